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
import math
import re
import os
import sys
from collections.abc import Sequence
from typing import Any

from nullsteer import __version__
from nullsteer.errors import NullsteerError, redacted

#: Command modules, in the order their commands are listed in ``--help``.
COMMAND_MODULES = (
    "nullsteer.cli.board",
    "nullsteer.cli.model",
    "nullsteer.cli.ladder",
    "nullsteer.cli.calibrate",
    "nullsteer.cli.sun",
    "nullsteer.cli.schedule",
    "nullsteer.cli.service",
    "nullsteer.cli.serve",
    "nullsteer.cli.autonull",
    "nullsteer.cli.level",
    "nullsteer.cli.follow",
    "nullsteer.cli.noise",
    "nullsteer.cli.plot",
    "nullsteer.cli.firmware",
    "nullsteer.cli.demo",
    "nullsteer.cli.reference",
)


def _finite_float(text: str) -> float:
    """argparse's ``type=float`` for every nullsteer option: nan and inf are refused."""
    value = float(text)  # ValueError -> argparse's one-line "invalid float value"
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number, got {text!r}")
    return value


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit 2.

    ``type=float`` on any option of any command means :func:`_finite_float` (argparse
    looks types up in the parser's registry, which its argument groups share).
    """

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        if kwargs.get("description"):
            kwargs["description"] = plain_text(kwargs["description"])
        super().__init__(*args, **kwargs)
        self.register("type", float, _finite_float)

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"nullsteer: error: {message}\n")
        raise SystemExit(2)


def plain_text(doc: str) -> str:
    """A docstring line as a terminal shows it: ````x```` and ``:mod:`x```` become x."""
    return re.sub(r"(?::[a-z]+:)?`{1,2}([^`]+)`{1,2}", r"\1", doc)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="nullsteer", description="Steer the rear null of a resistively "
                     "terminated receiving loop from the shack.")
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
    except NullsteerError as exc:  # messages never show a URL's password
        sys.stderr.write(f"nullsteer: error: {redacted(str(exc))}\n")
        return exc.exit_code
    except KeyboardInterrupt:
        sys.stderr.write("nullsteer: interrupted\n")
        return 130
    except BrokenPipeError:  # output piped into e.g. head, which stopped reading
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141
    except OSError as exc:  # a file the user named cannot be read or written
        where = f"{exc.filename}: " if exc.filename else ""
        sys.stderr.write(f"nullsteer: error: {where}{exc.strerror or exc}\n")
        return 2
    return int(code or 0)


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
