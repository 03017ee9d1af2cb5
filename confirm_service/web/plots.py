"""Pictures observers read, drawn server-side by matplotlib (Agg) as SVG.

Readable printed in grey: each site has its own line style, marker and hatching as well as a
colour (Okabe–Ito palette, safe for colour-blind readers); every axis names its unit; times are
to scale, in UTC below the axis and as MJD above it. Text stays text in the SVG
(``svg.fonttype = none``), so labels can be read, searched and checked. Every picture has a
table of the same numbers on the page as its text alternative.
"""

from __future__ import annotations

import io
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from confirm_service.services.observing_views import (
    SIGMA_BAND,
    CandidateTracks,
    ElevationTrack,
)
from confirm_service.timeutil import UNIX_EPOCH_MJD

if TYPE_CHECKING:  # matplotlib loads only when a picture is drawn
    from matplotlib.axes import Axes

SITE_STYLES = (
    ("#0072B2", "-", "o", "//"),
    ("#D55E00", "--", "s", "\\\\"),
    ("#009E73", ":", "^", ".."),
    ("#CC79A7", "-.", "D", "xx"),
    ("#56B4E9", (0, (5, 1, 1, 1)), "v", "++"),
)
"""Per site, in order: colour, line style, marker, hatch."""
TIME_LABEL = "Time (UTC)"
MJD_LABEL = "Modified Julian Date (UTC)"
WIDTH_IN = 9.0


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    matplotlib.rcParams.update(
        {
            "svg.fonttype": "none",
            "svg.hashsalt": "confirm-service",  # the same picture gives the same bytes
            "font.size": 10,
            "axes.grid": True,
            "grid.color": "#cccccc",
            "grid.linewidth": 0.6,
        }
    )
    import matplotlib.pyplot as plt

    return plt


def _dates(unix_s: Any) -> Any:
    import matplotlib.dates as mdates
    import numpy as np

    seconds = np.atleast_1d(np.asarray(unix_s, dtype=float))
    return mdates.date2num([datetime.fromtimestamp(s, UTC) for s in seconds])


def _time_axes(ax: Any, top: bool = True) -> None:
    """UTC dates below; MJD above (matplotlib date numbers count days from its epoch)."""
    import matplotlib.dates as mdates

    epoch = datetime.fromisoformat(mdates.get_epoch()).replace(tzinfo=UTC)
    offset = UNIX_EPOCH_MJD + epoch.timestamp() / 86_400.0
    locator = mdates.AutoDateLocator(tz=UTC, minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator, tz=UTC))
    if top:
        mjd = ax.secondary_xaxis("top", functions=(lambda x: x + offset, lambda m: m - offset))
        mjd.set_xlabel(MJD_LABEL)
        mjd.xaxis.get_major_formatter().set_useOffset(False)


def _svg(figure: Any) -> str:
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None})
    _pyplot().close(figure)
    return buffer.getvalue()


def _style(index: int) -> tuple[Any, ...]:
    return SITE_STYLES[index % len(SITE_STYLES)]


def frequency_against_time(data: CandidateTracks) -> str:
    """Every linked hit's frequency against time, with each site's predicted track and band."""
    plt = _pyplot()
    base = data.reference_frequency_hz
    figure, ax = plt.subplots(figsize=(WIDTH_IN, 4.6))
    for index, track in enumerate(data.tracks):
        colour, line, marker, hatch = _style(index)
        x = _dates(track.unix_s)
        centre = track.frequency_hz - base
        band = SIGMA_BAND * track.sigma_hz
        ax.fill_between(
            x,
            centre - band,
            centre + band,
            facecolor="none",
            edgecolor=colour,
            hatch=hatch,
            linewidth=0.0,
            alpha=0.45,
            label=f"{track.site}: ±{SIGMA_BAND:g}σ band",
        )
        ax.plot(
            x, centre, color=colour, linestyle=line, linewidth=1.6, label=f"{track.site}: predicted"
        )
        hits = [h for h in data.hits if h.site == track.site]
        for on_source in (True, False):
            chosen = [h for h in hits if h.on_source is on_source]
            if not chosen:
                continue
            ax.plot(
                _dates([h.unix_s for h in chosen]),
                [h.frequency_hz - base for h in chosen],
                linestyle="none",
                marker=marker,
                markersize=7,
                markeredgecolor="black",
                markerfacecolor=colour if on_source else "white",
                label=f"{track.site}: hits {'on' if on_source else 'off'}-source",
            )
    ax.set_xlabel(TIME_LABEL)
    ax.set_ylabel(f"Frequency − {base:,.3f} Hz (Hz)")
    ax.set_title("Linked hits and the predicted track per site", fontsize=11)
    _time_axes(ax)
    ax.legend(loc="best", fontsize=8, framealpha=0.9)
    return _svg(figure)


