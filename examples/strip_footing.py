"""Example: a rigid surface strip footing on undrained clay (Tresca), pushed to collapse.

The classical check: the collapse pressure approaches (2 + pi) s_u (Prandtl 1920). Run:

    python examples/strip_footing.py

It prints the load-settlement curve and the computed bearing factor N_c.
"""

import numpy as np

from benchmarks.footing import Footing, run_footing
from materials import Tresca

su = 20.0  # kPa
result = run_footing(Footing(Tresca(E=300 * su, nu=0.49, su=su), B=2.0, rough=True,
                             element="T15", h_near=0.05))
print(f"{'settlement (mm)':>16s} {'pressure (kPa)':>15s}")
for d, q in zip(result.displacement[::3], result.load[::3], strict=False):
    print(f"{d * 1e3:16.2f} {q:15.2f}")
print(f"N_c = q_u / s_u = {result.collapse / su:.3f}  (Prandtl: {2 + np.pi:.3f})")
