#!/usr/bin/env python3
"""certcheck: an independent checker of lawsmith proof certificates.

    python3 tools/certcheck/certcheck.py CERTIFICATE SPEC [--jobs N]

Exit 0: accepted; 1: rejected, with the reason; 3: an input cannot be read. It shares no code
with lawsmith: it reads the spec itself, derives what it needs with SymPy and re-evaluates
every leaf with its own interval arithmetic. The rules it checks, R1 to R13, are in README.md
beside this file; each function below names the rule it implements.
"""

import argparse
import functools
import hashlib
import json
import math
import multiprocessing
import os
import sys
from fractions import Fraction

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import sympy as sp  # noqa: E402

import formula  # noqa: E402
import iv  # noqa: E402
import model  # noqa: E402
import roundoff  # noqa: E402

VERSION = 4
ERROR_ROLES = ("error", "controller-state error")
SPLIT_DEPTH = 10      # a leaf this checker cannot show at once is halved, at most this deep
MAX_AFFINE = 6        # vertices of at most 2^6 sub-boxes


def factors_within(a, b):
    """Every non-constant factor of a's numerator is, up to a non-zero constant, a factor of
    b's: where b's numerator vanishes nowhere, neither does a's; where one of b's factors
    vanishes, so does a's numerator."""
    def factors(e):
        return [f for f, _ in sp.factor_list(sp.fraction(sp.together(e))[0])[1]]
    theirs = factors(b)
    return all(any(sp.cancel(f / t).is_number for t in theirs) for f in factors(a))


class Reject(Exception):
    """The certificate is rejected; the message says why."""


class Unreadable(Exception):
    """An input cannot be read."""


def sym(n): return sp.Symbol(n, real=True)


def expr_of(text):
    """A certificate expression as SymPy."""
    def go(node):
        t, a = node[0], node[1:]
        if t in ("num", "sym"):
            return model.R(a[0]) if t == "num" else sym(a[0])
        if t in ("add", "mul"):
            return (sp.Add if t == "add" else sp.Mul)(*[go(x) for x in a[0]])
        if t == "neg":
            return -go(a[0])
        if t in ("div", "pow"):
            return go(a[0]) / go(a[1]) if t == "div" else go(a[0]) ** go(a[1])
        return model.FUNCS[a[0]](*[go(x) for x in a[1]])
    try:
        return go(formula.parse(text))
    except (formula.FormulaError, KeyError) as e:
        raise Reject(f"cannot read the expression {text!r}: {e}") from e


def same(a, b):
    """a and b are the same function where both are defined (rational-function identity)."""
    d = sp.together(a - b)
    if sp.expand(sp.fraction(d)[0]) == 0:
        return True
    return sp.simplify(d) == 0


def canon(e):
    """Every function's arguments in SymPy's canonical rational form, inside out, so that two
    equal clamps (Min, Max) are one atom when `same` compares expressions holding them."""
    if not e.args or isinstance(e, sp.Number):
        return e
    args = [canon(a) for a in e.args]
    return e.func(*[sp.cancel(a) for a in args]) if isinstance(e, sp.Function) else e.func(*args)


def inward(q, toward):
    """The double nearest the exact number q on the side of `toward` (or q itself)."""
    q = Fraction(int(sp.Rational(q).p), int(sp.Rational(q).q))
    x = float(q)
    return x if (Fraction(x) >= q if toward > 0 else Fraction(x) <= q) else math.nextafter(x, toward)


def num(v):
    return float({"inf": "inf", "-inf": "-inf", "nan": "nan"}[v] if isinstance(v, str) else v)


def interval(v):
    lo, hi = num(v[0]), num(v[1])
    if not lo <= hi:
        raise Reject(f"malformed interval {v}")
    return (lo, hi)


def parse_test(t):
    if t == "nonzero":
        return ("nonzero",)
    if "below" in t:
        return ("below", bool(t["strict"]))
    if "within" in t:
        return ("within",) + interval(t["within"])
    raise Reject(f"unknown test {t}")


def proves(test, f):
    if test[0] == "below":
        return f[1] < 0.0 if test[1] else f[1] <= 0.0
    if test[0] == "within":
        return f[0] >= test[1] and f[1] <= test[2]
    return f[0] > 0.0 or f[1] < 0.0


def refutes(test, f):
    if test[0] == "below":
        return f[0] >= 0.0 if test[1] else f[0] > 0.0
    if test[0] == "within":
        return f[1] < test[1] or f[0] > test[2]
    return f == (0.0, 0.0)


def split(bx, k):
    """The two halves of a box at the midpoint of coordinate k (None if it does not cut)."""
    lo, hi = bx[k]
    mid = 0.5 * lo + 0.5 * hi
    a, b = list(bx), list(bx)
    a[k], b[k] = (lo, mid), (mid, hi)
    return (a, b) if lo < mid < hi else None


def inter(a, b):
    lo, hi = max(a[0], b[0]), min(a[1], b[1])
    return (lo, hi) if lo <= hi else a


