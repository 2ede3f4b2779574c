"""The run folder, the one file format of coilshift: the log.csv column table, frame tables,
run.json, markers.csv, frame flags, run and output folders, crash-safe writing and reading.
Imports only the standard library, NumPy, pandas and :mod:`coilshift.logger.errors`."""
