"""Rendering: the recording carries the scripted frequencies, markers, clock error and quantisation."""

from __future__ import annotations

import json
import tracemalloc

import numpy as np
import pytest
import soundfile as sf

from coilshift.logger.runfolder.markers import check_within, read_markers
from coilshift.sim.render import TAIL_S, blocks, markers_for, plan, render_array, simulate, truth_for
from coilshift.sim.script import parse_script
from sim_helpers import script_dict, zero_crossing_freq_hz

FS = 48000.0


def _hold(x, marker, fs=FS, scale=1.0):
    a, b = int(marker.start_s * fs) + 1, int(marker.end_s * fs) - 1
    return x[a:b]


def test_frequency_over_time_matches_script():
    # 11 kHz at 48 kHz: the second harmonic (22 kHz) is above the 0.45 fs anti-alias cutoff, so
    # the signal is a sinusoid and zero crossings count its cycles.
    s = parse_script(script_dict(), "t")
    x = render_array(s)
    p = plan(s)
    truth = truth_for(p)
    # Source: the script itself: steel A = -6 Hz, R = 50 mm at 10 mm -> A (R^2/(R^2+d^2))^3
    want_shift = [0.0, -6.0 * (2500 / 2600) ** 3, 4.0]
    for m, seg, want in zip(markers_for(p), truth["segments"], want_shift):
        f = zero_crossing_freq_hz(_hold(x, m), FS)
        # zero-crossing timing noise at -90 dBFS is ~1e-9 s over a 1 s hold: allow 1 mHz
        assert f == pytest.approx(11000.0 + want, abs=1e-3), m
        assert seg["shift_hz"] == pytest.approx(want, abs=1e-12)


def test_warmup_and_drift_follow_script():
    # a 2 kHz sinusoid: linear interpolation misplaces a crossing by ~1e-8 s, so whole cycles over
    # their duration give the mean frequency to ~1e-4 Hz
    d = script_dict(oscillator={"freq_hz": 2000.0, "warmup_hz": 2.0, "warmup_tau_s": 1.0},
                    recording={"max_harmonic": 1},
                    session={"move_s": 0.0, "steps": [{"target": "baseline", "hold_s": 1.0},
                                                       {"target": "baseline", "hold_s": 1.0},
                                                       {"target": "baseline", "hold_s": 1.0}]})
    s = parse_script(d, "t")
    x = render_array(s)
    for k, m in enumerate(markers_for(plan(s))):
        # mean of 2 exp(-t/1 s) over [k, k+1] s = 2 (e^-k - e^-(k+1)) (integral of an exponential)
        want = 2000.0 + 2.0 * (np.exp(-k) - np.exp(-(k + 1)))
        assert zero_crossing_freq_hz(_hold(x, m), FS, mean=True) == pytest.approx(want, abs=2e-3)


def test_quantised_to_16_bits():
    d16 = script_dict(recording={"noise_dbfs": -200, "bits": 16})
    d24 = script_dict(recording={"noise_dbfs": -200, "bits": 24})
    x16 = render_array(parse_script(d16, "a"))
    x24 = render_array(parse_script(d24, "b"))
    codes = x16 * 32768
    assert np.array_equal(codes, np.round(codes))
    # Source: uniform quantisation noise of step q has rms q/sqrt(12) (Widrow's model),
    # q = 2^-15 for 16 bits read back as float; the 24-bit render stands in for the exact signal
    err = np.std(x16 - x24)
    assert err == pytest.approx(2.0 ** -15 / np.sqrt(12), rel=0.05)


def test_clock_ppm_moves_frequency_and_markers(tmp_path):
    d = script_dict(recording={"clock_ppm": 100.0})
    s = parse_script(d, "t")
    p = plan(s)
    x = render_array(s)
    m = markers_for(p)
    # Source: a card clock fast by 100 ppm takes 1.0001 x the nominal samples per true second;
    # read at the nominal rate every frequency shows divided by 1.0001
    f = zero_crossing_freq_hz(_hold(x, m[0]), FS)
    assert f == pytest.approx(11000.0 / 1.0001, abs=1e-3)
    # markers stay on the session's (true) clock, and fit inside the file on either time axis
    assert m[-1].end_s == pytest.approx(s.duration_s)
    assert len(x) == round((s.duration_s + TAIL_S) * FS * 1.0001)
    check_within(m, len(x) / FS / 1.0001)
    check_within(m, len(x) / FS)


