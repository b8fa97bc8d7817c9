#!/usr/bin/env bash
# Regenerates the bit-exactness vectors on the host and checks that they equal the
# committed boards/vectors/node_law.bin byte for byte, so the committed file cannot go
# stale when the node law changes. (To refresh it after a deliberate change, run
# `cargo run --example bitexact_vectors -- boards/vectors/node_law.bin` at the root.)
# environment: HOST_TARGET_DIR (cargo target dir for the root crate, default target/).
set -euo pipefail

root=$(cd "$(dirname "$0")/.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
cd "$root"
CARGO_TARGET_DIR=${HOST_TARGET_DIR:-$root/target} \
    cargo run --quiet --example bitexact_vectors -- "$tmp/node_law.bin"
if cmp -s "$tmp/node_law.bin" boards/vectors/node_law.bin; then
    echo "vectors: the committed boards/vectors/node_law.bin is what the host generates"
else
    echo "vectors: STALE: boards/vectors/node_law.bin differs from what the host generates now" >&2
    cmp "$tmp/node_law.bin" boards/vectors/node_law.bin >&2 || true
    exit 1
fi
