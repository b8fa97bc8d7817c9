#!/usr/bin/env bash
# The beacon's tag comparison takes the same time whatever the tags hold, checked in the
# machine code: builds the `audit` firmware (it calls `BeaconPort::receive` on a port
# with a network key) for each target, disassembles it, and requires the comparison to be
# its own function, `entrain::beacon::mac::tags_equal`, with no conditional branch in it
# (and, on Arm, no IT block). The branch on its verdict (accept or refuse) is in the
# caller and public. Exits non-zero when the comparison is not found or branches.
# Needs llvm-objdump: on PATH (Debian llvm) or from rustup's llvm-tools component.
# environment: BOARDS_TARGET_DIR (default boards/target).
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
export CARGO_TARGET_DIR=${BOARDS_TARGET_DIR:-$here/target}
targets=(thumbv6m-none-eabi thumbv7em-none-eabihf riscv32imc-unknown-none-elf)
if command -v rustup >/dev/null; then
    rustup target add "${targets[@]}" >/dev/null 2>&1 || true
fi
objdump=$(command -v llvm-objdump || true)
if [[ -z $objdump ]] && command -v rustup >/dev/null; then
    rustup component add llvm-tools >/dev/null 2>&1 || true
    objdump=$(find "$(rustc --print sysroot)/lib/rustlib" -name llvm-objdump -type f | head -1)
fi
if [[ -z $objdump ]]; then
    echo "llvm-objdump not found (apt-get install llvm, or rustup component add llvm-tools)"
    exit 1
fi
# Conditional branches (Arm Thumb and RISC-V spellings) and Arm IT blocks.
branchy='^(b(eq|ne|cs|hs|cc|lo|mi|pl|vs|vc|hi|ls|ge|lt|gt|le)(\.w|\.n)?|cbn?z|it[te]{0,3}|c\.bnez|c\.beqz|beqz|bnez|blez|bgez|bltz|bgtz|bltu|bgeu|bgtu|bleu)$'
failed=()
for target in "${targets[@]}"; do
    (cd "$here" && cargo build --release --quiet -p audit --features loop-on-panic --target "$target")
    elf=$CARGO_TARGET_DIR/$target/release/audit
    dis=$(mktemp)
    "$objdump" -d --demangle --no-show-raw-insn "$elf" >"$dis"
    # Instructions of one function: from its label to the next label that is not a
    # local one (`.L...` on RISC-V, `$t`/`$d` mapping symbols on Arm); data (`$d`, a
    # literal pool) is not code and is skipped.
    body() {
        awk -v name="$1" '/^[0-9a-f]+ <.*>:$/ {
                              if (index($0, "<" name)) { on = 1; data = 0; next }
                              if ($0 !~ /<(\.L|\$)/) on = 0
                          }
                          /^[0-9a-f]+ <\$d>:$/ { data = 1 } /^[0-9a-f]+ <\$t>:$/ { data = 0 }
                          on && !data && /^ +[0-9a-f]+:/' "$dis"
    }
    mnemonics() { awk -F'\t' 'NF >= 2 { split($2, m, " "); print m[1] }'; }
    # The comparison's bytes, bounded by its symbol's size (padding after it is not it).
    read -r addr size < <("$objdump" -t "$elf" |
        awk '$3 == "F" && $NF ~ /7entrain6beacon3mac10tags_equal17h/ { print $1, $5; exit }') || true
    code=
    if [[ -n ${addr:-} ]]; then
        start=$(( 16#$addr & ~1 ))
        code=$("$objdump" -d --no-show-raw-insn --start-address=$start \
            --stop-address=$(( start + 16#$size )) "$elf" | grep -E '^ +[0-9a-f]+:')
    fi
    if [[ -z $code ]]; then
        echo "ct-check $target: FAIL (no function entrain::beacon::mac::tags_equal: the comparison is inlined where it cannot be checked)"
        # Evidence from where the comparison was inlined.
        for caller in "entrain::beacon::frame::Frame::decode_verified" "entrain::beacon::port::BeaconPort\$LT\$_\$GT\$::receive"; do
            n=$(body "$caller" | mnemonics | grep -cE "$branchy" || true)
            echo "    $caller: $n conditional branches or IT blocks"
        done
        failed+=("$target")
    else
        count=$(printf '%s\n' "$code" | wc -l)
        hits=$(printf '%s\n' "$code" | mnemonics | grep -E "$branchy" || true)
        if [[ -n $hits ]]; then
            echo "ct-check $target: FAIL (tags_equal branches on the data)"
            printf '%s\n' "$code" | sed 's/^/    /'
            failed+=("$target")
        else
            echo "ct-check $target: PASS (tags_equal: $count instructions, no conditional branch)"
        fi
    fi
    rm -f "$dis"
done
if ((${#failed[@]})); then
    echo "ct-check: the tag comparison is not shown constant-time on ${failed[*]}"
    exit 1
fi
