"""Antenna physics: geometry, thin-wire MoM, ground, port reduction, feedline, metrics.

Pure numpy; no I/O or printing lives in this package.
"""
