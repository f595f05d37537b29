"""Fakes for the analysis tests (a uniquely named module, not a conftest): controlled label maps instead of a real segmentation.

The analysis relies only on ``u``, ``edges``, ``labels`` and ``params.noise_k``
of a segmentation, so the tests build those directly and check the analysis
logic alone. Settings reach ``analyse`` only as its ``meta`` argument: the frames
built here carry none.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace

import numpy as np
from scipy import ndimage

from irseg.types import Air, AnalysisSettings, Camera, SurveyMeta, Surface, ThermalFrame


@dataclass(frozen=True)
class FakeParams:
    noise_k: float | None = 0.05
    min_step_k: float = 0.5


@dataclass(frozen=True)
class FakeSegmentation:
    u: np.ndarray
    v: np.ndarray
    edges: np.ndarray
    labels: np.ndarray
    n_regions: int
    params: FakeParams


def jump_set(labels: np.ndarray) -> np.ndarray:
    """Pixels with a 4-neighbour of another label (both sides of every boundary)."""
    e = np.zeros(labels.shape, bool)
    dv = labels[1:, :] != labels[:-1, :]
    dh = labels[:, 1:] != labels[:, :-1]
    e[1:, :] |= dv
    e[:-1, :] |= dv
    e[:, 1:] |= dh
    e[:, :-1] |= dh
    return e


def make_seg(defects: np.ndarray, *, u: np.ndarray, noise_k: float | None = 0.05) -> FakeSegmentation:
    """Regions = connected components of each defect id (0 = background); every pixel labelled."""
    labels = np.zeros(defects.shape, np.int32)
    nxt = 1
    for value in np.unique(defects):
        comp, k = ndimage.label(defects == value)
        labels[comp > 0] = comp[comp > 0] + nxt - 1
        nxt += k
    edges = jump_set(labels)
    return FakeSegmentation(
        u=u, v=np.where(edges, 0.0, 1.0), edges=edges, labels=labels, n_regions=int(labels.max()),
        params=FakeParams(noise_k=noise_k),
    )


def make_meta(**sections) -> SurveyMeta:
    """SurveyMeta for an interior wall (45°, 3 m), 20 °C inside, 0 °C outside; override section by section."""
    base = SurveyMeta(
        camera=Camera(hfov_deg=45.0, distance_m=3.0),
        surface=Surface(emissivity=0.93, view="interior"),
        air=Air(inside_c=20.0, outside_c=0.0, wind_m_s=1.0),
        analysis=AnalysisSettings(),
    )
    kw = {}
    for name, changes in sections.items():
        kw[name] = replace(getattr(base, name), **changes)
    return replace(base, **kw)


def make_frame(t: np.ndarray, mask: np.ndarray | None = None) -> ThermalFrame:
    """A corrected frame without settings: pass the SurveyMeta to ``analyse`` itself."""
    mask = np.zeros(t.shape, bool) if mask is None else mask
    extra = {}
    if "meta" in {f.name for f in fields(ThermalFrame)}:
        # while ThermalFrame still has a meta field it holds None here, so any analysis code
        # that read its settings from the frame instead of its meta argument would fail
        extra["meta"] = None
    return ThermalFrame(path="synthetic.npy", temperature_c=t, mask=mask, **extra)
