"""Inline SVG plots of a candidate's linked detections against their predictions.

For each site: one column per linked detection (time order, not to scale in time), the
observed-minus-predicted frequency (Hz) and drift rate (Hz/s) as a dot, and the prediction's
±1σ as a bar around zero. Used by the dossier page and the coordinators' decision screen.
"""

from __future__ import annotations

from html import escape
from typing import Any

PANEL_W, PANEL_H = 640.0, 190.0
PANEL_LEFT, PANEL_RIGHT, PANEL_TOP, PANEL_BOTTOM = 96.0, 16.0, 26.0, 40.0


def tick(value: float) -> str:
    """An axis label: whole numbers with separators from 100 up, else three digits."""
    return f"{value:+,.0f}" if abs(value) >= 100 else f"{value:+.3g}"


def residual_panel(title: str, unit: str, rows: list[tuple[str, float, float]]) -> str:
    """An SVG of observed minus predicted, one column per detection, with the ±1σ bar.

    ``rows`` are (label, observed - predicted, sigma) in ``unit``; columns are evenly spaced,
    in time order, not to scale in time.
    """
    extent = max([abs(r) for _, r, _ in rows] + [s for _, _, s in rows]) * 1.15 or 1.0
    plot_w = PANEL_W - PANEL_LEFT - PANEL_RIGHT
    plot_h = PANEL_H - PANEL_TOP - PANEL_BOTTOM

    def y_of(value: float) -> float:
        return PANEL_TOP + plot_h / 2 - value / extent * plot_h / 2

    zero = y_of(0.0)
    parts = [
        f'<svg viewBox="0 0 {PANEL_W:.0f} {PANEL_H:.0f}" width="{PANEL_W:.0f}" '
        f'height="{PANEL_H:.0f}" role="img" aria-label="{escape(title)}">',
        f"<title>{escape(title)}</title>",
        f'<text x="{PANEL_LEFT}" y="16" font-size="13" font-weight="600">{escape(title)}</text>',
        f'<rect x="{PANEL_LEFT}" y="{PANEL_TOP}" width="{plot_w}" height="{plot_h}" '
        'fill="none" stroke="#9aa0a6"/>',
        f'<line x1="{PANEL_LEFT}" x2="{PANEL_LEFT + plot_w}" y1="{zero:.1f}" y2="{zero:.1f}" '
        'stroke="#1f5f99" stroke-dasharray="5 3"/>',
    ]
    for value in (extent, 0.0, -extent):
        label = "predicted" if value == 0.0 else f"{tick(value)} {unit}"
        parts.append(
            f'<text x="{PANEL_LEFT - 6}" y="{y_of(value) + 4:.1f}" font-size="11" '
            f'text-anchor="end">{escape(label)}</text>'
        )
    step = plot_w / len(rows)
    for index, (label, residual, sigma) in enumerate(rows):
        x = PANEL_LEFT + (index + 0.5) * step
        top, bottom = y_of(sigma), y_of(-sigma)
        parts += [
            f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{top:.1f}" y2="{bottom:.1f}" '
            'stroke="#1f5f99" stroke-width="2"/>',
            f'<line x1="{x - 6:.1f}" x2="{x + 6:.1f}" y1="{top:.1f}" y2="{top:.1f}" '
            'stroke="#1f5f99" stroke-width="2"/>',
            f'<line x1="{x - 6:.1f}" x2="{x + 6:.1f}" y1="{bottom:.1f}" y2="{bottom:.1f}" '
            'stroke="#1f5f99" stroke-width="2"/>',
            f'<circle cx="{x:.1f}" cy="{y_of(residual):.1f}" r="4.5" fill="#b3261e"/>',
            f'<text x="{x:.1f}" y="{PANEL_H - 22}" font-size="10.5" text-anchor="middle">'
            f"{escape(label)}</text>",
        ]
    parts.append("</svg>")
    return "".join(parts)


def site_residual_panels(comparisons: list[dict[str, Any]]) -> dict[str, str]:
    """Per site: frequency and drift rate of each linked detection against its prediction."""
    panels: dict[str, str] = {}
    for site in sorted({row["site"] for row in comparisons}):
        rows = sorted((r for r in comparisons if r["site"] == site), key=lambda r: r["time"])
        labels = [f"{r['detection']} · {r['time'][5:16].replace('T', ' ')}" for r in rows]
        frequency = [
            (
                label,
                r["observed_frequency_hz"] - r["predicted_frequency_hz"],
                r["frequency_sigma_hz"],
            )
            for label, r in zip(labels, rows, strict=True)
        ]
        drift = [
            (label, r["observed_drift_hz_s"] - r["predicted_drift_hz_s"], r["drift_sigma_hz_s"])
            for label, r in zip(labels, rows, strict=True)
        ]
        panels[site] = residual_panel(
            f"{site}: frequency, observed minus predicted", "Hz", frequency
        ) + residual_panel(f"{site}: drift rate, observed minus predicted", "Hz/s", drift)
    return panels
