"""The optional PARDISO backend (install extra ``fast``) against the default SuperLU.

Reference: the SuperLU run of the same design in the same process; two exact sparse direct
solvers must give the same Newton path, so the key points agree to 1e-8 relative (the
tolerance of the issue that added the backend; round-off of both solvers is ~1e-12).
Skipped where pypardiso is not installed (the default install)."""

import numpy as np
import pytest

from femcore import linsolve
from femcore.foundation.design import demo_design
from femcore.foundation.run import run_design

pytestmark = pytest.mark.skipif("pardiso" not in linsolve.available_backends(),
                                reason="pypardiso not installed (pip install -e '.[fast]')")


def _keypoints(backend):
    d = demo_design(mesh="coarse", element="T6").model_copy(update={"design_strength": None})
    with linsolve.use_backend(backend):
        r = run_design(d, dynamic=True)
    assert r.status == "ok"
    return {k: v.value for k, v in r.keypoints.items()}, r.dynamic.value


def test_pardiso_gives_the_superlu_key_points():
    ref, dyn_ref = _keypoints("superlu")
    got, dyn = _keypoints("pardiso")
    assert got.keys() == ref.keys()
    for k in ref:
        assert got[k] == pytest.approx(ref[k], rel=1e-8), k
    assert dyn == pytest.approx(dyn_ref, rel=1e-8)


def test_pardiso_reports_a_mechanism_as_singular():
    """A free body (two equal rows): a SolverError naming the mechanism, as with SuperLU."""
    import scipy.sparse as sp

    A = sp.csc_matrix(np.array([[1.0, -1.0], [-1.0, 1.0]]))
    for _ in range(3):  # a pattern's first factorization is SuperLU's, later ones PARDISO's
        for backend in ("superlu", "pardiso"):
            with pytest.raises(linsolve.SolverError, match="singular"):
                linsolve.factorize(A, backend)


def test_pardiso_refactorizations_solve_with_their_own_matrix():
    """Factorizations of one pattern share PARDISO's analysis; an older one still solves
    with its own numbers (against SuperLU of the same matrix, 1e-10)."""
    import scipy.sparse as sp

    n = 40
    rng = np.random.default_rng(5)
    base = sp.random(n, n, density=0.1, format="csc", random_state=6) + 5 * sp.eye(n)
    mats = [(base + k * sp.eye(n)).tocsc() for k in range(3)]
    lus = [linsolve.factorize(A, "pardiso") for A in mats]
    assert isinstance(lus[-1], linsolve._Pardiso)
    b = rng.normal(size=n)
    for A, lu in zip(mats, lus, strict=True):
        assert np.allclose(lu.solve(b), linsolve.factorize(A, "superlu").solve(b), rtol=1e-10)
