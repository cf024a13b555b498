#!/usr/bin/env bash
# Instructions per estimator operation, counted by callgrind: stable on a noisy shared
# machine where wall time is not. Builds the estimator benchmark in release, runs each
# job (spec/variant/operation) RECKON_CALLGRIND_REPEAT times (default 1000) under
# callgrind counting only `measured_operation`, and prints a Markdown table of
# instructions per operation with the generated f64 estimator's ratios to the
# hand-written and finite-difference filters.
set -euo pipefail
cd "$(dirname "$0")/../.."

repeat=${RECKON_CALLGRIND_REPEAT:-1000}
binary=$(cargo bench -p reckon-tests --bench estimators --no-run --message-format=json 2>/dev/null \
  | jq -r 'select(.reason == "compiler-artifact" and .target.name == "estimators" and .executable != null) | .executable')
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

declare -A per_operation
for job in $(RECKON_CALLGRIND_JOB=list "$binary"); do
  file="$work/${job//\//.}.out"
  report=$(RECKON_CALLGRIND_JOB=$job RECKON_CALLGRIND_REPEAT=$repeat \
    valgrind --tool=callgrind --callgrind-out-file="$file" --collect-atstart=no \
    '--toggle-collect=*measured_operation*' "$binary" 2>/dev/null)
  expected_accepted=$repeat
  case $job in */cycle) expected_accepted="" ;; esac
  if [ -n "$expected_accepted" ] && [ "$report" != "$job accepted $repeat of $repeat operations" ]; then
    echo "warning: $report" >&2
  fi
  total=$(awk '/^totals:/ { print $2 }' "$file")
  per_operation[$job]=$((total / repeat))
done

ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", a / b }'; }

echo "| spec | operation | generated f64 | generated f32 | hand-written | finite differences | generated / hand-written | generated / finite differences |"
echo "| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: |"
for job in $(RECKON_CALLGRIND_JOB=list "$binary" | grep '/generated_f64/'); do
  spec=${job%%/*}
  operation=${job##*/}
  generated=${per_operation[$spec/generated_f64/$operation]}
  single=${per_operation[$spec/generated_f32/$operation]}
  hand=${per_operation[$spec/hand_written/$operation]}
  differences=${per_operation[$spec/finite_difference/$operation]}
  echo "| $spec | $operation | $generated | $single | $hand | $differences | $(ratio "$generated" "$hand") | $(ratio "$generated" "$differences") |"
done
