"""The ``loschmidt`` command line."""

from __future__ import annotations

import argparse
import sys

__all__ = ["main"]


def _demo(args: argparse.Namespace) -> int:
    from . import ics_builtin

    return ics_builtin.run_quick_demo(print)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="loschmidt", description="High-precision few-body dynamics.")
    parser.add_argument("--version", action="store_true", help="print the version and exit")
    sub = parser.add_subparsers(dest="command")
    demo = sub.add_parser("demo", help="run the built-in example")
    demo.set_defaults(func=_demo)
    args = parser.parse_args(argv)
    if args.version:
        from . import __version__

        print(__version__)
        return 0
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
