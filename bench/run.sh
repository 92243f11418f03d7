#!/usr/bin/env bash
# Benchmarks for Accountant, run by hand (not part of 'dotnet test' or CI): bash bench/run.sh
# Each figure is a ratio of two things measured side by side in this one run, on this machine.
# 'bash bench/run.sh statement-postgres' runs only that section (after the build); BENCH_WORK=DIR keeps the work files,
# the million-look ledgers among them, for the next run.
set -euo pipefail
cd "$(dirname "$0")/.."
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
WORK="${BENCH_WORK:-$(mktemp -d -t accountant-bench.XXXXXX)}"
mkdir -p "$WORK"
ONLY="${1:-}"
case "$ONLY" in ""|statement-postgres) ;; *) echo "usage: bash bench/run.sh [statement-postgres]" >&2; exit 2 ;; esac

# NumPy as a practitioner has it on Debian, with OpenBLAS (without it NumPy falls back to the reference BLAS).
if ! /usr/bin/python3 -c 'import numpy' 2>/dev/null || [ ! -e /usr/lib/x86_64-linux-gnu/openblas-pthread/libblas.so.3 ]; then
  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq python3-numpy libopenblas0-pthread >/dev/null
fi
PY=/usr/bin/python3

echo "== build (Release; the CLI published ReadyToRun, as a tool is shipped)"
dotnet build bench/Accountant.Bench -c Release -v q -nologo | grep -E "error|Warn" || true
dotnet publish src/Accountant.Cli -c Release -r linux-x64 --self-contained false -p:PublishReadyToRun=true -o "$WORK/cli" -v q -nologo | grep -E "error" || true
BENCH=bench/Accountant.Bench/bin/Release/net10.0/Accountant.Bench
CLI="$WORK/cli/accountant"

value() { grep "^$1 " "$2" | awk '{print $2}'; }
ratio() { $PY -c "print(f'{float($1)/float($2):.3f}')"; }
# Median wall time in milliseconds of a command run 7 times (after one untimed run).
median_ms() {
  "$@" >/dev/null 2>&1 || true
  for _ in 1 2 3 4 5 6 7; do
    local start end; start=$(date +%s%N); "$@" >/dev/null 2>&1; end=$(date +%s%N)
    echo $(( (end - start) / 1000000 ))
  done | sort -n | sed -n 4p
}
# Median wall times in milliseconds of two commands run in turn 9 times each (after one untimed run of each), so that
# a change in the machine's load falls on both alike: prints "A B".
median_pair_ms() {
  "$1" >/dev/null 2>&1 || true; "$2" >/dev/null 2>&1 || true
  local a=() b=() start end
  for _ in 1 2 3 4 5 6 7 8 9; do
    start=$(date +%s%N); "$1" >/dev/null 2>&1; end=$(date +%s%N); a+=($(( (end - start) / 1000000 )))
    start=$(date +%s%N); "$2" >/dev/null 2>&1; end=$(date +%s%N); b+=($(( (end - start) / 1000000 )))
  done
  echo "$(printf '%s\n' "${a[@]}" | sort -n | sed -n 5p) $(printf '%s\n' "${b[@]}" | sort -n | sed -n 5p)"
}

echo
echo "== machine"
echo "cpu: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs), $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
$BENCH peak | tee "$WORK/peak.txt"
echo "blas: $(readlink -f /usr/lib/x86_64-linux-gnu/libblas.so.3)"

if [ -z "$ONLY" ]; then
echo
echo "== bootstrap: K = 1,000 looks, n = 10,000 examples, B = 1,000 resamples (bootstrap-bias and max-bootstrap)"
$BENCH bootstrap 1000 10000 1000 1 "$WORK/losses.u8" | tee "$WORK/bootstrap.txt"
$PY bench/bootstrap_numpy.py 1000 10000 1000 1 "$WORK/losses.u8" | tee "$WORK/numpy.txt"
ours=$(value accountant_bootstrap_seconds "$WORK/bootstrap.txt"); theirs=$(value numpy_bootstrap_seconds "$WORK/numpy.txt")
peak=$(value fma_peak_gflops "$WORK/peak.txt")
echo "RATIO bootstrap time, accountant / NumPy: $(ratio "$ours" "$theirs")  (target <= 1.0)"
echo "KERNEL bootstrap popcount kernel that ran: $(value accountant_kernel "$WORK/bootstrap.txt")  (AVX-512BW, AVX2 or scalar, whichever this machine has)"
echo "RATE  NumPy matrix product: $(value numpy_matmul_gflops "$WORK/numpy.txt") GFLOP/s = $(ratio "$(value numpy_matmul_gflops "$WORK/numpy.txt")" "$peak") of the FMA peak"
echo "RATE  accountant engine: $(value accountant_equivalent_gflops "$WORK/bootstrap.txt") GFLOP/s-equivalent (2·K·n·B multiply-adds done as popcounts) = $(ratio "$(value accountant_equivalent_gflops "$WORK/bootstrap.txt")" "$peak") of the FMA peak"

echo
echo "== ledger ingest: batch API against raw prepared inserts of the same rows in one transaction"
$BENCH ingest "$WORK/ingest" | tee "$WORK/ingest.txt"
echo "RATIO ingest, score-only looks, library / raw: $(value ingest_score_only_ratio "$WORK/ingest.txt")  (target >= 0.7)"
echo "RATIO ingest, looks with a 100,000-example bitset, library / raw: $(value ingest_bitset_ratio "$WORK/ingest.txt")  (target >= 0.7)"

