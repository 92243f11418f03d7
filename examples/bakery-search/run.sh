#!/usr/bin/env bash
# Walkthrough: the built-in invented bakery scenario written to CSV, then searched, unsealed and plotted.
# Run from anywhere: bash examples/bakery-search/run.sh
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
repo="$(cd "$here/../.." && pwd)"
dotnet build "$repo/src/Accountant.Cli" -nologo -v quiet >/dev/null
accountant() { dotnet "$repo/src/Accountant.Cli/bin/Debug/net10.0/accountant.dll" "$@"; }

out="$here/out"
rm -rf "$out" && mkdir -p "$out"
export ACCOUNTANT_LEDGER="$out/bakery.db"

# 1. The data: 4,000 invented days (made by code; nothing here describes a real bakery).
accountant demo --export "$out/bakery.csv" --export-rows 4000 --seed 11

# 2. The search: successive halving over 27 configurations, scored on a 20% validation split,
#    with 20% of the days sealed as a test set. Every stage of every configuration is a look.
accountant search "$out/bakery.csv" --label sold_out --id-column day --strategy halving --looks 27 \
    --guard ladder:0.02 --quiet --plot "$out/bakery.png"

# 3. The sealed test set, opened once, beside the validation score and the corrected bound.
accountant unseal bakery-validation

# 4. The ledger verifies, and the statement can be pasted into a pull request.
accountant verify
accountant statement bakery-validation --format markdown > "$out/statement.md"
echo "statement: $out/statement.md, plot: $out/bakery.png"
