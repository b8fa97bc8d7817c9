#!/usr/bin/env bash
# A chain of emulated nodes: NODES instances of QEMU's mps2-an386, each running the
# `chain` firmware with its own crystal error, linked left-right over CMSDK UARTs on
# loopback TCP sockets (127.0.0.1 only), exchanging entrain beacon frames.
#
# Node i's UART1 is a TCP server on port BASE+i; node i+1's UART0 connects to it as a
# client. So node i is started, and its server is seen listening, before node i+1.
# Every QEMU runs under `timeout`; the script stops every process it started, by its
# PID, whatever happens. It passes when every node reports (over semihosting) that its
# phase differences to its neighbours stayed within tolerance at the end of the run and,
# under the PI law, when every node's mean trim over the judged window, relative to the
# trims' mean, matches its programmed crystal error relative to the crystals' mean,
# trim - mean trim = -(ppm - mean ppm), within TRIM_TOL_PPM.
#
# Every node also writes the crate's telemetry line (`ET1 ...`) of every
# TELEMETRY_EVERY-th update on the same console; they are kept out of the printed
# output, and with LOG_DIR set each node's lines go to LOG_DIR/node-K.log (one file per
# node, for `entrain field`; boards/chain-p.toml and chain-pi.toml describe the chain).
#
# usage: run-chain.sh [CHAIN_ELF]
# environment: NODES (3..5, default 5), RUN_MS (default 12000), TOL_US (default 10000),
#              KP_Q16 / KI_Q16 / LEAK_Q16 (gains in 1/65536, default 16384 / 0 / KI/64;
#              KI_Q16=0 is the P law), VERSION (beacon frame version, default 2),
#              TRIM_TOL_PPM (default 5), DELAY_US (link delay the nodes are told,
#              default 0: none, they measure it), SMOOTHING (delay smoothing shift,
#              default 3), SLEW_US (slew limit, us per update, default 62500),
#              TRIM_LIMIT_PPM (default 200), BASE_PORT, TELEMETRY_EVERY (default 1;
#              0: no telemetry lines), LOG_DIR (where the per-node telemetry logs go;
#              default: not kept), REFERENCE (a node index: that node never steers, so
#              the chain's common rate is its crystal's; default: none).
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
target_dir=${CARGO_TARGET_DIR:-$here/target}
elf=${1:-$target_dir/thumbv7em-none-eabihf/release/chain}
nodes=${NODES:-5}
run_ms=${RUN_MS:-12000}
tol_us=${TOL_US:-10000}
kp_q16=${KP_Q16:-16384}
ki_q16=${KI_Q16:-0}
leak_q16=${LEAK_Q16:-$((ki_q16 / 64))}
version=${VERSION:-2}
smoothing=${SMOOTHING:-3}
trim_limit_ppm=${TRIM_LIMIT_PPM:-200}
slew_us=${SLEW_US:-62500}
trim_tol_ppm=${TRIM_TOL_PPM:-5}
delay_us=${DELAY_US:-0}
telemetry_every=${TELEMETRY_EVERY:-1}
log_dir=${LOG_DIR:-}
reference=${REFERENCE:-}
if (( ki_q16 > 0 )); then law=PI; else law=P; fi
base=${BASE_PORT:-$((20000 + $$ % 20000))}
# Crystal errors, ppm: invented, within a ±100 ppm part (common practice, no source).
# boards/chain-p.toml and chain-pi.toml repeat them: change both together.
ppm=(+60 -45 +25 -70 +10)

if [[ ! -f $elf ]]; then
    echo "run-chain: no firmware at $elf (build boards/mps2-an386 with --features chain)" >&2
    exit 2
fi
if (( nodes < 3 || nodes > 5 )); then
    echo "run-chain: NODES must be 3 to 5, not $nodes" >&2
    exit 2
