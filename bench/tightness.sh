#!/usr/bin/env bash
# How tight each guarantee is against the oracle, in the scenarios of README's "How much the guarantees give away":
# runs 'accountant simulate' (seed 1, 2,000 repetitions, 10,000 examples, 1,000 looks) in each scenario and prints one
# Markdown table of coverage and mean margin / oracle margin. By hand, not in CI: about five minutes on 2 cores.
# Usage: bash bench/tightness.sh [REPETITIONS]
set -euo pipefail
cd "$(dirname "$0")/.."
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
reps="${1:-2000}"
work=$(mktemp -d -t accountant-tightness.XXXXXX)
dotnet build src/Accountant.Cli -c Release -v q -nologo | grep -E " error " || true
cli="dotnet src/Accountant.Cli/bin/Release/net10.0/accountant.dll"
common=(--holdout-size 10000 --looks 1000 --repetitions "$reps" --seed 1 --format json)
echo "cpu: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs), $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)" >&2
run() { local name=$1; shift; echo "== $name" >&2; local start=$(date +%s); $cli simulate "$@" "${common[@]}" >"$work/$name.json"; echo "   $(( $(date +%s) - start )) s" >&2; }
run independent --per-example --true-error 0.2
run independent-spread --per-example --true-error 0.15:0.25
run shared-0.5 --per-example --true-error 0.2 --correlation 0.5
run shared-0.9 --per-example --true-error 0.2 --correlation 0.9
run shared-0.99 --per-example --true-error 0.2 --correlation 0.99
run null --per-example --true-error 0.5
run refine-exact --strategy refine --true-error 0.1:0.3 --guard exact
run refine-ladder --strategy refine --true-error 0.1:0.3 --guard ladder:0.01
/usr/bin/python3 - "$work" <<'PY'
import json, sys, os
work = sys.argv[1]
names = ["independent", "independent-spread", "shared-0.5", "shared-0.9", "shared-0.99", "null", "refine-exact", "refine-ladder"]
print("| scenario | oracle margin | method | coverage ± s.e. | mean margin | margin / oracle |")
print("|---|---:|---|---:|---:|---:|")
for name in names:
    d = json.load(open(os.path.join(work, name + ".json")))
    for i, m in enumerate(d["methods"]):
        note = "" if m["validForThisAnalyst"] else " (not valid here)"
        if m["selection"]: note = " (smallest listed, per search)"
        print(f"| {name if i == 0 else ''} | {d['oracleMargin']:.4f} | {m['method']}{note} | {m['coverage']:.3f} ± {m['coverageStdErr']:.3f} | {m['meanMargin']:.4f} | {m['marginToOracle']:.2f} |".replace(f"| {d['oracleMargin']:.4f} |", "| |" if i else f"| {d['oracleMargin']:.4f} |", 1))
PY
rm -rf "$work"
