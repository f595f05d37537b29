"""Glazing: a framed pane told from a void by where its contrast is strongest.

A void, a missing board or an empty bay is strongest in its middle: the sound construction
around it conducts heat sideways and weakens its rim, so its contrast rises from the outline
toward the centre and stays there. A window is the other way round: its frame and the glass edge
over the spacer lose more heat than the middle of the glass (seen from inside they are colder),
and seen from outside the glass (emissivity about 0.84) reflects more of the cold sky than the
frame, so its middle looks less warm. Either way the contrast of a framed pane peaks in a rim a
few centimetres inside its outline and falls toward its middle.

:func:`pane_profile` measures the loss-signed contrast in rings one pixel wide at a distance of
:data:`RIM_M` from the outline and over the middle (at least :data:`CENTRE_M` inside);
:func:`is_framed_pane` applies the rule: a straight-edged rectangle (fill of its rectangle at
least :data:`PANE_FILL`) whose rim peak is at least :data:`RIM_RATIO` × its middle and
:data:`RIM_STEP_K` above it.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

__all__ = ["RIM_M", "CENTRE_M", "RIM_RATIO", "RIM_STEP_K", "PANE_FILL", "pane_profile", "is_framed_pane",
           "mark_panes"]

RIM_M = (0.02, 0.20)  # a frame (50-100 mm) and the glass edge (about 50 mm) lie this far inside the outline
CENTRE_M = 0.25  # the middle of the glass: at least this far inside
RIM_RATIO = 1.25
RIM_STEP_K = 0.3
PANE_FILL = 0.85


def pane_profile(rows: np.ndarray, cols: np.ndarray, loss_k: np.ndarray, pixel_m: float) -> tuple[float, float] | None:
    """``(rim peak, middle)`` of the loss-signed contrast (K) of one area; None when it has no middle.

    ``rows, cols`` are the area's pixels, ``loss_k`` the loss-signed contrast there.
    """
    if rows.size == 0 or pixel_m <= 0:
        return None
    r0, c0 = int(rows.min()), int(cols.min())
    mask = np.zeros((int(rows.max()) - r0 + 3, int(cols.max()) - c0 + 3), bool)
    mask[rows - r0 + 1, cols - c0 + 1] = True
    val = np.zeros(mask.shape)
    val[rows - r0 + 1, cols - c0 + 1] = loss_k
    d = ndimage.distance_transform_edt(mask)[rows - r0 + 1, cols - c0 + 1] * pixel_m
    middle = d >= CENTRE_M
    if middle.sum() < 9:
        return None
    ring = np.floor(d / pixel_m).astype(int)
    lo, hi = int(np.ceil(RIM_M[0] / pixel_m)), int(np.floor(RIM_M[1] / pixel_m))
    means = [float(loss_k[ring == k].mean()) for k in range(lo, hi + 1) if (ring == k).any()]
    if not means:
        return None
    return max(means), float(loss_k[middle].mean())


def is_framed_pane(profile: tuple[float, float] | None, *, rect_fill: float) -> bool:
    """The glazing rule (module docstring) on :func:`pane_profile`'s result."""
    if profile is None or rect_fill < PANE_FILL:
        return False
    rim, middle = profile
    return rim >= RIM_RATIO * max(middle, 0.0) and rim - middle >= RIM_STEP_K


def mark_panes(anomalies: list, labels: np.ndarray, temperature_c: np.ndarray, reference_c: np.ndarray, *,
               pixel_m: float | None, view: str, reason: str) -> list:
    """Anomalies that together make a framed pane, marked ``unclassified`` with ``reason``.

    A window's frame and glass often come out as several touching anomalies of the heat-loss sign
    (the frame bars as narrow bands, the glass as what is left). Touching anomalies of that sign
    (within 2 px) are taken together; when their union fills its bounding box (at least
    :data:`PANE_FILL`) and its contrast profile is a framed pane's (:func:`pane_profile`,
    :func:`is_framed_pane`), each of them becomes ``unclassified`` with ``reason`` and loses its heat,
    length and ψ figures (the heat of a window is not a defect's) and its mould-risk flag (the
    f_Rsi limit is for opaque elements). Anomalies already unclassified
    keep their reason.
    """
    from dataclasses import replace

    if pixel_m is None or view == "roof" or not anomalies:
        return list(anomalies)
    kind = "cold" if view == "interior" else "warm"
    sign = -1.0 if view == "interior" else 1.0
    ids = [a.anomaly for a in anomalies if a.kind == kind and a.cause != "unclassified"]
    if not ids:
        return list(anomalies)
    own = np.isin(labels, ids)
    groups, n = ndimage.label(ndimage.binary_dilation(own, iterations=2))
    marked: dict[int, str] = {}
    for g in range(1, n + 1):
        union = own & (groups == g)
        members = sorted(int(i) for i in np.unique(labels[union]))
        rows, cols = np.nonzero(union)
        box = (rows.max() - rows.min() + 1) * (cols.max() - cols.min() + 1)
        if rows.size / box < PANE_FILL:
            continue
        loss = sign * (temperature_c[rows, cols] - reference_c[rows, cols])
        ok = np.isfinite(loss)
        profile = pane_profile(rows[ok], cols[ok], loss[ok], pixel_m)
        if is_framed_pane(profile, rect_fill=rows.size / box):
            text = (f"{reason}; {len(members)} touching area(s) making a straight-edged rectangle whose rim (frame, "
                    f"glass edge) shows {profile[0]:.1f} K against {profile[1]:.1f} K in its middle: a framed pane "
                    "(a void is strongest in its middle); its heat is that of the window, not counted as a defect's")
            marked.update(dict.fromkeys(members, text))
    return [replace(a, cause="unclassified", reason=marked[a.anomaly], excess_w=None, excess_low_w=None,
                    excess_high_w=None, excess_kwh_year=None, length_m=None, psi_w_mk=None, psi_low_w_mk=None,
                    psi_high_w_mk=None, mould_risk=None, severity_score=1e-6 * min(a.area_px, 9.99e5))
            if a.anomaly in marked else a for a in anomalies]
