"""One image end to end: the only place where irseg's stages are chained.

::

    read_thermogram -> load_metadata -> calibrate -> segment -> analyse    (process_image)
    (zones: rasterised after the metadata, material zones into calibrate, exclude zones into
     the frame's invalid mask, their effects on the anomalies after analyse: irseg.controls)
    render_overlay + label_image -> PNG bytes                              (render_result)

Both functions are pure with respect to the output folder: they read the input
image and its metadata files and return data; neither changes its arguments.
Writing is left to :mod:`irseg.batch` and :mod:`irseg.io`.

Every exception leaving :func:`process_image` or :func:`render_result` carries
the stage it came from (:func:`failure_stage`), so a survey run can say
``overlay.tif: segment: ...`` in one line.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

from ._shared import DEFAULT_MAX_PIXELS
from .errors import IrsegWarning
from .types import RawFrame, SurveyMeta, ThermalFrame

__all__ = [
    "ImageResult",
    "RenderedImage",
    "process_image",
    "render_result",
    "failure_stage",
]


_STAGE_ATTR = "irseg_stage"
_T = TypeVar("_T")


@dataclass(frozen=True)
class ImageResult:
    """Everything computed for one image.

    Attributes
    ----------
    path : str
        The input file.
    meta : SurveyMeta
        Metadata in force (folder defaults, sidecar, overrides).
    frame : ThermalFrame
        Corrected surface temperature, °C, and its validity mask, ``(M, N)``.
    segmentation : irseg.segmentation.Segmentation
        Smooth field, jump set and regions.
    analysis : irseg.analysis.Analysis
        Anomalies with areas, excess heat loss and confidence bands.
    timings : dict of str to float
        Seconds spent per stage (``read``, ``metadata``, ``calibrate``, ``segment``, ``analyse``).
    warnings : tuple of str
        Messages of the irseg warnings (:class:`~irseg.errors.IrsegWarning`) raised by any
        stage, in order, without repeats. Other warnings pass through to the caller.
    zones : irseg.controls.ZoneLayer or None
        The image's ``[[zone]]`` masks (None without zones); ``frame.mask`` already holds
        the exclude zones.
    confirm_points : tuple of irseg.repairs.ConfirmPoint
        Where to confirm each moisture anomaly of a roof view (wet, edge, dry); empty otherwise.
    """

    path: str
    meta: SurveyMeta
    frame: ThermalFrame
    segmentation: Any
    analysis: Any
    timings: dict[str, float] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    zones: Any = None
    confirm_points: tuple[Any, ...] = ()


@dataclass(frozen=True)
class RenderedImage:
    """The pictures of one result, encoded (from :func:`render_result`).

    Attributes
    ----------
    overlay_png : bytes
        RGB PNG of the annotated thermogram.
    labels_png : bytes
        16-bit grey PNG, the image's size, pixel = anomaly id, 0 elsewhere.
    warnings : tuple of str
        Messages of the irseg warnings raised while drawing.
    seconds : float
        Time spent drawing and encoding (the ``render`` stage).
    """

    overlay_png: bytes = field(repr=False)
    labels_png: bytes = field(repr=False)
    warnings: tuple[str, ...]
    seconds: float


def failure_stage(exc: BaseException) -> str | None:
    """The stage name an exception from :func:`process_image`/:func:`render_result` came from."""
    return getattr(exc, _STAGE_ATTR, None)


def _tag(exc: BaseException, stage: str) -> None:
    if getattr(exc, _STAGE_ATTR, None) is None:
        try:
            setattr(exc, _STAGE_ATTR, stage)
        except (AttributeError, TypeError):  # pragma: no cover - exotic exception types
            pass


def _run_stage(stage: str, timings: dict[str, float], caught: list[str], func: Callable[[], _T]) -> _T:
    """Run one stage, timing it, recording its warnings and tagging any exception."""
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as records:
        warnings.simplefilter("always")
        try:
            value = func()
        except Exception as exc:  # every failure is tagged, then propagated unchanged
            _tag(exc, stage)
            raise
        finally:
            timings[stage] = timings.get(stage, 0.0) + time.perf_counter() - start
    for record in records:
        if issubclass(record.category, IrsegWarning):
            text = str(record.message)
            if text not in caught:
                caught.append(text)
        else:  # not irseg's: hand it back to the caller's warning filters unchanged
            warnings.warn_explicit(record.message, record.category, record.filename, record.lineno,
                                   source=record.source)
    return value


def process_image(
    path: str | Path,
    *,
    overrides: Mapping[str, Mapping[str, Any]] | None = None,
    format: str | None = None,
    max_pixels: int = DEFAULT_MAX_PIXELS,
) -> ImageResult:
    """Read, correct, segment and analyse one thermogram.

    Parameters
    ----------
    path : str or Path
        The image file (TIFF, 16-bit PNG, CSV/TXT or NPY). Metadata comes from
        ``survey.toml`` in its folder and ``<stem>.toml`` beside it.
    overrides : mapping, optional
        ``{"section": {"key": value}}`` applied after the metadata files
        (validated like them; source name "command line").
    format : str, optional
        Force a reader (see :func:`irseg.io.list_readers`) instead of detecting it.
    max_pixels : int
        Pixel budget, checked from the file header before decoding.

    Returns
    -------
    ImageResult
        Warnings raised by the stages are collected in ``ImageResult.warnings``
        instead of being emitted.

    Raises
    ------
    IrsegError
        Any stage's error (InputError, MetadataError, CalibrationError,
        SolverError ...). Every exception carries its stage, see
        :func:`failure_stage`.
    """
    import numpy as np

    from .analysis import analyse
    from .controls import mark_zones, material_maps, zone_layer
    from .io import read_thermogram
    from .metadata import load_metadata
    from .radiometry import calibrate
    from .repairs import confirm_points
    from .segmentation import segment

    timings: dict[str, float] = {}
    caught: list[str] = []
    image = str(path)

    raw: RawFrame = _run_stage(
        "read", timings, caught, lambda: read_thermogram(image, format=format, max_pixels=max_pixels)
    )
    meta: SurveyMeta = _run_stage(
        "metadata", timings, caught, lambda: load_metadata(image, overrides=overrides)
    )
    zones = _run_stage("metadata", timings, caught, lambda: zone_layer(meta.zones, np.shape(raw.data), image=image))
    frame: ThermalFrame = _run_stage(
        "calibrate", timings, caught, lambda: calibrate(raw, meta, **material_maps(zones, meta))
    )
    del raw  # the stored values are not needed after calibration (frees the input's memory early)
    if zones is not None:  # exclude zones: invalid pixels from here on (no anomaly, no reference, no edge)
        zones, frame = _run_stage("calibrate", timings, caught, lambda: zones.exclude(frame))
    flat = _flat_warning(frame, meta)
    if flat is not None:
        caught.append(flat)
    knobs = meta.segment
    seg = _run_stage(
        "segment",
        timings,
        caught,
        lambda: segment(
            frame.temperature_c,
            mask=frame.mask,
            noise_k=knobs.noise_k,
            min_step_k=knobs.min_step_k,
            min_feature_px=knobs.min_feature_px,
        ),
    )
    analysis = _run_stage("analyse", timings, caught, lambda: mark_zones(analyse(frame, seg, meta), zones, meta))
    points = _run_stage("analyse", timings, caught, lambda: confirm_points(
        frame.temperature_c, frame.mask, analysis.labels, analysis.anomalies, pixel_m=analysis.pixel_m,
        view=meta.surface.view))
    return ImageResult(
        path=image,
        meta=meta,
        frame=frame,
        segmentation=seg,
        analysis=analysis,
        timings=timings,
        warnings=tuple(caught),
        zones=zones,
        confirm_points=points,
    )


def _flat_warning(frame: ThermalFrame, meta: SurveyMeta) -> str | None:
    """A warning when the valid pixels span less than the camera's NETD (nothing to segment)."""
    import numpy as np

    valid = ~np.asarray(frame.mask, dtype=bool)
    if not valid.any():
        return None
    t = frame.temperature_c  # reductions over the valid pixels without copying them
    span = float(np.max(t, where=valid, initial=-np.inf) - np.min(t, where=valid, initial=np.inf))
    netd = float(meta.camera.netd_k)
    if span >= netd:
        return None
    return (
        f"{Path(frame.path).name}: the image is uniform (range {span:.3g} K, below the camera NETD "
        f"{netd:.3g} K): no anomaly can be found; check that the export holds the scene's temperatures"
    )


