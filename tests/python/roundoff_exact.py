"""The worst error of compiled generated code against the exact law, at sampled points.

Reads a JSON job on stdin:
  {"spec": PATH, "inputs": [names], "actuators": [names], "points": [[values]],
   "runs": {"f64": {"limits": [[lo, hi]], "commands": [[values]]}, "f32": {...}}}
and writes {"f64": {actuator: worst}, ...}: for each precision and actuator, the largest
|command − clamp(exact law, lo, hi)|, the law evaluated by mpmath at 50 significant digits
on the point's values exactly as given (each a double), parameters the exact decimals the spec
wrote, clamped to the limits the code used. The laws come from the spec through the
independent checker's own reader (tools/certcheck/model.py, SymPy), not from lawsmith.
"""

import json
import sys
from pathlib import Path

import mpmath
import sympy as sp

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "tools" / "certcheck"))
import model  # noqa: E402

mpmath.mp.dps = 50


def main():
    job = json.load(sys.stdin)
    m = model.Model(Path(job["spec"]).read_text())
    params = {m.sym(p): model.R(v) for p, v in m.params.items()}
    syms = [m.sym(n) for n in job["inputs"]]
    laws = []
    for a in job["actuators"]:
        e = m.actuators[a][0].xreplace(params)
        laws.append(sp.lambdify(syms, e, modules="mpmath"))
    # every point's exact commands, once for both precisions
    exact = []
    for p in job["points"]:
        xs = [mpmath.mpf(float(v)) for v in p]  # a double converts exactly
        exact.append([f(*xs) for f in laws])
    out = {}
    for prec, run in job["runs"].items():
        worst = {}
        for j, a in enumerate(job["actuators"]):
            lo, hi = (mpmath.mpf(float(x)) for x in run["limits"][j])
            w = mpmath.mpf(0)
            for e, c in zip(exact, run["commands"]):
                want = min(max(e[j], lo), hi)
                w = max(w, abs(mpmath.mpf(c[j]) - want))
            worst[a] = float(w)
        out[prec] = worst
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
