"""Events without markers: where the frequency leaves its baseline and comes back (a target passed by
hand, swept past the coil, or left for a while). A streaming detector in pure NumPy (one frame
block at a time, so the live capture and the batch analysis run the same code), its false-event
threshold, the measurement of each event with an honest uncertainty, and the events.csv format.
May import logger.errors and logger.textfile; never the analysis side."""
