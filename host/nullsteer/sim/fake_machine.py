"""Fake ``machine`` module for the MicroPython unix port (copied as ``machine.py``).

Runs under MicroPython, not CPython. Every pin level change is appended to the file named
by NULLSTEER_PINLOG as one line ``<ticks_us> <pin> <level>`` in a single unbuffered
write, so a SIGKILL leaves every complete line intact. ``WDT`` only counts feeds;
``UART`` is absent (the simulator's link is a pseudo-terminal).
"""

import os
import time

_log = None
_path = os.getenv("NULLSTEER_PINLOG")
if _path:
    _log = open(_path, "ab")


def _record(pin, level):
    if _log is not None:
        _log.write(b"%d %s %d\n" % (time.ticks_us(), pin, level))


class Pin:
    IN = 0
    OUT = 1
    PULL_UP = 1
    PULL_DOWN = 2

    def __init__(self, pin_id, mode=-1, pull=-1, value=None):
        self.id = str(pin_id)
        self.mode = mode
        self.level = 0
        if value is not None:
            self.level = 1 if value else 0
            _record(self.id, self.level)

    def value(self, level=None):
        if level is None:
            return self.level
        level = 1 if level else 0
        if level != self.level:
            self.level = level
            _record(self.id, level)
        return None

    def on(self):
        self.value(1)

    def off(self):
        self.value(0)


class WDT:
    def __init__(self, id=0, timeout=5000):
        self.timeout = timeout
        self.feeds = 0

    def feed(self):
        self.feeds += 1
