"""The command line shared by the benchmark scripts: ``--quick`` and ``--json FILE``."""

from __future__ import annotations

import argparse
import json
from collections.abc import Callable


def _print(out: dict, indent: str = "") -> None:
    for k, v in out.items():
        if isinstance(v, dict):
            print(f"{indent}--- {k}")
            _print(v, indent + "  ")
        else:
            print(f"{indent}{k:>32s}: {v:.4g}" if isinstance(v, float) else
                  f"{indent}{k:>32s}: {v}")


def script_main(doc: str, run: Callable[[bool], dict], argv: list[str] | None = None) -> int:
    """Parse ``--quick`` / ``--json``, run, print the figures, write them as JSON."""
    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes (used by the tests)")
    ap.add_argument("--json", help="write the figures to this file")
    args = ap.parse_args(argv)
    out = run(args.quick)
    _print(out)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(out, fh, indent=2)
    return 0
