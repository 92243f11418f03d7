#!/usr/bin/env bash
# Records a search run in another language (search.py) with the accountant, then prints the statement.
# Run from anywhere: bash examples/other-language/run.sh
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
repo="$(cd "$here/../.." && pwd)"
# Build once, then call the built tool (quicker than 'dotnet run' for every step).
dotnet build "$repo/src/Accountant.Cli" -nologo -v quiet >/dev/null
accountant() { dotnet "$repo/src/Accountant.Cli/bin/Debug/net10.0/accountant.dll" "$@"; }

python3 "$here/search.py"
ledger="$here/out/tea-room.db"
rm -f "$ledger" "$ledger-wal" "$ledger-shm"

accountant init --ledger "$ledger"
accountant holdout add tea-validation --labels "$here/out/labels.csv" --ledger "$ledger"
accountant import tea-validation "$here/out/looks.jsonl" --ledger "$ledger"
accountant statement tea-validation --ledger "$ledger"
accountant verify --ledger "$ledger"
