"""Coil and target models: inductance (Wheeler, current sheet), wire tables, the 555 astable,
materials and target responses. Pure computation; may import only :mod:`coilshift.logger.errors`
and the user-file reader."""
