"""Events outputs: the text table, events.csv, events.json, the plot and a one-file HTML report."""

from __future__ import annotations

import csv
import html
import io
import json
import os
from pathlib import Path
from typing import Callable

from coilshift.analysis.events.find import EventsResult
from coilshift.logger.runfolder.atomic import to_jsonable, write_text_atomic
from coilshift.analysis.report.cells import cell_text

COLUMNS = ("event", "start_s", "end_s", "duration_s", "peak_t_s", "peak_shift_hz", "peak_u_hz", "ci95_lo_hz",
           "ci95_hi_hz", "sign", "class", "strength", "baseline_before_hz", "baseline_after_hz")



def events_summary(res: EventsResult) -> dict:
    """Everything the command prints with ``--json``."""
    s = res.settings
    return {"run": res.source, "duration_s": res.duration_s, "quiet_s": res.quiet_s, "hop_s": res.hop_s,
            "detector": {"method": "moving average minus a trailing baseline line, thresholded at the level "
                                   "whose crossing rate gives the stated false-event rate",
                         "false_per_hour": s.false_per_hour, "level_sigma": res.level,
                         "noise_hz": res.noise.sigma_hz, "noise_lag1_correlation": res.noise.rho1,
                         "smooth_s": s.smooth_s, "polarity": s.polarity,
                         "expected_false_events_bound": res.expected_false},
            "events": [dict(event=i + 1, **ev.to_dict()) for i, ev in enumerate(res.events)],
            "warnings": list(res.warnings)}


def events_csv(res: EventsResult) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for i, ev in enumerate(res.events):
        lo, hi = ev.ci95_hz
        w.writerow([i + 1, cell_text(ev.start_s, "{:.3f}"), cell_text(ev.end_s, "{:.3f}"), cell_text(ev.duration_s, "{:.3f}"),
                    cell_text(ev.peak_t_s, "{:.3f}"), cell_text(ev.peak_shift_hz, "{:.6f}"), cell_text(ev.peak_u_hz, "{:.6f}"),
                    cell_text(lo, "{:.6f}"), cell_text(hi, "{:.6f}"), ev.sign, ev.kind, cell_text(ev.strength, "{:.3g}"),
                    cell_text(ev.baseline_before_hz, "{:.6f}"), cell_text(ev.baseline_after_hz, "{:.6f}")])
    return buf.getvalue()


def detector_line(res: EventsResult) -> str:
    return (f"detector: at most {res.settings.false_per_hour:g} false event(s) per hour of quiet baseline; level "
            f"{res.level:.2f} x the statistic's noise {res.noise.sigma_hz:.3g} Hz (its {res.settings.smooth_s:g} s "
            f"moving average); {res.quiet_s:.0f} s of {res.duration_s:.0f} s quiet")


def summary_lines(res: EventsResult) -> list[str]:
    """The text summary: the detector's level, then one line per event."""
    lines = [f"{res.name}: {len(res.events)} event(s)", "  " + detector_line(res)]
    if res.events:
        lines.append(f"  {'#':>3} {'start s':>9} {'end s':>9} {'dur s':>6} {'peak shift Hz':>24} {'x noise':>8}  class")
    for i, ev in enumerate(res.events):
        lines.append(f"  {i + 1:>3} {ev.start_s:9.2f} {ev.end_s:9.2f} {ev.duration_s:6.2f} "
                     f"{ev.peak_shift_hz:+12.4g} +- {1.96 * ev.peak_u_hz:<9.2g} {ev.strength:8.1f}  {ev.kind}")
    lines += [f"  warning: {w}" for w in res.warnings]
    return lines


HOWTO = ("Each event is a stretch where the frequency left its baseline and came back; it is shaded in the plot "
         "(red: frequency fell, ferrous with normal polarity; blue: rose, non-ferrous; grey: indeterminate).",
         "Peak shift: the largest departure from the baseline line drawn under the event, with its 95 % interval "
         "(1.96 standard uncertainties from the frames' measured variogram, whatever the noise's colour).",
         "x noise: the peak over the detector statistic's noise; events are found down to about the level shown "
         "in the detector line, with at most the stated rate of false events on quiet baseline.")


def report_html(res: EventsResult, png: bytes) -> str:
    from coilshift.analysis.report.html_page import howto, img, page, provenance, table

    rows = [[i + 1, f"{ev.start_s:.2f}", f"{ev.end_s:.2f}", f"{ev.duration_s:.2f}", f"{ev.peak_shift_hz:+.4g}",
             f"{1.96 * ev.peak_u_hz:.2g}", f"{ev.strength:.1f}", ev.kind] for i, ev in enumerate(res.events)]
    body = [howto(HOWTO), f"<p>{html.escape(detector_line(res))}</p>", img(png, "events"),
            table(["#", "start s", "end s", "duration s", "peak shift Hz", "+- (95 %) Hz", "x noise", "class"], rows,
                  numeric=("#", "start s", "end s", "duration s", "peak shift Hz", "+- (95 %) Hz", "x noise"))
            or "<p>No event found.</p>"]
    body += [f"<p class='caution'>{html.escape(w)}</p>" for w in res.warnings]
    return page(f"Events in {res.name}", provenance([res.source]), body)


def write_events_outputs(res: EventsResult, out_dir: str | os.PathLike,
                         progress: Callable[[str], None] | None = None) -> None:
    """events.csv, events.json, events.png and report.html into ``out_dir`` (atomic files);
    ``progress`` is called with a few words as each stage begins."""
    say = progress or (lambda text: None)
    say("writing the tables")
    out = Path(out_dir)
    write_text_atomic(out / "events.csv", events_csv(res))
    write_text_atomic(out / "events.json", json.dumps(to_jsonable(events_summary(res)), indent=2) + "\n")
    say("drawing the plot")
    from coilshift.analysis.report.plots_events import plot_events  # matplotlib: loaded only to draw

    png = plot_events(res, out / "events.png")
    say("writing the report")
    write_text_atomic(out / "report.html", report_html(res, png))
