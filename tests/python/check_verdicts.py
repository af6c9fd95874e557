"""Independent check of lawsmith's verdicts on mutated specs.

Reference: SymPy. For each case (a spec text, lawsmith's verdict and counterexample), V-dot
and the laws are derived from the YAML with SymPy (the derivation of crosscheck_derive.py,
written independently of lawsmith's engine), then:

1. a counterexample is re-evaluated in exact rational arithmetic at its coordinates (states
   are reference + error, parameters their decimal values): a claim counterexample needs
   V-dot >= 0 (with non-zero error), a well-posedness one an asin/acos argument outside
   [-1, 1], a V counterexample V <= 0;
2. the case is searched for a violation on its own: random points of the envelope, points
   close to zero error and on the error's coordinate planes, evaluated in floating point,
   every hit confirmed exactly.

A case fails when lawsmith says `proven` but a violation exists, when a violation exists but
lawsmith did not say `falsified`, or when lawsmith's counterexample is not confirmed.
Exit 0 when no case fails.
"""

import json
import os
import random
import sys

import sympy as sp
import yaml
from sympy.parsing.sympy_parser import parse_expr

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from crosscheck_derive import FUNCS, TRANSFORMS, sympy_derivation  # noqa: E402

SAMPLES = 3000


def exact(x):
    """The exact rational value of a float (its binary value, as lawsmith's point holds)."""
    return sp.Rational(x)


def decimal(x):
    """The decimal a spec wrote (lawsmith proves with it, not with the nearest double)."""
    return sp.Rational(repr(float(x)))


class Case:
    def __init__(self, case):
        self.case = case
        self.spec = yaml.safe_load(case["yaml"])
        v, vdot, laws = sympy_derivation(self.spec)
        s = self.spec
        self.params = {sp.Symbol(n, real=True): decimal(d["value"])
                       for n, d in (s.get("parameters") or {}).items()}
        self.v = v.subs(self.params)
        self.vdot = vdot.subs(self.params)
        self.unit_args = []
        for e in laws.values():
            for a in e.atoms(sp.asin, sp.acos):
                self.unit_args.append(a.args[0].subs(self.params))
        self.states = s.get("states") or {}
        self.ranges = {}
        for sec in ("gains", "signals"):
            for n, d in (s.get(sec) or {}).items():
                self.ranges[n] = d["range"]
        for n, d in (s.get("references") or {}).items():
            self.ranges[n] = d["range"]
            self.ranges[d["rate"]] = d["rate_range"]
            if d.get("accel"):
                self.ranges[d["accel"]] = d["accel_range"]
        # the unknowns: constant ones, and the errors of uncertain quantities (named or δ)
        for n, d in (s.get("uncertain") or {}).items():
            if "constant" in d:
                self.ranges[n] = d["constant"]
            else:
                form = "relative" if "relative" in d else "absolute"
                self.ranges[d.get("error") or "\u03b4" + n] = d[form]
        # controller states: each what it settles at plus its error, held within its limits
        self.memory = s.get("memory") or {}
        claim = (s.get("lyapunov") or {}).get("claim")
        tracked = claim.get("negative_definite_in") if isinstance(claim, dict) else None
        self.exempt = ["Δ" + n for n in (tracked if tracked else
                                          list(self.states) + list(self.memory))]
        local = dict(FUNCS)
        local.update({n: sp.Symbol(n, real=True) for n in self.ranges})
        self.constraints = [parse_expr(c.replace("<=", "<").replace(">=", ">"), local_dict=local,
                                       transformations=TRANSFORMS)
                            for c in (s.get("constraints") or [])]
        syms = sorted({str(x) for e in [self.vdot, *self.unit_args] for x in e.free_symbols})
        self.names = syms
        args = [sp.Symbol(n, real=True) for n in syms]
        self.f_vdot = sp.lambdify(args, self.vdot, "math")
        self.f_args = [sp.lambdify(args, u, "math") for u in self.unit_args]

    def base_point(self, coords):
        """Base symbols from proof coordinates (errors as Δx), exactly."""
        p = {}
        for n, x in coords.items():
            if not n.startswith("Δ"):
                p[n] = exact(x)
        for n, d in self.states.items():
            centre = p[d["reference"]] if d.get("reference") else decimal(d.get("equilibrium", 0))
            p[n] = centre + exact(coords["Δ" + n])
        for n, d in self.memory.items():
            p[n] = self.settle(n, p) + exact(coords["Δ" + n])
        return p

    def settle(self, m, p):
        """What controller state m settles at, at base point p (exact)."""
        d = self.memory[m]
        return p[d["estimates"]] if d.get("estimates") else decimal(d.get("equilibrium", 0))

    def within_limits(self, p):
        return all(decimal(d["limits"][0]) <= p[n] <= decimal(d["limits"][1])
                   for n, d in self.memory.items())

    def subs(self, point):
        return {sp.Symbol(n, real=True): v for n, v in point.items()}

    def violation_at(self, point, errors_nonzero):
        """The violation at an exact point, or None."""
        sub = self.subs(point)
        for u in self.unit_args:
            val = u.subs(sub)
            if abs(val) > 1:
                return f"asin/acos argument {float(val):.6g} outside [-1, 1]"
        if errors_nonzero:
            val = self.vdot.subs(sub)
            if val >= 0:
                return f"V-dot = {float(val):.6g} >= 0"
        return None

    def feasible(self, point):
        sub = self.subs(point)
        return self.within_limits(point) and all(bool(c.subs(sub)) for c in self.constraints)

    def search(self, rng):
        """An independent search for a violation; returns a description or None."""
        errs = list(self.states)
        for i in range(SAMPLES):
            pt = {n: rng.uniform(lo, hi) for n, (lo, hi) in self.ranges.items()}
            err = {}
            for n, d in self.states.items():
                lo, hi = d["error"]
                err[n] = rng.uniform(lo, hi)
            for n, d in self.memory.items():
                # the state within its limits: its error from what it settles at
                lo, hi = d["limits"]
                base = pt[d["estimates"]] if d.get("estimates") else float(d.get("equilibrium", 0))
                err[n] = rng.uniform(lo, hi) - base
            kind = i % 4
            if kind == 1:  # close to zero error
                scale = 10.0 ** -rng.randint(1, 5)
                err = {n: e * scale for n, e in err.items()}
            elif kind == 2 and len(errs) > 1:  # on a coordinate plane of the error
                err[rng.choice(errs)] = 0.0
            if all(err[e[1:]] == 0.0 for e in self.exempt):
                continue
            fpoint = dict(pt)
            for n, d in self.states.items():
                centre = pt[d["reference"]] if d.get("reference") else float(d.get("equilibrium", 0))
                fpoint[n] = centre + err[n]
            for n, d in self.memory.items():
                base = pt[d["estimates"]] if d.get("estimates") else float(d.get("equilibrium", 0))
                fpoint[n] = base + err[n]
            vals = [fpoint[n] for n in self.names]
            try:
                suspicious = any(abs(f(*vals)) > 1 for f in self.f_args)
                vd = self.f_vdot(*vals)
            except (ValueError, ZeroDivisionError):
                continue
            if not suspicious and vd <= 0:
                continue
            coords = {n: x for n, x in pt.items()}
            coords.update({"Δ" + n: e for n, e in err.items()})
            exact_point = self.base_point(coords)
            if not self.feasible(exact_point):
                continue
            found = self.violation_at(exact_point, True)
            if found:
                return found
        return None


