"""Temperature coefficient: frequency regressed on a temperature record, and that record's reader."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability.drift import fit_line_ar1
from coilshift.analysis.stability.grid import UniformSeries


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


def temperature_coefficient(series: UniformSeries, time_s, temp_c, nominal_hz: float,
                            source: str = "temperature") -> TempCo:
    """Frequency vs temperature slope, Hz/degC, by least squares.

    Temperature is interpolated linearly onto the grid times; frames outside the temperature
    record are left out (no extrapolation). The uncertainty allows for AR(1) residuals as in
    :func:`fit_line_ar1`. Time-linear drift that is not thermal is not separated: if the
    temperature also trends, the coefficient absorbs it (compare with the drift figure).
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
    fit = fit_line_ar1(temp, f)
    y = f - (fit.intercept + fit.slope * (temp - fit.x_ref))
    ss_tot = float(np.sum((f[ok] - f[ok].mean()) ** 2))
    r2 = 1.0 - float(np.nansum(y ** 2)) / ss_tot if ss_tot > 0 else float("nan")
    return TempCo(hz_per_degc=fit.slope, u_hz_per_degc=fit.u_slope,
                  ppm_per_degc=fit.slope / nominal_hz * 1e6, temp_min_c=float(np.min(temp[ok])),
                  temp_max_c=float(np.max(temp[ok])), n_frames=int(ok.sum()), r_squared=r2)


def read_temperature_csv(path) -> tuple[np.ndarray, np.ndarray]:
    """Read a ``time_s,temp_c`` CSV (header row; times on the log's clock, increasing)."""
    import pandas as pd

    try:
        df = pd.read_csv(path, skipinitialspace=True)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read as CSV ({str(exc).splitlines()[0]})") from None
    cols = [c.strip() for c in df.columns]
    df.columns = cols
    if "time_s" not in cols or "temp_c" not in cols:
        raise InputError(f"{path}: needs time_s and temp_c columns")
    try:
        ts = df["time_s"].to_numpy(float)
        tc = df["temp_c"].to_numpy(float)
    except ValueError:
        raise InputError(f"{path}: non-numeric time_s or temp_c") from None
    ok = np.isfinite(ts) & np.isfinite(tc)
    ts, tc = ts[ok], tc[ok]
    if ts.size < 2:
        raise InputError(f"{path}: fewer than two temperature readings")
    if np.any(np.diff(ts) <= 0):
        raise InputError(f"{path}: time_s does not increase")
    return ts, tc
