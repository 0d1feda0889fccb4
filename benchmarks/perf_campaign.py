"""Performance: campaign throughput on the example space (coarse T6 model).

Runs the first N samples of ``examples/fennwick_space.toml`` with 2 workers (and, in full
mode, the same samples with 1 worker for the speed-up), and reports samples per hour, the
extrapolated time of the whole 2048 + 128-sample campaign on this machine, the overhead share
(sampling, dispatch, storage: wall time x workers minus run time, over run time) and the
1 -> 2 worker speed-up.

Run: ``python -m benchmarks.perf_campaign [--quick] [--json FILE]``.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

from femcore.workflows.campaign import Store, load_space, run_campaign, sample_space

from ._script import script_main

SPACE = Path(__file__).resolve().parents[1] / "examples" / "fennwick_space.toml"


def _timed(n: int, workers: int, folder: Path) -> tuple[float, list[dict]]:
    store = folder / f"w{workers}.sqlite"
    t = time.perf_counter()
    run_campaign(SPACE, store, workers=workers, quiet=True, limit=n)
    wall = time.perf_counter() - t
    return wall, Store(store).rows()


def run(quick: bool = False) -> dict:
    n = 8 if quick else 32
    total = len(sample_space(load_space(SPACE)))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        wall2, rows = _timed(n, 2, folder)
        busy = sum(r["seconds"] for r in rows)
        out = {"case": "perf_campaign", "samples": len(rows), "workers": 2,
               "wall_s": wall2, "samples_per_hour": len(rows) / wall2 * 3600,
               "overhead_share": max(wall2 * 2 - busy, 0.0) / busy,
               "statuses": sorted({r["status"] for r in rows}),
               "extrapolated_full_campaign_h": total / (len(rows) / wall2) / 3600}
        if not quick:
            wall1, _ = _timed(n, 1, folder)
            out["speedup_1_to_2_workers"] = wall1 / wall2
    return out


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
