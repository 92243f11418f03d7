#!/usr/bin/env bash
# A throwaway PostgreSQL cluster for the tests: `start DIR` initializes one under DIR (owned by the postgres user,
# since PostgreSQL refuses to run as root), listening on 127.0.0.1 only with its socket in DIR, and prints a
# connection string; `stop DIR` stops it and removes DIR. Nothing outside DIR is touched.
set -euo pipefail
action=${1:?usage: postgres.sh start|stop DIR}
dir=${2:?usage: postgres.sh start|stop DIR}
bin=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
# A fresh Debian machine may not have the server yet: install Debian's package when we can (as root, with apt-get).
if [ "$action" = start ] && [ ! -x "$bin/initdb" ] && [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
  { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq postgresql; } >/dev/null 2>&1 || true
  bin=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
fi
[ -x "$bin/initdb" ] || { echo "postgres.sh: PostgreSQL is not installed (apt-get install postgresql)" >&2; exit 1; }

as_owner() {
  if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}

case "$action" in
  start)
    mkdir -p "$dir"
    [ "$(id -u)" = 0 ] && chown postgres: "$dir"
    # A free port on loopback, chosen by the kernel.
    port=$(python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])' 2>/dev/null || echo 54329)
    # With ACCOUNTANT_PG_PASSWORD set, logins need that password (SCRAM-SHA-256); otherwise loopback is trusted.
    auth=(--auth=trust)
    if [ -n "${ACCOUNTANT_PG_PASSWORD:-}" ]; then
      printf '%s\n' "$ACCOUNTANT_PG_PASSWORD" >"$dir/pwfile"
      [ "$(id -u)" = 0 ] && chown postgres: "$dir/pwfile"
      auth=(--auth=scram-sha-256 --pwfile="$dir/pwfile")
    fi
    as_owner "$bin/initdb" -D "$dir/data" -U accountant "${auth[@]}" -E UTF8 --no-locale >"$dir/initdb.log" 2>&1 \
      || { cat "$dir/initdb.log" >&2; exit 1; }
    rm -f "$dir/pwfile"
    as_owner "$bin/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 60 \
      -o "-c listen_addresses=127.0.0.1 -p $port -k $dir -c fsync=on -c max_connections=200" start >/dev/null \
      || { cat "$dir/server.log" >&2; exit 1; }
    echo "Host=127.0.0.1;Port=$port;Username=accountant;Database=postgres"
    ;;
  stop)
    [ -d "$dir/data" ] && as_owner "$bin/pg_ctl" -D "$dir/data" -m fast -w stop >/dev/null || true
    rm -rf "$dir"
    ;;
  *) echo "usage: postgres.sh start|stop DIR" >&2; exit 2 ;;
esac
