"""Tracker settings: checks, the check against the sample rate, the run.json form."""

import json

import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.tracking.settings import TrackerSettings
from coilshift.logger.tracking.tracker import FrameTracker

FS = 48000.0


@pytest.mark.parametrize(
    "kwargs, words",
    [
        (dict(hop_ms=100.0), "hop"),
        (dict(frame_ms=-1.0), "frame"),
        (dict(band_hz=(3000.0, 1000.0)), "band"),
        (dict(clip_level=1.5), "clip_level"),
    ],
)
def test_invalid_settings_raise_input_error(kwargs, words):
    with pytest.raises(InputError, match=words):
        TrackerSettings(**kwargs)


@pytest.mark.parametrize(
    "kwargs, words",
    [
        (dict(band_hz=(1000.0, 30000.0)), "half the sample rate"),
        (dict(frame_ms=10.0, hop_ms=5.0, band_hz=(100.0, 2000.0)), "cycles"),
        (dict(near_hz=25000.0), "near_hz"),
        (dict(band_hz=(1000.0, 2000.0), near_hz=5000.0), "outside"),
    ],
)
def test_settings_checked_against_sample_rate(kwargs, words):
    with pytest.raises(InputError, match=words):
        FrameTracker(FS, TrackerSettings(**kwargs))


def test_settings_to_dict_is_json_ready():
    s = TrackerSettings(band_hz=[900, 1100], near_hz=1000.0, refine=True)
    d = json.loads(json.dumps(s.to_dict()))
    assert d["band_hz"] == [900.0, 1100.0] and d["refine"] is True and d["frame_ms"] == 85.0
    assert TrackerSettings(**{**d, "band_hz": tuple(d["band_hz"])}) == s


def test_fine_estimator_default_and_run_json():
    # the default is the exact-kernel Aboutanios-Mulgrew step; run.json always records the choice
    assert TrackerSettings().fine_estimator == "aboutanios-mulgrew"
    d = json.loads(json.dumps(TrackerSettings(fine_estimator="quinn2").to_dict()))
    assert d["fine_estimator"] == "quinn2"
    assert TrackerSettings().to_dict()["fine_estimator"] == "aboutanios-mulgrew"
    assert TrackerSettings(**d) == TrackerSettings(fine_estimator="quinn2")


def test_unknown_fine_estimator_names_the_setting_and_the_choices():
    with pytest.raises(InputError) as info:
        TrackerSettings(fine_estimator="jacobsen")
    text = str(info.value)
    assert "fine_estimator" in text and "'jacobsen'" in text
    for name in ("aboutanios-mulgrew", "candan2013", "quinn2", "macleod3", "grandke-hann"):
        assert name in text
    # the command line renders the marker as an option, as for every other setting
    assert "--fine-estimator" in info.value.render(lambda s: "--" + s.replace("_", "-"))
