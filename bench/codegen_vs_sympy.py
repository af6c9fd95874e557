"""Benchmark: operations per step of lawsmith's emitted C against SymPy's cse + C printer.

Reference: SymPy (`sympy.cse` on the spec's laws and actuator commands, derived from the YAML
by the independent derivation of tests/python/crosscheck_derive.py, parameters as floats so
their products fold, then `sympy.ccode`). Both sides are counted by the same counter on the C
text: every arithmetic operator (+ - * /, unary minus included) and every function call.
lawsmith's count covers the law section of `NAME_compute_commands` (between its `the law` and
`saturation` comments), not the envelope guards and saturation, which SymPy does not produce;
its `asin` argument clamp is counted. Goal: ratio <= 1.0.

Usage: python3 bench/codegen_vs_sympy.py [SPEC ...] [--bin LAWSMITH]   (default: every spec in specs/)
"""

import argparse
import glob
import os
import re
import subprocess
import sys
import tempfile

import sympy as sp
import yaml

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "tests", "python"))
from crosscheck_derive import FUNCS, TRANSFORMS, sympy_derivation  # noqa: E402
from sympy.parsing.sympy_parser import parse_expr  # noqa: E402

TOKEN = re.compile(r"\s*(?:(\d+\.?\d*(?:[eE][-+]?\d+)?[fF]?|\.\d+(?:[eE][-+]?\d+)?)|([A-Za-z_]\w*)|(->|[-+*/(),?:<>=!&|]))")


def count_ops(expr):
    """Arithmetic operators and function calls in a C expression. A minus in front of a
    literal is part of the constant (the compiler folds it), any other unary minus counts."""
    tokens = []
    pos = 0
    while pos < len(expr):
        m = TOKEN.match(expr, pos)
        if not m or m.end() == pos:
            pos += 1
            continue
        pos = m.end()
        num, ident, op = m.groups()
        tokens.append(("num", num) if num else ("id", ident) if ident else ("op", op))
    count = 0
    for i, (kind, text) in enumerate(tokens):
        nxt = tokens[i + 1] if i + 1 < len(tokens) else None
        prev = tokens[i - 1] if i > 0 else None
        if kind == "id" and nxt == ("op", "("):
            count += 1
        elif kind == "op" and text in "+-*/":
            unary = prev is None or prev[0] == "op" and prev[1] not in ")"
            if text == "-" and unary and nxt and nxt[0] == "num":
                continue
            count += 1
    return count


def ours(spec_path, binary):
    with tempfile.TemporaryDirectory() as d:
        subprocess.run([binary, "emit", spec_path, "--lang", "c", "--out", d],
                       check=True, capture_output=True)
        c_file = glob.glob(os.path.join(d, "*.c"))[0]
        src = open(c_file, encoding="utf-8").read()
    law = src.split("/* the law (in the envelope) */", 1)[1].split("/* saturation */", 1)[0]
    total = 0
    for line in law.splitlines():
        if "=" in line:
            total += count_ops(line.split("=", 1)[1].rstrip(";"))
    return total


def sympys(spec_path):
    spec = yaml.safe_load(open(spec_path, encoding="utf-8"))
    _, _, laws = sympy_derivation(spec)
    params = {sp.Symbol(n, real=True): sp.Float(d["value"])
              for n, d in (spec.get("parameters") or {}).items()}
    local = dict(FUNCS)
    names = set()
    for sec in ("parameters", "gains", "states", "references", "signals", "inputs"):
        names |= set(spec.get(sec) or {})
    for d in (spec.get("references") or {}).values():
        names.add(d["rate"])
    local.update({n: sp.Symbol(n, real=True) for n in names})
    exprs = []
    for a in (spec.get("actuators") or {}).values():
        e = parse_expr(str(a["law"]), local_dict=local, transformations=TRANSFORMS)
        e = e.subs({sp.Symbol(k, real=True): v for k, v in laws.items()}, simultaneous=True)
        exprs.append(e.subs(params))
    repl, reduced = sp.cse(exprs)
    total = sum(count_ops(sp.ccode(e)) for _, e in repl)
    total += sum(count_ops(sp.ccode(e)) for e in reduced)
    return total


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("specs", nargs="*")
    ap.add_argument("--bin", help="the lawsmith binary (default: build target/release/lawsmith)")
    args = ap.parse_args()
    specs = args.specs or sorted(glob.glob(os.path.join(HERE, "..", "specs", "*.yaml")))
    binary = args.bin
    if binary is None:
        subprocess.run(["cargo", "build", "--release", "-q"], check=True)
        binary = os.path.join(HERE, "..", "target", "release", "lawsmith")
    print(f"{'spec':<24} {'lawsmith':>9} {'sympy cse':>10} {'ratio':>6}")
    worst = 0.0
    for s in specs:
        a, b = ours(s, binary), sympys(s)
        worst = max(worst, a / b)
        print(f"{os.path.basename(s):<24} {a:>9} {b:>10} {a / b:>6.2f}")
    print(f"worst ratio {worst:.2f} (goal <= 1.0)")


if __name__ == "__main__":
    main()