echo
echo "== PostgreSQL ledger over loopback: looks per second through the library against raw Npgsql writes of the same rows"
ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 || { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq postgresql >/dev/null; }
chmod 755 "$WORK"
PG=$(bash .ci/postgres.sh start "$WORK/pg")
$BENCH ingest-postgres "$PG" | tee "$WORK/pg.txt"
bash .ci/postgres.sh stop "$WORK/pg"
echo "RATIO PostgreSQL ingest, 20,000 score-only looks in one batch, library / raw prepared INSERTs: $(value pg_score_only_ratio_vs_insert "$WORK/pg.txt")  (library / raw binary COPY: $(value pg_score_only_ratio_vs_copy "$WORK/pg.txt"))"
echo "RATIO PostgreSQL ingest, 1,000 looks with a 100,000-example bitset, library / raw prepared INSERTs: $(value pg_bitset_ratio_vs_insert "$WORK/pg.txt")  (library / raw binary COPY: $(value pg_bitset_ratio_vs_copy "$WORK/pg.txt"))"
echo "RATIO PostgreSQL, 500 single looks, one transaction each (as a worker writes), library / raw: $(value pg_single_ratio_vs_insert "$WORK/pg.txt")"

echo
echo "== accountant statement on 1,000,000 looks, and record of one look, from separate processes"
[ -f "$WORK/million.db" ] || $BENCH ledger-scores "$WORK/million.db" 1000000
$BENCH ledger-bitsets "$WORK/wide.db" 1000 10000 >/dev/null
"$CLI" statement big --ledger "$WORK/million.db" >/dev/null   # first open builds the tally index of an old ledger; not timed
start_ms=$(median_ms "$CLI" --version)
statement_ms=$(median_ms "$CLI" statement big --ledger "$WORK/million.db")
record_ms=$(median_ms "$CLI" record wide --configuration '{"bench":1}' --predictions "$WORK/wide.predictions.csv" --ledger "$WORK/wide.db")
echo "process start alone (accountant --version): ${start_ms} ms"
echo "statement, 1,000,000 looks: ${statement_ms} ms, work beyond start $((statement_ms - start_ms)) ms  (target < 500 ms)"
echo "record, one look with 10,000 predictions: ${record_ms} ms, beyond start $((record_ms - start_ms)) ms  (target <= 100 ms)"

echo
echo "== peak memory of the bootstrap run (statement --estimates --winner on 1,000 looks x 10,000 examples)"
/usr/bin/time -f "%M" -o "$WORK/rss-version.txt" "$CLI" --version >/dev/null
/usr/bin/time -f "%M" -o "$WORK/rss.txt" "$CLI" statement wide --estimates --winner --ledger "$WORK/wide.db" >/dev/null
loss_kb=$(( $(value loss_bytes "$WORK/bootstrap.txt") / 1024 ))
echo "loss data read: ${loss_kb} KB; peak resident memory: $(cat "$WORK/rss.txt") KB (process start alone: $(cat "$WORK/rss-version.txt") KB)"
echo "RATIO peak memory beyond start / loss data: $(ratio "$(( $(cat "$WORK/rss.txt") - $(cat "$WORK/rss-version.txt") ))" "$loss_kb")"
fi

echo
echo "== accountant statement on 1,000,000 looks: a PostgreSQL ledger over loopback against the SQLite file, same looks"
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 || { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq postgresql >/dev/null; }
chmod 755 "$WORK"
[ -f "$WORK/million.db" ] || $BENCH ledger-scores "$WORK/million.db" 1000000
"$CLI" statement big --ledger "$WORK/million.db" >/dev/null   # first open builds the tally index of an old ledger; not timed
PG=$(bash .ci/postgres.sh start "$WORK/pg-statement")
trap 'bash .ci/postgres.sh stop "$WORK/pg-statement"' EXIT
PG_BIG="$PG;SearchPath=million"
# The same seeded looks through the library's batch append (10 batches of 100,000), then VACUUM (ANALYZE), the state
# autovacuum leaves a table in within a minute or so of a large write.
$BENCH ledger-scores "$PG_BIG" 1000000
sqlite_statement() { "$CLI" statement big --ledger "$WORK/million.db"; }
pg_statement() { "$CLI" statement big --ledger "$PG_BIG"; }
# Both ledgers hold the same looks (only timestamps, and so the chain, differ): the statements must agree but for it.
if ! diff <(sqlite_statement | grep -v '^Chain head') <(pg_statement | grep -v '^Chain head') >/dev/null; then
  echo "the PostgreSQL and SQLite statements differ:" >&2
  diff <(sqlite_statement) <(pg_statement) >&2 || true
  exit 1
fi
echo "statements: the same on both ledgers but for the chain head"
start_ms=$(median_ms "$CLI" --version)
read -r sqlite_ms pg_ms < <(median_pair_ms sqlite_statement pg_statement)
echo "process start alone (accountant --version): ${start_ms} ms"
echo "statement, 1,000,000 looks, SQLite: ${sqlite_ms} ms, beyond start $((sqlite_ms - start_ms)) ms"
echo "statement, 1,000,000 looks, PostgreSQL: ${pg_ms} ms, beyond start $((pg_ms - start_ms)) ms"
echo "RATIO statement on 1,000,000 looks, PostgreSQL / SQLite: $(ratio "$pg_ms" "$sqlite_ms")  (target <= 2.0; beyond process start: $(ratio "$((pg_ms - start_ms))" "$((sqlite_ms - start_ms))"))"
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"

echo
echo "work files in $WORK"
