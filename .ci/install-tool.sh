#!/usr/bin/env bash
# Packs the command line as a .NET tool, installs it from the local package folder into a temporary tool path, and
# runs it from a clean folder: what README.md tells a newcomer to do.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
dotnet pack "$repo/src/Accountant.Cli" -c Release -o "$work/packages" -nologo -v quiet
dotnet tool install Accountant.Cli --tool-path "$work/tools" --add-source "$work/packages" --version 0.1.0
cd "$work"
version="$("$work/tools/accountant" --version)"
echo "installed: accountant $version"
case "$version" in *"ledger schema"*) ;; *) echo "--version does not name the ledger schema" >&2; exit 1 ;; esac
"$work/tools/accountant" demo --looks 5 --fresh-rows 5000 --quiet --ledger "$work/demo.db" | grep -E "^(Holdout|Looks|  binomial-union)"
"$work/tools/accountant" verify --ledger "$work/demo.db"
