"""Annotated overlay and label images of one analysed thermogram (arrays only).

:func:`render_overlay` turns a corrected thermogram, its segmentation and its analysis into
one RGB picture a thermographer can put in front of a client: the surface temperature in an
open colour map, the jump set of the segmentation, every anomaly outlined in the colour of its
probable cause with its id, a °C colour bar, a metre scale bar and a title line.
:func:`label_image` gives the 16-bit label image (pixel = anomaly id). Saving the arrays is
the job of :mod:`irseg.io`; nothing here touches the filesystem.

All drawing uses OpenCV (``cv2.findContours``, ``cv2.drawContours``, ``cv2.putText``), which
is deterministic: the same inputs give byte-identical arrays.
"""

from __future__ import annotations

import math
from typing import Any

import cv2
import numpy as np

from ..errors import ConfigError, OutputError
from ..vocabulary import CAUSE_COLOURS, CAUSE_LABELS, CAUSES
from ._margins import NO_DATA as _NO_DATA
from ._margins import draw_bottom, draw_colour_bar, draw_title
from ._marks import blend_edges, thin_jump_lines
from ._text import draw_text, text_width
from ._colours import colormap_lut, display_range
from ._layout import BACKGROUND as _BACKGROUND
from ._layout import ID_SCALE as _ID_SCALE
from ._layout import OverlayLayout, overlay_layout, scale_bar_length_m

__all__ = ["render_overlay", "label_image", "draw_zones", "overlay_range_c"]


def overlay_range_c(frame: Any, zones: Any = None) -> tuple[float, float]:
    """The colour range :func:`render_overlay` gives an image of its own: :func:`display_range`
    of the valid pixels outside exclude zones, °C."""
    temp = np.asarray(frame.temperature_c)
    mask = _as_bool(getattr(frame, "mask", None), temp.shape, "frame.mask")
    return display_range(temp, mask=_range_mask(mask, zones, temp.shape))


def label_image(analysis: Any) -> np.ndarray:
    """Return the label image of an analysis: pixel = anomaly id, 0 elsewhere.

    Parameters
    ----------
    analysis : Analysis
        Needs ``analysis.labels``, an ``(M, N)`` integer array of anomaly ids (0 = none).

    Returns
    -------
    (M, N) uint16 ndarray

    Raises
    ------
    OutputError
        Ids above 65535 (a 16-bit PNG cannot hold them) or negative ids.
    """
    labels = np.asarray(analysis.labels)
    if labels.ndim != 2:
        raise OutputError(f"label image: labels must be a 2-D (M, N) array, got shape {labels.shape}")
    if labels.size and labels.dtype.kind not in "iub":
        raise OutputError(f"label image: labels must be integers, got dtype {labels.dtype}")
    if labels.size:
        top, bottom = int(labels.max()), int(labels.min())
        if top > 65535:
            raise OutputError(
                f"label image: anomaly id {top} does not fit a 16-bit label image (max 65535); "
                "raise [analysis] min_contrast_k or [segment] min_feature_px to merge small anomalies"
            )
        if bottom < 0:
            raise OutputError(f"label image: negative anomaly id {bottom}; ids must be 0 (none) or 1..k")
    return labels.astype(np.uint16)


# --------------------------------------------------------------------------- overlay


