#!/usr/bin/env bash
# Everything the boards workspace proves, in one run (called by CI):
#   1. QEMU and the Rust targets are there (installs only those, and only if missing);
#      no panic is reachable from the node law or the beacon, and the beacon's tag
#      comparison has no data-dependent branch, on all three targets (panic-check.sh,
#      ct-check.sh, both on the `audit` firmware);
#   2. the committed bit-exactness vectors are what the host generates now;
#   3. the shared kit's unit tests pass on the host; every board and every firmware
#      builds, clippy-clean;
#   4. the vectors replay bit-exactly on the Cortex-M4F and the Cortex-M0 (and on the
#      RISC-V sifive_e);
#   5. the size probe and the sync-pulse demo run (pulse logs decoded when defmt-print
#      is installed);
#   6. the cost tables (instructions per update, per law and neighbour count);
#   7. the chain of five emulated nodes locks under the P law with version-2 beacons and
#      no latency told, and under the PI law with node 0 as a reference (15 minutes; the
#      trims match the crystals within 5 ppm); each node's telemetry lines are kept, and
#      the host checker's `entrain field` holds the P chain's against boards/chain-p.toml
#      (gating: verdict pass, the links heard exactly the chain's, both ways);
#   8. the figures in boards/README.md (digests, sizes, cost tables: all deterministic
#      under -icount) are the ones this run printed (BOARDS_UPDATE_README=1 rewrites them).
# environment: BOARDS_TARGET_DIR (default boards/target), HOST_TARGET_DIR (default
# target/; the host checker `entrain` is built there), NODES / RUN_MS / TOL_US /
# TELEMETRY_EVERY for the chain (see run-chain.sh), CHAIN_PI_REFERENCE / CHAIN_KI_Q16 /
# CHAIN_PI_RUN_MS / CHAIN_SMOOTHING / CHAIN_PI_GATES for the PI chain (see below),
# BOARDS_UPDATE_README=1 to rewrite the README's figures instead of checking them.
set -euo pipefail

started=$(date +%s)
here=$(cd "$(dirname "$0")" && pwd)
export CARGO_TARGET_DIR=${BOARDS_TARGET_DIR:-$here/target}
m4=$CARGO_TARGET_DIR/thumbv7em-none-eabihf/release
m0=$CARGO_TARGET_DIR/thumbv6m-none-eabi/release
step() { printf '\n== %s (%ss)\n' "$1" "$(( $(date +%s) - started ))"; }
# What the README's figures block is generated from: the deterministic lines this run
# prints, in the order printed.
figures=$CARGO_TARGET_DIR/readme-figures.txt
mkdir -p "$CARGO_TARGET_DIR"
: >"$figures"
record() { tee -a "$figures"; }

