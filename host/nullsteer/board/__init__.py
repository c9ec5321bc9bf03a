"""Talking to boards: where the antenna's relay board is reached and put on its feet.

Owns the controller (requests, retries, typed replies, flip), the ``[[device]]`` entries
of the station file, the transports chosen by URL scheme (``links/``), the firmware
bundle for one board and its deployment with mpremote. The bytes on the wire are
``nullsteer.protocol``'s.

Never does: physics, schedules, measurement, printing for the user (``cli``).
"""
