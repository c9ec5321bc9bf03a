"""Small helpers shared by the command modules: JSON output and argument types."""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from nullsteer.errors import ConfigError


def add_json_flag(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")


def print_json(obj: Any) -> None:
    """Print ``obj`` as indented JSON on stdout (numpy scalars are converted)."""
    json.dump(obj, sys.stdout, indent=2, default=_json_default)
    sys.stdout.write("\n")


def _json_default(value: Any) -> Any:
    try:
        import numpy as np
    except ImportError:  # pragma: no cover
        np = None
    if np is not None:
        if isinstance(value, np.generic):
            return value.item()
        if isinstance(value, np.ndarray):
            return value.tolist()
    if hasattr(value, "to_json"):
        return value.to_json()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def positive_float(flag: str):
    """argparse type: a finite float > 0; the error names ``flag``."""

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{flag} must be a number, got {text!r}") from None
        if not value > 0 or value == float("inf"):
            raise argparse.ArgumentTypeError(f"{flag} must be > 0, got {text!r}")
        return value

    return parse


def require(condition: bool, key: str, message: str) -> None:
    """Raise :class:`ConfigError` (exit 2) naming ``key`` unless ``condition``."""
    if not condition:
        raise ConfigError(key, message)