def render_overlay(
    frame: Any, seg: Any, analysis: Any, meta: Any, *, cmap: str = "inferno", zones: Any = None,
    show_jumps: bool = False, range_c: tuple[float, float] | None = None,
) -> np.ndarray:
    """Draw the annotated overlay of one analysed thermogram.

    Parameters
    ----------
    frame : ThermalFrame
        Uses ``temperature_c`` (M, N) °C, ``mask`` (M, N) bool and ``path`` (title).
    seg : Segmentation
        Uses ``edges``, the (M, N) bool jump set: blended into the picture at full size, drawn
        as 1-pixel lines through the (thinned) jump set when the thermogram is enlarged.
    analysis : Analysis
        Uses ``labels`` (M, N) anomaly ids, ``anomalies`` (``anomaly``, ``cause``,
        ``centroid_row``, ``centroid_col``, ``bbox_*``) and ``pixel_m`` (scale bar).
    meta : SurveyMeta
        The image's metadata; the title line uses ``surface.view`` and ``air.inside_c`` /
        ``air.outside_c`` (ΔT in–out). None prints both as unknown.
    cmap : str, optional
        Open colour-map name, see :func:`colormap_lut`. Default ``"inferno"``.
    zones : sequence, optional
        The image's zones (:class:`irseg.controls.ZoneMask`: ``mask``, ``label``, ``kind``,
        ``zone.emissivity``), drawn hatched with their label over the thermogram
        (:func:`draw_zones`); the pixels of exclude zones do not count for the colour range.
    show_jumps : bool, optional
        Draw the segmentation's jump set (the temperature edges it found). Off by default: on
        real frames it marks every stud and much sensor speckle.
    range_c : (lo_c, hi_c), optional
        A fixed colour range in °C (a survey's common range); default: the image's own
        :func:`display_range`.

    Returns
    -------
    (M', N', 3) uint8 ndarray
        RGB picture; shape and positions are given by :func:`overlay_layout` ``((M, N))``. The
        temperatures are mapped linearly from :func:`display_range` (1st–99th percentile,
        values outside are clipped to the ends); masked pixels are a grey checkerboard;
        anomaly outlines use :data:`CAUSE_COLOURS`.

    Raises
    ------
    ConfigError
        Unknown ``cmap``, or arrays whose shapes disagree.

    Notes
    -----
    Drawing order: colour-mapped thermogram, no-data checkerboard, jump set, outlines (outer
    contours of each anomaly's pixels from ``cv2.findContours``, 2 px wide, centred on the
    anomaly's boundary pixels), id badges, then the margins. About 10 ms for a 640×480 frame on
    one laptop core. Output is byte-identical for identical inputs.

    References
    ----------
    .. [1] S. Suzuki and K. Abe, "Topological structural analysis of digitized binary images by
       border following", CVGIP 30(1), 32-46, 1985, doi:10.1016/0734-189X(85)90016-7
       (the contour tracing behind ``cv2.findContours``).
    .. [2] Z. Guo and R. W. Hall, "Parallel thinning with two-subiteration algorithms",
       Commun. ACM 32(3), 359-373, 1989, doi:10.1145/62065.62074 (``skimage.morphology.thin``).
    .. [3] The perceptually uniform colour maps inferno, magma, plasma and viridis by S. van der
       Walt and N. Smith (2015), as shipped with OpenCV's ``applyColorMap``.
    """
    lut = colormap_lut(cmap)
    temp = np.asarray(frame.temperature_c)
    if temp.ndim != 2:
        raise ConfigError(f"render_overlay: temperature_c must be (M, N), got shape {temp.shape}")
    shape = temp.shape
    mask = _as_bool(getattr(frame, "mask", None), shape, "frame.mask")
    edges = _as_bool(getattr(seg, "edges", None), shape, "seg.edges")
    labels = np.asarray(analysis.labels)
    if labels.shape != shape:
        raise ConfigError(f"render_overlay: analysis.labels has shape {labels.shape}, image has {shape}")
    lay = overlay_layout(shape)
    s, k = lay.scale, lay.shrink
    range_mask = _range_mask(mask, zones, shape)
    if k > 1:  # a large thermogram is drawn reduced: only display-sized arrays from here on
        temp = _block_reduce(temp, k, "mean")
        range_mask = None if range_mask is None else _block_reduce(range_mask, k, "majority")
        mask = None if mask is None else _block_reduce(mask, k, "majority")
        edges = None if edges is None else _block_reduce(edges, k, "any")

    if range_c is not None:
        lo, hi = float(range_c[0]), float(range_c[1])
        if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
            raise ConfigError(f"render_overlay: range_c = {range_c!r} must be two finite °C values, low first")
    else:
        lo, hi = display_range(temp, mask=range_mask)
    del range_mask
    canvas = np.empty(lay.shape, dtype=np.uint8)
    canvas[...] = _BACKGROUND

    # thermogram in the colour map
    with np.errstate(invalid="ignore", over="ignore"):
        norm = (temp.astype(np.float32) - np.float32(lo)) * np.float32(255.0 / (hi - lo))
    idx = np.clip(np.nan_to_num(norm, nan=0.0, posinf=255.0, neginf=0.0) + 0.5, 0, 255).astype(np.uint8)
    del norm
    rgb = np.take(lut, idx, axis=0)  # lut[idx], about 4× faster
    del idx
    dshape = temp.shape
    if mask is not None and mask.any():
        checker = ((np.add.outer(np.arange(dshape[0]), np.arange(dshape[1])) & 1) == 0)
        rgb[mask & checker] = _NO_DATA[0]
        rgb[mask & ~checker] = _NO_DATA[1]
    jumps = None
    if show_jumps and edges is not None and edges.any():
        jumps = edges & ~mask if mask is not None else edges
    if s == 1:
        if jumps is not None:
            blend_edges(rgb, jumps)
    else:
        rgb = np.repeat(np.repeat(rgb, s, axis=0), s, axis=1)
        if jumps is not None:
            blend_edges(rgb, thin_jump_lines(jumps, s))
    view = canvas[lay.image_row0 : lay.image_row0 + lay.image_rows, lay.image_col0 : lay.image_col0 + lay.image_cols]
    view[...] = rgb
    del rgb

    if zones:
        draw_zones(canvas, zones, lay)
    anomalies = tuple(getattr(analysis, "anomalies", ()) or ())
    _draw_outlines(canvas, labels, anomalies, lay)
    _draw_ids(canvas, anomalies, lay)
    draw_colour_bar(canvas, lut, lo, hi, lay)
    draw_title(canvas, frame, meta, len(anomalies), lay)
    has_mask = bool(mask is not None and mask.any())
    pixel_m = getattr(analysis, "pixel_m", None)
    bar_m = None
    if _is_positive(pixel_m):
        bar_m = scale_bar_length_m(float(pixel_m), width_px=shape[1])
    draw_bottom(
        canvas,
        anomalies,
        None if bar_m is None else (bar_m, int(round(bar_m / float(pixel_m) * s / k))),
        has_mask,
        lay,
        causes=CAUSES,
        colours=CAUSE_COLOURS,
        labels=CAUSE_LABELS,
        show_jumps=show_jumps,
    )
    return canvas


