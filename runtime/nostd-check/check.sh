#!/usr/bin/env bash
# Proves reckon-runtime is no_std and heap-free: builds a freestanding binary that uses
# it (f32, fixed-size EKF, UKF and matrix exponential), links it without any C runtime or
# standard library, and on x86_64 Linux runs it and checks its exit status.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
export CARGO_TARGET_DIR="$root/target/nostd-check"
export RUSTFLAGS="-C link-arg=-nostartfiles -C link-arg=-nostdlib -C link-arg=-static"

cargo build --quiet --release --manifest-path "$here/Cargo.toml"
binary="$CARGO_TARGET_DIR/release/reckon-runtime-nostd-check"

if [[ "$(uname -s)-$(uname -m)" == "Linux-x86_64" ]]; then
    if "$binary"; then
        echo "nostd-check: linked without std and ran correctly"
    else
        status=$?
        echo "nostd-check: binary exited with status $status" >&2
        exit 1
    fi
else
    echo "nostd-check: linked without std (not run on $(uname -s)-$(uname -m))"
fi
