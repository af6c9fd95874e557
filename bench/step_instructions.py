"""Benchmark: instructions per control step (`NAME_compute_commands`) of lawsmith's emitted C against a hand-written C
implementation of the same law (bench/handwritten/energy_longitudinal_hand.c, which does the
same job: envelope guards, default gains, asin guard, saturation and limit bits).

Both are compiled with `cc -O2`, driven over the same 1,000 inputs (inside the envelope,
with some outside it), and measured with `valgrind --tool=callgrind`, counting only inside
the step function (`--toggle-collect`). Instruction counts repeat exactly for the same binary
and inputs. Goal: ratio <= 1.0.

Usage: python3 bench/step_instructions.py [--bin LAWSMITH] [--steps N]
"""

import argparse
import os
import random
import re
import subprocess
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.join(HERE, "..")
STEPS = 1000

FIELDS = ["h", "va", "h_r", "va_r", "hdot_r", "vadot_r", "drag", "alpha"]


def inputs():
    rng = random.Random(20261202)
    rows = []
    for i in range(STEPS):
        h_r, va_r = rng.uniform(30, 600), rng.uniform(15, 30)
        row = {"h_r": h_r, "va_r": va_r, "h": h_r + rng.uniform(-5, 5), "va": va_r + rng.uniform(-2, 2),
               "hdot_r": rng.uniform(-3, 3), "vadot_r": rng.uniform(-1, 1),
               "drag": rng.uniform(1, 25), "alpha": rng.uniform(-0.05, 0.2)}
        if i % 10 == 0:  # a tenth outside the envelope
            row["h"] = h_r + 40.0
        rows.append(row)
    return rows


def driver(fn, header, types):
    rows = inputs()
    lines = [f'#include "{header}"', "#include <stdio.h>", f"static const double X[{STEPS}][8] = {{"]
    for r in rows:
        lines.append("  {" + ", ".join(repr(r[f]) for f in FIELDS) + "},")
    lines.append("};")
    lines.append("int main(void) {")
    lines.append(f"  {types[1]} g = {{0.25, 0.35, 0.3, 0.5}};")
    lines.append("  double acc = 0.0; int i;")
    lines.append(f"  for (i = 0; i < {STEPS}; i++) {{")
    lines.append(f"    {types[0]} in; {types[2]} out;")
    for k, f in enumerate(FIELDS):
        lines.append(f"    in.{f} = X[i][{k}];")
    lines.append(f"    {fn}(&in, &g, &out);")
    lines.append("    acc += out.pitch_cmd + out.thrust_cmd;")
    lines.append("  }")
    lines.append('  printf("%f\\n", acc);')
    lines.append("  return 0;\n}")
    return "\n".join(lines)


def instructions(exe, fn, tmp):
    out = os.path.join(tmp, f"cg.{fn}")
    subprocess.run(["valgrind", "--tool=callgrind", f"--callgrind-out-file={out}",
                    f"--toggle-collect={fn}", exe], check=True, capture_output=True)
    text = open(out, encoding="utf-8").read()
    m = re.search(r"^(?:summary|totals):\s+(\d+)", text, re.M)
    return int(m.group(1))


def main():
    global STEPS
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--bin", help="the lawsmith binary (default: build target/release/lawsmith)")
    ap.add_argument("--steps", type=int, default=STEPS, help="steps measured")
    args = ap.parse_args()
    STEPS = args.steps
    binary = args.bin
    if binary is None:
        subprocess.run(["cargo", "build", "--release", "-q"], check=True, cwd=ROOT)
        binary = os.path.join(ROOT, "target", "release", "lawsmith")
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([binary, "emit", os.path.join(ROOT, "specs", "energy_longitudinal.yaml"),
                        "--lang", "c", "--out", tmp], check=True, capture_output=True)
        hand_h = os.path.join(tmp, "hand.h")
        with open(hand_h, "w", encoding="utf-8") as fh:
            src = open(os.path.join(HERE, "handwritten", "energy_longitudinal_hand.c"), encoding="utf-8").read()
            fh.write(src.split("#define MASS")[0].replace("#include <math.h>", "") +
                     "void hand_step(const hand_inputs *in, const hand_gains *gains, hand_outputs *out);\n")
        results = {}
        for name, header, fn, types, source in [
            ("lawsmith", "energy_longitudinal.h", "energy_longitudinal_compute_commands",
             ("energy_longitudinal_reading", "energy_longitudinal_gains", "energy_longitudinal_commands"),
             os.path.join(tmp, "energy_longitudinal.c")),
            ("hand-written", "hand.h", "hand_step", ("hand_inputs", "hand_gains", "hand_outputs"),
             os.path.join(HERE, "handwritten", "energy_longitudinal_hand.c")),
        ]:
            drv = os.path.join(tmp, f"drv_{fn}.c")
            open(drv, "w", encoding="utf-8").write(driver(fn, header, types))
            exe = os.path.join(tmp, f"bench_{fn}")
            subprocess.run(["cc", "-std=c99", "-O2", "-I", tmp, drv, source, "-lm", "-o", exe], check=True)
            results[name] = instructions(exe, fn, tmp) / STEPS
        ours, hand = results["lawsmith"], results["hand-written"]
        print(f"instructions per step (callgrind, cc -O2, {STEPS} steps, libm calls included):")
        print(f"  lawsmith emitted C   {ours:10.1f}")
        print(f"  hand-written C       {hand:10.1f}")
        print(f"  ratio                {ours / hand:10.3f}   (goal <= 1.0)")


if __name__ == "__main__":
    main()
