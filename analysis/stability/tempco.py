"""Temperature coefficient: frequency regressed on a temperature record (generalised least squares
under the record's noise model), and that record's reader."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError
from coilshift.logger.textfile import require_regular_file

from coilshift.analysis.stability.blocks import Blocks, block_length
from coilshift.analysis.stability.gls import Whitener, gls_fit
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.noise_model import NoiseModel


#: the temperatures a reading may give (absolute zero to a soldering iron's), and the largest
#: time (the log's own limit, about 300 years)
TEMP_RANGE_C = (-273.15, 1000.0)
MAX_TIME_S = 1e10


@dataclass
class TempCo:
    """Temperature coefficient from regressing frequency on temperature."""

    hz_per_degc: float
    u_hz_per_degc: float
    ppm_per_degc: float
    temp_min_c: float
    temp_max_c: float
    n_frames: int
    r_squared: float
    note: str = ""  # why the uncertainty is not determined (empty when it is)


def temperature_coefficient(series: UniformSeries, time_s, temp_c, nominal_hz: float, noise: NoiseModel,
                            frame_s: float | None = None, source: str = "temperature") -> TempCo:
    """Frequency vs temperature slope, Hz/degC, by generalised least squares.

    Temperature is interpolated linearly onto the grid times; frames outside the temperature
    record are left out (no extrapolation). Frequency is regressed on temperature over block
    means weighted by the record's noise model (white FM plus random-walk FM, :mod:`.gls`), so
    the uncertainty allows for the oscillator's slow wander. Time-linear drift that is not
    thermal is not separated: if the temperature also trends, the coefficient absorbs it
    (compare with the drift figure). The uncertainty is NaN when it is not determined.
    """
    ts = np.asarray(time_s, float)
    tc = np.asarray(temp_c, float)
    t = series.t_s
    inside = (t >= ts[0]) & (t <= ts[-1])
    temp = np.where(inside, np.interp(t, ts, tc), np.nan)
    f = np.where(np.isfinite(temp), series.freq_hz, np.nan)
    ok = np.isfinite(f)
    if ok.sum() < 3:
        raise InputError(f"{source}: fewer than three frames fall inside the temperature record")
    if np.ptp(temp[ok]) <= 0:
        raise InputError(f"{source}: the temperature does not change over the log; no coefficient")
    sub = UniformSeries(series.t0_s, series.tau0_s, f, series.n_frames, series.n_unusable, series.n_missing,
                        series.jitter_rms)
    blocks = Blocks(sub, block_length(f.size, series.tau0_s, frame_s))
    t_mean = blocks.means(temp)
    slope, u = math.nan, math.nan
    sw2, sr2 = noise.sample_variances(series.tau0_s)
    if blocks.n >= 3 and np.isfinite(sw2 + sr2) and sw2 + sr2 > 0 and np.ptp(t_mean) > 0:
        w = Whitener(blocks.covariance_parts(), sw2, sr2)
        beta, cov, _ = gls_fit(w.whiten(np.column_stack([np.ones(blocks.n), t_mean - t_mean.mean()])),
                               w.whiten(blocks.mean_hz - blocks.mean_hz.mean()))
        slope = float(beta[1])
        u = float(np.sqrt(cov[1, 1])) if np.isfinite(cov[1, 1]) and cov[1, 1] > 0 else math.nan
    note = ""
    if not math.isfinite(slope):  # too few blocks for the weighted fit: ordinary least squares, no error
        slope = float(np.polyfit(temp[ok], f[ok], 1)[0])
        note = f"too few usable blocks ({blocks.n}) or no noise model for a weighted fit"
    elif not math.isfinite(u):
        note = "the temperature does not vary independently of the fit's other terms"
    resid = f[ok] - f[ok].mean() - slope * (temp[ok] - temp[ok].mean())
    ss_tot = float(np.sum((f[ok] - f[ok].mean()) ** 2))
    r2 = 1.0 - float(np.sum(resid ** 2)) / ss_tot if ss_tot > 0 else float("nan")
    return TempCo(hz_per_degc=slope, u_hz_per_degc=u,
                  ppm_per_degc=slope / nominal_hz * 1e6, temp_min_c=float(np.min(temp[ok])),
                  temp_max_c=float(np.max(temp[ok])), n_frames=int(ok.sum()), r_squared=r2, note=note)


def read_temperature_csv(path) -> tuple[np.ndarray, np.ndarray]:
    """Read a ``t_s,temp_c`` CSV (header row; times on the log's clock, increasing; the older
    column name ``time_s`` is accepted too)."""
    import pandas as pd

    require_regular_file(path, "temperature CSV")  # a named pipe would block the reader for ever
    try:
        df = pd.read_csv(path, skipinitialspace=True)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read as CSV ({str(exc).splitlines()[0]})") from None
    cols = [c.strip() for c in df.columns]
    df.columns = cols
    tcol = "t_s" if "t_s" in cols else "time_s"
    if tcol not in cols or "temp_c" not in cols:
        raise InputError(f"{path}: needs t_s and temp_c columns")
    try:
        ts = df[tcol].to_numpy(float)
        tc = df["temp_c"].to_numpy(float)
    except ValueError:
        raise InputError(f"{path}: non-numeric {tcol} or temp_c") from None
    ok = np.isfinite(ts) & np.isfinite(tc)
    ts, tc = ts[ok], tc[ok]
    if ts.size < 2:
        raise InputError(f"{path}: fewer than two temperature readings")
    if np.any(np.diff(ts) <= 0):
        raise InputError(f"{path}: {tcol} does not increase")
    for name, v, lo, hi in ((tcol, ts, -MAX_TIME_S, MAX_TIME_S), ("temp_c", tc, *TEMP_RANGE_C)):
        bad = (v < lo) | (v > hi)  # a damaged cell: the regression would overflow on it
        if bad.any():
            raise InputError(f"{path}: {name} {v[np.argmax(bad)]:g} is out of range ({lo:g} .. {hi:g})")
    return ts, tc
