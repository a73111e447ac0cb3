"""Plots the scan of examples/reflecting-wall.ward: the boundary anomaly
coefficient b2 against the coupling g, both sides of the statement.

    python python/examples/plot_scan.py [out.png]

Uses matplotlib when it is installed; otherwise prints the table.
"""

import os
import sys

import wardsmith

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))

out = wardsmith.check_file(os.path.join(ROOT, "examples", "reflecting-wall.ward"))
scan = out.scans()[0]
print(f"line {scan.line}: {scan.status}, {len(scan.parameter)} rows")

try:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
except ImportError:
    print(f"{scan.parameter_name:>8} {'left':>22} {'right':>22}")
    for x, l, r in zip(scan.parameter, scan.left[:, 0], scan.right[:, 0]):
        print(f"{x:8.4f} {l:22.15e} {r:22.15e}")
    sys.exit(0)

fig, ax = plt.subplots(figsize=(5, 3.5))
ax.plot(scan.parameter, scan.left[:, 0], "o", label="b2 from ⟨D D⟩ (left side)")
ax.plot(scan.parameter, scan.right[:, 0], "-", label="(1 + ρ²)/30 (right side)")
ax.set_xlabel(f"coupling {scan.parameter_name}")
ax.set_ylabel("b2")
ax.legend()
fig.tight_layout()
target = sys.argv[1] if len(sys.argv) > 1 else "reflecting-wall-b2.png"
fig.savefig(target, dpi=150)
print(f"wrote {target}")
