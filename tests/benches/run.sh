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
cargo bench -q -p reckon-tests --bench bayes_estimators -- "${criterion_args[@]}"

if [ "$quick" = false ]; then
  mean_ns() { jq '.mean.point_estimate' "target/criterion/$1/new/estimates.json"; }
  ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", a / b }'; }
  echo "## Estimators: wall time per operation, mean (ns)"
  echo "| spec | operation | generated f64 | generated f32 | hand-written | finite differences | generated / hand-written | generated / finite differences |"
  echo "| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: |"
  binary=$(cargo bench -p reckon-tests --bench estimators --no-run --message-format=json 2>/dev/null \
    | jq -r 'select(.reason == "compiler-artifact" and .target.name == "estimators" and .executable != null) | .executable')
  for job in $(RECKON_CALLGRIND_JOB=list "$binary" | grep '/generated_f64/'); do
    spec=${job%%/*}
    operation=${job##*/}
    generated=$(mean_ns "${spec}_generated_f64/$operation")
    single=$(mean_ns "${spec}_generated_f32/$operation")
    hand=$(mean_ns "${spec}_hand_written/$operation")
    differences=$(mean_ns "${spec}_finite_difference/$operation")
    printf '| %s | %s | %.0f | %.0f | %.0f | %.0f | %s | %s |\n' "$spec" "$operation" \
      "$generated" "$single" "$hand" "$differences" \
      "$(ratio "$generated" "$hand")" "$(ratio "$generated" "$differences")"
  done
  echo "## Compiler, grid and particle filters: wall time, mean (ns)"
  echo "| benchmark | mean (ns) |"
  echo "| --- | ---: |"
  find target/criterion -path '*/new/estimates.json' | sort | while read -r file; do
    name=${file#target/criterion/}
    name=${name%/new/estimates.json}
    case $name in rail_cart_* | pallet_robot_* | survey_launch_*) continue ;; esac
    printf '| %s | %.0f |\n' "$name" "$(jq '.mean.point_estimate' "$file")"
  done
  echo "## Estimators: instructions per operation (callgrind)"
  tests/benches/callgrind.sh
fi
