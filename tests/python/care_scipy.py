"""Solves continuous algebraic Riccati equations with SciPy (reference:
scipy.linalg.solve_continuous_are). Reads {"a", "b", "q", "r"} cases as JSON on stdin and
prints the solutions P as JSON, one list of rows per case."""

import json
import sys

import numpy as np
from scipy.linalg import solve_continuous_are

cases = json.load(sys.stdin)
out = [solve_continuous_are(np.array(c["a"]), np.array(c["b"]), np.array(c["q"]),
                            np.array(c["r"])).tolist() for c in cases]
print(json.dumps(out))
