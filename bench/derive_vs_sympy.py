"""Benchmark: lawsmith load+derive+simplify vs SymPy derive+simplify of the same spec.

Both are measured in this run on this machine; the figure that matters is the ratio
(goal: lawsmith >= 50x faster).

Usage: python3 bench/derive_vs_sympy.py [SPEC] [--runs N] [--sympy-runs M]
"""

import argparse
import json
import os
import subprocess
import sys
import time

import sympy as sp
import yaml

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "tests", "python"))
from crosscheck_derive import sympy_derivation  # noqa: E402


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("spec", nargs="?", default="specs/energy_longitudinal.yaml")
    ap.add_argument("--runs", type=int, default=200, help="lawsmith runs (median taken)")
    ap.add_argument("--sympy-runs", type=int, default=3, help="SymPy runs (median taken)")
    args = ap.parse_args()
    spec_path = args.spec
    # the bench runs in crates/spec: give it the spec's absolute path
    out = subprocess.run(
        ["cargo", "bench", "-q", "-p", "lawsmith-spec", "--bench", "derive", "--",
         os.path.abspath(spec_path), str(args.runs)],
        capture_output=True, text=True, check=True,
    ).stdout
    ours = json.loads(out.strip().splitlines()[-1])
    with open(spec_path, encoding="utf-8") as fh:
        spec = yaml.safe_load(fh)
    runs = []
    for _ in range(args.sympy_runs):
        t0 = time.perf_counter()
        _, vdot, laws = sympy_derivation(spec)
        vdot_s = sp.simplify(vdot)
        for e in laws.values():
            sp.simplify(e)
        runs.append(time.perf_counter() - t0)
    sympy_s = sorted(runs)[len(runs) // 2]
    print(f"spec: {spec_path}")
    print(f"lawsmith derive+simplify (median of {ours['runs']}): {ours['median_s'] * 1e3:9.3f} ms")
    print(f"SymPy    derive+simplify (median of {args.sympy_runs}):   {sympy_s * 1e3:9.3f} ms   (V-dot -> {vdot_s})")
    print(f"ratio SymPy / lawsmith: {sympy_s / ours['median_s']:.1f}x  (goal >= 50x)")


if __name__ == "__main__":
    main()
