#!/usr/bin/env bash
# The long run of the parser properties in tests/it/parsers_fuzz.rs: current CSV
# rows, layout TOML, typed times and cell ranges, FUZZ_CASES cases each
# (default 250000: a million in all). Release build; prints the count and result.
#   scripts/fuzz.sh [CASES_PER_PARSER]
set -euo pipefail
cd "$(dirname "$0")/.."
cases="${1:-250000}"
parsers=4
start=$(date +%s)
FUZZ_CASES="$cases" cargo test --release --test it parsers_fuzz:: -- --test-threads=2
end=$(date +%s)
echo "fuzz: $parsers parsers x $cases cases = $((parsers * cases)) arbitrary inputs, no failure, in $((end - start)) s"