class Goal:
    """One expression over some coordinates, compiled on demand."""

    def __init__(self, expr, dims, check):
        self.expr = expr
        self.dims = list(dims)
        self.check = check
        missing = {s.name for s in expr.free_symbols} - set(self.dims)
        if missing:
            raise Reject(f"the expression uses {sorted(missing)}, not among its coordinates")
        # the error coordinates (a Lyapunov goal's are the ones its certificate names, R3)
        self.errors = [k for k, n in enumerate(self.dims) if check.role.get(n) in ERROR_ROLES]
        self._value = self._hessian = self._affine = self._closable = None
        self._grad = {}
        # the saturated law's goal: each command with its test, and the claim's exempt errors
        self.unclamped, self.exempt = [], []

    def value(self, box):
        if self._value is None:
            self._value = iv.Compiled([self.expr], self.dims)
        return self._value(box)[0]

    def grad(self, box, ks):
        """The gradient's components along coordinates ks over the box (compiled once per
        set of coordinates: at the vertices of the affine ones, only the others count)."""
        if ks not in self._grad:
            try:
                # each component as one cancelled fraction: the quotient rule's raw form
                # loses the correlation of a variable in numerator and denominator
                # min and max through |.|, whose derivative is the sign (with [-1, 1] where
                # its argument may vanish): a generalized gradient, as the mean-value form needs
                lo = lambda *a: functools.reduce(lambda x, y: (x + y - sp.Abs(x - y)) / 2, a)
                hi = lambda *a: functools.reduce(lambda x, y: (x + y + sp.Abs(x - y)) / 2, a)
                e = self.expr.replace(sp.Min, lo).replace(sp.Max, hi)
                self._grad[ks] = iv.Compiled(
                    [sp.cancel(sp.diff(e, sym(self.dims[k]))) for k in ks], self.dims)
            except iv.Undefined:
                self._grad[ks] = None
        if self._grad[ks] is None:
            raise iv.Undefined("no gradient")
        return self._grad[ks](box)

    def affine(self):
        """Non-error coordinates the expression is affine in (each to degree <= 1 in its
        numerator, absent from its denominator), so multi-affine in them together."""
        if self._affine is None:
            n, d = sp.fraction(sp.together(self.expr))
            out = []
            for k, name in enumerate(self.dims):
                x = sym(name)
                if k in self.errors or x not in self.expr.free_symbols or len(out) >= MAX_AFFINE:
                    continue
                p = n.as_poly(x)
                if x not in d.free_symbols and p is not None and p.degree() <= 1:
                    out.append(k)
            self._affine = out
        return self._affine

    def proves(self, box, test):
        """Does an enclosure over the box prove the test? The cheap forms are tried first:
        the natural extension, then the mean-value form with monotone faces, then vertices."""
        need_lower = test[0] != "below"
        if proves(test, self.value(box)):
            return True
        whole = self._centered(box, need_lower)
        return proves(test, whole) or proves(test, self.enclose(box, need_lower, whole))

    def vertices(self, box):
        """The box with its affine coordinates at each combination of their ends: the
        expression (and its Hessian) over the box is a convex combination of these."""
        free = [k for k in self.affine() if box[k][0] < box[k][1]]
        for mask in range(1 << len(free)):
            v = list(box)
            for bit, k in enumerate(free):
                e = box[k][1] if mask >> bit & 1 else box[k][0]
                v[k] = (e, e)
            yield v

    def enclose(self, box, need_lower, whole):
        """`whole` tightened by the hull of the enclosures at the vertices."""
        fs = [self._centered(v, need_lower) for v in self.vertices(box)]
        return inter(whole, (min(f[0] for f in fs), max(f[1] for f in fs)))

    def _centered(self, box, need_lower, faces=True):
        nat = self.value(box)
        ks = tuple(k for k in range(len(box)) if box[k][0] < box[k][1])
        try:
            g = self.grad(box, ks)
        except iv.Undefined:
            return nat
        if not all(math.isfinite(x) for gi in g for x in gi):
            return nat
        c = [iv.mid(x) for x in box]
        f = self.value([(x, x) for x in c])
        for gi, k in zip(g, ks):
            x, ci = box[k], c[k]
            f = iv.add(f, iv.mul(gi, (iv.down(x[0] - ci), iv.up(x[1] - ci))))
        out = inter(nat, f)
        if not faces:
            return out
        # monotone along a coordinate: the maximum lies on the face at its increasing end
        mono = [(k, gi[0] >= 0.0) for gi, k in zip(g, ks) if gi[0] >= 0.0 or gi[1] <= 0.0]
        if not mono:
            return out
        lo, hi = out
        for upper in ([True, False] if need_lower else [True]):
            face = list(box)
            for k, inc in mono:
                e = box[k][1] if inc == upper else box[k][0]
                face[k] = (e, e)
            try:
                fb = self._centered(face, need_lower, faces=False)
            except iv.Undefined:
                continue
            if upper:
                hi = min(hi, fb[1])
            else:
                lo = max(lo, fb[0])
        return (lo, hi) if lo <= hi else out

    def closable(self):
        """f and its gradient in the errors vanish at zero error (one-double boxes at their value); f smooth."""
        if self._closable is None:
            e, xs, bx = self.expr, [sym(self.dims[k]) for k in self.errors], self.check.box
            zero = {x: 0 for x in xs} | {sym(n): sp.Rational(bx[n][0]) for n in self.dims
                                         if bx[n][0] == bx[n][1] and sym(n) not in xs}
            self._closable = bool(xs) and not e.has(sp.Abs, sp.Min, sp.Max, sp.atan2) and all(
                same(f.xreplace(zero), 0) for f in [e] + [sp.diff(e, x) for x in xs])
            if self._closable:
                self._hessian = iv.Compiled([sp.diff(e, a, b) for a in xs for b in xs], self.dims)
        return self._closable

    def hessian_closes(self, box, strict):
        if not self.closable():
            return False
        hull = list(box)
        for k in self.errors:
            hull[k] = (min(hull[k][0], 0.0), max(hull[k][1], 0.0))
        n = len(self.errors)
        for v in self.vertices(hull):
            try:
                self.value(v)  # defined on the whole hull
                flat = self._hessian(v)
            except iv.Undefined:
                return False
            m = [flat[i * n:(i + 1) * n] for i in range(n)]
            if not (gershgorin(m, strict) or minors(m, strict)):
                return False
        return True


