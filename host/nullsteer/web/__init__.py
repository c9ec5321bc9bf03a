"""The control page: ``nullsteer serve``'s web service and the page it serves.

This folder owns the service that keeps one controller per ``[[device]]`` of a station
file (:mod:`.desk`: state, commands through :mod:`nullsteer.board.commands`, live
events, the schedule's next actions, auto-null runs), the HTTP layer with its safety
checks and the JSON API under ``/api/`` (:mod:`.server`), the azimuth picture drawn from
the antenna model (:mod:`.pattern`), and the page itself (``static/``: HTML, CSS and
JavaScript shipped as package data). It never talks protocol bytes and has no physics of
its own.
"""
