"""The package docstring's worked example and the example scripts, run as a user would."""

from __future__ import annotations

import doctest
import re
import subprocess
import sys
from pathlib import Path

import femcore

ROOT = Path(__file__).resolve().parents[1]


def test_package_docstring_runs():
    """The engine walk-through in ``femcore/__init__.py``: sigma_xx = E/(1 - nu^2) eps of a
    laterally free plane-strain bar, exact for constant-strain triangles (patch test, Irons &
    Razzaque 1972)."""
    res = doctest.testmod(femcore, optionflags=doctest.ELLIPSIS)
    assert res.attempted >= 10
    assert res.failed == 0


def test_strip_footing_example_gives_prandtl():
    """``examples/strip_footing.py`` (T15) reaches N_c within 0 ... +2 % of 2 + pi (Prandtl
    1920, rough strip; displacement FE over-predicts collapse, so the band is one-sided)."""
    out = subprocess.run([sys.executable, str(ROOT / "examples" / "strip_footing.py")],
                         capture_output=True, text=True, timeout=300, cwd=ROOT,
                         check=True).stdout
    n_c = float(re.search(r"N_c = q_u / s_u = ([0-9.]+)", out).group(1))
    ratio = n_c / (2 + 3.141592653589793)
    assert 1.0 <= ratio <= 1.02, ratio
