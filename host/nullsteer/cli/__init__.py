"""Command-line entry point: ``nullsteer <command> ...``.

Each command lives in a module of this package that defines ``register(subparsers)``;
``register`` adds its parser and sets ``func`` to a callable taking the parsed
arguments and returning an exit code. Errors derived from
:class:`nullsteer.errors.NullsteerError` are printed as one line and mapped to their
exit code (2 for usage/configuration errors).
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
from collections.abc import Sequence

from nullsteer import __version__
from nullsteer.errors import NullsteerError

#: Command modules, in the order their commands are listed in ``--help``.
COMMAND_MODULES = (
    "nullsteer.cli.board",
    "nullsteer.cli.model",
    "nullsteer.cli.ladder",
    "nullsteer.cli.calibrate",
    "nullsteer.cli.sun",
    "nullsteer.cli.schedule",
    "nullsteer.cli.service",
    "nullsteer.cli.autonull",
    "nullsteer.cli.noise",
    "nullsteer.cli.plot",
    "nullsteer.cli.firmware",
    "nullsteer.cli.demo",
)


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"nullsteer: error: {message}\n")
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="nullsteer", description=__doc__.splitlines()[0])
    parser.add_argument("--version", action="version", version=f"nullsteer {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == name:  # command not built (yet): leave it out of the parser
                continue
            raise
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        code = args.func(args)
    except NullsteerError as exc:
        sys.stderr.write(f"nullsteer: error: {exc}\n")
        return exc.exit_code
    except KeyboardInterrupt:
        sys.stderr.write("nullsteer: interrupted\n")
        return 130
    except BrokenPipeError:  # output piped into e.g. head, which stopped reading
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141
    return int(code or 0)


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
