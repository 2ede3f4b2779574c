"""Every command-line option that two or more commands share, defined once, and the map from
library setting names to the options that set them.

Library code raises :class:`~coilshift.logger.errors.InputError` messages that name settings
(``clock_ppm``); :func:`option_for` turns a setting into the option a user types
(``--clock-ppm``). A setting whose option is not simply ``--`` plus its name with dashes is listed
in :data:`SETTING_OPTIONS`.
"""

from __future__ import annotations

#: setting name -> the option that sets it, where the rule "--" + name-with-dashes does not hold
SETTING_OPTIONS: dict[str, str] = {
    "out_dir": "-o/--out",
}


def option_for(setting_name: str) -> str:
    """The command-line option that sets ``setting_name`` (``clock_ppm`` -> ``--clock-ppm``)."""
    return SETTING_OPTIONS.get(setting_name, "--" + setting_name.replace("_", "-"))
