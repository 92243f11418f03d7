#!/usr/bin/env bash
# The streaming search benchmark, run by hand (not part of 'dotnet test', CI or bench/run.sh): bash bench/stream.sh
# Generates invented CSVs of 1 GB and 5 GB under the work folder (never in the repository), and for each, in processes of
# their own: ML.NET's text loader reading the file alone, and a search of one look on it (two passes, split, featurize,
# train, record). Prints the rows/s ratio of the two, each one's peak resident memory (/usr/bin/time %M, and VmHWM seen by
# the process), and the share of the search's wall time spent in accounting (ledger writes and reads, the statement).
# Deletes the files after. About 5 minutes on 2 cores (measured under load); needs about 6 GB of free disk.
set -euo pipefail
cd "$(dirname "$0")/.."
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
WORK="${BENCH_WORK:-$(mktemp -d -t accountant-stream.XXXXXX)}"
SIZES="${STREAM_SIZES:-1024 5120}"   # megabytes
mkdir -p "$WORK"

echo "== build (Release, published ReadyToRun as the CLI is shipped, so the search's first ledger calls are not timed compiling)"
dotnet publish bench/Accountant.Bench -c Release -r linux-x64 --self-contained false -p:PublishReadyToRun=true -o "$WORK/harness" -v q -nologo | grep -E " error" || true
BENCH="$WORK/harness/Accountant.Bench"
value() { grep "^$1 " "$2" | awk '{print $2}'; }
ratio() { python3 -c "print(f'{float($1)/float($2):.3f}')"; }

echo
echo "== machine"
echo "cpu: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs), $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
need_mb=$(( $(echo "$SIZES" | tr ' ' '\n' | sort -n | tail -1) + 1024 ))
free_mb=$(df -Pm "$WORK" | awk 'NR==2 {print $4}')
echo "disk: ${free_mb} MB free under $WORK (the largest file needs about ${need_mb} MB with its ledger)"
if [ "$free_mb" -lt "$need_mb" ]; then echo "not enough disk under $WORK; set BENCH_WORK to a folder with more room"; exit 1; fi

# One configuration: FastTree with 20 trees of 31 leaves, so the look builds the binned copy of the training rows a tree
# trainer makes (the largest memory a look takes), in a fraction of the time a default search would spend.
SPACE="$WORK/space.json"
echo '{"trainers":[{"trainer":"fasttree","parameters":{"trees":{"scale":"choice","values":[20]},"leaves":{"scale":"choice","values":[31]},"learningRate":{"scale":"choice","values":[0.2]},"minLeaf":{"scale":"choice","values":[20]}}}]}' > "$SPACE"

for mb in $SIZES; do
  csv="$WORK/stream-${mb}mb.csv"
  echo
  echo "== ${mb} MB CSV"
  $BENCH stream-generate "$csv" "$mb" 1 | tee "$WORK/gen-$mb.txt"
  echo "load average before ML.NET: $(cut -d' ' -f1-3 /proc/loadavg)"
  /usr/bin/time -f "%M %e" -o "$WORK/mlnet-$mb.time" $BENCH stream-mlnet "$csv" | tee "$WORK/mlnet-$mb.txt"
  echo "load average before the search: $(cut -d' ' -f1-3 /proc/loadavg)"
  rm -f "$WORK/ledger-$mb.db"*
  /usr/bin/time -f "%M %e" -o "$WORK/search-$mb.time" $BENCH stream-search "$csv" "$WORK/ledger-$mb.db" "$SPACE" 2>"$WORK/search-$mb.err" | tee "$WORK/search-$mb.txt"
  echo "load average after the search: $(cut -d' ' -f1-3 /proc/loadavg)"
  rows=$(value rows "$WORK/gen-$mb.txt")
  mlnet_s=$(value mlnet_seconds "$WORK/mlnet-$mb.txt"); search_s=$(value search_seconds "$WORK/search-$mb.txt")
  echo "FIGURE ${mb} MB: ${rows} rows; ML.NET text loader alone $(ratio "$rows" "$mlnet_s") rows/s, search (two passes, split, featurize, one look) $(ratio "$rows" "$search_s") rows/s"
  echo "RATIO ${mb} MB, rows/s of the search / rows/s of ML.NET's text loader alone: $(ratio "$mlnet_s" "$search_s")"
  echo "RATIO ${mb} MB, rows/s of the search's two passes alone / ML.NET's text loader: $(ratio "$mlnet_s" "$(value search_reading_seconds "$WORK/search-$mb.txt")")"
  echo "FIGURE ${mb} MB, peak resident memory of the search: $(( $(cut -d' ' -f1 "$WORK/search-$mb.time") / 1024 )) MB (/usr/bin/time), ML.NET's loader alone $(( $(cut -d' ' -f1 "$WORK/mlnet-$mb.time") / 1024 )) MB  (target for 5 GB: <= 1536 MB)"
  echo "RATIO ${mb} MB, accounting (ledger + statement) / search wall time: $(value search_accounting_share "$WORK/search-$mb.txt")  ($(value search_accounting_seconds "$WORK/search-$mb.txt") s of ${search_s} s; target <= 0.01)"
  rm -f "$csv" "$WORK/ledger-$mb.db"* "$WORK"/*.model.zip "$WORK"/*.search.json
done
echo
echo "work files in $WORK (the CSVs were deleted)"
