"""The board protocol: code the host shares with the board, byte for byte.

Owns the frame codec (``wire.py``: frames, CRC, signing, the nearest-setting rule) and
the home-automation discovery payloads (``discovery.py``). Both files are copied verbatim
onto the board beside the firmware, so they stay in the CPython/MicroPython common subset
and import nothing from the host package. It sits below ``ladder``, ``sim`` and ``board``,
which all need the codec.

Never does: I/O, transports, retries (``board``), physics.
"""