def gershgorin(m, strict):
    """Every symmetric matrix in the interval matrix m is negative (semi)definite: after
    scaling by d_i = 1/sqrt|mid m_ii| (a congruence, which keeps definiteness), each row's
    diagonal plus the magnitudes of the others is below zero (at most zero), so every
    Gershgorin disc lies left of it."""
    n = len(m)
    d = []
    for i in range(n):
        c = abs(iv.mid(m[i][i]))
        d.append(1.0 / math.sqrt(c) if 0.0 < c < math.inf else 1.0)
    scaled = lambda i, j: iv.mul(iv.mul(m[i][j], (d[i], d[i])), (d[j], d[j]))
    for i in range(n):
        acc = scaled(i, i)
        for j in range(n):
            if j != i:
                e = scaled(i, j)
                acc = iv.add(acc, (0.0, max(-e[0], e[1])))
        if not (acc[1] < 0.0 if strict else acc[1] <= 0.0):
            return False
    return True


def det(m):
    """An enclosure of the determinant of every matrix in an interval matrix (Laplace)."""
    if len(m) == 1:
        return m[0][0]
    out = (0.0, 0.0)
    for j in range(len(m)):
        minor = [[row[c] for c in range(len(m)) if c != j] for row in m[1:]]
        t = iv.mul(m[0][j], det(minor))
        out = iv.add(out, t if j % 2 == 0 else iv.neg(t))
    return out


def minors(m, strict):
    """Sylvester's criterion on -m: its leading principal minors positive (definite), or all
    its principal minors non-negative (semidefinite); n <= 4."""
    n = len(m)
    if n > 4:
        return False
    neg = [[iv.neg(x) for x in row] for row in m]
    if strict:
        subsets = [list(range(k)) for k in range(1, n + 1)]
    else:
        subsets = [[i for i in range(n) if mask >> i & 1] for mask in range(1, 1 << n)]
    for rows in subsets:
        d = det([[neg[r][c] for c in rows] for r in rows])
        if not (d[0] > 0.0 if strict else d[0] >= 0.0):
            return False
    return True


