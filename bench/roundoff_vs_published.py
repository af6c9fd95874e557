"""Benchmark: lawsmith's proved round-off bounds against the published ones (FPBench kernels).

For each kernel of the open FPBench suite listed in ../shared/checkvalues.md §7 (expression
and input ranges as in the FPTaylor repository's `benchmarks/macro/Rosa/RosaBenchmarks.scala`,
binary64, exact inputs), written as a lawsmith formula: lawsmith's bound of |computed − exact|
for the code it generates for that formula (`crates/verify/benches/roundoff.rs`), the worst
error observed by sampling (the code's value at each point against mpmath at 50 digits), and
the ratio of lawsmith's bound to the best published bound for an established analyser.
Published figures, from checkvalues.md §7: FPTaylor and VCFloat2 from the VCFloat
repository's `FPBench/plotting.py` (fields `fpt` and `err`), Rosa from the `ensuring`
clauses of a Rosa benchmark file.

lawsmith folds constants exactly and collects like terms before it emits code (3*x3*x3 twice
becomes one term), so it bounds its own evaluation order of the same real function, not the
published one operation for operation: a ratio below 1 is possible and not a contradiction.
A bound below the sampled worst would be a soundness failure: the script exits 1.

Usage: python3 bench/roundoff_vs_published.py [--samples N] [--leaves L]
"""

import argparse
import json
import subprocess
import sys

import mpmath
import sympy as sp
from sympy.parsing.sympy_parser import parse_expr, rationalize, standard_transformations

mpmath.mp.dps = 50

T = "331.4 + 0.6*T"
# (name, formula, [(var, lo, hi)], best published, its source, others)
KERNELS = [
    ("rigidBody1", "-x1*x2 - 2*x2*x3 - x1 - x3",
     [("x1", -15, 15), ("x2", -15, 15), ("x3", -15, 15)],
     3.05e-13, "VCFloat2", "FPTaylor 3.9e-13; Rosa 5.08e-13"),
    ("rigidBody2", "2*x1*x2*x3 + 3*x3*x3 - x2*x1*x2*x3 + 3*x3*x3 - x2",
     [("x1", -15, 15), ("x2", -15, 15), ("x3", -15, 15)],
     3.9e-11, "VCFloat2", "FPTaylor 5.3e-11; Rosa 6.48e-11"),
    ("doppler1", f"-({T})*v / (({T} + u)*({T} + u))",
     [("u", -100, 100), ("v", 20, 20000), ("T", -30, 50)],
     1.6e-13, "FPTaylor", "VCFloat2 4.5e-13; Rosa 4.92e-13"),
    ("turbine1", "3 + 2/(r*r) - 0.125*(3 - 2*v)*(w*w*r*r)/(1 - v) - 4.5",
     [("v", -4.5, -0.3), ("w", 0.4, 0.9), ("r", 3.8, 7.8)],
     2.4e-14, "FPTaylor", "VCFloat2 7.9e-14; Rosa 1.24e-13"),
    ("turbine2", "6*v - 0.5*v*(w*w*r*r)/(1 - v) - 2.5",
     [("v", -4.5, -0.3), ("w", 0.4, 0.9), ("r", 3.8, 7.8)],
     2.6e-14, "FPTaylor", "Rosa 1.76e-13"),
    ("turbine3", "3 - 2/(r*r) - 0.125*(1 + 2*v)*(w*w*r*r)/(1 - v) - 0.5",
     [("v", -4.5, -0.3), ("w", 0.4, 0.9), ("r", 3.8, 7.8)],
     1.3e-14, "FPTaylor", "Rosa 8.5e-14"),
    ("carbonGas",
     "(35000000 + 0.401*(1000/V)*(1000/V))*(V - 1000*0.0000427) - 0.000000000000000000000013806503*1000*300",
     [("V", 0.1, 0.5)],
     9.2e-9, "FPTaylor", "VCFloat2 2.5e-8"),
    ("verhulst", "4*x/(1 + x/1.11)", [("x", 0.1, 0.3)],
     2.32e-16, "VCFloat2", "FPTaylor 3.3e-16"),
    ("predatorPrey", "4*x*x/(1 + (x/1.11)*(x/1.11))", [("x", 0.1, 0.3)],
     1.9e-16, "FPTaylor", "VCFloat2 2.9e-16; Rosa 2.94e-16"),
]


def exact_of(formula, names):
    syms = [sp.Symbol(n) for n in names]
    e = parse_expr(formula, local_dict=dict(zip(names, syms)),
                   transformations=standard_transformations + (rationalize,))
    return sp.lambdify(syms, e, modules="mpmath")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=20000, help="sampled points per kernel")
    ap.add_argument("--leaves", type=int, default=200000, help="branch-and-bound leaves")
    args = ap.parse_args()
    job = [{"name": n, "expr": f, "vars": [list(v) for v in vs], "samples": args.samples,
            "leaves": args.leaves} for n, f, vs, *_ in KERNELS]
    out = subprocess.run(
        ["cargo", "bench", "-q", "-p", "lawsmith-verify", "--bench", "roundoff"],
        input=json.dumps(job), capture_output=True, text=True, check=True,
    ).stdout
    ours = {r["name"]: r for r in map(json.loads, out.strip().splitlines())}
    print(f"{'kernel':<13} {'lawsmith bound':>14} {'sampled worst':>13} {'best published':>14}"
          f" {'ratio':>6}  source (others)")
    failed, worst_ratio = False, 0.0
    for name, formula, vs, best, source, others in KERNELS:
        r = ours[name]
        f = exact_of(formula, [v[0] for v in vs])
        seen = mpmath.mpf(0)
        for x, y in r["points"]:
            seen = max(seen, abs(mpmath.mpf(y) - f(*[mpmath.mpf(v) for v in x])))
        seen = float(seen)
        ratio = r["bound"] / best
        worst_ratio = max(worst_ratio, ratio)
        flag = "" if r["bound"] >= seen else "  BOUND BELOW A SAMPLED ERROR"
        failed |= r["bound"] < seen
        print(f"{name:<13} {r['bound']:14.3e} {seen:13.3e} {best:14.3e} {ratio:6.2f}  "
              f"{source} ({others}); {r['leaves']} leaves, {r['seconds']:.2f} s{flag}")
    print(f"worst ratio to the best published bound: {worst_ratio:.2f} (goal <= 3); "
          f"{args.samples} samples and {args.leaves} leaves per kernel")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
