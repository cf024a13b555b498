#!/usr/bin/env bash
# Builds generated estimator modules in a #![no_std] crate with no allocator, for a
# microcontroller target when one is installed (otherwise for the host, which still
# proves the modules need neither std nor alloc).
set -euo pipefail
cd "$(dirname "$0")"
target=thumbv7em-none-eabihf
args=()
if rustup target list --installed 2>/dev/null | grep -qx "$target"; then
  args=(--target "$target")
fi
# The main workspace's lock file pins the same dependency versions.
cp ../../Cargo.lock Cargo.lock
cargo build --quiet --lib "${args[@]}" --target-dir ../../target/nostd
echo "generated modules build as no_std without an allocator (${args[*]:-host})"