class Check:
    def __init__(self, cert, spec_text, spec_bytes):
        self.cert = cert
        if cert.get("version") != VERSION:
            raise Reject(f"certificate version {cert.get('version')} is not {VERSION}")
        sha = hashlib.sha256(spec_bytes).hexdigest()
        if (cert.get("spec") or {}).get("sha256") != sha:
            raise Reject(f"the spec's SHA-256 is {sha}, the certificate names "
                         f"{(cert.get('spec') or {}).get('sha256')}")
        try:
            self.m = model.Model(spec_text)
        except (model.SpecError, formula.FormulaError, KeyError, TypeError) as e:
            raise Unreadable(f"the spec cannot be read: {e}") from e
        self.role, self.leaves, self.jobs, self.below, self.limits = {}, 0, 1, None, []
        self.proved_rates = self.region_text = None
        self.roundoff = []

    # R2 ---------------------------------------------------------------------------------
    def domain(self):
        own = {n: (role, decl) for n, role, _, decl in self.m.coords}
        self.declared = {n: decl for n, (_, decl) in own.items()}
        got = {}
        for d in self.cert["domain"]:
            n = d["name"]
            if n not in own:
                raise Reject(f"domain coordinate `{n}` is not one of the spec's")
            role, (lo, hi) = own[n]
            box = interval(d["range"])
            if d.get("role") != role:
                raise Reject(f"`{n}` is a {role}, the certificate says {d.get('role')}")
            if not (Fraction(box[0]) <= lo and Fraction(box[1]) >= hi):
                raise Reject(f"the box [{box[0]!r}, {box[1]!r}] of `{n}` does not hold its "
                             f"declared range [{lo}, {hi}]")
            got[n] = box
            self.role[n] = role
        if set(got) != set(own):
            raise Reject(f"the domain lacks {sorted(set(own) - set(got))}")
        self.box = got

    # R3, R4 -----------------------------------------------------------------------------
    def goals(self):
        m = self.m
        V, Vdot = m.to_proof(m.V), m.to_proof(m.Vdot)
        self.V = V
        kind, arg = m.claim_kind()
        self.kind = kind
        claim_expr = Vdot + 2 * model.R(arg) * V if kind == "exponential" else Vdot
        strict = kind in ("negative_definite", "ultimate_bound", "negative_definite_in")
        self.own = {"claim": (claim_expr, ("below", strict)), "positive": (-V, ("below", True))}
        # the errors each Lyapunov goal is exempt at: the claim's, and every error for V
        exempt = {"claim": m.exempt_errors(), "positive": list(m.errors)}
        projections = [m.to_proof(e) for e in m.projections]
        gs = self.cert.get("goals") or []
        self.compiled = []
        for i, gj in enumerate(gs):
            g = self.goal(gj, f"goal {i + 1} ({gj.get('label')})", gj["kind"])
            at = g.at
            if g.kind in self.own:
                e, test = self.own[g.kind]
                if g.test != test or not g.origin:
                    raise Reject(f"{at}: its test is not the spec's claim ({self.kind})")
                if gj.get("errors") != exempt[g.kind] or set(exempt[g.kind]) - set(g.dims):
                    raise Reject(f"{at}: it is not exempt at exactly the errors "
                                 f"{exempt[g.kind]}")
                g.errors = [g.dims.index(n) for n in exempt[g.kind]]
                if not same(g.expr, e):
                    raise Reject(f"{at}: its expression is not the spec's "
                                 f"{'V-dot' if g.kind == 'claim' else '-V'}")
            if g.kind == "projection":
                k = sum(x.kind == "projection" for x in self.compiled)
                if k >= len(projections) or g.test != ("below", False) or g.origin:
                    raise Reject(f"{at}: not one of the spec's controller-state limit goals")
                if not same(g.expr, projections[k]):
                    raise Reject(f"{at}: its expression is not -dV/dm at the upper limit "
                                 f"(dV/dm at the lower) of the spec's controller state")
            if g.kind == "claim" and (kind == "ultimate_bound") != ("region" in gj):
                raise Reject(f"{at}: an ultimate bound's claim goal, and only it, has a region")
            if "region" in gj:
                # the certificate's form of V (shown equal to the spec's) bounds tighter
                self.region = expr_of(gj["region"])
                if not same(self.region, V):
                    raise Reject(f"{at}: its region is not V")
            self.compiled.append(g)
        for k in ("claim", "positive"):
            if sum(g.kind == k for g in self.compiled) != 1:
                raise Reject(f"the certificate does not have exactly one {k} goal")
        if sum(g.kind == "projection" for g in self.compiled) != len(projections):
            raise Reject(f"the certificate does not have the spec's {len(projections)} "
                         f"controller-state limit goals")

    def goal(self, gj, at, kind):
        g = Goal(expr_of(gj["expr"]), gj["dims"], self)
        g.test = parse_test(gj["test"])
        g.origin = bool(gj.get("origin_exempt"))
        g.kind, g.status, g.at, g.json = kind, gj["status"], at, gj
        for n in g.dims:
            if n not in self.box:
                raise Reject(f"{at}: `{n}` is not a domain coordinate")
        return g

    # R10 --------------------------------------------------------------------------------
    def actuators(self):
        """Each command against its limits, outside the verdict: ['name status']."""
        acts = self.cert.get("actuators") or []
        if [a.get("actuator") for a in acts] != list(self.m.actuators):
            raise Reject("the certificate's actuators are not the spec's, in its order")
        for aj in acts:
            g = self.command_goal(aj, f"actuator `{aj['actuator']}`", "actuator")
            _, lo, hi = self.m.actuators[aj["actuator"]]
            self.evidence(g)
            if g.status == "refuted":
                f = g.value([(num(x), num(x)) for x in aj["counterexample"]["point"]])
                if not (model.R(f[1]) < lo or model.R(f[0]) > hi):
                    raise Reject(f"{g.at}: the recorded point is not outside the limits")
        words = {"proven": "saturation-free", "refuted": "saturates", "inconclusive": "undecided"}
        return [f"{a['actuator']} {words.get(a['status'], 'not checked')}" for a in acts]

    def command_goal(self, aj, at, kind):
        """An actuator's goal: the spec's command (R3's identity), its test `within` ends
        inside the declared limits, not exempt at zero error."""
        e, lo, hi = self.m.actuators[aj["actuator"]]
        g = self.goal(aj, at, kind)
        if (t := g.test)[0] != "within" or g.origin or not (model.R(t[1]) >= lo and model.R(t[2]) <= hi):
            raise Reject(f"{g.at}: its test is not within the declared limits [{lo}, {hi}]")
        if not same(g.expr, self.m.to_proof(e)):
            raise Reject(f"{g.at}: its expression is not the spec's command")
        return g

    def own_conditions(self):
        """R4's conditions in proof coordinates, once each: (kind, u, source)."""
        out, seen = [], set()
        for kind, e, source in self.m.conds:
            u = self.m.to_proof(e)
            key = (kind, sp.srepr(u))
            if key not in seen:
                seen.add(key)
                out.append((kind, u, source))
        return out

    def implies(self, g, kind, u, refuted=False):
        """Does goal g, proven, give the condition `kind` of u everywhere? (refuted: does g's
        failure at a point make the condition fail, or u undefined, there?)"""
        if kind == "unit":
            return g.test == ("within", -1.0, 1.0) and same(g.expr, u)
        if kind == "positive":
            return g.test == ("below", True) and same(g.expr, -u)
        if kind == "nonnegative":
            return g.test[0] == "below" and same(g.expr, -u)
        if refuted:
            return g.test == ("nonzero",) and factors_within(g.expr, u)
        return g.test in (("nonzero",), ("below", True)) and factors_within(u, g.expr)

    def conditions(self):
        """R4: the conditions that no constant and no proven goal shows."""
        proven = [g for g in self.compiled if g.kind == "condition" and g.status == "proven"]
        open_ = []
        for kind, u, source in self.own_conditions():
            if not u.free_symbols:
                holds = {"nonzero": u != 0, "positive": u > 0, "nonnegative": u >= 0,
                         "unit": (u >= -1) & (u <= 1)}[kind]
                if holds is sp.true or holds is True:
                    continue
            if not any(self.implies(g, kind, u) for g in proven):
                open_.append((kind, u, source))
        return open_

    # R5, R6 -----------------------------------------------------------------------------
    def tree(self, obj, g, root, test, at, level=None):
        shape, leaves = obj.get("tree"), obj.get("leaves")
        if not isinstance(shape, list) or not isinstance(leaves, list):
            raise Reject(f"{at}: no proof tree")
        boxes, stack, pos = [], [list(root)], 0
        while stack:
            bx = stack.pop()
            if pos >= len(shape):
                raise Reject(f"{at}: the tree ends before covering the box")
            s = shape[pos]
            pos += 1
            if s < 0:
                boxes.append(bx)
                continue
            if s >= len(bx):
                raise Reject(f"{at}: a split along a coordinate the goal does not have")
            halves = split(bx, s)
            if halves is None:
                raise Reject(f"{at}: a split that does not cut its box")
            stack += [halves[1], halves[0]]
        if pos != len(shape) or len(boxes) != len(leaves):
            raise Reject(f"{at}: the tree has {len(boxes)} leaves and {len(shape)} entries, "
                         f"the certificate lists {len(leaves)} leaves")
        for li, (bx, leaf) in enumerate(zip(boxes, leaves)):
            rec = [interval(x) for x in leaf.get("box", [])]
            if rec != bx:
                raise Reject(f"{at}, leaf {li}: its box is not the one its tree position gives")
        work = (self, g, test, level, boxes, leaves)
        if self.jobs > 1 and len(leaves) >= 64:
            # forked workers inherit the compiled goal; results come back in leaf order
            with multiprocessing.get_context("fork").Pool(
                    self.jobs, initializer=_share, initargs=(work,)) as pool:
                whys = pool.map(_leaf_at, range(len(leaves)), chunksize=16)
        else:
            _share(work)
            whys = [_leaf_at(i) for i in range(len(leaves))]
        for li, why in enumerate(whys):
            if why:
                raise Reject(f"{at}, leaf {li}: {why}")
        self.leaves += len(leaves)

    def leaf(self, leaf, g, bx, test, level):
        if "bound" in leaf:
            rec = interval(leaf["bound"])
            try:
                at_mid = g.value([(iv.mid(x), iv.mid(x)) for x in bx])
            except iv.Undefined:
                return "the expression is not defined at the box's midpoint"
            if at_mid[1] < rec[0] or at_mid[0] > rec[1]:
                return f"the recorded bound {list(rec)} misses the value {list(at_mid)} at its midpoint"
            if not self.show(g, bx, test, SPLIT_DEPTH):
                return "the bound does not prove the test on the box"
            return None
        if "hessian" in leaf:
            if not (g.origin and test[0] == "below"):
                return "a Hessian test on a goal that is not a Lyapunov inequality"
            if not g.closable():
                return ("a Hessian test on an expression that does not vanish with its "
                        "gradient at zero error (or is not smooth)")
            if not self.close(g, bx, test[1], SPLIT_DEPTH):
                return "the interval Hessian over the box's hull with zero error is not negative definite"
            return None
        if "excluded" in leaf:
            i = leaf["excluded"]
            if not (isinstance(i, int) and 0 <= i < len(self.m.constraints)):
                return f"no constraint {i}"
            gexp, strict = self.m.constraints[i]
            try:
                f = iv.Compiled([gexp], g.dims)
            except iv.Undefined:
                return f"constraint {i} cannot be evaluated on the box"

            def fails(box, depth):
                # the constraint fails on the box, or on each half (halved at most `depth` times)
                try:
                    c = f(box)[0]
                    if c[0] >= 0.0 if strict else c[0] > 0.0:
                        return True
                except iv.Undefined:
                    pass
                return depth > 0 and all(fails(h, depth - 1) for h in self.halves(g, box))
            if not fails(bx, SPLIT_DEPTH):
                return f"constraint {i} does not fail everywhere on the box"
            return None
        if "unclamped" in leaf:
            # every command within its limits: the clamps are the identity and the goal's
            # expression is the claim's V-dot, proven < 0 away from its exempt zero
            if not g.unclamped:
                return "`unclamped` outside the saturated law's goal of a strict claim"
            if all(bx[k][0] <= 0.0 <= bx[k][1] for k in g.exempt):
                return "the box holds the claim's exempt zero"
            if not all(self.show(c, bx, t, SPLIT_DEPTH) for c, t in g.unclamped):
                return "a command may leave its limits on the box"
            return None
        if "below_level" in leaf:
            if level is None or level <= 0.0:
                return "`below_level` outside an ultimate bound's level proof"
            if self.below is None or self.below[0] != (level, tuple(g.dims)):
                self.below = ((level, tuple(g.dims)),
                              Goal(self.region - model.R(Fraction(level)), g.dims, self))
            if not self.show(self.below[1], bx, ("below", True), SPLIT_DEPTH):
                return f"V is not below the level {level} on the box"
            return None
        return "no evidence"

    def show(self, g, bx, test, depth):
        try:
            if g.proves(bx, test):
                return True
        except iv.Undefined:
            pass
        return depth > 0 and all(self.show(g, half, test, depth - 1)
                                 for half in self.halves(g, bx))

    def close(self, g, bx, strict, depth):
        if g.hessian_closes(bx, strict):
            return True
        return depth > 0 and all(self.close(g, half, strict, depth - 1)
                                 for half in self.halves(g, bx))

    def halves(self, g, bx):
        root = [self.box[n] for n in g.dims]
        k = max(range(len(bx)), key=lambda i: (bx[i][1] - bx[i][0]) /
                ((root[i][1] - root[i][0]) or 1.0))
        return split(bx, k) or []

    # R7 ---------------------------------------------------------------------------------
    def ultimate(self, g):
        ub = g.json.get("ultimate_bound")
        if not isinstance(ub, dict):
            raise Reject(f"{g.at}: no ultimate-bound section")
        level, a = num(ub["level"]), num(ub["attraction"])
        if not (math.isfinite(level) and level >= 0.0 and math.isfinite(a) and a >= 0.0):
            raise Reject(f"{g.at}: malformed level or region of attraction")
        cand = ub.get("candidate") or {}
        vg = Goal(expr_of(cand.get("expr", "0")), cand.get("dims", []), self)
        if not same(vg.expr, self.V):
            raise Reject(f"{g.at}: the sublevel proofs' candidate is not V")
        root = [self.box[n] for n in vg.dims]
        proved = self.sublevels(ub.get("sublevel") or [], vg, root, f"{g.at}, sublevel proof")
        if a > 0.0:
            self.faces_shown(proved, vg, root, a, g.at)
        if level > 0.0 and not level < a:
            raise Reject(f"{g.at}: the level {level} is not below the region of attraction {a}")
        stated = {}
        for e in ub.get("bounds") or []:
            s = e["state"]
            name = "Δ" + s
            if name not in vg.dims:
                raise Reject(f"{g.at}: a bound on `{s}`, which is not a state of V")
            k = vg.dims.index(name)
            lower, upper = num(e["lower"]), num(e["upper"])

            if not (level == 0.0 and lower == upper == 0.0) and not self.bounds_shown(
                    proved, name, (lower, upper), root[k], level):
                raise Reject(f"{g.at}: the bound [{lower}, {upper}] on `{s}` is not proved at "
                             f"level {level}")
            stated[s] = max(abs(lower), abs(upper))
        for s, need in self.m.required_bounds():
            if s not in stated:
                raise Reject(f"{g.at}: the spec requires a bound on `{s}`; none is proved")
            if stated[s] > need:
                raise Reject(f"{g.at}: the proved bound {stated[s]} on `{s}` exceeds the "
                             f"spec's required {float(need)}")
        return level

    def sublevels(self, proofs, vg, root, at):
        """R5, R6 for proofs that V > a level on part of the root box (one side of an error
        coordinate from a point, or that face): [(coordinate, side, from, level)]."""
        out = []
        for i, p in enumerate(proofs):
            a = f"{at} {i + 1}"
            name, side = p.get("coordinate"), p.get("side")
            if name not in vg.dims or self.role.get(name) not in ERROR_ROLES:
                raise Reject(f"{a}: `{name}` is not an error of V")
            k = vg.dims.index(name)
            frm, lv = num(p["from"]), num(p["level"])
            if not (root[k][0] <= frm <= root[k][1]) or side not in ("upper", "lower", "face"):
                raise Reject(f"{a}: malformed part of the box")
            r = list(root)
            r[k] = {"upper": (frm, root[k][1]), "lower": (root[k][0], frm), "face": (frm, frm)}[side]
            self.tree(p, vg, r, ("within", math.nextafter(lv, math.inf), math.inf), a)
            out.append((name, side, frm, lv))
        return out

    def faces_shown(self, proved, vg, root, level, at):
        """Every face of every error (but one at zero) has a proof at `level` or above."""
        for name in self.m.errors:
            if name not in vg.dims:
                raise Reject(f"{at}: V does not depend on `{name}`")
            for end in root[vg.dims.index(name)]:
                if end != 0.0 and not any((n, sd, f) == (name, "face", end) and lv >= level
                                          for n, sd, f, lv in proved):
                    raise Reject(f"{at}: no proof that V > {level} on the face {name} = {end}")

    @staticmethod
    def bounds_shown(proved, name, bounds, whole, level):
        """Proofs at `level` or above put {V <= level} within these bounds on `name`."""
        return all((b == 0.0 and end == 0.0) or any(
            n == name and sd == side and lv >= level and (f <= b if side == "upper" else f >= b)
            for n, sd, f, lv in proved)
            for side, b, end in (("lower", bounds[0], whole[0]), ("upper", bounds[1], whole[1])))

    # R11 --------------------------------------------------------------------------------
    def rates(self, verdict):
        """The proved guidance rates: V > level on every face of the error box cut to the
        stated bounds, and each command within its limits wherever V <= level over those
        bounds and the proved rates. Returns the rates as text (None without them)."""
        r = self.cert.get("rate_limits")
        if r is None:
            return None
        at = "guidance rates"
        if verdict != "proven" or self.kind == "ultimate_bound":
            raise Reject(f"{at}: they rest on a proven claim with V-dot <= 0")
        within = {s: num(b) for s, b in r["within"].items()}
        if any(s not in self.m.states or not 0.0 < b < math.inf for s, b in within.items()):
            raise Reject(f"{at}: the bounds are not positive bounds on states")
        level = num(r["level"])
        if not 0.0 < level < math.inf:
            raise Reject(f"{at}: malformed level")
        cand = r["candidate"]
        vg = Goal(expr_of(cand["expr"]), cand["dims"], self)
        if not same(vg.expr, self.V):
            raise Reject(f"{at}: the candidate is not V")

        def cut(n, rates):
            lo, hi = self.box[n]
            if self.role.get(n) == "error" and n[1:] in within:
                lo, hi = max(lo, -within[n[1:]]), min(hi, within[n[1:]])
            return rates.get(n, (lo, hi))
        root = [cut(n, {}) for n in vg.dims]
        self.faces_shown(self.sublevels(r["faces"], vg, root, f"{at}, face proof"),
                         vg, root, level, at)
        # the proved rates, each within its declared range, in the domain's order
        names = [n for n, role, _, _ in self.m.coords if role == "rate"]
        listed = r["rates"]
        if [x["name"] for x in listed] != names:
            raise Reject(f"{at}: the rates are not the spec's")
        proved = {}
        for x in listed:
            lo, hi = interval(x["proved"])
            if Fraction(lo) < self.declared[x["name"]][0] or Fraction(hi) > self.declared[x["name"]][1]:
                raise Reject(f"{at}: `{x['name']}` is proved beyond its declared range")
            proved[x["name"]] = (lo, hi)
        # each command within its limits wherever V <= level: that constraint after the others
        if r["sublevel_constraint"] != len(self.m.constraints):
            raise Reject(f"{at}: the sublevel constraint is not after the spec's")
        self.m.constraints.append((sp.expand(self.V - model.R(Fraction(level))), False))
        try:
            acts = r["actuators"]
            if [a.get("actuator") for a in acts] != list(self.m.actuators):
                raise Reject(f"{at}: the actuators are not the spec's, in its order")
            for aj in acts:
                g = self.command_goal(aj, f"{at}, actuator `{aj['actuator']}`", "rates")
                if g.status != "proven":
                    raise Reject(f"{g.at}: not a proof of the spec's command")
                self.tree(aj, g, [cut(n, proved) for n in g.dims], g.test, g.at)
        finally:
            self.m.constraints.pop()
        if r.get("saturated") is not None:
            self.region_text = self.saturated(r["saturated"], within, level, proved, vg)
        return ", ".join(f"{n} in [{lo!r}, {hi!r}]" for n, (lo, hi) in proved.items())

    # R12 --------------------------------------------------------------------------------
    def saturated(self, s, within, free, proved, vg):
        """The saturated law's region of attraction {V <= level}: inside the whole error box,
        V above the saturation-free level `free` beyond the bounds `within`, the saturated
        V-dot < 0 wherever free <= V <= level over the proved rates, and each stated bound
        shown at the level. Returns it as text."""
        at = "saturated law"
        level = num(s["level"])
        if num(s["free_level"]) != free or not free < level < math.inf:
            raise Reject(f"{at}: malformed levels")
        whole = [self.box[n] for n in vg.dims]
        self.faces_shown(self.sublevels(s["faces"], vg, whole, f"{at}, face proof"),
                         vg, whole, level, at)
        outside = self.sublevels(s["outside"], vg, whole, f"{at}, outside proof")
        for n, b in within.items():
            k = vg.dims.index("Δ" + n)
            for side, end, beyond in (("upper", b, whole[k][1] > b), ("lower", -b, whole[k][0] < -b)):
                if beyond and not any((x, sd, f) == ("Δ" + n, side, end) and lv >= free
                                      for x, sd, f, lv in outside):
                    raise Reject(f"{at}: no proof that V > {free} where Δ{n} is beyond {end}")
        gj = s["goal"]
        g = self.goal(gj, f"{at}, dV/dt", "saturated")
        if g.test != ("below", True) or g.origin or g.status != "proven":
            raise Reject(f"{g.at}: not a proof that dV/dt < 0")
        try:
            own = self.m.to_proof(self.m.saturated_vdot())
        except model.SpecError as e:
            raise Reject(f"{g.at}: {e}") from e
        if not same(canon(g.expr), canon(own)):
            raise Reject(f"{g.at}: its expression is not the spec's dV/dt with the commands clamped")
        region = expr_of(gj.get("region", "0"))
        if not same(region, self.V):
            raise Reject(f"{g.at}: its region is not V")
        if s["constraint"] != len(self.m.constraints):
            raise Reject(f"{at}: the level's constraint is not after the spec's")
        if self.kind in ("negative_definite", "negative_definite_in"):
            cmds = []
            for e, lo, hi in self.m.actuators.values():
                u = self.m.to_proof(e)
                if not {x.name for x in u.free_symbols} <= set(g.dims):
                    cmds = []
                    break
                lo, hi = (x.xreplace({sp.pi: model.PI_50}) for x in (lo, hi))
                cmds.append((Goal(u, g.dims, self),
                             ("within", inward(lo, math.inf), inward(hi, -math.inf))))
            g.unclamped = cmds
            g.exempt = [g.dims.index(n) for n in self.m.exempt_errors() if n in g.dims]
        self.m.constraints.append((sp.expand(self.V - model.R(Fraction(level))), False))
        self.region, self.below = region, None
        try:
            self.tree(gj, g, [proved.get(n, self.box[n]) for n in g.dims], g.test, g.at, free)
        finally:
            self.m.constraints.pop()
        shown = self.sublevels(s["bound_proofs"], vg, whole, f"{at}, bound proof")
        text = []
        for e in s["bounds"]:
            name, lo, hi = "Δ" + e["state"], num(e["lower"]), num(e["upper"])
            if name not in vg.dims or not self.bounds_shown(
                    shown, name, (lo, hi), whole[vg.dims.index(name)], level):
                raise Reject(f"{at}: the bound [{lo}, {hi}] on `{e['state']}` is not proved")
            text.append(f"{name} in [{lo!r}, {hi!r}]")
        return f"V <= {level!r} ({', '.join(text)})"

    # R8 ---------------------------------------------------------------------------------
    def declared_point(self, dims, pt):
        for n, x in zip(dims, pt):
            lo, hi = self.declared[n]
            if not (math.isfinite(x) and lo <= Fraction(x) <= hi):
                raise Reject(f"the counterexample's {n} = {x!r} is outside its declared range")

    def feasible(self, dims, pt, every=False):
        """The constraints over these coordinates (every gain constraint: `every`) hold at
        the point."""
        box = [(x, x) for x in pt]
        cs = self.m.constraints[:self.m.gain_constraints] if every else self.m.constraints
        for gexp, strict in cs:
            names = {s.name for s in gexp.free_symbols}
            if not names & set(dims) and not every:
                continue
            try:
                c = iv.Compiled([gexp], dims)(box)[0]
            except iv.Undefined:
                return False
            if not (c[1] < 0.0 if strict else c[1] <= 0.0):
                return False
        return True

    def counterexample(self, g):
        cx = g.json.get("counterexample") or {}
        pt = [num(x) for x in cx.get("point", [])]
        if len(pt) != len(g.dims):
            raise Reject(f"{g.at}: the counterexample has the wrong dimension")
        ends = cx.get("bracket")
        pts = [[num(x) for x in e] for e in ends] if ends else [pt]
        for p in pts:
            self.declared_point(g.dims, p)
            if not self.feasible(g.dims, p):
                raise Reject(f"{g.at}: the counterexample does not meet the constraints")
        if not self.some_feasible_gain():
            raise Reject(f"{g.at}: no gain vector is shown to meet the constraints")
        if g.kind == "condition" and not any(
                self.implies(g, k, u, refuted=True) for k, u, _ in self.own_conditions()):
            raise Reject(f"{g.at}: the refuted condition is none the spec's laws need")
        for e in [g.expr] + ([self.own[g.kind][0]] if g.kind in self.own else []):
            # the spec's own form may use coordinates that cancel from the goal's: any value
            # in their declared ranges will do (their midpoints)
            extra = sorted({s.name for s in e.free_symbols} - set(g.dims))
            fill = [float(sum(self.declared[n]) / 2) for n in extra]
            h = Goal(e, g.dims + extra, self)
            if ends:
                self.sign_change(g, h, [p + fill for p in pts])
            else:
                self.refuted_at(g, h, pt + fill)

    def sign_change(self, g, h, ends):
        if g.test != ("nonzero",):
            raise Reject(f"{g.at}: a sign change refutes only a != 0 goal")
        try:
            fa = h.value([(x, x) for x in ends[0]])
            fb = h.value([(x, x) for x in ends[1]])
            # defined on the box spanned by the two points, so continuous along the segment
            h.value([(min(a, b), max(a, b)) for a, b in zip(*ends)])
        except iv.Undefined:
            raise Reject(f"{g.at}: the expression is not defined along the bracket")
        if not (fa[0] > 0.0 and fb[1] < 0.0):
            raise Reject(f"{g.at}: the bracket does not show a sign change")

    def refuted_at(self, g, h, pt):
        if g.origin and all(pt[k] == 0.0 for k in g.errors):
            raise Reject(f"{g.at}: the counterexample is at zero error, where it is exempt")
        try:
            f = h.value([(x, x) for x in pt])
        except iv.Undefined:
            raise Reject(f"{g.at}: the expression is not defined at the counterexample")
        if not refutes(g.test, f):
            raise Reject(f"{g.at}: the recorded counterexample does not refute the goal "
                         f"(enclosure {list(f)})")

    def some_feasible_gain(self):
        """Some gain vector of the declared ranges meets every constraint (tried at the
        midpoint, the quarter points and the corners of the gain box, rounded inward)."""
        gains = [n for n, r, _, _ in self.m.coords if r == "gain"]
        inner = [tuple(float(x) if Fraction(float(x)) == x else math.nextafter(float(x), t)
                       for x, t in zip(self.declared[n], (math.inf, -math.inf))) for n in gains]
        tries = [[lo + t * (hi - lo) for lo, hi in inner] for t in (0.5, 0.25, 0.75)]
        tries += [[inner[k][mask >> k & 1] for k in range(len(inner))]
                  for mask in range(1 << min(len(inner), 10))]
        return not self.m.gain_constraints or any(self.feasible(gains, p, True) for p in tries)

    # R9 ---------------------------------------------------------------------------------
    def evidence(self, g):
        """R5 to R8 for the goal's status."""
        if g.status == "proven":
            level = None
            if g.kind == "claim" and self.kind == "ultimate_bound":
                level = self.ultimate(g)
            self.tree(g.json, g, [self.box[n] for n in g.dims], g.test, g.at, level)
        elif g.status == "refuted":
            self.counterexample(g)
        elif g.status not in ("inconclusive", "skipped"):
            raise Reject(f"{g.at}: unknown status {g.status!r}")

    def run(self):
        self.domain()
        self.goals()
        statuses = [g.status for g in self.compiled]
        for g in self.compiled:
            self.evidence(g)
        implied = ("falsified" if "refuted" in statuses else
                   "proven" if all(s == "proven" for s in statuses) else "inconclusive")
        if self.cert.get("verdict") != implied:
            raise Reject(f"the certificate states `{self.cert.get('verdict')}` but its goals "
                         f"give `{implied}`")
        if implied == "proven":
            missing = self.conditions()
            if missing:
                kind, u, source = missing[0]
                raise Reject(f"no proven goal shows the {kind} condition on {u} ({source})")
        self.limits = self.actuators()
        self.proved_rates = self.rates(implied)
        try:  # R13
            self.roundoff = roundoff.check(self.cert, self.m)
        except roundoff.Bad as e:
            raise Reject(f"round-off: {e}") from e
        return implied


