"""What a person looks at: figures and the HTML report.

Owns the matplotlib figures (``plots``, imported only when a figure is drawn) and the
self-contained HTML report with its tables (``builder``).

Never does: physics of its own (it asks ``antenna`` and ``ladder``), talking to boards.
"""
