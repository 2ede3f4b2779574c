"""Capture side of coilshift: sources -> frequency tracker -> shift log writer.

Nothing in this package imports :mod:`coilshift.analysis`.
"""
