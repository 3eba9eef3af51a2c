"""Command-line interface: ``stressmap <command> ...``.

Each module in this package that defines ``register(subparsers)`` contributes its commands; the
modules are discovered, so adding a command never means editing a shared list. A command's
handler receives the parsed arguments and returns a process exit code. User errors
(:class:`stressmap.errors.InputError`) are printed one problem per line with exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import pkgutil
import sys

from stressmap import __version__
from stressmap.errors import InputError, StressmapError

__all__ = ["main", "build_parser"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="stressmap",
        description=(
            "Predict tectonic stress in plate interiors from typed plate boundaries, compare it "
            "with stress indicators, calibrate force magnitudes and screen faults. Outputs are "
            "screening estimates from a regional, plate-scale model."
        ),
    )
    parser.add_argument("--version", action="version", version=f"stressmap {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log progress details to stderr")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"{__name__}.{info.name}")
        register = getattr(module, "register", None)
        if register is not None:
            register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(
        level=logging.INFO if args.verbose else logging.WARNING,
        format="%(levelname)s %(name)s: %(message)s",
    )
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help()
        return 1
    try:
        return int(handler(args) or 0)
    except InputError as exc:
        only = exc.problems[0] if len(exc.problems) == 1 else None
        if only is not None and only["message"] == exc.message:  # say where, on one line
            where = ", ".join(f"{k} {only[k]}" for k in ("row", "field")
                              if only.get(k) is not None)
            print(f"error: {exc.message}" + (f" ({where})" if where else ""), file=sys.stderr)
            return 2
        print(f"error: {exc.message}", file=sys.stderr)
        for p in exc.problems:
            where = ", ".join(f"{k} {p[k]}" for k in ("row", "field") if p.get(k) is not None)
            print(f"  - {where + ': ' if where else ''}{p['message']}", file=sys.stderr)
        return 2
    except StressmapError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
