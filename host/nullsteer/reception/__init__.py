"""What the receiver hears: signal and noise levels, and the search for the deepest null.

Owns the ITU-R P.372 noise budget (``noise``), measurement sources and the meter that
averages them (``measure``), the physics-based virtual receiver that stands in for a
radio in tests and the demo (``virtual``), real receivers named by URL
(``receivers``: rigctl, rtltcp, iqwav, the ``sim`` loopback; IQ levels by Welch's
method), the auto-null search (``autonull``), the significance of its null
(``significance``), its runner that joins a station, a board and a source
(``autonull_run``) and the follower that retunes the termination with the receiver
(``follow``; schedule rules reach it as a callable, never by import).

Never does: the board protocol's bytes, schedules, printing for the user (``cli``).
"""
