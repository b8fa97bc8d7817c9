#!/usr/bin/env python3
"""The emulated chain's field check in one line, and the gate boards/ci.sh holds it to.

Reads the JSON of `entrain field SCENARIO LOG... --json` on standard input and prints

    field: law P verdict pass links 4/4 settled 0.5 s (predicted p50 2.2 s p90 3.2 s) ...

With --gate NODES it exits 1 unless the verdict passes and the links heard are exactly
those of a chain of NODES nodes, 0-1, 1-2, ..., each heard in both directions: none
missing, none one-way, none unexpected. Each --allow CODE lets a failing verdict whose
reasons all have such codes through (printed, not gating). Without --gate it only
prints.

usage: field-summary.py [--gate NODES [--allow CODE]...] < field.json
"""
import json
import sys


def seconds(x):
    return "-" if x is None else f"{x:.3g} s"


def main(argv):
    gate = None
    allowed = set()
    args = argv[1:]
    try:
        if args[:1] == ["--gate"]:
            gate = int(args[1])
            args = args[2:]
            while args[:1] == ["--allow"]:
                allowed.add(args[1])
                args = args[2:]
        if args:
            raise ValueError(args)
    except (IndexError, ValueError):
        print(__doc__.strip().splitlines()[-1], file=sys.stderr)
        return 2
    r = json.load(sys.stdin)
    law = "PI" if r["scenario"]["ki"] > 0 else "P"
    verdict = "pass" if r["verdict"]["pass"] else "fail"
    links = r["links"]
    each = links["each"]
    both = {(k["a"], k["b"]) for k in each if k["a_hears_b"] and k["b_hears_a"]}
    heard = {(k["a"], k["b"]) for k in each if k["a_hears_b"] or k["b_hears_a"]}
    losses = [k["loss"] for k in each if k["loss"] is not None]
    observed = r["observed"]
    predicted = r["predicted"]
    settle = predicted["settle_s"] or {}
    decay = observed["decay"]
    fitted = "not fitted" if decay is None else f"{decay['fitted_per_update']:.4f}"
    floor = observed["noise_floor_s"]
    p99 = "-" if floor is None else f"{floor['p99'] * 1e3:.2f} ms"
    limit = observed["noise_floor_limit_s"]
    limit = "-" if limit is None else f"{limit * 1e3:.2f} ms"
    print(
        f"field: law {law} verdict {verdict} links {links['present']}/{links['expected']}"
        f" settled {seconds(observed['settle_s'])}"
        f" (predicted p50 {seconds(settle.get('p50'))} p90 {seconds(settle.get('p90'))})"
        f" decay {fitted} (predicted {predicted['decay_per_update']:.4f})"
        f" noise p99 {p99} (limit {limit})"
        f" loss max {max(losses, default=0) * 100:.1f} %"
    )
    for reason in r["verdict"]["reasons"]:
        print(f"field:   {reason['code']}: {reason['message']}")
    if gate is None:
        return 0
    chain = {(k, k + 1) for k in range(gate - 1)}
    problems = []
    codes = {reason["code"] for reason in r["verdict"]["reasons"]}
    if verdict != "pass" and not codes <= allowed:
        problems.append(f"verdict fail ({', '.join(sorted(codes - allowed))})")
    elif verdict != "pass":
        print(f"field: not gating on {', '.join(sorted(codes))} (allowed)")
    if links["missing"] or links["unexpected"]:
        problems.append(f"missing {links['missing']}, unexpected {links['unexpected']}")
    if heard != chain:
        problems.append(f"links heard {sorted(heard)}, the chain has {sorted(chain)}")
    if both != chain:
        problems.append(f"links heard both ways {sorted(both)}, want {sorted(chain)}")
    for p in problems:
        print(f"field: FAIL: {p}")
    if not problems:
        print(f"field: the links heard are exactly the chain's {len(chain)}, both ways")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
