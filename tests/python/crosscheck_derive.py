"""Cross-check `lawsmith derive --format json` against an independent SymPy derivation.

Reference: SymPy (symbolic derivation from the YAML spec, written here independently of
lawsmith's engine) and mpmath (50-digit evaluation, so floating-point cancellation in the
expanded polynomials cannot hide or fake a difference).

For each spec: derive V, the closed-loop V-dot and each law with SymPy, then compare them
with lawsmith's expressions at N random points of the declared envelope. Exit 0 when every
relative difference is <= 1e-12, 1 otherwise.
"""

import argparse
import json
import random
import subprocess
import sys

import mpmath
import sympy as sp
import yaml
from sympy.parsing.sympy_parser import (
    convert_xor,
    parse_expr,
    standard_transformations,
)

TRANSFORMS = standard_transformations + (convert_xor,)
FUNCS = {
    "sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "asin": sp.asin, "acos": sp.acos,
    "atan": sp.atan, "atan2": sp.atan2, "sqrt": sp.sqrt, "exp": sp.exp, "ln": sp.log,
    "abs": sp.Abs, "min": sp.Min, "max": sp.Max,
}


def sympy_derivation(spec):
    """V, V-dot and the laws of a spec, derived with SymPy from the YAML alone."""
    syms = {}

    def sym(name):
        if name not in syms:
            syms[name] = sp.Symbol(name, real=True)
        return syms[name]

    states = spec.get("states") or {}
    refs = spec.get("references") or {}
    inputs = list((spec.get("inputs") or {}).keys())
    state_target = {}
    for s, d in states.items():
        if d.get("reference"):
            state_target[sym(s)] = sym(d["reference"])
        else:
            state_target[sym(s)] = sp.nsimplify(str(d.get("equilibrium", 0)))
    rate_of = {sym(r): sym(d["rate"]) for r, d in refs.items()}
    rate_of.update({sym(d["rate"]): sym(d["accel"]) for d in refs.values() if d.get("accel")})

    dynamics = {}
    definitions = {}
    defined_names = list((spec.get("energies") or {}).items()) + list(
        ((spec.get("lyapunov") or {}).get("where") or {}).items()
    )

    def parse(text):
        local = dict(FUNCS)
        for n in list(syms) + [k for k, _ in defined_names]:
            if n in definitions:
                local[n] = definitions[n]
        local["ref"] = lambda e: e.subs(state_target, simultaneous=True)
        local["ddt"] = lambda e: sum(
            (sp.diff(e, x) * f for x, f in dynamics.items()), sp.Integer(0)
        ) + sum((sp.diff(e, r) * rd for r, rd in rate_of.items()), sp.Integer(0))
        for section in ("parameters", "gains", "states", "references", "signals", "inputs",
                        "memory"):
            for n in spec.get(section) or {}:
                local.setdefault(n, sym(n))
        for d in refs.values():
            local.setdefault(d["rate"], sym(d["rate"]))
            if d.get("accel"):
                local.setdefault(d["accel"], sym(d["accel"]))
        # the plant's true value of an estimate: estimate*(1 + error) or estimate + error,
        # the error a symbol named with a leading delta
        # (named by its `error:` key when it has one); a constant unknown is a symbol
        for n, d in (spec.get("uncertain") or {}).items():
            if "constant" in d:
                local[n] = sym(n)
                continue
            err = sym(d.get("error") or "\u03b4" + n)
            local[str(err)] = err
            est = sym(d["estimate"])
            local[n] = est * (1 + err) if "relative" in d else est + err
        return parse_expr(str(text), local_dict=local, transformations=TRANSFORMS, evaluate=True)

    for s, f in (spec.get("dynamics") or {}).items():
        dynamics[sym(s)] = parse(f)
    for n, f in defined_names:
        definitions[n] = parse(f)
    laws = {}
    for n, f in (spec.get("laws") or {}).items():
        e = parse(f).subs({sym(k): v for k, v in laws.items()}, simultaneous=True)
        laws[n] = e
    closed = {x: f.subs({sym(k): v for k, v in laws.items()}, simultaneous=True)
              for x, f in dynamics.items()}
    # each controller state moves by its update law, the laws substituted
    updates = {sym(m): parse(d["update"]).subs({sym(k): v for k, v in laws.items()},
                                                simultaneous=True)
               for m, d in (spec.get("memory") or {}).items()}
    v = parse(spec["lyapunov"]["candidate"])
    vdot = sum((sp.diff(v, x) * f for x, f in closed.items()), sp.Integer(0)) + sum(
        (sp.diff(v, r) * rd for r, rd in rate_of.items()), sp.Integer(0)
    ) + sum((sp.diff(v, m) * u for m, u in updates.items()), sp.Integer(0))
    return v, vdot, laws


