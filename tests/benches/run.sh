#!/usr/bin/env bash
# The whole benchmark suite in one command: estimator wall time and allocations, compiler
# cost, grid and particle filter cost (criterion, short measurement times so a shared
# machine finishes in minutes), then instruction counts with callgrind. Prints Markdown
# tables; BENCHMARKS.md holds a recorded run.
#
# Pass `--quick` for a smoke run (each benchmark once, no callgrind).
set -euo pipefail
cd "$(dirname "$0")/../.."

criterion_args=(--warm-up-time 1 --measurement-time 3)
quick=false
if [ "${1:-}" = "--quick" ]; then
  criterion_args=(--test)
  quick=true
fi

echo "## Estimators: allocations and wall time"
cargo bench -q -p reckon-tests --bench estimators -- "${criterion_args[@]}"
echo "## Compiler: check and generate"
cargo bench -q -p reckon --bench compile -- "${criterion_args[@]}"
echo "## Grid and particle filters"
cargo bench -q -p reckon-runtime --bench bayes -- "${criterion_args[@]}"

if [ "$quick" = false ]; then
  echo "## Wall time, mean of criterion's samples (ns)"
  echo "| benchmark | mean (ns) |"
  echo "| --- | ---: |"
  find target/criterion -path '*/new/estimates.json' | sort | while read -r file; do
    name=${file#target/criterion/}
    name=${name%/new/estimates.json}
    printf '| %s | %.0f |\n' "$name" "$(jq '.mean.point_estimate' "$file")"
  done
  echo "## Instructions per operation (callgrind)"
  tests/benches/callgrind.sh
fi
