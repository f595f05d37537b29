"""Frozen records of the pair analysis: the registration, one leak, the whole pair."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["Registration", "PairAnomaly", "PairAnalysis"]


@dataclass(frozen=True)
class Registration:
    """Where the reference image lies on the pressurised one.

    Attributes
    ----------
    matrix : (2, 3) ndarray
        Affine map from a pixel ``(col, row)`` of the pressurised image to the same surface point
        ``(col, row)`` in the reference image (what ``cv2.warpAffine`` with ``WARP_INVERSE_MAP``
        samples).
    shift_px : (float, float)
        ``(row, col)``: how far the reference's centre pixel moves onto the pressurised image.
    rotation_deg : float
        Rotation of the reference onto the pressurised image, degrees, positive from the +col
        axis towards the +row axis (clockwise on the screen).
    scale : float
        Size of the reference's pixels on the pressurised image (1.02: the second shot zoomed in 2 %).
    rms_px : float or None
        Residual misregistration, pixels: the shifts still found between the registered images
        tile by tile, as a robust root mean square (square root of the median squared shift;
        None when fewer than three tiles hold structure in two directions).
    overlap : float
        Fraction of the pressurised image's pixels that the reference covers, 0-1.
    correlation : float
        Correlation coefficient of the two registered structure images (1 = identical).
    """

    matrix: np.ndarray = field(repr=False)
    shift_px: tuple[float, float]
    rotation_deg: float
    scale: float
    rms_px: float | None
    overlap: float
    correlation: float

    def to_json(self) -> dict[str, Any]:
        """``{shift_px: [row, col], rotation_deg, scale, rms_px, overlap}`` (result.json's ``registration``)."""
        return {
            "shift_px": [float(self.shift_px[0]), float(self.shift_px[1])],
            "rotation_deg": float(self.rotation_deg),
            "scale": float(self.scale),
            "rms_px": None if self.rms_px is None else float(self.rms_px),
            "overlap": float(self.overlap),
        }


@dataclass(frozen=True)
class PairAnomaly:
    """One leakage path: where the surface cooled (inside view) or warmed (outside view) under pressure.

    Attributes
    ----------
    anomaly : int
        Id, after the pressurised image's single-image anomalies (the pixel value in ``pair_labels.png``).
    cause, kind, reason : str
        ``"air_leakage"``; ``"cold"`` or ``"warm"``; the pattern and the pressure in words.
    pattern : str
        ``"jet"`` (elongated: a stream spreading from its entry point) or ``"spot"``.
    area_px : int
        Pixels of the extent (30 % of the peak, the rule of :mod:`irseg.pairs._detect`).
    area_m2 : float or None
        Area on the surface, m² (None without the shot's geometry).
    cooling_k, cooling_max_k : float
        Mean and largest extra cooling over the extent, K, drift removed (negative: warming).
    mean_c, min_c, max_c : float
        Temperatures of the pressurised image over the extent, °C.
    reference_c : float
        Mean of the registered reference over the extent, °C.
    delta_k : float
        Mean of pressurised minus registered reference, drift removed, K.
    centroid_row, centroid_col : float
    bbox_row0, bbox_col0, bbox_row1, bbox_col1 : int
        Bounding box, half-open ``[row0, row1) x [col0, col1)``.
    pressure_pa : float
        The pressure difference during the pressurised image, Pa.
    """

    anomaly: int
    cause: str
    kind: str
    reason: str
    pattern: str
    area_px: int
    area_m2: float | None
    cooling_k: float
    cooling_max_k: float
    mean_c: float
    min_c: float
    max_c: float
    reference_c: float
    delta_k: float
    centroid_row: float
    centroid_col: float
    bbox_row0: int
    bbox_col0: int
    bbox_row1: int
    bbox_col1: int
    pressure_pa: float


@dataclass(frozen=True)
class PairAnalysis:
    """The comparison of a pressurised image with its reference.

    Attributes
    ----------
    registration : Registration
    difference_k : (M, N) float32 ndarray
        Pressurised minus registered reference, K, with the common drift of the sound surface
        removed; NaN where the reference does not cover the image.
    drift_k : float
        The drift removed at the image's centre, K (the sound surface's common change).
    noise_k : float
        Standard deviation of one pixel of ``difference_k`` from the noise of both images, K.
    labels : (M, N) int32 ndarray
        Pixel = pair anomaly id, 0 elsewhere.
    anomalies : tuple of PairAnomaly
    pressure_pa : float
    minutes : float or None
    sign : int
        +1 when leakage cools the surface (inside view), -1 when it warms it (outside view).
    """

    registration: Registration
    difference_k: np.ndarray = field(repr=False)
    drift_k: float
    noise_k: float
    labels: np.ndarray = field(repr=False)
    anomalies: tuple[PairAnomaly, ...]
    pressure_pa: float
    minutes: float | None
    sign: int
