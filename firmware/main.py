"""Entry point: MicroPython runs ``main.py`` at boot; the simulator runs it directly."""

import hw

hw.run()
