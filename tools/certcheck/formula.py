"""The formula language, read into a small tree of tuples.

Grammar (as the README states it): sums of products, `^` right-associative and binding
tighter than a unary minus (`-x^2` is `-(x^2)`), decimals read exactly, calls `name(a, ...)`.
Names are ASCII identifiers, optionally prefixed with `Δ` (a state's error) or `δ` (an
estimate's error) as certificates write proof coordinates.

Nodes: ("num", Fraction) ("sym", name) ("add", [terms]) ("mul", [factors]) ("div", a, b)
("neg", a) ("pow", a, b) ("call", name, [args]).
"""

import re
from fractions import Fraction

_TOKEN = re.compile(r"""\s*(?:
      (?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)
    | (?P<name>[Δδ]?[A-Za-z_][A-Za-z0-9_]*)
    | (?P<op>[-+*/^(),])
    | (?P<bad>\S))""", re.VERBOSE)


class FormulaError(ValueError):
    """A formula that does not parse."""


def tokens(text):
    out = []
    for m in _TOKEN.finditer(text):
        if m.group("bad"):
            raise FormulaError(f"unexpected character {m.group('bad')!r} in {text!r}")
        kind = m.lastgroup
        out.append((kind, Fraction(m.group(kind)) if kind == "num" else m.group(kind)))
    return out + [("end", None)]


class _Parser:
    def __init__(self, text):
        self.toks = tokens(text)
        self.i = 0
        self.text = text

    def peek(self):
        return self.toks[self.i]

    def take(self):
        t = self.toks[self.i]
        self.i += 1
        return t

    def expect(self, op):
        t = self.take()
        if t != ("op", op):
            raise FormulaError(f"expected {op!r} in {self.text!r}")

    def sum(self):
        terms = [self.product()]
        while self.peek() in (("op", "+"), ("op", "-")):
            neg = self.take()[1] == "-"
            t = self.product()
            terms.append(("neg", t) if neg else t)
        return terms[0] if len(terms) == 1 else ("add", terms)

    def product(self):
        node = self.unary()
        run = [node]
        while self.peek() in (("op", "*"), ("op", "/")):
            op = self.take()[1]
            rhs = self.unary()
            if op == "*":
                run.append(rhs)
            else:
                lhs = run[0] if len(run) == 1 else ("mul", run)
                run = [("div", lhs, rhs)]
        return run[0] if len(run) == 1 else ("mul", run)

    def unary(self):
        if self.peek() in (("op", "-"), ("op", "+")):
            neg = self.take()[1] == "-"
            inner = self.unary()
            return ("neg", inner) if neg else inner
        return self.power()

    def power(self):
        base = self.primary()
        if self.peek() == ("op", "^"):
            self.take()
            return ("pow", base, self.unary())
        return base

    def primary(self):
        kind, value = self.take()
        if kind == "num":
            return ("num", value)
        if kind == "name":
            if self.peek() != ("op", "("):
                return ("sym", value)
            self.take()
            args = []
            if self.peek() != ("op", ")"):
                while True:
                    args.append(self.sum())
                    if self.peek() == ("op", ","):
                        self.take()
                        continue
                    break
            self.expect(")")
            return ("call", value, args)
        if (kind, value) == ("op", "("):
            inner = self.sum()
            self.expect(")")
            return inner
        raise FormulaError(f"unexpected {value!r} in {self.text!r}")


def parse(text):
    """The tree of a formula (text, or a YAML number)."""
    if isinstance(text, Fraction):
        return ("num", text)
    p = _Parser(str(text))
    node = p.sum()
    if p.peek() != ("end", None):
        raise FormulaError(f"trailing input in {text!r}")
    return node
