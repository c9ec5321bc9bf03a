"""Exception types shared by every part of the host package.

Each carries a one-line message; the CLI prints ``error: <message>`` and exits with
the code attached to the class (2 for usage and configuration errors).
"""

from __future__ import annotations

import re

#: ``scheme://user:password@`` in any text: the password part is what :func:`redacted` hides
_URL_PASSWORD = re.compile(r"(?P<head>[A-Za-z][A-Za-z0-9+.-]*://[^\s/?#@:]*):[^\s/?#]*@")


def redacted(text: str) -> str:
    """``text`` with the password of every URL in it replaced by ``***`` (for messages
    and logs: a password must never be printed)."""
    return _URL_PASSWORD.sub(lambda m: m.group("head") + ":***@", text)


class NullsteerError(Exception):
    """Base class. ``exit_code`` is what the CLI returns for it."""

    exit_code = 1


class ConfigError(NullsteerError):
    """A bad configuration value or command-line argument.

    Parameters
    ----------
    key : str
        The offending key as the user wrote it, e.g. ``antenna.height_m`` or ``--mask``.
    message : str
        What is wrong with it, one line.
    """

    exit_code = 2

    def __init__(self, key: str, message: str) -> None:
        self.key = key
        self.message = message
        super().__init__(f"{key}: {message}")


class LinkError(NullsteerError):
    """The board could not be reached, or did not answer in time."""

    exit_code = 3


class BoardError(NullsteerError):
    """The board answered with an error reply (code and message from the board)."""

    exit_code = 4

    def __init__(self, code: str, message: str) -> None:
        self.code = code
        self.message = message
        super().__init__(f"board refused: {code}: {message}")


class MeasurementError(NullsteerError):
    """A measurement source failed (command timed out, unparsable reading...)."""

    exit_code = 5
