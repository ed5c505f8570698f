"""An inline SVG chart of a simulated charge: voltage, current and state of charge against
time, the stages marked. Drawn from the physics time series; no scripts, no external assets."""

from __future__ import annotations

from html import escape

import numpy as np

__all__ = ["svg_chart"]

_W, _H = 680, 420  # viewBox
_LEFT, _RIGHT, _TOP = 64, 16, 28
_PANEL, _GAP = 104, 18


def _ticks(low: float, high: float, count: int = 4) -> list[float]:
    if high <= low:
        high = low + 1.0
    raw = (high - low) / count
    magnitude = 10 ** np.floor(np.log10(raw))
    step = min((m * magnitude for m in (1, 2, 2.5, 5, 10) if m * magnitude >= raw),
               default=raw)
    start = np.ceil(low / step) * step
    return [float(v) if abs(v) > step * 1e-9 else 0.0
            for v in np.arange(start, high + step * 1e-6, step)]


def svg_chart(series: dict[str, np.ndarray], stage_labels: list[str]) -> str:
    """The chart as an ``<svg>`` element (text already escaped)."""
    t_h = np.asarray(series["time_s"], dtype=float) / 3600.0
    if t_h.size < 2:
        return ""
    panels = [
        ("voltage", "Voltage (V)", np.asarray(series["voltage_v"], dtype=float), "#1f4e79"),
        ("current", "Current (A)", np.asarray(series["current_a"], dtype=float), "#8a3b12"),
        ("soc", "State of charge (%)", np.asarray(series["soc"], dtype=float) * 100, "#2e6b30"),
    ]
    span = max(t_h[-1], 1e-6)
    plot_w = _W - _LEFT - _RIGHT

    def x(t: float) -> float:
        return _LEFT + plot_w * t / span

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_W} {_H}" role="img" '
           'aria-label="Simulated charge: voltage, current and state of charge against time" '
           'class="chart" font-family="sans-serif" font-size="11">']
    stage = np.asarray(series["stage"], dtype=int)
    starts = [0, *list(np.flatnonzero(np.diff(stage)) + 1)]
    for k, start in enumerate(starts):
        sx = x(t_h[start])
        out.append(f'<line x1="{sx:.1f}" y1="{_TOP - 6}" x2="{sx:.1f}" '
                   f'y2="{_TOP + 3 * _PANEL + 2 * _GAP}" stroke="#999" stroke-dasharray="3,3"/>')
        end = starts[k + 1] if k + 1 < len(starts) else t_h.size - 1
        label = stage_labels[stage[start]] if stage[start] < len(stage_labels) else "stage"
        mid = (sx + x(t_h[end])) / 2
        out.append(f'<text class="stage-label" x="{mid:.1f}" y="{_TOP - 10}" '
                   f'text-anchor="middle">{escape(label)}</text>')
    for index, (_key, title, values, colour) in enumerate(panels):
        top = _TOP + index * (_PANEL + _GAP)
        low, high = float(np.min(values)), float(np.max(values))
        if high - low < 1e-9:
            low, high = low - 0.5, high + 0.5
        pad = (high - low) * 0.08
        low, high = low - pad, high + pad

        def y(v: float, top: int = top, low: float = low, high: float = high) -> float:
            return top + _PANEL * (1 - (v - low) / (high - low))

        out.append(f'<rect x="{_LEFT}" y="{top}" width="{plot_w}" height="{_PANEL}" '
                   'fill="none" stroke="#444"/>')
        for tick in _ticks(low, high):
            ty = y(tick)
            out.append(f'<line x1="{_LEFT - 4}" y1="{ty:.1f}" x2="{_LEFT}" y2="{ty:.1f}" '
                       'stroke="#444"/>')
            out.append(f'<text x="{_LEFT - 6}" y="{ty + 3:.1f}" text-anchor="end">'
                       f'{tick:g}</text>')
        out.append(f'<text x="14" y="{top + _PANEL / 2:.1f}" text-anchor="middle" '
                   f'transform="rotate(-90 14 {top + _PANEL / 2:.1f})">{escape(title)}</text>')
        step = max(1, t_h.size // 600)
        points = " ".join(f"{x(t):.1f},{y(v):.1f}" for t, v in zip(t_h[::step], values[::step],
                                                                   strict=True))
        out.append(f'<polyline fill="none" stroke="{colour}" stroke-width="1.6" '
                   f'points="{points}"/>')
    bottom = _TOP + 3 * _PANEL + 2 * _GAP
    for tick in _ticks(0.0, span, 6):
        tx = x(tick)
        out.append(f'<line x1="{tx:.1f}" y1="{bottom}" x2="{tx:.1f}" y2="{bottom + 4}" '
                   'stroke="#444"/>')
        out.append(f'<text x="{tx:.1f}" y="{bottom + 15}" text-anchor="middle">{tick:g}</text>')
    out.append(f'<text x="{_LEFT + plot_w / 2:.1f}" y="{bottom + 30}" text-anchor="middle">'
               'Time (h)</text>')
    out.append("</svg>")
    return "\n".join(out)