_WORK = []


def _share(work): _WORK[:] = [work]


def _leaf_at(i):
    check, g, test, level, boxes, leaves = _WORK[0]
    return check.leaf(leaves[i], g, boxes[i], test, level)


def main(argv=None):
    ap = argparse.ArgumentParser(description="Independent checker of lawsmith certificates.")
    ap.add_argument("certificate")
    ap.add_argument("spec")
    ap.add_argument("--jobs", type=int, default=os.cpu_count() or 1,
                    help="processes that re-evaluate leaves (default: one per core)")
    args = ap.parse_args(argv)
    try:
        with open(args.certificate, encoding="utf-8") as f:
            cert = json.load(f)
        with open(args.spec, "rb") as f:
            spec_bytes = f.read()
        c = Check(cert, spec_bytes.decode("utf-8"), spec_bytes)
        c.jobs = max(1, args.jobs)
        verdict = c.run()
    except (OSError, UnicodeError, json.JSONDecodeError, Unreadable) as e:
        print(f"unreadable: {e}", file=sys.stderr)
        return 3
    except Reject as e:
        print(f"rejected: {e}")
        return 1
    except (KeyError, TypeError, ValueError, IndexError, AttributeError) as e:
        print(f"rejected: malformed certificate ({type(e).__name__}: {e})")
        return 1
    print(f"accepted: {verdict} ({len(c.compiled)} goals, {c.leaves} leaves re-evaluated; "
          f"actuators: {', '.join(c.limits) or 'none'}"
          + (f"; guidance rates: {c.proved_rates}" if c.proved_rates else "")
          + (f"; region of attraction with saturation: {c.region_text}" if c.region_text else "")
          + (f"; round-off: {'; '.join(c.roundoff)}" if c.roundoff else "")
          + ")")
    return 0


if __name__ == "__main__":
    sys.exit(main())