def render_result(result: ImageResult, *, cmap: str = "inferno") -> RenderedImage:
    """Draw the overlay and the label image of one result and encode both as PNG.

    Parameters
    ----------
    result : ImageResult
        From :func:`process_image`; not changed (the render time is returned, not added to
        ``result.timings``).
    cmap : str
        Open colour-map name for the thermogram (``inferno``, ``magma``, ``gray`` ...).

    Returns
    -------
    RenderedImage
        Both PNGs, the warnings raised while drawing and the seconds spent.

    Raises
    ------
    IrsegError
        Rendering errors; tagged with stage ``"render"``.
    """
    from .io import encode_png
    from .render import draw_confirm_marks, label_image, overlay_layout, render_overlay

    caught: list[str] = []
    timings: dict[str, float] = {}

    zones = getattr(result, "zones", None)
    frame = result.frame if zones is None else zones.display_frame(result.frame)

    def _draw() -> tuple[bytes, bytes]:
        overlay = render_overlay(frame, result.segmentation, result.analysis, result.meta, cmap=cmap,
                                 zones=None if zones is None else zones.zones)
        points = getattr(result, "confirm_points", ())
        if points:  # roof moisture: numbered marks where to confirm (irseg.repairs.confirm_points)
            draw_confirm_marks(overlay, points, overlay_layout(frame.temperature_c.shape))
        labels = label_image(result.analysis)
        return encode_png(overlay), encode_png(labels)

    overlay_png, labels_png = _run_stage("render", timings, caught, _draw)
    return RenderedImage(overlay_png, labels_png, tuple(caught), timings["render"])
