"""Time: when the null flips.

Owns the solar position algorithm (``solar``), sunrise/sunset and twilight events at a
place (``sun``), the station file's ``[[rule]]`` entries and the plan of coming actions
(``rules``), and the long-running service that applies them to the boards (``service``).

Never does: physics, the board protocol's bytes, measurement.
"""
