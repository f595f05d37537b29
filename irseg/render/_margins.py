"""Margins of the overlay: title lines, °C colour bar, metre scale bar and legend.

Private helpers of :mod:`irseg.render`; positions come from its ``OverlayLayout``.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from typing import Any

import cv2
import numpy as np

from ._text import draw_text, text_width

FOREGROUND = (236, 236, 236)
MUTED = (170, 174, 184)
SCALE_BAR = (255, 255, 255)
NO_DATA = ((92, 92, 92), (140, 140, 140))
LEFT = 10
FONT_SCALE = 0.42
TITLE_SCALE = 0.5


def _nice_step(span: float, target: int) -> float:
    raw = span / max(target, 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    for f in (1.0, 2.0, 2.5, 5.0, 10.0):
        if f * mag >= raw:
            return f * mag
    return 10.0 * mag


def _decimals(step: float) -> int:
    exponent = math.floor(math.log10(step) + 1e-9)
    mantissa = round(step / 10.0**exponent, 6)
    return max(0, -exponent + (1 if mantissa == 2.5 else 0))


def draw_colour_bar(canvas: np.ndarray, lut: np.ndarray, lo: float, hi: float, lay: Any, unit: str = "°C") -> None:
    h = lay.bar_row1 - lay.bar_row0
    pos = np.arange(h, dtype=np.float64)
    idx = np.round((h - 1 - pos) * (255.0 / max(h - 1, 1))).astype(np.intp)
    canvas[lay.bar_row0 : lay.bar_row1, lay.bar_col0 : lay.bar_col1] = lut[idx][:, None, :]
    cv2.rectangle(canvas, (lay.bar_col0 - 1, lay.bar_row0 - 1), (lay.bar_col1, lay.bar_row1), MUTED, 1)
    draw_text(canvas, unit, (lay.bar_col0 - 2, lay.bar_row0 - 6), FONT_SCALE, FOREGROUND, 1)
    step = _nice_step(hi - lo, max(2, h // 45))
    digits = _decimals(step)
    first = math.ceil(lo / step - 1e-9)
    k = first
    while k * step <= hi + 1e-9 * step:
        v = k * step
        y = lay.bar_row0 + int(round((hi - v) / (hi - lo) * (h - 1)))
        cv2.line(canvas, (lay.bar_col1, y), (lay.bar_col1 + 4, y), FOREGROUND, 1)
        label = f"{(0.0 if abs(v) < step * 1e-6 else v):.{digits}f}"
        draw_text(canvas, label, (lay.bar_col1 + 7, y + 4), FONT_SCALE * 0.95, FOREGROUND, 1)
        k += 1


def _fit(text: str, width: int, scale: float) -> str:
    if text_width(text, scale, 1) <= width:
        return text
    while len(text) > 1 and text_width(text + "...", scale, 1) > width:
        text = text[:-1]
    return text + "..."


def _header_parts(meta: Any) -> list[str]:
    """View, ΔT in–out, emissivity, reflected temperature, distance and time, each when known."""
    surface, air = getattr(meta, "surface", None), getattr(meta, "air", None)
    camera, image = getattr(meta, "camera", None), getattr(meta, "image", None)
    parts = [f"{getattr(surface, 'view', None) or 'unknown'} view"]
    t_in, t_out = getattr(air, "inside_c", None), getattr(air, "outside_c", None)
    parts.append(f"ΔT in–out {float(t_in) - float(t_out):.1f} K" if t_in is not None and t_out is not None
                 else "ΔT in–out unknown")
    emissivity = getattr(surface, "emissivity", None)
    if emissivity is not None:
        parts.append(f"emissivity {float(emissivity):.2f}")
    reflected = getattr(surface, "reflected_c", None)
    if reflected is not None:
        parts.append(f"refl. {float(reflected):.1f} °C")
    distance = getattr(camera, "distance_m", None)
    if distance is not None:
        parts.append(f"{float(distance):.1f} m away")
    when = getattr(image, "time", None)
    if isinstance(when, str) and when.strip():
        parts.append(when.strip())
    return parts


def draw_title(canvas: np.ndarray, frame: Any, meta: Any, n_anomalies: int, lay: Any) -> None:
    """The title ([image] title, else the file name) with the anomaly count, then the shot's header.

    The header line gives view, ΔT in–out, emissivity, reflected temperature, distance and time,
    each when known (from ``meta``).
    """
    width = lay.shape[1] - 2 * LEFT
    name = os.path.basename(str(getattr(frame, "path", "") or "")) or "(unnamed image)"
    title = getattr(getattr(meta, "image", None), "title", None)
    name = f"{title.strip()} ({name})" if isinstance(title, str) and title.strip() else name
    count = f"{n_anomalies} anomal{'y' if n_anomalies == 1 else 'ies'}"
    draw_text(canvas, _fit(f"{name}  |  {count}", width, TITLE_SCALE), (LEFT, 19), TITLE_SCALE, FOREGROUND, 1)
    line = "  |  ".join(_header_parts(meta))
    draw_text(canvas, _fit(line, width, FONT_SCALE), (LEFT, 38), FONT_SCALE, MUTED, 1)


def _format_length(length_m: float) -> str:
    if length_m >= 1.0:
        return f"{length_m:g} m"
    if length_m >= 0.01:
        return f"{length_m * 100:g} cm"
    return f"{length_m * 1000:g} mm"


def draw_bottom(
    canvas: np.ndarray,
    anomalies: tuple,
    scale_bar: tuple[float, int] | None,
    has_mask: bool,
    lay: Any,
    *,
    causes: tuple[str, ...],
    colours: Mapping[str, tuple[int, int, int]],
    labels: Mapping[str, str],
    show_jumps: bool = False,
) -> None:
    y0 = lay.legend_row0
    x = LEFT
    base = y0 + 20
    if scale_bar is not None and scale_bar[1] >= 1:
        length_m, length_px = scale_bar
        canvas[base - 6 : base - 2, x : x + length_px] = SCALE_BAR
        canvas[base - 10 : base + 2, x : x + 1] = SCALE_BAR
        canvas[base - 10 : base + 2, x + length_px - 1 : x + length_px] = SCALE_BAR
        x += length_px + 8
        draw_text(canvas, _format_length(length_m), (x, base), FONT_SCALE, FOREGROUND, 1)
        x += text_width(_format_length(length_m), FONT_SCALE, 1) + 18
    else:
        msg = "no scale bar: camera geometry unknown"
        draw_text(canvas, msg, (x, base), FONT_SCALE, MUTED, 1)
        x += text_width(msg, FONT_SCALE, 1) + 18
    # neutral items on the first row
    items: list[tuple[str, Any]] = [("temperature edges", "edge")] if show_jumps else []
    if has_mask:
        items.append(("no data", "mask"))
    for label, kind in items:
        x = _legend_item(canvas, x, base, label, kind, colours)
    # causes present, with counts, on the second row
    counts: dict[str, int] = {}
    for a in anomalies:
        c = str(a.cause) if str(a.cause) in colours else "unclassified"
        counts[c] = counts.get(c, 0) + 1
    x, base = LEFT, y0 + 44
    if not counts:
        draw_text(canvas, "no anomalies found", (x, base), FONT_SCALE, MUTED, 1)
        return
    right = lay.shape[1] - LEFT
    for cause in causes:
        if cause not in counts:
            continue
        label = f"{labels[cause]} ({counts[cause]})"
        need = 22 + text_width(label, FONT_SCALE, 1)
        if x + need > right and x > LEFT:
            x, base = LEFT, base + 16
            if base > lay.shape[0] - 2:
                break
        x = _legend_item(canvas, x, base, label, cause, colours)


def _legend_item(
    canvas: np.ndarray, x: int, base: int, label: str, kind: str, colours: Mapping[str, tuple[int, int, int]]
) -> int:
    top, bottom = base - 9, base + 1
    if kind == "edge":
        cv2.line(canvas, (x, base - 4), (x + 14, base - 4), MUTED, 1)
    elif kind == "mask":
        for i in range(7):
            for j in range(5):
                canvas[top + 2 * j : top + 2 * j + 2, x + 2 * i : x + 2 * i + 2] = NO_DATA[(i + j) & 1]
    else:
        cv2.rectangle(canvas, (x, top), (x + 14, bottom), colours[kind], 2)
    x += 20
    draw_text(canvas, label, (x, base), FONT_SCALE, FOREGROUND, 1)
    return x + text_width(label, FONT_SCALE, 1) + 16
