"""The station file and what it says about the site.

Owns the TOML readers that turn bad input into a one-line ``ConfigError`` (``config``),
the site (position, time zone), the fed-end and bearing rules, and the presets.

Never does: physics, I/O beyond reading the station file, talking to boards.
"""