def _is_positive(value: Any) -> bool:
    if value is None or isinstance(value, bool):
        return False
    try:
        v = float(value)
    except (TypeError, ValueError):
        return False
    return math.isfinite(v) and v > 0


def _as_bool(arr: Any, shape: tuple[int, ...], name: str) -> np.ndarray | None:
    if arr is None:
        return None
    a = np.asarray(arr, dtype=bool)
    if a.shape != shape:
        raise ConfigError(f"render_overlay: {name} has shape {a.shape}, image has {shape}")
    return a


def _draw_outlines(canvas: np.ndarray, labels: np.ndarray, anomalies: tuple, lay: OverlayLayout) -> None:
    s, k = lay.scale, lay.shrink
    m, n = labels.shape
    thickness = 3
    for a in anomalies:
        aid = int(a.anomaly)
        r0, c0, r1, c1 = _bbox(a, m, n)
        if k > 1:  # whole display blocks: every display pixel that holds a pixel of the anomaly
            r0, c0 = r0 - r0 % k, c0 - c0 % k
        crop = labels[r0:r1, c0:c1] == aid
        if not crop.any():
            continue
        if k > 1:
            crop = _block_reduce(crop, k, "any")
        crop = crop.astype(np.uint8)
        if s > 1:
            crop = np.repeat(np.repeat(crop, s, axis=0), s, axis=1)
        contours, _ = cv2.findContours(
            crop, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE,
            offset=(lay.image_col0 + c0 * s // k, lay.image_row0 + r0 * s // k),
        )
        colour = CAUSE_COLOURS.get(str(a.cause), CAUSE_COLOURS["unclassified"])
        cv2.drawContours(canvas, contours, -1, (0, 0, 0), thickness + 2, lineType=cv2.LINE_8)  # casing
        cv2.drawContours(canvas, contours, -1, colour, thickness, lineType=cv2.LINE_8)


def _bbox(a: Any, m: int, n: int) -> tuple[int, int, int, int]:
    try:
        r0, c0 = max(0, int(a.bbox_row0)), max(0, int(a.bbox_col0))
        r1, c1 = min(m, int(a.bbox_row1)), min(n, int(a.bbox_col1))
    except (AttributeError, TypeError, ValueError):
        return 0, 0, m, n
    if r1 <= r0 or c1 <= c0:
        return 0, 0, m, n
    return r0, c0, r1, c1


def _draw_ids(canvas: np.ndarray, anomalies: tuple, lay: OverlayLayout) -> None:
    s = lay.scale
    k = lay.shrink
    for a in anomalies:
        try:
            row = (float(a.centroid_row) + 0.5) * s / k + lay.image_row0
            col = (float(a.centroid_col) + 0.5) * s / k + lay.image_col0
        except (AttributeError, TypeError, ValueError):
            continue
        if not (math.isfinite(row) and math.isfinite(col)):
            continue
        text = str(int(a.anomaly))
        w = text_width(text, _ID_SCALE, 1)
        x0, y0 = int(round(col - w / 2)), int(round(row - 7))
        colour = CAUSE_COLOURS.get(str(a.cause), CAUSE_COLOURS["unclassified"])
        cv2.rectangle(canvas, (x0 - 3, y0 - 2), (x0 + w + 2, y0 + 15), (0, 0, 0), -1)
        cv2.rectangle(canvas, (x0 - 3, y0 - 2), (x0 + w + 2, y0 + 15), colour, 1)
        draw_text(canvas, text, (x0, y0 + 12), _ID_SCALE, (255, 255, 255), 1)


_BAND_BLOCKS = 64  # display rows reduced at a time: the temporaries stay a few rows of the input


def _block_reduce(a: np.ndarray, k: int, how: str) -> np.ndarray:
    """Reduce an ``(M, N)`` array by ``k`` in both directions, a band of rows at a time.

    ``how``: ``"mean"`` (float64 block means of a numeric array), ``"any"`` (a block holding a
    True pixel) or ``"majority"`` (more than half of a block's pixels True). The last row and
    column of blocks may be partial: they are reduced over the pixels they hold.
    """
    m, n = a.shape
    rows, cols = -(-m // k), -(-n // k)
    out = np.empty((rows, cols), np.float64 if how == "mean" else bool)
    for i0 in range(0, rows, _BAND_BLOCKS):
        i1 = min(rows, i0 + _BAND_BLOCKS)
        band = a[i0 * k : i1 * k]
        h = band.shape[0]
        pad_r, pad_c = (i1 - i0) * k - h, cols * k - n
        vals = band.astype(np.float64)
        weight = np.ones(band.shape, np.float64)
        if pad_r or pad_c:
            vals = np.pad(vals, ((0, pad_r), (0, pad_c)))
            weight = np.pad(weight, ((0, pad_r), (0, pad_c)))
        total = vals.reshape(i1 - i0, k, cols, k).sum(axis=(1, 3))
        count = weight.reshape(i1 - i0, k, cols, k).sum(axis=(1, 3))
        if how == "mean":
            out[i0:i1] = total / count
        elif how == "any":
            out[i0:i1] = total > 0
        else:
            out[i0:i1] = total > 0.5 * count
    return out


# --------------------------------------------------------------------------- zones

#: Hatch of a zone: (line spacing in display pixels, direction +1 "\\" or -1 "/", weight of the
#: hatch colour). Exclude zones are hatched densely; material zones sparsely, so the
#: temperatures measured there stay readable.
_HATCH = {"exclude": (6, 1, 0.75), "material": (12, -1, 0.45)}
_ZONE_COLOUR = (235, 235, 235)


def _range_mask(mask: np.ndarray | None, zones: Any, shape: tuple[int, ...]) -> np.ndarray | None:
    """The pixels left out of the colour range: the invalid ones and those of exclude zones."""
    excluded = [np.asarray(z.mask, bool) for z in (zones or ()) if getattr(z, "kind", None) == "exclude"]
    if not excluded:
        return mask
    out = np.zeros(shape, bool) if mask is None else mask.copy()
    for zone in excluded:
        if zone.shape == shape:
            out |= zone
    return out if not out.all() else mask


def draw_zones(canvas: np.ndarray, zones: Any, lay: OverlayLayout) -> None:
    """Draw zones on an overlay canvas: hatched, outlined, labelled (in place).

    Parameters
    ----------
    canvas : (M', N', 3) uint8 ndarray
        The overlay, laid out by ``lay``.
    zones : sequence
        Objects with ``mask`` ((M, N) bool), ``label`` (str), ``kind`` (``"exclude"`` or
        ``"material"``) and, for material zones, ``zone.emissivity``.
    lay : OverlayLayout
        :func:`overlay_layout` of the image.
    """
    s = lay.scale
    view = canvas[lay.image_row0: lay.image_row0 + lay.image_rows, lay.image_col0: lay.image_col0 + lay.image_cols]
    rows, cols = np.indices(view.shape[:2])
    for z in zones:
        mask = np.asarray(z.mask, bool)
        if not mask.any():
            continue
        if lay.shrink > 1:  # the zone on the reduced thermogram (every block it touches)
            mask = _block_reduce(mask, lay.shrink, "any")
        big = np.repeat(np.repeat(mask, s, axis=0), s, axis=1) if s > 1 else mask
        spacing, direction, weight = _HATCH.get(str(z.kind), _HATCH["exclude"])
        hatch = big & (((rows + direction * cols) % spacing) == 0)
        px = view[hatch].astype(np.float32)
        # towards black on light colours, towards white on dark ones (visible on any colour map)
        luma = px @ np.array([0.299, 0.587, 0.114], dtype=np.float32)
        target = np.where(luma[:, None] > 128.0, 0.0, 255.0).astype(np.float32)
        view[hatch] = np.round((1.0 - weight) * px + weight * target).astype(np.uint8)
        contours, _ = cv2.findContours(big.astype(np.uint8), cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
        cv2.drawContours(view, contours, -1, (0, 0, 0), 3, lineType=cv2.LINE_8)
        cv2.drawContours(view, contours, -1, _ZONE_COLOUR, 1, lineType=cv2.LINE_8)
        text = str(z.label)
        emissivity = getattr(getattr(z, "zone", None), "emissivity", None)
        if z.kind == "material" and emissivity is not None:
            text += f" e={float(emissivity):.2f}"
        r_idx, c_idx = np.nonzero(big)
        x0, y0 = int(c_idx.min()) + 2, int(r_idx.min()) + 2
        w = text_width(text, _ID_SCALE, 1)
        x0 = max(0, min(x0, view.shape[1] - w - 4))
        y0 = max(0, min(y0, view.shape[0] - 18))
        cv2.rectangle(view, (x0, y0), (x0 + w + 4, y0 + 16), (0, 0, 0), -1)
        draw_text(view, text, (x0 + 2, y0 + 13), _ID_SCALE, _ZONE_COLOUR, 1)