def main():
    cases = json.load(open(sys.argv[1], encoding="utf-8"))
    rng = random.Random(20261202)
    failures = []
    tally = {}
    for raw in cases:
        c = Case(raw)
        label = f'{raw["spec"]}: {raw["what"]}'
        verdict = raw["verdict"]
        cx = raw.get("counterexample")
        confirmed = None
        if cx is not None:
            point = c.base_point(cx["coordinates"])
            nonzero = any(v != 0 for n, v in cx["coordinates"].items() if n in c.exempt)
            sub = c.subs(point)
            if cx["kind"] == "projection":
                # "dV/d(m) >= 0 where m is at its upper limit X" (or <= 0 at the lower)
                m = cx["goal"].split("d(", 1)[1].split(")", 1)[0]
                upper = "upper limit" in cx["goal"]
                val = sp.diff(c.v, sp.Symbol(m, real=True)).subs(sub)
                confirmed = val < 0 if upper else val > 0
                detail = f"dV/d({m}) = {float(val):.6g}"
            elif cx["kind"] == "claim":
                val = c.vdot.subs(sub)
                confirmed = nonzero and val >= 0
                detail = f"V-dot = {float(val):.6g}"
            elif cx["kind"] == "condition":
                vals = [u.subs(sub) for u in c.unit_args]
                confirmed = any(abs(v) > 1 for v in vals)
                detail = "asin/acos arguments " + ", ".join(f"{float(v):.6g}" for v in vals)
            else:
                val = c.v.subs(sub)
                confirmed = any(v != 0 for n, v in cx["coordinates"].items()
                                if n.startswith("Δ")) and val <= 0
                detail = f"V = {float(val):.6g}"
            if not confirmed:
                failures.append(f"{label}: counterexample NOT CONFIRMED ({detail})")
        independent = c.search(rng)
        if independent and verdict == "proven":
            failures.append(f"{label}: PROVEN BUT FALSE ({independent})")
        if independent and verdict != "falsified":
            failures.append(f"{label}: FALSE BUT NOT FALSIFIED ({independent})")
        key = (verdict, bool(independent), confirmed)
        tally[key] = tally.get(key, 0) + 1
        print(f"{label:<90} {verdict:<12} sympy: "
              f"{'violation: ' + independent if independent else 'no violation found'}"
              f"{'' if confirmed is None else ('; counterexample confirmed' if confirmed else '; COUNTEREXAMPLE WRONG')}")
    print(f"{len(cases)} cases; by (verdict, sympy found a violation, counterexample confirmed):")
    for k, n in sorted(tally.items(), key=str):
        print(f"  {k}: {n}")
    for f in failures:
        print("FAIL", f)
    print(f"failures {len(failures)}")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
