"""What the receiver hears: signal and noise levels, and the search for the deepest null.

Owns the ITU-R P.372 noise budget (``noise``), measurement sources and the meter that
averages them (``measure``), the physics-based virtual receiver that stands in for a
radio in tests and the demo (``virtual``), the auto-null search (``autonull``) and its
runner that joins a station, a board and a source (``autonull_run``).

Never does: the board protocol's bytes, schedules, printing for the user (``cli``).
"""