@pytest.mark.parametrize("enc", ["wav", "flac"])
def test_files_written_and_markers_within_duration(tmp_path, enc):
    s = parse_script(script_dict(recording={"encoding": enc}), "t")
    out = simulate(s, tmp_path)
    info = sf.info(out["recording"])
    assert info.samplerate == 48000 and info.channels == 1 and info.subtype == "PCM_16"
    markers = read_markers(tmp_path / "markers.csv")
    check_within(markers, info.frames / info.samplerate)
    assert [m.target for m in markers] == ["baseline", "steel", "alu"]
    truth = json.loads((tmp_path / "truth.json").read_text())
    assert truth["synthetic"] is True and truth["seed"] == 1
    assert truth["targets"]["steel"]["class"] == "ferrous"
    assert truth["targets"]["alu"]["class"] == "non-ferrous"
    data, _ = sf.read(out["recording"], dtype="float64")
    assert np.array_equal(data, render_array(s))
    assert not list(tmp_path.glob(".*tmp"))


def test_deterministic_with_seed_and_block_size():
    s = parse_script(script_dict(oscillator={"freq_hz": 11000.0, "white_fm_hz": 0.01, "random_walk_hz": 0.01},
                                 recording={"noise_dbfs": -60}), "t")
    a = render_array(s, block_frames=65536)
    b = render_array(s, block_frames=7001)
    assert np.array_equal(a, b)
    other = parse_script(script_dict(seed=2, oscillator={"freq_hz": 11000.0, "white_fm_hz": 0.01},
                                     recording={"noise_dbfs": -60}), "u")
    assert not np.array_equal(a, render_array(other))


def test_memory_bounded_by_block_size(tmp_path):
    def peak(seconds):
        d = script_dict(session={"steps": [{"target": "baseline", "hold_s": seconds}]})
        p = plan(parse_script(d, "t"))
        tracemalloc.start()
        for _ in blocks(p, block_frames=4096):
            pass
        _, top = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        return top

    short, long_ = peak(2.0), peak(40.0)
    # 40 s of float64 audio would be 15 MB; streaming keeps the peak at a few blocks
    assert long_ < short + 256 * 1024
    assert long_ < 2 * 1024 * 1024


def test_alias_and_prescaler_paths():
    # 40 kHz straight into a 48 kHz card without an anti-alias filter shows at 8 kHz
    # (second Nyquist zone: frequency rises show as falls)
    d = script_dict(oscillator={"freq_hz": 40000.0}, recording={"anti_alias": False, "max_harmonic": 1})
    s = parse_script(d, "t")
    x = render_array(s)
    m = markers_for(plan(s))
    assert zero_crossing_freq_hz(_hold(x, m[0]), FS) == pytest.approx(8000.0, abs=1e-3)
    assert zero_crossing_freq_hz(_hold(x, m[2]), FS) == pytest.approx(8000.0 - 4.0, abs=1e-3)
    t = truth_for(plan(s))
    assert t["oscillator"]["nyquist_zone"] == 2
    assert t["segments"][2]["apparent_shift_hz"] == pytest.approx(-4.0, abs=1e-6)
    # 176 kHz through a divide-by-16 prescaler reaches the line-in at 11 kHz, shifts divided by 16
    d = script_dict(oscillator={"freq_hz": 176000.0, "prescaler": 16},
                    targets={"alu": {"peak_shift_hz": 64.0, "coil_radius_mm": 50},
                             "steel": {"peak_shift_hz": -6.0, "coil_radius_mm": 50}})
    s = parse_script(d, "t")
    x = render_array(s)
    m = markers_for(plan(s))
    assert zero_crossing_freq_hz(_hold(x, m[2]), FS) == pytest.approx(11000.0 + 4.0, abs=1e-3)


def test_clipping_and_hum():
    d = script_dict(recording={"level_dbfs": 6.0, "hum": {"mains_hz": 50, "level_dbfs": -40}})
    x = render_array(parse_script(d, "t"))
    assert x.max() == pytest.approx(1 - 2 ** -15) and x.min() == -1.0
    d = script_dict(recording={"level_dbfs": -200, "noise_dbfs": -200,
                               "hum": {"mains_hz": 60, "level_dbfs": -40}})
    x = render_array(parse_script(d, "t"))
    n = 48000
    spec = np.abs(np.fft.rfft(x[:n])) / (n / 2)
    # hum at 60 Hz, 0.01 amplitude, and its third harmonic at half that
    assert spec[60] == pytest.approx(0.01, rel=1e-3)
    assert spec[180] == pytest.approx(0.005, rel=1e-2)


