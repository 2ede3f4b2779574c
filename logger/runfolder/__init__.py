"""The run folder, the one file format of coilshift: log.csv columns, run.json, markers.csv,
frame flags, crash-safe writing and reading. Imports only the standard library, NumPy, pandas
and :mod:`coilshift.logger.errors`."""
