"""Energy-norm convergence of the thick-walled cylinder under internal pressure (Lame).

Reference (exact, any mechanics text, e.g. Timoshenko & Goodier 1951, *Theory of Elasticity*,
§28): sigma_r = A - B/r^2, sigma_theta = A + B/r^2, A = p a^2/(b^2 - a^2), B = A b^2; plane
strain sigma_z = 2 nu A. Expected energy-norm rate O(h^p) for Lagrange elements of degree p
(Strang & Fix 1973, *An Analysis of the Finite Element Method*, ch. 3); accepted if the fitted
rate is within 0.2 of p (or better). The same field is checked in plane strain (quarter
annulus, curved isoparametric boundary) and in axisymmetry (a long cylinder: r in [a, b],
axial displacement fixed top and bottom).
"""

import numpy as np
import pytest

from benchmarks.elastic import energy_error


@pytest.mark.parametrize("analysis", ["plane_strain", "axisymmetric"])
@pytest.mark.parametrize("element,p,sizes", [("T6", 2, (0.2, 0.1, 0.05)),
                                             ("T15", 4, (0.25, 0.125, 0.0625))])
def test_lame_energy_rate(analysis, element, p, sizes):
    errs, hs = zip(*(energy_error(analysis, element, h) for h in sizes), strict=True)
    rate = np.polyfit(np.log(hs), np.log(errs), 1)[0]
    assert rate >= p - 0.2, f"rate {rate:.2f} for {element} ({errs})"
    assert errs[-1] < (1e-3 if p == 2 else 1e-5)
