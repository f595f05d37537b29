"""Candidate selection: regions whose contrast against their local sound ring is significant."""

from __future__ import annotations

import math

import numpy as np

from ._geometry import MIN_SPOT_PX
from ._reach import distance_to_zeros
from ._reference import RingReference, SurfaceReference, rim_extent_px, ring_reference

__all__ = [
    "Candidate",
    "significance_threshold_k",
    "select_candidates",
    "GAP_PX",
    "RIM_PX",
    "RIM_FRACTION",
    "MAX_RIM_PX",
    "RING_SIGMA_FACTOR",
]

GAP_PX = 2.0  # the ring starts at least beyond the jump band
RIM_PX = 3.0  # the thermal region takes at least this much of the soft rim
RIM_FRACTION = 0.3  # the soft rim is searched out to 0.3·√area ...
MAX_RIM_PX = 30.0  # ... but not beyond 30 px
RING_SIGMA_FACTOR = 2.0  # contrast must also exceed this many ring spreads


class Candidate:
    """A region whose contrast against its local ring is significant.

    Crop coordinates: the region's pixels ``rr, cc`` are relative to ``(r0, c0)``,
    the top-left corner of ``crop`` in the image.

    Only ``region`` is held of the per-pixel data unless more is given: ``rr, cc`` (its pixels
    in raster order, ``np.nonzero(region)``), ``dist`` (each crop pixel's distance to the region,
    ``distance_transform_edt(~region)``) and ``ref_in`` (the reference plane on its pixels) are
    formed again when they are read. A large defect's crop would otherwise hold 8 bytes a
    pixel of distances and 24 a region pixel of indices and references through the whole
    analysis (memory, issue 15); only the candidate read last keeps what was formed for it (one
    crop's worth, module-wide), so the several reads while one candidate is measured form each
    once. The arrays returned are not to be changed in place. What is given (``dist``, ``rr``,
    ``cc``, ``ref_in`` not None) is kept and returned as given.
    """

    def __init__(
        self, label: int, r0: int, c0: int, crop: tuple[slice, slice], region: np.ndarray, dist: np.ndarray | None,
        ref: RingReference, mean_c: float, reference_c: float, delta_k: float, gap_px: float,
        rr: np.ndarray | None = None, cc: np.ndarray | None = None, ref_in: np.ndarray | None = None,
    ) -> None:
        self.label = label
        self.r0 = r0
        self.c0 = c0
        self.crop = crop
        self.region = region  # bool mask of the region in the crop
        self.ref = ref
        self.mean_c = mean_c
        self.reference_c = reference_c
        self.delta_k = delta_k
        self.gap_px = gap_px  # where the ring starts: the soft rim has faded there
        self.n_px = int(rr.size) if rr is not None else int(np.count_nonzero(region))  # pixels of the region
        self._dist, self._rr, self._cc, self._ref_in = dist, rr, cc, ref_in

    def _formed(self, key: str, make):
        """What ``make()`` forms for this candidate, kept while it is the candidate read last."""
        last = _LAST_READ
        if last[0] is not self:
            last = (self, {})
            _set_last_read(last)
        values = last[1]
        if key not in values:
            values[key] = make()
        return values[key]

    @property
    def rr(self) -> np.ndarray:
        """Rows of the region's pixels in the crop (raster order)."""
        return self._rr if self._rr is not None else self._formed("nz", lambda: np.nonzero(self.region))[0]

    @property
    def cc(self) -> np.ndarray:
        """Columns of the region's pixels in the crop (raster order)."""
        return self._cc if self._cc is not None else self._formed("nz", lambda: np.nonzero(self.region))[1]

    @property
    def dist(self) -> np.ndarray:
        """Distance of each crop pixel to the region, px."""
        return self._dist if self._dist is not None else self._formed("dist", lambda: distance_to_zeros(~self.region))

    @property
    def ref_in(self) -> np.ndarray:
        """The reference plane on the region's pixels (``rr, cc`` order), °C."""
        if self._ref_in is not None:
            return self._ref_in

        def make() -> np.ndarray:
            rr, cc = self._formed("nz", lambda: np.nonzero(self.region))
            return self.ref.plane.evaluate(rr + float(self.r0), cc + float(self.c0))

        return self._formed("ref_in", make)

    @property
    def rim_reach_px(self) -> float:
        """How far from the region its soft rim belongs to it, px."""
        return max(RIM_PX, self.gap_px)


_LAST_READ: tuple = (None, {})  # (the candidate read last, what was formed for it): see Candidate


def _set_last_read(value: tuple) -> None:
    global _LAST_READ
    _LAST_READ = value


def forget_last_read() -> None:
    """Drop what the candidate read last keeps (at the end of an analysis)."""
    _set_last_read((None, {}))


