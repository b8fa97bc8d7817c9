#!/usr/bin/env bash
# Panic-freedom of the node law and the beacon, proven on target: builds the `audit`
# firmware (every public node-law and beacon entry point, feature `mac` included) for
# each target, with a panic handler that calls a symbol defined nowhere. After LTO the
# handler is linked only if a panic is reachable, so a reachable panic fails the link and
# the linker names the symbol and, where it can, the call site. Exits non-zero then.
# environment: BOARDS_TARGET_DIR (default boards/target).
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
export CARGO_TARGET_DIR=${BOARDS_TARGET_DIR:-$here/target}
targets=(thumbv6m-none-eabi thumbv7em-none-eabihf riscv32imc-unknown-none-elf)
if command -v rustup >/dev/null; then
    rustup target add "${targets[@]}" >/dev/null 2>&1 || true
fi
failed=()
for target in "${targets[@]}"; do
    log=$(mktemp)
    if (cd "$here" && cargo build --release --quiet -p audit --target "$target") >"$log" 2>&1; then
        echo "panic-check $target: PASS (no panic reachable from the node law or the beacon)"
    else
        echo "panic-check $target: FAIL"
        # The linker's complaint: which undefined symbol, referenced from where.
        grep -E "undefined symbol|referenced by|>>> |error:" "$log" | sed 's/^/    /' | head -n 30
        failed+=("$target")
    fi
    rm -f "$log"
done
if ((${#failed[@]})); then
    echo "panic-check: a panic is reachable on ${failed[*]}"
    exit 1
fi
