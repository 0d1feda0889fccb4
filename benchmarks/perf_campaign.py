"""Performance: campaign throughput on the example space (coarse T6 model).

Runs the first N samples of ``examples/fennwick_space.toml`` with 2 workers and reports
samples per hour, the extrapolated time of the whole 2048 + 128-sample campaign on this
machine and the overhead share (sampling, dispatch, storage: wall time x workers minus run
time, over run time). The full mode also runs the same samples with 1 worker (the 1 -> 2
worker speed-up) and with ``[run] dynamic = false`` (the speed-up from skipping the
small-strain stiffness analysis).

Run: ``python -m benchmarks.perf_campaign [--quick] [--json FILE]``.
"""

from __future__ import annotations

import re
import tempfile
import time
from pathlib import Path

from femcore.workflows.campaign import Store, load_space, run_campaign, sample_space

from ._script import script_main

SPACE = Path(__file__).resolve().parents[1] / "examples" / "fennwick_space.toml"


def _without_dynamic(folder: Path) -> Path:
    """The example space with ``[run] dynamic = false`` (its last section), base made
    absolute."""
    text = SPACE.read_text(encoding="utf-8")
    base = (SPACE.parent / "fennwick_fw07.toml").as_posix()
    text = text.replace('base = "fennwick_fw07.toml"', f'base = "{base}"', 1)
    text = re.sub(r"^#?\s*dynamic\s*=.*$", "", text, flags=re.M) + "\ndynamic = false\n"
    out = folder / "space_without_dynamic.toml"
    out.write_text(text, encoding="utf-8")
    if load_space(out).dynamic:  # [run] must be the last section for the appended line
        raise RuntimeError(f"{SPACE}: could not switch the dynamic analysis off")
    return out


def _timed(space: Path, n: int, workers: int, store: Path) -> tuple[float, list[dict]]:
    t = time.perf_counter()
    run_campaign(space, store, workers=workers, quiet=True, limit=n)
    wall = time.perf_counter() - t
    return wall, Store(store).rows()


def run(quick: bool = False) -> dict:
    n = 8 if quick else 32
    total = len(sample_space(load_space(SPACE)))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        wall2, rows = _timed(SPACE, n, 2, folder / "w2.sqlite")
        busy = sum(r["seconds"] for r in rows)
        out = {"case": "perf_campaign", "samples": len(rows), "workers": 2,
               "wall_s": wall2, "samples_per_hour": len(rows) / wall2 * 3600,
               "overhead_share": max(wall2 * 2 - busy, 0.0) / busy,
               "statuses": sorted({r["status"] for r in rows}),
               "extrapolated_full_campaign_h": total / (len(rows) / wall2) / 3600}
        if not quick:
            wall1, _ = _timed(SPACE, n, 1, folder / "w1.sqlite")
            out["speedup_1_to_2_workers"] = wall1 / wall2
            wall_nd, rows_nd = _timed(_without_dynamic(folder), n, 2, folder / "nd.sqlite")
            out["samples_per_hour_without_dynamic"] = len(rows_nd) / wall_nd * 3600
            out["speedup_without_dynamic"] = wall2 / wall_nd
    return out


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