def lawsmith_expr(text, symbols):
    local = dict(FUNCS)
    local.update({n: sp.Symbol(n, real=True) for n in symbols})
    return parse_expr(text, local_dict=local, transformations=TRANSFORMS, evaluate=False)


def sample(symbols, rng):
    point = {}
    for name, s in symbols.items():
        kind = s["kind"]
        if kind == "parameter":
            point[name] = s["value"]
        elif kind in ("gain", "reference", "rate", "signal", "unknown constant",
                      "controller state"):
            lo, hi = s["range"]
            point[name] = rng.uniform(lo, hi)
    for name, s in symbols.items():
        if s.get("error_symbol"):
            lo, hi = s["range"]
            point[s["error_symbol"]] = rng.uniform(lo, hi)
    for name, s in symbols.items():
        if s["kind"] == "state":
            lo, hi = s["error"]
            centre = point[s["reference"]] if s.get("reference") else s.get("equilibrium", 0.0)
            point[name] = centre + rng.uniform(lo, hi)
    return point


def evaluate(expr, point):
    subs = {sp.Symbol(k, real=True): mpmath.mpf(v) for k, v in point.items()}
    f = sp.lambdify(list(subs.keys()), expr, modules="mpmath")
    return f(*subs.values())


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", required=True)
    ap.add_argument("--points", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--perturb", type=float, default=0.0,
                    help="scale lawsmith's V-dot by (1 + PERTURB): shows the check can fail")
    ap.add_argument("specs", nargs="+")
    args = ap.parse_args()
    mpmath.mp.dps = 50
    rng = random.Random(args.seed)
    worst_overall = 0.0
    failed = False
    for path in args.specs:
        out = subprocess.run([args.bin, "derive", "--format", "json", path],
                             capture_output=True, text=True, check=True).stdout
        got = json.loads(out)
        with open(path, encoding="utf-8") as fh:
            spec = yaml.safe_load(fh)
        v_ref, vdot_ref, laws_ref = sympy_derivation(spec)
        names = list(got["symbols"].keys()) + [
            s["error_symbol"] for s in got["symbols"].values() if s.get("error_symbol")]
        pairs = [("V", lawsmith_expr(got["candidate"], names), v_ref),
                 ("Vdot", lawsmith_expr(got["vdot"], names) * (1 + sp.Float(args.perturb, 60)), vdot_ref)]
        pairs += [(f"law {n}", lawsmith_expr(got["laws"][n], names), e) for n, e in laws_ref.items()]
        fns = []
        for label, mine, ref in pairs:
            free = sorted({str(s) for s in mine.free_symbols | ref.free_symbols})
            args_ = [sp.Symbol(n, real=True) for n in free]
            fns.append((label, free, sp.lambdify(args_, mine, "mpmath"), sp.lambdify(args_, ref, "mpmath")))
        worst = {label: 0.0 for label, *_ in fns}
        used = skipped = 0
        while used < args.points:
            point = sample(got["symbols"], rng)
            try:
                vals = []
                for label, free, f_mine, f_ref in fns:
                    xs = [mpmath.mpf(point[n]) for n in free]
                    a, b = f_mine(*xs), f_ref(*xs)
                    if isinstance(a, mpmath.mpc) or isinstance(b, mpmath.mpc):
                        raise ArithmeticError("outside the real domain")
                    vals.append((label, a, b))
            except (ArithmeticError, ValueError, ZeroDivisionError):
                # a point where a law is not defined (e.g. asin argument beyond 1)
                skipped += 1
                if skipped > args.points:
                    print(f"{path}: too many points outside the real domain", file=sys.stderr)
                    failed = True
                    break
                continue
            for label, a, b in vals:
                scale = max(abs(a), abs(b), mpmath.mpf("1e-30"))
                rel = float(abs(a - b) / scale)
                worst[label] = max(worst[label], rel)
            used += 1
        for label, w in worst.items():
            status = "ok" if w <= 1e-12 else "MISMATCH"
            failed |= w > 1e-12
            worst_overall = max(worst_overall, w)
            print(f"{got['name']:<22} {label:<14} points {used:>5} (skipped {skipped:>3})  max rel diff {w:.3e}  {status}")
    print(f"worst relative difference over all specs: {worst_overall:.3e} (tolerance 1e-12)")
    print(f"{0 if failed else 1} passed, {1 if failed else 0} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