fi
if [[ -n $log_dir ]]; then
    mkdir -p "$log_dir"
    rm -f "$log_dir"/node-*.log
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
echo "chain: law $law (kp $kp_q16, ki $ki_q16, leak $leak_q16 /65536), beacon version $version, $nodes nodes, ${run_ms} ms each, tolerance ${tol_us} us, ports $base..$((base + nodes - 2)) on 127.0.0.1"
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
        -append "node=$i nodes=$nodes ppm=${ppm[$i]} delay=$delay_us run_ms=$run_ms tol_us=$tol_us kp_q16=$kp_q16 ki_q16=$ki_q16 leak_q16=$leak_q16 version=$version smoothing=$smoothing trim_limit_ppm=$trim_limit_ppm slew_us=$slew_us telemetry=$telemetry_every reference=$([[ $reference == "$i" ]] && echo 1 || echo 0)" \
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
    grep -v '^ET1 ' "$logs/node$i.log" || true
    if [[ -n $log_dir ]]; then
        grep '^ET1 ' "$logs/node$i.log" >"$log_dir/node-$i.log" || true
    fi
    if (( status != 0 )); then
        echo "chain: node $i exited with status $status"
        failed=1
    fi
done
pids=()
# Each node printed, per side, the mean difference the law pulled with at its updates and
# the mean delay it measured. The true differences of a link's two ends cancel, so the sum
# of the two means is the link's bias; summed over the links it is what the PI law's
# integral turns into a drift of the common rate (see README.md, "The chain").
cat "$logs"/node*.log | awk '
    $1 == "node" && $4 == "link" && $5 == "at" {
        k = $2 + 0; d = $9 + 0; m = $14 + 0
        if ($3 == "right") { rd[k] = d; rm[k] = m; right[k] = 1 } else { ld[k] = d; lm[k] = m; left[k] = 1 }
    }
    END {
        total = 0; links = 0
        for (k = 0; k < 16; k++) {
            if (!right[k] || !left[k + 1]) continue
            printf "chain: link %d-%d: mean diffs %+d us (node %d) and %+d us (node %d), bias %+d us; delays measured %d and %d us\n",
                   k, k + 1, rd[k], k, ld[k + 1], k + 1, rd[k] + ld[k + 1], rm[k], lm[k + 1]
            total += rd[k] + ld[k + 1]; links++
        }
        if (links) printf "chain: links bias summed over the chain %+d us\n", total
    }'
if (( failed )); then
    echo "chain: law $law FAIL (phases)"
    exit 1
fi
echo "chain: every node within ${tol_us} us of its neighbours"
if [[ $law == PI ]]; then
    # Each node printed "chain: law PI node K programmed P ppm trim T ppm". Node K's
    # timer runs P ppm fast, so the rates agree when K trims -(P - c) for a common c;
    # with the leak, c is held near the crystals' mean, but the noise of emulated links
    # moves it (see README.md), so each trim is judged relative to the trims' mean
    # against the crystal relative to the crystals' mean, and c is printed beside.
    if ! cat "$logs"/node*.log | awk -v n="$nodes" -v tol="$trim_tol_ppm" '
        $1 == "chain:" && $2 == "law" && $3 == "PI" && $4 == "node" {
            k = $5; p[k] = $7 + 0; t[k] = $10 + 0; seen++; psum += $7; tsum += t[k]
        }
        END {
            if (seen != n) { printf "chain: %d of %d nodes reported a trim\n", seen, n; exit 1 }
            pmean = psum / n; tmean = tsum / n; bad = 0
            for (k = 0; k < n; k++) {
                want = -(p[k] - pmean); got = t[k] - tmean; off = got - want
                ok = (off <= tol && off >= -tol)
                printf "chain: node %d trim %+.1f ppm, %+.1f from the trims mean; want %+.1f = -(%+d - %+.1f): off %+.1f ppm, %s\n",
                       k, t[k], got, want, p[k], pmean, off, ok ? "ok" : "OUT OF TOLERANCE"
                if (!ok) bad = 1
            }
            printf "chain: common rate: trims mean %+.1f ppm, crystals mean %+.1f ppm, so the chain runs %+.1f ppm from nominal\n",
                   tmean, pmean, pmean + tmean
            exit bad
        }'; then
        echo "chain: law PI FAIL (trims not within ${trim_tol_ppm} ppm of -(ppm - mean ppm), relative to their mean)"
        exit 1
    fi
fi
echo "chain: law $law PASS"
