"""A spec read on its own: symbols, exact ranges, the closed loop, V, V-dot and the conditions
under which the laws are defined, all in proof coordinates, with SymPy.

Proof coordinates are the certificate's: each state `x` is its target plus the error `Δx`,
each controller state `ξ` what it settles at (a number, or the unknown it estimates) plus
the error `Δξ`, an uncertain quantity's true value is `estimate*(1 + δq)` (relative) or
`estimate + δq` (absolute) with `δq` a coordinate (named by its `error:` key when it has one;
a constant when its range is one point), a constant unknown is a coordinate of its own,
parameters are the exact decimals written. Nothing here comes from lawsmith's own code.
"""

import re
from fractions import Fraction

import sympy as sp
import yaml

import formula

# π to 50 decimals (truncated), as the spec reader takes it for limits in `deg`
PI_50 = sp.Rational("3.14159265358979323846264338327950288419716939937510")
NUMBER = re.compile(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$")


class SpecError(ValueError):
    """A spec this checker cannot read."""


class _ExactLoader(yaml.SafeLoader):
    """YAML with every plain decimal read as the exact fraction it spells."""


_ExactLoader.yaml_implicit_resolvers = {
    k: [r for r in v if r[0] not in ("tag:yaml.org,2002:float", "tag:yaml.org,2002:int")]
    for k, v in yaml.SafeLoader.yaml_implicit_resolvers.items()
}
for _first in "-+.0123456789":
    _ExactLoader.yaml_implicit_resolvers.setdefault(_first, []).insert(
        0, ("tag:lawsmith:decimal", NUMBER))
_ExactLoader.add_constructor("tag:lawsmith:decimal", lambda l, n: Fraction(n.value))


def load_yaml(text):
    try:
        data = yaml.load(text, Loader=_ExactLoader)
    except yaml.YAMLError as e:
        raise SpecError(f"the spec is not YAML: {e}") from e
    if not isinstance(data, dict):
        raise SpecError("the spec is not a mapping")
    return data


def R(q):
    """An exact SymPy number."""
    q = Fraction(q)
    return sp.Rational(q.numerator, q.denominator)


def pair(v, what):
    if not (isinstance(v, list) and len(v) == 2 and all(isinstance(x, Fraction) for x in v)):
        raise SpecError(f"{what} is not [min, max] of decimals")
    return (v[0], v[1])


FUNCS = {
    "sin": sp.sin, "cos": sp.cos, "tan": sp.tan, "asin": sp.asin, "acos": sp.acos,
    "atan": sp.atan, "atan2": sp.atan2, "sqrt": sp.sqrt, "exp": sp.exp, "ln": sp.log,
    "abs": sp.Abs, "min": sp.Min, "max": sp.Max, "clamp": lambda x, lo, hi: sp.Min(sp.Max(x, lo), hi),
}


class Model:
    """Everything the checker derives from a spec itself."""

    def __init__(self, text):
        d = load_yaml(text)
        sym = self.sym = lambda n: sp.Symbol(n, real=True)
        sec = lambda k: d.get(k) or {}
        self.params = {n: v["value"] for n, v in sec("parameters").items()}
        self.states = sec("states")
        self.refs = sec("references")
        self.rate_of = {r: v["rate"] for r, v in self.refs.items()}
        # a rate with its own rate (`accel`)
        self.rate_of.update({v["rate"]: v["accel"] for v in self.refs.values() if v.get("accel")})
        # coordinates: (name, role, symbol, declared range), in the certificate's order
        coords = []
        target = {}
        for s, v in self.states.items():
            if v.get("reference"):
                target[s] = sym(v["reference"])
            else:
                target[s] = R(v.get("equilibrium", 0))
            coords.append(("Δ" + s, "error", s, pair(v["error"], f"error box of {s}")))
        self.target = target
        # the unknowns: each uncertain quantity's error (its own name, or δ and the quantity's)
        # and each constant unknown, with its declared range
        unknowns = {}
        for n, v in sec("uncertain").items():
            if "constant" in v:
                unknowns[n] = pair(v["constant"], f"range of {n}")
            else:
                form = "relative" if "relative" in v else "absolute"
                unknowns[v.get("error") or "δ" + n] = pair(v[form], f"error range of {n}")
        value = lambda u: sym(u) if unknowns[u][0] != unknowns[u][1] else R(unknowns[u][0])
        # controller states: the error from what each settles at, whose box is its limits
        # less that value's range
        self.memory, self.settle = sec("memory"), {}
        for m, v in self.memory.items():
            lo, hi = pair(v["limits"], f"limits of {m}")
            if v.get("estimates") is not None:
                u = v["estimates"]
                if u not in unknowns:
                    raise SpecError(f"`{m}` estimates `{u}`, which is not an unknown")
                self.settle[m], (slo, shi) = value(u), unknowns[u]
            else:
                eq = v.get("equilibrium", Fraction(0))
                self.settle[m], (slo, shi) = R(eq), (eq, eq)
            coords.append(("Δ" + m, "controller-state error", m, (lo - shi, hi - slo)))
        for r, v in self.refs.items():
            coords.append((r, "reference", r, pair(v["range"], f"range of {r}")))
        for r, v in self.refs.items():
            coords.append((v["rate"], "rate", v["rate"], pair(v["rate_range"], f"rate of {r}")))
            if v.get("accel"):
                coords.append((v["accel"], "rate", v["accel"],
                               pair(v["accel_range"], f"accel of {r}")))
        for n, v in sec("signals").items():
            coords.append((n, "signal", n, pair(v["range"], f"range of {n}")))
        self.true_value, self.constants = {}, {}
        for n, v in sec("uncertain").items():
            if "constant" in v:
                name, (lo, hi) = n, unknowns[n]
            else:
                form = "relative" if "relative" in v else "absolute"
                name = v.get("error") or "δ" + n
                lo, hi = unknowns[name]
                est = sym(v["estimate"])
                err = value(name)
                self.true_value[n] = est * (1 + err) if form == "relative" else est + err
            if lo != hi:
                coords.append((name, "uncertainty", n, (lo, hi)))
            else:
                self.constants[name] = R(lo)
        for n, v in sec("gains").items():
            coords.append((n, "gain", n, pair(v["range"], f"range of {n}")))
        self.coords = coords
        self.errors = ["Δ" + s for s in self.states] + ["Δ" + m for m in self.memory]
        self.defs_text = dict(sec("energies"))
        self.defs_text.update((d.get("lyapunov") or {}).get("where") or {})
        self.defs, self.conds, self._source = {}, [], ""  # conds: (kind, expr, source)
        # the plant model (true values allowed), then the laws in order
        self.dynamics = {}
        for s, f in sec("dynamics").items():
            self._source = f"dynamics of `{s}`"
            self.dynamics[s] = self.convert(formula.parse(f), plant=True)
        self.laws = {}
        for n, f in sec("laws").items():
            self._source = f"law `{n}`"
            e = self.convert(formula.parse(f))
            self.laws[n] = e.xreplace({sym(k): v for k, v in self.laws.items()})
        law_map = {sym(k): v for k, v in self.laws.items()}
        # each controller state's update law (its rate), the laws substituted
        self.updates = {}
        for m, v in self.memory.items():
            self._source = f"update law of `{m}`"
            self.updates[m] = self.convert(formula.parse(v["update"])).xreplace(law_map)
        self.actuators, self.sent = {}, {}  # name: (command, lo, hi), `deg` limits in rad
        for n, a in sec("actuators").items():
            self._source = f"actuator `{n}`"
            raw = self.convert(formula.parse(a["law"]))
            e = raw.xreplace(law_map)
            k = sp.pi / 180 if a.get("unit") == "deg" else 1
            self.actuators[n] = (e, *(R(x) * k for x in pair(a["limits"], f"limits of {n}")))
            self.sent[n] = raw
        self.law_map = law_map
        self.closed = {s: f.xreplace(law_map) for s, f in self.dynamics.items()}
        lyap = d.get("lyapunov") or {}
        self._source = "V"
        self.V = self.convert(formula.parse(lyap["candidate"]))
        self.Vdot = self.vdot(self.closed, walk=True)
        # holding a controller state at a limit never increases V: -dV/dm <= 0 at the upper
        # limit, dV/dm <= 0 at the lower (in base symbols)
        self.projections = []
        for m, v in self.memory.items():
            lo, hi = pair(v["limits"], f"limits of {m}")
            dv = sp.diff(self.V, sym(m))
            self.projections += [-dv.xreplace({sym(m): R(hi)}), dv.xreplace({sym(m): R(lo)})]
        self.claim = lyap.get("claim")
        # constraints relate gains; they are not part of the laws, so no condition of theirs
        # is required
        kept = len(self.conds)
        self.constraints = [self.constraint(c) for c in d.get("constraints") or []]
        del self.conds[kept:]
        # into proof coordinates
        sub = {sym(s): target[s] + sym("Δ" + s) for s in self.states}
        sub.update({sym(m): self.settle[m] + sym("Δ" + m) for m in self.memory})
        sub.update({sym(p): R(v) for p, v in self.params.items()})
        sub.update({sym(u): c for u, c in self.constants.items()})
        self.to_proof = lambda e: e.xreplace(sub)
        # then each controller state's limits, `lo - m <= 0` and `m - hi <= 0`, in proof
        # coordinates like the constraints
        self.constraints = [(self.to_proof(g), st) for g, st in self.constraints]
        self.gain_constraints = len(self.constraints)
        for m, v in self.memory.items():
            lo, hi = pair(v["limits"], f"limits of {m}")
            x = self.to_proof(sym(m))
            self.constraints += [(R(lo) - x, False), (x - R(hi), False)]

    def vdot(self, closed, walk=False):
        """dV/dt along these closed-loop dynamics, the reference rates and the update laws."""
        sym, out = self.sym, sp.Integer(0)
        for s in self.states:
            dv = sp.diff(self.V, sym(s))
            if walk:
                self.walk(dv, "dV/dt")
            out += dv * closed[s]
        for r, rate in self.rate_of.items():
            out += sp.diff(self.V, sym(r)) * sym(rate)
        for m, u in self.updates.items():
            dv = sp.diff(self.V, sym(m))
            if walk:
                self.walk(dv, "dV/dt")
            out += dv * u
        return out

    def saturated_vdot(self):
        """dV/dt with each command clamped to its limits: an actuator sends one input plus
        terms of none, and in the dynamics that input becomes the clamped command less those
        terms. Limits in `deg` take π to 50 decimals, as the spec reader does."""
        sat, sent = dict(self.law_map), set()
        for n, raw in self.sent.items():
            used = [self.sym(k) for k in self.laws if self.sym(k) in raw.free_symbols]
            if len(used) != 1 or used[0] in sent or sp.simplify(sp.diff(raw, used[0]) - 1) != 0:
                raise SpecError(f"actuator `{n}` is not one input plus terms of none")
            u = used[0]
            sent.add(u)
            e, lo, hi = self.actuators[n]
            lo, hi = (x.xreplace({sp.pi: PI_50}) for x in (lo, hi))
            sat[u] = sp.Min(sp.Max(e, lo), hi) - (e - self.law_map[u])
        return self.vdot({s: f.xreplace(sat) for s, f in self.dynamics.items()})

    # formulas ---------------------------------------------------------------------------

    def cond(self, kind, e):
        self.conds.append((kind, e, self._source))

    def convert(self, node, plant=False):
        """A formula tree as a SymPy expression in base symbols, recording the condition
        under which each division, power and function of it is defined."""
        t = node[0]
        c = lambda n: self.convert(n, plant)
        if t == "num":
            return R(node[1])
        if t == "sym":
            n = node[1]
            if n in self.defs_text:
                if n not in self.defs:
                    here = self._source
                    self._source = f"definition `{n}` in {here}"
                    self.defs[n] = None
                    self.defs[n] = self.convert(formula.parse(self.defs_text[n]))
                    self._source = here
                if self.defs[n] is None:
                    raise SpecError(f"definition `{n}` refers to itself")
                return self.defs[n]
            if n in self.true_value:
                if not plant:
                    raise SpecError(f"`{n}` (a true value) outside the dynamics")
                return self.true_value[n]
            return self.sym(n)
        if t == "add":
            return sp.Add(*[c(a) for a in node[1]])
        if t == "mul":
            return sp.Mul(*[c(a) for a in node[1]])
        if t == "neg":
            return -c(node[1])
        if t == "div":
            a, b = c(node[1]), c(node[2])
            self.cond("nonzero", b)
            return a / b
        if t == "pow":
            a, b = c(node[1]), c(node[2])
            self.pow_cond(a, b)
            return a ** b
        if t == "call":
            name, args = node[1], node[2]
            if name == "ref":
                return c(args[0]).xreplace({self.sym(s): v for s, v in self.target.items()})
            if name == "ddt":
                return self.ddt(c(args[0]))
            xs = [c(a) for a in args]
            self.call_cond(name, xs)
            if name not in FUNCS:
                raise SpecError(f"unknown function `{name}`")
            return FUNCS[name](*xs)
        raise SpecError(f"unknown node {t}")

    def pow_cond(self, a, b):
        if b.is_Integer:
            if b < 0:
                self.cond("nonzero", a)
        elif b.is_Rational and b > 0:
            self.cond("nonnegative", a)
        else:
            self.cond("positive", a)

    def call_cond(self, name, xs):
        if name in ("asin", "acos"):
            self.cond("unit", xs[0])
        elif name in ("sqrt", "ln"):
            self.cond("nonnegative" if name == "sqrt" else "positive", xs[0])
        elif name == "tan":
            self.cond("nonzero", sp.cos(xs[0]))
        elif name == "atan2":
            y, x = xs
            self.cond("positive", sp.sqrt(x**2 + y**2) + x)

    def walk(self, e, source):
        """The conditions of an expression SymPy built (a derivative): its negative and
        fractional powers and its functions."""
        here, self._source = self._source, source
        names = {sp.asin: "asin", sp.acos: "acos", sp.log: "ln", sp.tan: "tan",
                 sp.atan2: "atan2"}
        for n in sp.preorder_traversal(e):
            if isinstance(n, sp.Pow) and not (n.exp.is_Integer and n.exp > 0):
                self.pow_cond(n.base, n.exp)
            elif type(n) in names:
                self.call_cond(names[type(n)], n.args)
        self._source = here

    def ddt(self, e):
        """d/dt of e along the dynamics (inputs as symbols) and the reference rates."""
        out = sp.Integer(0)
        for s in self.states:
            d = sp.diff(e, self.sym(s))
            if d != 0:
                if s not in self.dynamics:
                    raise SpecError(f"ddt needs the dynamics of `{s}`")
                out += d * self.dynamics[s]
        for r, rate in self.rate_of.items():
            out += sp.diff(e, self.sym(r)) * self.sym(rate)
        self.walk(out, f"ddt in {self._source}")
        return out

    def constraint(self, text):
        m = re.match(r"^(.*?)(<=|>=|<|>)(.*)$", str(text))
        if not m:
            raise SpecError(f"constraint {text!r} has no comparison")
        lhs, op, rhs = m.groups()
        values = {self.sym(p): R(v) for p, v in self.params.items()}
        a, b = (self.convert(formula.parse(t)).xreplace(values) for t in (lhs, rhs))
        g = a - b if op in ("<", "<=") else b - a
        return (g, op in ("<", ">"))   # g < 0 (strict) or g <= 0

    # the claim ----------------------------------------------------------------------------

    def claim_kind(self):
        c = self.claim
        if c in ("negative_definite", "negative_semidefinite"):
            return c, None
        if isinstance(c, dict) and "negative_definite_in" in c:
            return "negative_definite_in", list(c["negative_definite_in"])
        if isinstance(c, dict) and "exponential" in c:
            return "exponential", c["exponential"]
        if isinstance(c, dict) and "ultimate_bound" in c:
            return "ultimate_bound", c["ultimate_bound"]
        raise SpecError(f"unknown claim {c!r}")

    def exempt_errors(self):
        """The error coordinates at whose joint zero the claim is exempt: those named by
        negative_definite_in, else every error (the states' and the controller states')."""
        kind, names = self.claim_kind()
        if kind == "negative_definite_in":
            return [e for e in self.errors if e[1:] in names]
        return list(self.errors)

    def required_bounds(self):
        """An ultimate bound's required bounds: [(state, bound)] in state order."""
        kind, b = self.claim_kind()
        if kind != "ultimate_bound" or b == "auto":
            return []
        states = list(self.states)
        if isinstance(b, list):
            return list(zip(states, b))
        return [(s, b[s]) for s in states if s in b]
