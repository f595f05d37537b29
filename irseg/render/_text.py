"""Text drawing for the overlay: OpenCV's Hershey font plus the few symbols it lacks.

OpenCV's built-in fonts cover printable ASCII only. The overlay needs ``°`` (°C), ``Δ`` (ΔT)
and the en dash; these are drawn as small primitives of the same height. The Hershey font's
zero carries a slash ("50 cm" would read as a diameter), so ``0`` is drawn as a plain oval of
the digit's width. Any other non-ASCII character (for instance in a file name) is drawn as ``?``.
"""

from __future__ import annotations

import functools

import cv2
import numpy as np

__all__ = ["draw_text", "text_width"]

_FONT = cv2.FONT_HERSHEY_SIMPLEX
_SPECIAL = {"°", "Δ", "–", "—", "0"}


def _segments(text: str) -> list[str]:
    """Split into runs of plain ASCII and single special symbols."""
    out: list[str] = []
    run = []
    for ch in text:
        if ch in _SPECIAL:
            if run:
                out.append("".join(run))
                run = []
            out.append(ch)
        else:
            run.append(ch if 32 <= ord(ch) < 127 else "?")
    if run:
        out.append("".join(run))
    return out


def _cap_height(scale: float, thickness: int) -> int:
    return cv2.getTextSize("C", _FONT, scale, thickness)[0][1]


def _symbol_width(ch: str, scale: float, thickness: int) -> int:
    h = _cap_height(scale, thickness)
    if ch == "°":
        return max(4, int(round(0.55 * h))) + 1
    if ch == "Δ":
        return cv2.getTextSize("A", _FONT, scale, thickness)[0][0]
    if ch == "0":
        return _advance("0", scale, thickness)
    return cv2.getTextSize("-", _FONT, scale, thickness)[0][0] + max(1, int(round(0.3 * h)))


def _advance(run: str, scale: float, thickness: int) -> int:
    """How far a run of the font moves the pen (its box width less the stroke that overhangs the end)."""
    return cv2.getTextSize(run, _FONT, scale, thickness)[0][0] - thickness


@functools.lru_cache(maxsize=32)
def _zero_box(scale: float, thickness: int) -> tuple[int, int, int, int]:
    """Ink box (col0, row0, col1, row1) of the font's zero drawn at baseline (0, 0), end exclusive."""
    w, h = cv2.getTextSize("0", _FONT, scale, thickness)[0]
    pad = 4 + thickness
    scratch = np.zeros((h + 2 * pad, w + 2 * pad), np.uint8)
    cv2.putText(scratch, "0", (pad, h + pad), _FONT, scale, 255, thickness, lineType=cv2.LINE_8)
    rows, cols = np.nonzero(scratch)
    if rows.size == 0:
        return 0, -h, w, 0
    return int(cols.min()) - pad, int(rows.min()) - h - pad, int(cols.max()) + 1 - pad, int(rows.max()) + 1 - h - pad


def text_width(text: str, scale: float, thickness: int) -> int:
    """Width in pixels of ``text`` as :func:`draw_text` draws it."""
    total = 0
    for seg in _segments(text):
        if seg in _SPECIAL:
            total += _symbol_width(seg, scale, thickness)
        else:
            total += _advance(seg, scale, thickness)
    return total + thickness


def draw_text(
    img: np.ndarray, text: str, org: tuple[int, int], scale: float, colour: tuple[int, int, int], thickness: int
) -> int:
    """Draw ``text`` with its baseline starting at ``org`` (column, row); return the end column."""
    x, y = int(org[0]), int(org[1])
    h = _cap_height(scale, thickness)
    for seg in _segments(text):
        if seg == "°":
            r = max(2, int(round(0.2 * h)))
            cv2.circle(img, (x + r + 1, y - h + r), r, colour, max(1, thickness), lineType=cv2.LINE_AA)
        elif seg == "Δ":
            w = _symbol_width(seg, scale, thickness)
            pts = np.array([[x + 1, y], [x + w - 2, y], [x + (w - 1) // 2, y - h]], dtype=np.int32)
            cv2.polylines(img, [pts], True, colour, max(1, thickness), lineType=cv2.LINE_AA)
        elif seg == "0":
            c0, r0, c1, r1 = _zero_box(scale, thickness)  # the font's own zero's ink, relative to (x, y)
            t = max(1, thickness)
            centre = ((2 * x + c0 + c1) * 8, (2 * y + r0 + r1) * 8)  # 4 fractional bits: half pixels
            axes = (max(1, (c1 - c0 - t)) * 8, max(2, (r1 - r0 - t)) * 8)
            cv2.ellipse(img, centre, axes, 0, 0, 360, colour, t, lineType=cv2.LINE_AA, shift=4)
        elif seg in ("–", "—"):
            w = _symbol_width(seg, scale, thickness)
            ym = y - h // 2 + 1
            cv2.line(img, (x + 1, ym), (x + w - 2, ym), colour, max(1, thickness), lineType=cv2.LINE_AA)
        else:
            cv2.putText(img, seg, (x, y), _FONT, scale, colour, thickness, lineType=cv2.LINE_AA)
        x += _symbol_width(seg, scale, thickness) if seg in _SPECIAL else _advance(seg, scale, thickness)
    return x
