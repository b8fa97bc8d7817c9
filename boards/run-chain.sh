#!/usr/bin/env bash
# A chain of emulated nodes: NODES instances of QEMU's mps2-an386, each running the
# `chain` firmware with its own crystal error, linked left-right over CMSDK UARTs on
# loopback TCP sockets (127.0.0.1 only), exchanging entrain beacon frames.
#
# Node i's UART1 is a TCP server on port BASE+i; node i+1's UART0 connects to it as a
# client. So node i is started, and its server is seen listening, before node i+1.
# Every QEMU runs under `timeout`; the script stops every process it started, by its
# PID, whatever happens. It passes when every node reports (over semihosting) that its
# phase differences to its neighbours stayed within tolerance at the end of the run.
#
# usage: run-chain.sh [CHAIN_ELF]
# environment: NODES (3..5, default 5), RUN_MS (default 12000), TOL_US (default 10000),
#              KP_Q16 / KI_Q16 (gains in 1/65536, default 16384 / 0),
#              DELAY_US (link delay the nodes assume, default 0), BASE_PORT.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
target_dir=${CARGO_TARGET_DIR:-$here/target}
elf=${1:-$target_dir/thumbv7em-none-eabihf/release/chain}
nodes=${NODES:-5}
run_ms=${RUN_MS:-12000}
tol_us=${TOL_US:-10000}
kp_q16=${KP_Q16:-16384}
ki_q16=${KI_Q16:-0}
delay_us=${DELAY_US:-0}
base=${BASE_PORT:-$((20000 + $$ % 20000))}
# Crystal errors, ppm: invented, within a ±100 ppm part (common practice, no source).
ppm=(+60 -45 +25 -70 +10)

if [[ ! -f $elf ]]; then
    echo "run-chain: no firmware at $elf (build boards/mps2-an386 with --features chain)" >&2
    exit 2
fi
if (( nodes < 3 || nodes > 5 )); then
    echo "run-chain: NODES must be 3 to 5, not $nodes" >&2
    exit 2
fi

logs=$(mktemp -d)
pids=()
stop_all() {
    for pid in "${pids[@]}"; do
        kill "$pid" 2>/dev/null || true
    done
    for pid in "${pids[@]}"; do
        wait "$pid" 2>/dev/null || true
    done
}
trap 'stop_all; rm -rf "$logs"' EXIT

if command -v ss >/dev/null; then
    listening() {
        ss -ltnH "sport = :$1" 2>/dev/null | grep -q .
    }
else
    # No way to look without connecting (a probe would take the server's one client
    # slot), so give each server a second to come up.
    listening() {
        sleep 1
        [[ $2 == wait ]]
    }
fi

limit_s=$(( run_ms / 1000 + 30 ))
echo "chain: $nodes nodes, ${run_ms} ms each, tolerance ${tol_us} us, ports $base..$((base + nodes - 2)) on 127.0.0.1"
for (( i = 0; i < nodes; i++ )); do
    if (( i == 0 )); then
        left=null
    else
        left="tcp:127.0.0.1:$((base + i - 1)),nodelay=on"
    fi
    if (( i == nodes - 1 )); then
        right=null
    else
        port=$((base + i))
        if listening "$port" check; then
            echo "chain: port $port is taken; set BASE_PORT" >&2
            exit 2
        fi
        right="tcp:127.0.0.1:$port,server=on,wait=off,nodelay=on"
    fi
    timeout "$limit_s" qemu-system-arm -machine mps2-an386 -cpu cortex-m4 \
        -nographic -monitor none -semihosting-config enable=on,target=native \
        -serial "$left" -serial "$right" -kernel "$elf" \
        -append "node=$i nodes=$nodes ppm=${ppm[$i]} delay=$delay_us run_ms=$run_ms tol_us=$tol_us kp_q16=$kp_q16 ki_q16=$ki_q16" \
        >"$logs/node$i.log" 2>&1 &
    pids+=("$!")
    if (( i < nodes - 1 )); then
        # The next node's client needs this node's server up.
        for (( k = 0; k < 200; k++ )); do
            listening "$port" wait && break
            sleep 0.02
        done
        listening "$port" wait || { echo "chain: node $i never listened on $port" >&2; exit 1; }
    fi
done

failed=0
for (( i = 0; i < nodes; i++ )); do
    if wait "${pids[$i]}"; then
        status=0
    else
        status=$?
    fi
    cat "$logs/node$i.log"
    if (( status != 0 )); then
        echo "chain: node $i exited with status $status"
        failed=1
    fi
done
pids=()
if (( failed )); then
    echo "chain: FAIL"
    exit 1
fi
echo "chain: PASS, every node within ${tol_us} us of its neighbours"
