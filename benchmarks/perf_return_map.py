"""Performance: Mohr-Coulomb / Tresca return-map throughput (Gauss points per second).

Random strain increments from a K0 stress state, a mix of elastic and plastic points in every
region, through ``MohrCoulomb.update`` (stress, consistent tangent and trial state): "heavy"
increments make about half the points plastic, "light" ones a few per cent (typical of a
pushover increment away from collapse). The issue
target is >= 2 million points per second on one core. No reference value: a speed case.

Run: ``python -m benchmarks.perf_return_map [--quick] [--json FILE]``.
"""

from __future__ import annotations

import time

import numpy as np

from materials import MohrCoulomb, Tresca

from ._script import script_main


def _rate(model, n_points: int, repeat: int, strain: float, seed: int = 0):
    rng = np.random.default_rng(seed)
    shape = (n_points // 16, 16)
    x = np.zeros((*shape, 2))
    x[..., 1] = -rng.uniform(1, 20, shape)
    st = model.initial_state(x)
    s0 = np.zeros((*shape, 4))
    s0[..., 1] = -18.0 * -x[..., 1]
    s0[..., 0] = s0[..., 2] = 0.6 * s0[..., 1]
    st = st.with_stress(s0)
    eps = rng.normal(scale=strain, size=(*shape, 4))
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        _, _, trial = model.update(eps, st)
        best = min(best, time.perf_counter() - t)
    return shape[0] * shape[1] / best, float(trial.yielded.mean())


def run(quick: bool = False) -> dict:
    n = 20_000 if quick else 200_000
    repeat = 2 if quick else 5
    out = {"case": "perf_return_map", "quick": quick, "n_points": n}
    models = {
        "mohr_coulomb_cutoff": MohrCoulomb(E=3e4, nu=0.3, c=5.0, phi=30.0, psi=5.0),
        "mohr_coulomb_no_cutoff": MohrCoulomb(E=3e4, nu=0.3, c=5.0, phi=30.0, psi=30.0,
                                              tension_cutoff=None),
        "tresca": Tresca(E=5e4, nu=0.49, su=20.0, su_gradient=5.0),
    }
    for name, m in models.items():
        for label, strain in (("heavy", 2e-3), ("light", 3e-4)):
            rate, frac = _rate(m, n, repeat, strain)
            out[f"{name}_{label}_points_per_s"] = rate
            out[f"{name}_{label}_plastic_fraction"] = frac
    return out


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
