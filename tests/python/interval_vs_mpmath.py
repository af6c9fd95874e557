"""Check lawsmith's interval results against mpmath (reference: mpmath, 50-digit reals and
its interval context `mpmath.iv`).

Input: a JSON file of cases {"expr": formula text, "box": {var: [lo, hi]}, "result": [lo, hi]}.
For every case:
  * at the box's two extreme corners, its midpoint and two random points, the expression's
    value computed with 50-digit mpmath must lie inside lawsmith's interval (points where the
    expression is undefined or complex are skipped);
  * where mpmath.iv has every function the expression uses, mpmath's enclosure of the range
    over the box must intersect lawsmith's (both contain the true range).
Prints counts and violations; exit 1 on any violation.
"""

import json
import random
import re
import sys

import mpmath
from mpmath import iv, mp

mp.dps = 50
iv.dps = 30
NUM = re.compile(r"(?<![A-Za-z_0-9.])(\d+\.?\d*(?:[eE][+-]?\d+)?|\.\d+(?:[eE][+-]?\d+)?)")


def to_python(text, wrap):
    text = NUM.sub(lambda m: f"{wrap}('{m.group(1)}')", text)
    return text.replace("^", "**")


def clamp(x, lo, hi):
    return min(max(x, lo), hi)


def real_only(f, ok):
    """f restricted to its real domain: outside it the expression is undefined (as in
    lawsmith), not complex."""
    def g(*a):
        if not ok(*a):
            raise ValueError("outside the real domain")
        return f(*a)
    return g


REAL = {
    "sin": mp.sin, "cos": mp.cos, "tan": mp.tan,
    "asin": real_only(mp.asin, lambda x: -1 <= x <= 1),
    "acos": real_only(mp.acos, lambda x: -1 <= x <= 1),
    "atan": mp.atan, "atan2": mp.atan2,
    "sqrt": real_only(mp.sqrt, lambda x: x >= 0), "exp": mp.exp,
    "ln": real_only(mp.log, lambda x: x > 0),
    "abs": abs, "min": min, "max": max, "clamp": clamp, "R": mp.mpf,
}
IV_FUNCS = {"sin": iv.sin, "cos": iv.cos, "tan": iv.tan, "sqrt": iv.sqrt, "exp": iv.exp,
            "ln": iv.log, "abs": iv.fabs, "R": iv.mpf}
IV_MISSING = ("asin", "acos", "atan(", "atan2", "min", "max", "clamp")


def inside(v, lo, hi):
    return mp.mpf(lo) <= v <= mp.mpf(hi)


def main():
    cases = json.load(open(sys.argv[1]))
    rng = random.Random(7)
    points = violations = iv_checked = iv_violations = 0
    for c in cases:
        lo, hi = c["result"]
        lo = float("-inf") if lo is None else lo
        hi = float("inf") if hi is None else hi
        code = compile(to_python(c["expr"], "R"), "<expr>", "eval")
        box = c["box"]
        names = list(box)
        picks = [{n: box[n][0] for n in names}, {n: box[n][1] for n in names},
                 {n: (box[n][0] + box[n][1]) / 2 for n in names}]
        for _ in range(2):
            picks.append({n: rng.uniform(*box[n]) for n in names})
        for p in picks:
            env = dict(REAL)
            env.update({n: mp.mpf(v) for n, v in p.items()})
            try:
                v = eval(code, {"__builtins__": {}}, env)
            except (ValueError, ZeroDivisionError, OverflowError, TypeError):
                continue
            if isinstance(v, mpmath.mpc) or not mp.isfinite(v):
                continue
            points += 1
            if not inside(v, lo, hi):
                violations += 1
                if violations <= 10:
                    print(f"VIOLATION {c['expr']} at {p}: {v} not in [{lo}, {hi}]")
        if not any(m in c["expr"] for m in IV_MISSING):
            env = dict(IV_FUNCS)
            env.update({n: iv.mpf(list(box[n])) for n in names})
            try:
                r = eval(compile(to_python(c["expr"], "R"), "<iv>", "eval"), {"__builtins__": {}}, env)
            except (ValueError, ZeroDivisionError, OverflowError, TypeError):
                continue
            if r.a == r.a and r.b == r.b and mp.isfinite(r.a) and mp.isfinite(r.b):
                iv_checked += 1
                if r.b < mp.mpf(lo) or r.a > mp.mpf(hi):
                    iv_violations += 1
                    if iv_violations <= 10:
                        print(f"IV DISJOINT {c['expr']} box {box}: mpmath [{r.a}, {r.b}] vs [{lo}, {hi}]")
    print(f"cases {len(cases)}, 50-digit points {points}, point violations {violations}, "
          f"mpmath.iv boxes {iv_checked}, disjoint {iv_violations}")
    return 1 if violations or iv_violations else 0


if __name__ == "__main__":
    sys.exit(main())