def significance_threshold_k(*, noise_k: float, netd_k: float, min_step_k: float, min_contrast_k: float | None) -> float:
    """Smallest |contrast| kept: ``min_contrast_k`` if set, else ``max(3·noise, ½·min_step_k)``."""
    if min_contrast_k is not None:
        return float(min_contrast_k)
    return max(3.0 * max(noise_k, netd_k), 0.5 * min_step_k)


def _ring_width(area_px: int) -> float:
    return float(np.clip(round(0.5 * math.sqrt(area_px)), 3, 15))


def select_candidates(
    *, labels: np.ndarray, t: np.ndarray, u: np.ndarray, allowed: np.ndarray, sound: np.ndarray,
    areas: np.ndarray, means_u: np.ndarray, slices: list, noise_k: float, threshold_k: float, trend: SurfaceReference,
) -> list[Candidate]:
    """Every region that is not sound, at least :data:`MIN_SPOT_PX` large and significant, by label.

    Parameters
    ----------
    labels : (M, N) int ndarray
        Region labels 1..n, 0 masked.
    t, u : (M, N) ndarray
        Measured and smooth temperature, °C.
    allowed : (M, N) bool ndarray
        Pixels that may serve as a sound reference.
    sound : (n + 1,) bool ndarray
        Sound regions (:func:`._reference.find_sound_regions`).
    areas, means_u : (n + 1,) ndarray
        Pixel count and mean of ``u`` per label.
    slices : list
        ``scipy.ndimage.find_objects(labels)``.
    noise_k, threshold_k : float
        Noise and significance threshold, K.
    trend : SurfaceReference
        The local sound surface, the reference of last resort.
    """
    n = areas.size - 1
    return [
        c for lab in range(1, n + 1)
        if slices[lab - 1] is not None and not sound[lab] and areas[lab] >= MIN_SPOT_PX
        for c in [_local_contrast(lab, slices[lab - 1], labels=labels, t=t, u=u, allowed=allowed,
                                  area_px=int(areas[lab]), mean_u=float(means_u[lab]), noise_k=noise_k,
                                  threshold_k=threshold_k, trend=trend)]
        if c is not None
    ]


def _local_contrast(
    lab: int, sl: tuple[slice, slice], *, labels: np.ndarray, t: np.ndarray, u: np.ndarray, allowed: np.ndarray,
    area_px: int, mean_u: float, noise_k: float, threshold_k: float, trend: SurfaceReference,
) -> Candidate | None:
    """Local ring reference of one candidate region; None when its contrast is not significant."""
    shape = labels.shape
    width = _ring_width(area_px)
    max_gap = float(np.clip(RIM_FRACTION * math.sqrt(area_px), GAP_PX, MAX_RIM_PX))
    gap = GAP_PX
    for factor in (1.0, 4.0):  # a wider crop only when the first ring is too thin
        pad = int(math.ceil(max_gap + factor * width)) + 1
        r0, r1 = max(0, sl[0].start - pad), min(shape[0], sl[0].stop + pad)
        c0, c1 = max(0, sl[1].start - pad), min(shape[1], sl[1].stop + pad)
        crop = (slice(r0, r1), slice(c0, c1))
        region = labels[crop] == lab
        dist = distance_to_zeros(~region)
        extent = (sl[0].start - r0, sl[1].start - c0, sl[0].stop - 1 - r0, sl[1].stop - 1 - c0)
        if factor == 1.0:
            gap = rim_extent_px(
                u_crop=u[crop], dist_crop=dist, allowed_crop=allowed[crop], region_mean_u=mean_u,
                noise_k=noise_k, min_px=GAP_PX, max_px=max_gap, width_px=width,
            )
        ref = ring_reference(
            u_crop=u[crop], t_crop=t[crop], dist_crop=dist, allowed_crop=allowed[crop],
            row_offset=r0, col_offset=c0, gap_px=gap, width_px=width, trend=trend, extent=extent,
            widen=factor > 1.0,
        )
        if ref.source == "ring":
            break
    rr, cc = np.nonzero(region)
    ref_vals = ref.plane.evaluate(rr + float(r0), cc + float(c0))
    t_reg = t[crop][region]
    mean_c = float(t_reg.mean())
    reference_c = float(ref_vals.mean())
    delta = mean_c - reference_c
    needed = max(threshold_k, RING_SIGMA_FACTOR * ref.sigma_k)
    # the median contrast must agree: a sound region pulled by a neighbour's rim is not an anomaly
    if abs(delta) < needed or abs(float(np.median(t_reg - ref_vals))) < needed:
        return None
    return Candidate(lab, r0, c0, crop, region, None, ref, mean_c, reference_c, delta, gap)  # the rest formed on reading
