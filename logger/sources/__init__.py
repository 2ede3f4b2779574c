"""Signal sources with one interface: audio files, oscilloscope CSV exports, a synthetic
oscillator and the soundcard. May import :mod:`coilshift.logger.runfolder` and the shared helpers."""