def drift_against_earth(data: CandidateTracks) -> str:
    """Observed drift of each linked hit against the drift Earth alone gives at that scan."""
    import numpy as np

    plt = _pyplot()
    figure, ax = plt.subplots(figsize=(WIDTH_IN * 0.75, 4.6))
    earth = np.array([h.earth_drift_hz_s for h in data.hits] or [0.0])
    low, high = float(earth.min()), float(earth.max())
    pad = max(0.01, 0.15 * (high - low))
    line_x = np.array([low - pad, high + pad])
    ax.plot(line_x, line_x, color="black", linestyle=":", linewidth=1.2, label="Earth's drift only")
    ax.plot(
        line_x,
        line_x + data.residual_drift_hz_s,
        color="black",
        linestyle="-",
        linewidth=1.2,
        label=f"predicted: Earth's drift {data.residual_drift_hz_s:+.4f} Hz/s",
    )
    for index, site in enumerate(dict.fromkeys(h.site for h in data.hits)):
        colour, _line, marker, _hatch = _style(index)
        chosen = [h for h in data.hits if h.site == site]
        ax.errorbar(
            [h.earth_drift_hz_s for h in chosen],
            [h.drift_hz_s for h in chosen],
            yerr=[SIGMA_BAND * h.drift_sigma_hz_s for h in chosen],
            linestyle="none",
            marker=marker,
            markersize=7,
            markeredgecolor="black",
            color=colour,
            capsize=3,
            label=f"{site}: observed (bar ±{SIGMA_BAND:g}σ)",
        )
        for h in chosen:
            ax.annotate(
                f"scan {h.observation_id}",
                (h.earth_drift_hz_s, h.drift_hz_s),
                textcoords="offset points",
                xytext=(6, 4),
                fontsize=7,
            )
    ax.set_xlabel("Earth's drift at the site and time (Hz/s)")
    ax.set_ylabel("Observed drift (Hz/s)")
    ax.set_title("Observed drift against Earth's drift, per scan", fontsize=11)
    ax.legend(loc="best", fontsize=8, framealpha=0.9)
    return _svg(figure)


def elevation_at_sites(target: str, tracks: list[ElevationTrack]) -> str:
    """The target's elevation at each site, observable windows shaded, Sun too close hatched."""
    import numpy as np

    plt = _pyplot()
    rows = max(len(tracks), 1)
    figure, axes = plt.subplots(
        rows, 1, figsize=(WIDTH_IN, 1.9 * rows + 1.0), sharex=True, layout="constrained"
    )
    axes = np.atleast_1d(axes)
    for index, (ax, track) in enumerate(zip(axes, tracks, strict=False)):
        _elevation_panel(ax, track, index)
        if index == 0:
            _time_axes(ax, top=True)
    axes[-1].set_xlabel(TIME_LABEL)
    figure.suptitle(f"{target}: elevation over the next 48 hours at each site", fontsize=11)
    return _svg(figure)


def _elevation_panel(ax: Axes, track: ElevationTrack, index: int) -> None:
    """One site's panel: windows shaded, Sun-avoidance hatched, elevation and the site limit."""
    colour, line, _marker, _hatch = _style(index)
    x = _dates(track.unix_s)
    for number, (start, end, _peak) in enumerate(track.windows):
        ax.axvspan(
            *_dates([start.timestamp(), end.timestamp()]),
            facecolor="#dddddd",
            edgecolor="#777777",
            hatch="..",
            linewidth=0.0,
            label="observable window" if number == 0 else None,
        )
    _sun_avoidance(ax, track, x)
    ax.plot(x, track.elevation_deg, color=colour, linestyle=line, linewidth=1.8, label="elevation")
    ax.axhline(
        track.min_elevation_deg,
        color="black",
        linestyle="--",
        linewidth=1.0,
        label=f"site limit {track.min_elevation_deg:g}°",
    )
    ax.set_ylim(-30, 90)
    ax.set_ylabel("Elevation (deg)")
    ax.set_title(f"{track.site} · {track.site_name}", fontsize=10, loc="left")
    ax.legend(loc="upper right", fontsize=7, framealpha=0.9, ncol=2)


def _sun_avoidance(ax: Axes, track: ElevationTrack, x: Any) -> None:
    """Hatch the times the Sun is closer than the site's avoidance angle, or say it never is."""
    close = track.sun_too_close
    if not close.any():
        ax.text(
            0.01,
            0.04,
            f"Sun never within {track.sun_avoidance_deg:g}° in these 48 h",
            transform=ax.transAxes,
            fontsize=7,
        )
        return
    ax.fill_between(
        x,
        -30,
        90,
        where=close,
        facecolor="none",
        edgecolor="#444444",
        hatch="xxx",
        linewidth=0.0,
        label=f"Sun within {track.sun_avoidance_deg:g}°",
    )
