"""Coil and target models: inductance formulas (Wheeler, current sheet) and the choice among them
for a winding, wire tables, the 555 astable, materials, target responses and the finite-winding
law the calibration fits use (:mod:`.windinglaw`). Pure computation;
may import only :mod:`coilshift.logger.errors` and the user-file reader."""
