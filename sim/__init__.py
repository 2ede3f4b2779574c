"""Detector simulator: synthesises recordings with a known truth (for the demo and the tests)."""