def test_coil_and_physical_targets_drive_the_tone():
    # The oscillator runs at the coil's LC frequency and a physical target shifts it by the
    # simulator's own truth (coilshift.sim.response; checked against the analysis' prediction and
    # published values in tests/sim/test_response.py and test_truth.py); here the zero-crossing
    # count of the rendered tone must show both.
    from coilshift.analysis.models.coil import analyse_coil, design_from_dict
    from coilshift.analysis.models.target import parse_target_spec, predicted_shift_hz
    from coilshift.sim.response import build_responses

    coil = {"turns": 32, "inner_diameter_mm": 200, "length_mm": 7, "depth_mm": 7, "awg": 25, "cap_nf": 270}
    d = script_dict(oscillator={"coil": coil}, recording={"max_harmonic": 1},
                    targets={"alu": {"material": "aluminium", "diameter_mm": 25}},
                    session={"move_s": 0.2, "steps": [{"target": "baseline", "hold_s": 1.0},
                                                       {"target": "alu", "distance_mm": 20, "hold_s": 1.0}]})
    d["oscillator"].pop("freq_hz")
    s = parse_script(d, "t")
    p = plan(s)
    truth = truth_for(p)
    l_uh = truth["oscillator"]["inductance_uh"]
    # one L for the tone, the target's response and truth.json
    assert p.responses["alu"].params["inductance_uh"] == l_uh
    # Thomson's formula f = 1/(2 pi sqrt(L C)) written here, with C the 270 nF capacitor alone
    f0 = 1.0 / (2.0 * np.pi * np.sqrt(l_uh * 1e-6 * 270e-9))
    assert s.oscillator.freq_hz == pytest.approx(f0, rel=1e-12)
    report = analyse_coil(design_from_dict(coil))
    # the analysis' L (thin-ring formula, 1 % by docs/models.md) moves its f by at most 1/2 %
    assert f0 == pytest.approx(report.lc_freq_hz, rel=0.005)
    shift = float(build_responses(s)["alu"].shift_hz(np.array([20.0]))[0])
    # the analysis' prediction agrees within its thin-ring inductance formula's stated 1 %
    model = float(predicted_shift_hz(report, parse_target_spec("aluminium:diameter_mm=25"), [20.0],
                                     report.lc_freq_hz)[0])
    assert shift == pytest.approx(model, rel=0.01)
    assert shift > 1.0  # a conductor raises the frequency by a measurable amount here
    x = render_array(s)
    m = markers_for(p)
    assert zero_crossing_freq_hz(_hold(x, m[0]), FS) == pytest.approx(f0, abs=1e-3)
    assert zero_crossing_freq_hz(_hold(x, m[1]), FS) == pytest.approx(f0 + shift, abs=1e-3)


def test_progress_hears_the_audio_written_block_by_block(tmp_path):
    s = parse_script(script_dict(), "t")
    heard = []
    simulate(s, tmp_path, progress=lambda done, total: heard.append((done, total)))
    info = sf.info(tmp_path / "recording.wav")
    total = info.frames / info.samplerate
    assert heard and all(t == pytest.approx(total) for _, t in heard)
    done = [d for d, _ in heard]
    assert done == sorted(done) and done[-1] == pytest.approx(total)


def test_simulate_command_draws_its_bar_on_a_terminal_only(tmp_path, capsys, monkeypatch):
    from ttystream import on_a_terminal

    from coilshift.cli.main import main

    script = tmp_path / "s.json"
    script.write_text(json.dumps(script_dict()))
    assert main(["simulate", str(script), "-o", str(tmp_path / "a")]) == 0
    assert capsys.readouterr().err.count("\r") == 0  # captured stderr is not a terminal
    tty = on_a_terminal(monkeypatch)
    assert main(["simulate", str(script), "-o", str(tmp_path / "b"), "--json"]) == 0
    json.loads(capsys.readouterr().out)  # stdout stays one JSON object
    assert "rendering [" in tty.getvalue() and "100.0%" in tty.getvalue()
    quiet = on_a_terminal(monkeypatch)
    assert main(["simulate", str(script), "-o", str(tmp_path / "c"), "--quiet"]) == 0
    assert "rendering" not in quiet.getvalue()
