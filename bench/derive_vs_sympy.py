"""Benchmark: lawsmith load+derive+simplify vs SymPy derive+simplify of the same spec.

Both are measured in this run on this machine; the figure that matters is the ratio
(goal: lawsmith >= 50x faster). Usage: python3 bench/derive_vs_sympy.py [SPEC]
"""

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
    spec_path = sys.argv[1] if len(sys.argv) > 1 else "specs/energy_longitudinal.yaml"
    out = subprocess.run(
        ["cargo", "bench", "-q", "--bench", "derive", "--", spec_path, "200"],
        capture_output=True, text=True, check=True,
    ).stdout
    ours = json.loads(out.strip().splitlines()[-1])
    with open(spec_path, encoding="utf-8") as fh:
        spec = yaml.safe_load(fh)
    runs = []
    for _ in range(3):
        t0 = time.perf_counter()
        _, vdot, laws = sympy_derivation(spec)
        vdot_s = sp.simplify(vdot)
        for e in laws.values():
            sp.simplify(e)
        runs.append(time.perf_counter() - t0)
    sympy_s = sorted(runs)[1]
    print(f"spec: {spec_path}")
    print(f"lawsmith derive+simplify (median of {ours['runs']}): {ours['median_s'] * 1e3:9.3f} ms")
    print(f"SymPy    derive+simplify (median of 3):   {sympy_s * 1e3:9.3f} ms   (V-dot -> {vdot_s})")
    print(f"ratio SymPy / lawsmith: {sympy_s / ours['median_s']:.1f}x  (goal >= 50x)")


if __name__ == "__main__":
    main()
