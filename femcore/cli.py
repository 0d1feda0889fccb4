"""The ``tiltfe`` command.

Sub-commands arrive with the analyses they drive; this module keeps start-up fast by
importing numerical packages only inside the commands that need them.
"""

from __future__ import annotations

import argparse
import sys

CAUTION = (
    "Caution: indicative results of a simplified 2D model with idealised soil behaviour; not a "
    "foundation design. Design and certification must follow the turbine supplier's foundation "
    "specification, IEC 61400-6, the applicable national codes (e.g. EN 1997-1 with its national "
    "annex, EN 1992-1-1) and be carried out or checked by a qualified, licensed engineer."
)


def _cmd_info(args: argparse.Namespace) -> int:
    import platform

    import numpy
    import scipy

    from femcore import __version__
    from femcore.linsolve import available_backends

    try:
        import gmsh

        gmsh_version = gmsh.__version__
    except Exception as exc:  # pragma: no cover - depends on the machine
        gmsh_version = f"unavailable ({exc})"
    print(f"tiltfe {__version__}")
    print(f"python {platform.python_version()}, numpy {numpy.__version__}, "
          f"scipy {scipy.__version__}, gmsh {gmsh_version}")
    print(f"linear solver backends: {', '.join(available_backends())}")
    print()
    print(CAUTION)
    return 0


def build_parser() -> argparse.ArgumentParser:
    from femcore import __version__

    parser = argparse.ArgumentParser(
        prog="tiltfe",
        description="2D nonlinear finite elements for the moment-rotation response of piled "
                    "wind-turbine foundations.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"tiltfe {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p_info = sub.add_parser("info", help="versions, solver backends and the caution text")
    p_info.set_defaults(func=_cmd_info)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    return int(args.func(args))


if __name__ == "__main__":
    sys.exit(main())
