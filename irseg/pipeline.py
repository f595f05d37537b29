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
    "PairResult",
    "process_image",
    "process_pair",
    "render_result",
    "render_pair",
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

    def to_records(self) -> list[dict[str, Any]]:
        """One dict per anomaly (``image`` then every :class:`~irseg.analysis.Anomaly` field, full
        precision), in id order: ``pandas.DataFrame(result.to_records())`` is the image's table."""
        from dataclasses import asdict

        return [{"image": self.path, **asdict(a)} for a in self.analysis.anomalies]


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
    own_range_c : (float, float) or None
        The image's own colour range, °C (what ``range_c=None`` draws with).
    range_c : (float, float) or None
        The colour range the overlay was drawn with, °C.
    """

    overlay_png: bytes = field(repr=False)
    labels_png: bytes = field(repr=False)
    warnings: tuple[str, ...]
    seconds: float
    own_range_c: tuple[float, float] | None = None
    range_c: tuple[float, float] | None = None


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
    from .io import read_thermogram
    from .metadata import load_metadata

    timings: dict[str, float] = {}
    caught: list[str] = []
    image = str(path)

    raw: RawFrame = _run_stage(
        "read", timings, caught, lambda: read_thermogram(image, format=format, max_pixels=max_pixels)
    )
    meta: SurveyMeta = _run_stage(
        "metadata", timings, caught, lambda: load_metadata(image, overrides=overrides)
    )
    handed = [raw]
    del raw  # the read image is freed as soon as it is calibrated (memory, issue 15)
    return _from_metadata(image, handed, meta, timings, caught)


def _from_metadata(image: str, handed: list[RawFrame], meta: SurveyMeta, timings: dict[str, float],
                   caught: list[str]) -> ImageResult:
    """The stages after read and metadata: zones, calibrate, segment, analyse (shared by both entries).

    ``handed`` holds the read image; it is taken out, so that no reference outlives calibration.
    """
    import numpy as np

    from .analysis import analyse
    from .controls import mark_zones, material_maps, zone_layer
    from .radiometry import calibrate
    from .repairs import confirm_points
    from .segmentation import segment

    raw = handed.pop()
    zones = _run_stage("metadata", timings, caught, lambda: zone_layer(meta.zones, np.shape(raw.data), image=image))
    frame: ThermalFrame = _run_stage(
        "calibrate", timings, caught, lambda: calibrate(raw, meta, **material_maps(zones, meta))
    )
    del raw
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
            keep_v=False,  # read by no later stage: its 4 bytes per pixel are freed at once (issue 15)
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


def process_array(
    temperature_c: Any,
    meta: Mapping[str, Any] | str | SurveyMeta | None = None,
    *,
    name: str = "array",
) -> ImageResult:
    """Correct, segment and analyse a thermogram already in memory (the same result as :func:`process_image`).

    Parameters
    ----------
    temperature_c : (M, N) array_like of float
        Temperatures in °C as the camera exported them (apparent temperatures, or already
        corrected with ``[camera] export_emissivity``); NaN marks invalid pixels.
    meta : mapping, str or SurveyMeta, optional
        The metadata as a dict of sections (``{"surface": {"emissivity": 0.93}, "air": {...}}``),
        as the text of a TOML file, or a :class:`~irseg.types.SurveyMeta`; validated like a
        sidecar file. ``[camera] units``, ``scale`` and ``offset`` are set to °C, 1 and 0.
    name : str
        The image's name in messages, the overlay's title and ``ImageResult.path``.

    Returns
    -------
    ImageResult
        As :func:`process_image`; draw it with :func:`render_result`.

    Raises
    ------
    IrsegError
        ``InputError`` for an array that is not 2-D numbers, ``MetadataError`` for bad metadata,
        and any later stage's error (tagged with its stage, :func:`failure_stage`).

    Examples
    --------
    >>> import numpy as np, irseg
    >>> wall = np.full((120, 160), 19.0); wall[40:80, 50:100] = 15.5
    >>> result = irseg.process_array(wall, {"surface": {"view": "interior"},
    ...                                     "air": {"inside_c": 20.0, "outside_c": 0.0}})
    >>> rows = result.to_records()          # one dict per anomaly: pandas.DataFrame(rows)
    """
    import dataclasses

    import numpy as np

    from .errors import InputError
    from .metadata import check_overrides, merge_metadata, parse_metadata_text

    timings: dict[str, float] = {}
    caught: list[str] = []
    data = np.asarray(temperature_c)
    if data.ndim != 2 or data.dtype.kind not in "fiu" or 0 in data.shape:
        raise InputError(f"{name}: temperature_c must be a non-empty 2-D (M, N) array of numbers in °C, "
                         f"got shape {data.shape} and dtype {data.dtype}")
    raw = RawFrame(path=name, data=data if data.dtype.kind == "f" else data.astype(np.float64), format="array")
    celsius = {"camera": {"units": "celsius", "scale": 1.0, "offset": 0.0}}

    def _meta() -> SurveyMeta:
        if isinstance(meta, SurveyMeta):
            return dataclasses.replace(meta, camera=dataclasses.replace(meta.camera, **celsius["camera"]))
        if isinstance(meta, str):
            layer = parse_metadata_text(meta, source=f"{name} metadata")
        else:
            layer = check_overrides(meta or {}, source=f"{name} metadata")
        return merge_metadata(layer, check_overrides(celsius, source=f"{name} metadata"),
                              sources=(f"{name} metadata",))

    result_meta = _run_stage("metadata", timings, caught, _meta)
    return _from_metadata(name, [raw], result_meta, timings, caught)


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


def render_result(result: ImageResult, *, cmap: str = "inferno", show_jumps: bool = False,
                  range_c: tuple[float, float] | None = None) -> RenderedImage:
    """Draw the overlay and the label image of one result and encode both as PNG.

    Parameters
    ----------
    result : ImageResult
        From :func:`process_image`; not changed (the render time is returned, not added to
        ``result.timings``).
    cmap : str
        Open colour-map name for the thermogram (``inferno``, ``magma``, ``gray`` ...).
    show_jumps, range_c
        As :func:`irseg.render.render_overlay`: draw the jump set; a fixed colour range in °C
        (None: the image's own 1st-99th percentile).

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
    from .render import draw_confirm_marks, label_image, overlay_layout, overlay_range_c, render_overlay

    caught: list[str] = []
    timings: dict[str, float] = {}

    zones = getattr(result, "zones", None)
    frame = result.frame if zones is None else zones.display_frame(result.frame)

    def _draw() -> tuple[bytes, bytes]:
        overlay = render_overlay(frame, result.segmentation, result.analysis, result.meta, cmap=cmap,
                                 zones=None if zones is None else zones.zones, show_jumps=show_jumps,
                                 range_c=range_c)
        points = getattr(result, "confirm_points", ())
        if points:  # roof moisture: numbered marks where to confirm (irseg.repairs.confirm_points)
            draw_confirm_marks(overlay, points, overlay_layout(frame.temperature_c.shape))
        labels = label_image(result.analysis)
        return encode_png(overlay), encode_png(labels)

    overlay_png, labels_png = _run_stage("render", timings, caught, _draw)
    own = overlay_range_c(frame, None if zones is None else zones.zones)
    used = own if range_c is None else (float(range_c[0]), float(range_c[1]))
    return RenderedImage(overlay_png, labels_png, tuple(caught), timings["render"], own, used)


# --------------------------------------------------------------------------- pairs under pressure


@dataclass(frozen=True)
class PairResult:
    """The pair analysis of a pressurised image (:func:`process_pair`): ``reference`` (its file),
    ``analysis`` (:class:`irseg.pairs.PairAnalysis`), ``timings`` (``pair``) and ``warnings``."""

    reference: str
    analysis: Any
    timings: dict[str, float] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()


def process_pair(pressed: ImageResult, reference_path: str | Path, *,
                 overrides: Mapping[str, Mapping[str, Any]] | None = None, format: str | None = None,
                 max_pixels: int = DEFAULT_MAX_PIXELS) -> PairResult:
    """Compare a processed pressurised image (``pressed.meta.pressure`` names the pair) with its reference.

    The reference is read, its own metadata loaded and corrected as in :func:`process_image`,
    then registered onto the pressurised image and compared (:func:`irseg.pairs.analyse_pair`);
    ``overrides``, ``format`` and ``max_pixels`` apply to it as there.

    Raises
    ------
    IrsegError
        ``MetadataError``: an unusable ``[pressure]`` section, a reference that is itself
        pressurised; ``InputError``: views that do not overlap or match; any error of reading or
        correcting the reference. Every exception carries the stage ``"pair"``.
    """
    from .controls import material_maps, zone_layer
    from .errors import MetadataError
    from .io import read_thermogram
    from .metadata import load_metadata
    from .pairs import analyse_pair
    from .radiometry import calibrate

    timings: dict[str, float] = {}
    caught: list[str] = []
    reference = str(reference_path)
    pressure = pressed.meta.pressure
    sidecar = f"{Path(pressed.path).stem}.toml"

    def _check() -> None:
        if pressure is None:
            raise MetadataError(f"{sidecar}: no [pressure] section; name the reference image there to form a pair")
        if pressure.problem:
            raise MetadataError(pressure.problem)

    def _reference_frame() -> ThermalFrame:
        raw = read_thermogram(reference, format=format, max_pixels=max_pixels)
        meta = load_metadata(reference, overrides=overrides)
        if meta.pressure is not None:
            raise MetadataError(
                f"{sidecar}: [pressure] reference = \"{pressure.reference}\" is itself an image taken under a "
                f"pressure difference (its sidecar has [pressure]); name the image of the same view taken at "
                "ambient pressure")
        zones = zone_layer(meta.zones, raw.data.shape, image=reference)
        frame = calibrate(raw, meta, **material_maps(zones, meta))
        return frame if zones is None else zones.exclude(frame)[1]

    _run_stage("pair", timings, caught, _check)
    frame = _run_stage("pair", timings, caught, _reference_frame)
    own = [int(a.anomaly) for a in pressed.analysis.anomalies]
    analysis = _run_stage("pair", timings, caught, lambda: analyse_pair(
        frame, pressed.frame, pressure_pa=float(pressure.difference_pa), minutes=pressure.minutes,
        view=pressed.meta.surface.view, first_id=max(own, default=0) + 1,
        pixel_area_m2=getattr(pressed.analysis, "pixel_area_m2", None), own_labels=pressed.analysis.labels))
    return PairResult(reference=reference, analysis=analysis, timings=timings, warnings=tuple(caught))


def render_pair(pressed: ImageResult, pair: PairResult) -> tuple[bytes, bytes]:
    """``difference.png`` (RGB) and ``pair_labels.png`` (16-bit, pixel = pair anomaly id); errors tagged ``render``."""
    from types import SimpleNamespace

    from .io import encode_png
    from .render import label_image, render_difference

    a = pair.analysis
    reg = a.registration
    title = getattr(pressed.meta.image, "title", None) or Path(pressed.path).name
    n = len(a.anomalies)
    residual = "not measurable" if reg.rms_px is None else f"{reg.rms_px:.2f} px"
    header = (f"registration residual {residual}, shift ({reg.shift_px[0]:.1f}, {reg.shift_px[1]:.1f}) px, "
              f"rotation {reg.rotation_deg:.2f}°, scale {reg.scale:.3f}, overlap {reg.overlap:.0%}  |  "
              f"drift {a.drift_k:+.2f} K removed")

    def _draw() -> tuple[bytes, bytes]:
        picture = render_difference(a.difference_k, a.labels, a.anomalies,
                                    title=f"{title}  |  ΔT against {Path(pair.reference).name}: "
                                          f"{n} lea{'k' if n == 1 else 'ks'} at {a.pressure_pa:g} Pa",
                                    header=header)
        return encode_png(picture), encode_png(label_image(SimpleNamespace(labels=a.labels)))

    return _run_stage("render", {}, [], _draw)