step "tools"
missing=()
command -v qemu-system-arm >/dev/null || missing+=(qemu-system-arm)
command -v qemu-system-riscv32 >/dev/null || missing+=(qemu-system-misc)
command -v python3 >/dev/null || missing+=(python3)
if ((${#missing[@]})); then
    apt-get update -qq
    apt-get install -y --no-install-recommends "${missing[@]}"
fi
qemu-system-arm --version | head -1
if command -v rustup >/dev/null; then
    rustup target add thumbv7em-none-eabihf thumbv6m-none-eabi riscv32imc-unknown-none-elf
fi
# llvm-size for the size figures: on PATH, or rustup's llvm-tools component.
llvm_size=$(command -v llvm-size || true)
if [[ -z $llvm_size ]] && command -v rustup >/dev/null; then
    rustup component add llvm-tools
    llvm_size=$(find "$(rustc --print sysroot)/lib/rustlib" -name llvm-size -type f | head -1)
fi
if [[ -z $llvm_size ]]; then
    echo "llvm-size not found (install llvm, or rustup component add llvm-tools)"
    exit 1
fi

step "no panic reachable from the node law or the beacon (link-time audit, three targets)"
"$here/panic-check.sh"

step "the beacon's tag comparison has no data-dependent branch (three targets)"
"$here/ct-check.sh"
(cd "$here" && cargo clippy --release --quiet -p audit --target thumbv7em-none-eabihf -- -D warnings)

step "bit-exactness vectors are fresh"
"$here/check-vectors.sh"

step "kit unit tests (host)"
(cd "$here" && cargo test --quiet -p kit --all-features)

step "build"
for board in mps2-an386 microbit; do
    (
        cd "$here/$board"
        cargo build --release --quiet
        cargo build --release --quiet --features pulse --bin pulse
        cargo build --release --quiet --features f32-laws --bin cost
        if [[ $board == mps2-an386 ]]; then
            cargo build --release --quiet --features chain --bin chain
        fi
        cargo clippy --release --quiet --all-features -- -D warnings
    )
    echo "$board: built"
done
(
    cd "$here/sifive-e"
    cargo build --release --quiet
    cargo clippy --release --quiet -- -D warnings
)
echo "sifive-e: built"
# The host checker, for the chain's field check.
host_target=${HOST_TARGET_DIR:-$here/../target}
(cd "$here/.." && CARGO_TARGET_DIR=$host_target cargo build --release --quiet --features cli --bin entrain)
entrain=$host_target/release/entrain
echo "entrain (host checker): built"

# The boards' runners, spelled out so each run can be bounded by `timeout`.
qemu_m4() {
    timeout 120 qemu-system-arm -machine mps2-an386 -cpu cortex-m4 -nographic -monitor none \
        -semihosting-config enable=on,target=native -icount shift=0 -kernel "$@"
}
qemu_m0() {
    timeout 120 qemu-system-arm -machine microbit -nographic -monitor none \
        -semihosting-config enable=on,target=native -icount shift=0 -kernel "$@"
}

step "bit-exact replay"
qemu_m4 "$m4/bitexact" | record
qemu_m0 "$m0/bitexact" | record
# The RISC-V board runs on QEMU's RISC-V system emulator (Debian package
# qemu-system-misc, installed above when missing; skipped if the install failed).
if command -v qemu-system-riscv32 >/dev/null; then
    timeout 120 qemu-system-riscv32 -machine sifive_e -nographic -monitor none \
        -semihosting-config enable=on,target=native \
        -kernel "$CARGO_TARGET_DIR/riscv32imc-unknown-none-elf/release/bitexact" | record
else
    echo "sifive_e (RISC-V): built, not run (qemu-system-riscv32 missing; apt-get install qemu-system-misc)"
fi

step "size of the node law alone (.text/.bss; size-empty is the same skeleton without it)"
qemu_m4 "$m4/size"
qemu_m0 "$m0/size"
(cd "$CARGO_TARGET_DIR" && "$llvm_size" thumbv7em-none-eabihf/release/size{,-empty} thumbv6m-none-eabi/release/size{,-empty}) |
    awk '{ print } $6 ~ /size$/ { text[$6] = $1; bss[$6] = $3 }
         $6 ~ /size-empty$/ { split($6, p, "/"); full = p[1] "/" p[2] "/size";
                              printf "law alone on %s: .text %d bytes, .bss %d bytes\n",
                                     p[1], text[full] - $1, bss[full] - $3 }' | record

step "sync pulse with defmt logs"
for core in m4 m0; do
    if [[ $core == m4 ]]; then elf=$m4/pulse; else elf=$m0/pulse; fi
    log=$(mktemp)
    status=0
    "qemu_$core" "$elf" >"$log" || status=$?
    if command -v defmt-print >/dev/null; then
        defmt-print -e "$elf" <"$log" | tail -n 4
    else
        echo "$(wc -c <"$log") bytes of defmt frames (install defmt-print to read them)"
    fi
    rm -f "$log"
    if (( status != 0 )); then
        echo "pulse on $core failed with status $status"
        exit 1
    fi
done

step "cost of Node::update (instructions, -icount shift=0)"
qemu_m4 "$m4/cost" | record
qemu_m0 "$m0/cost" | record

step "chain of emulated nodes, P law, version-2 beacons, no latency told"
chain_logs=$CARGO_TARGET_DIR/chain-logs
mkdir -p "$chain_logs"
# The most SysTick time any node of a run lost to the host not scheduling its QEMU, ms
# (each node prints `time check: … (N us lost)`). A quiet host loses under 25 ms in the
# 12 s run; a stalled one 130 to 200 ms and more, with phase spikes of tens of ms.
stalled_ms() {
    awk '/time check:/ { for (i = 3; i <= NF; i++) if ($i == "lost)") {
             v = $(i - 2); gsub(/[(]/, "", v); if (v + 0 > m) m = v + 0 } }
         END { print int(m / 1000) }' "$1"
}
# Every node's telemetry lines against the scenario of the chain as it runs (five nodes:
# with another NODES the scenario does not describe the chain, and the check is skipped).
# The checker exits 1 on a failing verdict, which field-summary.py reads from the JSON;
# the full text report is kept beside the logs (field.txt).
field_check() {
    local scenario=$1 logs=$2 status=0
    shift 2
    if [[ ${NODES:-5} != 5 ]]; then
        echo "field: skipped, $scenario describes five nodes, not NODES=$NODES"
        return 0
    fi
    "$entrain" field "$here/$scenario" "$logs"/node-*.log --json >"$logs/field.json" || status=$?
    if (( status > 1 )); then
        echo "entrain field failed with status $status"
        return "$status"
    fi
    "$entrain" field "$here/$scenario" "$logs"/node-*.log >"$logs/field.txt" || true
    python3 "$here/field-summary.py" "$@" <"$logs/field.json"
}
# A run the host stalled (over 50 ms lost on some node) judges the host, not the law:
# it is printed and the chain runs once more, with its field check; a second failure, or
# any failure without a stall, fails CI. The field check is inside the repeat because a
# stall shows there too (a run that passed its own phase check with 7.1 ms of noise at
# the 99th percentile, against a 9.85 ms limit, on a host losing 0.1 to 0.25 s a run).
for attempt in 1 2; do
    p_status=0
    KI_Q16=0 LOG_DIR=$chain_logs/p "$here/run-chain.sh" "$m4/chain" >"$chain_logs/p-run.txt" 2>&1 ||
        p_status=$?
    cat "$chain_logs/p-run.txt"
    if (( p_status == 0 )); then
        step "field check of the P chain's telemetry against boards/chain-p.toml"
        # The decay fitted from the emulated links' noisy stamps is noisy too: 0.805 to
        # 0.937 per update against 0.909 predicted in nine runs; the slowest, on a run
        # with a high noise floor, is just inside the 1.5 times allowed (see README.md,
        # "The field check"). A `slower_than_predicted` is printed, not gating.
        field_check chain-p.toml "$chain_logs/p" --gate 5 --allow slower_than_predicted ||
            p_status=$?
        (( p_status == 0 )) && break
    fi
    lost_ms=$(stalled_ms "$chain_logs/p-run.txt")
    if (( attempt == 1 && lost_ms > 50 )); then
        echo "chain: the host stalled the emulated nodes (up to $lost_ms ms lost in that run): running the P chain and its field check once more"
        continue
    fi
    exit "$p_status"
done

# The PI law over the same links (issue 12). By default node 0 is a reference (it beacons
# and echoes but never steers, so the common rate is its crystal's) and the other four
# run the PI law with ki = 16/65536 for 15 minutes: that passes here (see README.md, "With
# a reference node it passes, given time") and gates. CHAIN_PI_REFERENCE= (empty) runs
# the chain without a reference, reported only unless CHAIN_PI_GATES=1: its relative
# trims can pass, but its common rate drifts by the links' leftover bias until a trim
# reaches its limit (README.md, "Without a reference"); CHAIN_KI_Q16=128
# CHAIN_PI_RUN_MS=60000 is the leaderless run of before, which fails here.
pi_reference=${CHAIN_PI_REFERENCE-0}
if [[ -n $pi_reference ]]; then
    step "chain of emulated nodes, PI law on four nodes, node $pi_reference a reference, version-2 beacons, no latency told"
else
    step "chain of emulated nodes, PI law with a trim leak, version-2 beacons, no latency told"
fi
pi_status=0
KI_Q16=${CHAIN_KI_Q16:-16} SMOOTHING=${CHAIN_SMOOTHING:-5} RUN_MS=${CHAIN_PI_RUN_MS:-900000} \
    REFERENCE=$pi_reference LOG_DIR=$chain_logs/pi "$here/run-chain.sh" "$m4/chain" || pi_status=$?
if [[ $pi_reference == 0 ]]; then
    # chain-pi-ref.toml describes this run on the reference's clock (its header says
    # why). Reported, not gating: over 15 minutes the host stalls some node more than
    # once, and a reception stamped 15 to 20 ms late anywhere after the budget (540 s)
    # moves the observed settling past it (a passing run here: settled 491.8 s, from such
    # a spike; noise floor p99 1.6 ms).
    step "field check of the PI chain's telemetry against boards/chain-pi-ref.toml (reported only)"
    field_check chain-pi-ref.toml "$chain_logs/pi" || true
elif [[ -n $pi_reference ]]; then
    echo "field: skipped for the PI chain with node $pi_reference a reference (chain-pi-ref.toml describes node 0 as the reference)"
else
    # The PI chain's field report, printed, not gating (issue 12).
    step "field check of the PI chain's telemetry against boards/chain-pi.toml (reported only)"
    field_check chain-pi.toml "$chain_logs/pi" || true
fi
pi_gates=0
[[ -n $pi_reference ]] && pi_gates=1
if (( pi_status != 0 )); then
    if [[ ${CHAIN_PI_GATES:-$pi_gates} == 1 ]]; then
        exit "$pi_status"
    fi
    echo "chain: the PI run above did not pass; not gating (set CHAIN_PI_GATES=1 to gate on it)"
fi

step "figures in boards/README.md are the ones printed above"
"$here/readme-figures.sh" "$figures" "$here/README.md"

step "done: boards CI passed in $(( $(date +%s) - started )) s"
