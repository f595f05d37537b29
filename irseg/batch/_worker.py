"""The worker side of a survey run: one image to a small, picklable outcome (used by irseg.batch).

:func:`run_task` runs in a worker process (or a dask worker, or in the calling
process with ``jobs=1``). It reads the input and returns the ``result.json``
record (:class:`~irseg.batch.ImageRecord`) and the PNG bytes; it never writes into
the output folder and never raises for a bad input: the failure, with its stage,
is part of the outcome.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
from collections.abc import Iterable, Sequence
from typing import Any

from .. import io as irio
from .._version import __version__
from ..errors import IrsegError
from ._records import ImageFailure, ImageOutcome, ImageRecord, SurveySettings

__all__ = ["run_task", "run_task_single_threaded", "import_stages", "guard_malloc_trim"]

_GUARD_THRESHOLD = 128 * 1024 * 1024
_M_TRIM_THRESHOLD = -1  # glibc <malloc.h>


def guard_malloc_trim() -> bool:
    """Undo a tiny ``MALLOC_TRIM_THRESHOLD_`` in this worker process (glibc only; cheap, idempotent).

    Why: see "Memory trimming" in :mod:`irseg.batch._dask`; it runs first in every task.

    Returns
    -------
    bool
        True when the threshold was raised by this call.
    """
    value = os.environ.get("MALLOC_TRIM_THRESHOLD_")
    if value is None:
        return False
    try:
        if int(value) >= _GUARD_THRESHOLD:
            return False
    except ValueError:
        return False
    name = ctypes.util.find_library("c")
    if not name:
        return False
    try:
        libc = ctypes.CDLL(name)
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    return bool(mallopt(_M_TRIM_THRESHOLD, _GUARD_THRESHOLD))


def _relativise(text: str, root: str) -> str:
    """Drop the survey root folder from messages (no absolute paths in data files)."""
    prefix = root.rstrip(os.sep)
    if prefix:  # never for the filesystem root, which would eat every separator
        text = text.replace(prefix + os.sep, "")
    return " ".join(text.split())


def import_stages() -> None:
    """Import every stage module, so their native thread pools exist before they are limited."""
    import importlib

    for name in ("irseg.io", "irseg.metadata", "irseg.radiometry", "irseg.segmentation", "irseg.analysis",
                 "irseg.render", "irseg.pairs"):
        importlib.import_module(name)


def run_task_single_threaded(task: dict[str, Any]) -> ImageOutcome:
    """:func:`run_task` with BLAS/OpenMP pools limited to one thread (dask tasks)."""
    import cv2
    from threadpoolctl import threadpool_limits

    import_stages()
    cv2.setNumThreads(1)  # a dask worker runs irseg tasks one per thread; keep OpenCV serial
    with threadpool_limits(limits=1):
        return run_task(task)


def run_task(task: dict[str, Any]) -> ImageOutcome:
    """Process one image; runs in a worker. Never raises for a bad input.

    Callers limit native thread pools to one thread (same bits whatever the
    worker count): the pool initializer, the in-process loop, or
    :func:`run_task_single_threaded` on dask.
    """
    import traceback

    from ..pipeline import failure_stage, process_image, render_result

    guard_malloc_trim()
    settings: SurveySettings = task["settings"]
    image, stem, root = task["image"], task["stem"], task["root"]
    timings: dict[str, float] = {}
    stage = "read"  # the stage of a failure that carries no stage of its own
    try:
        result = process_image(
            task["path"],
            overrides=settings.overrides or None,
            format=settings.format,
            max_pixels=settings.max_pixels,
        )
        timings = dict(result.timings)
        stage = "render"
        fixed = settings.range_c if isinstance(settings.range_c, tuple) else None
        rendered = render_result(result, cmap=settings.cmap, show_jumps=settings.show_jumps,
                                 range_c=task.get("range_c") or fixed)
        timings["render"] = rendered.seconds
        pair, pair_pngs, pair_info = _run_pair(result, task, timings)
        stage = "write"
        record = _make_record(result, task, rendered.warnings, rendered, pair=pair, pair_info=pair_info)
    except Exception as exc:  # one bad input must never stop the survey
        stage = failure_stage(exc) or stage
        if isinstance(exc, IrsegError):
            message = str(exc)
        else:
            message = f"unexpected {type(exc).__name__}: {exc} (the verbose setting shows the traceback)"
        if isinstance(exc, MemoryError):
            message = (f"out of memory in the {stage} stage ({exc or 'no detail'}); run fewer images at once "
                       "(the jobs setting), or refuse images this large (the max_pixels setting)")
        failure = ImageFailure(
            image=image,
            stage=stage,
            message=_relativise(message, root) or type(exc).__name__,
            traceback=traceback.format_exc(),
        )
        return ImageOutcome(task["index"], image, stem, "failed", failure=failure, timings=timings)
    return ImageOutcome(
        task["index"], image, stem, "ok", record=record, timings=timings,
        overlay_png=rendered.overlay_png, labels_png=rendered.labels_png,
        difference_png=None if pair_pngs is None else pair_pngs[0],
        pair_labels_png=None if pair_pngs is None else pair_pngs[1],
    )


def _run_pair(result: Any, task: dict[str, Any], timings: dict[str, float]) -> tuple[Any, Any, dict[str, Any] | None]:
    """The pair analysis of a pressurised image: ``(PairResult, (difference, pair_labels) PNGs, pair info)``.

    Never raises: a failing pair (its ``[pressure]`` section, a reference missing or itself
    pressurised, views that do not overlap) is recorded in the pair info and fails the pair alone;
    the image keeps its single-image results. ``(None, None, None)`` for an image without ``[pressure]``.
    """
    from ..pipeline import process_pair, render_pair

    pressure = getattr(result.meta, "pressure", None)
    if pressure is None:
        return None, None, None
    settings: SurveySettings = task["settings"]
    reference = task.get("reference") or {}
    info: dict[str, Any] = {"reference": reference.get("image") or pressure.reference}
    try:
        from ..errors import MetadataError

        if pressure.problem:
            raise MetadataError(pressure.problem)
        if task.get("reference_problem") or not reference.get("path"):
            raise MetadataError(task.get("reference_problem") or (
                f"{stem_of(task)}.toml: [pressure] reference = \"{pressure.reference}\" names no image of this "
                "survey; give the stem of the image of the same view taken at ambient pressure, in the same folder"))
        pair = process_pair(result, reference["path"], overrides=settings.overrides or None,
                            format=settings.format, max_pixels=settings.max_pixels)
        timings["pair"] = sum(pair.timings.values())
        pngs = render_pair(result, pair)
    except Exception as exc:  # the pair fails alone
        message = str(exc) if isinstance(exc, IrsegError) else (
            f"unexpected {type(exc).__name__}: {exc} (the verbose setting shows the traceback)")
        info.update(status="failed", message=_relativise(message, task["root"]))
        return None, None, info
    a = pair.analysis
    info.update(status="ok", pressure_pa=a.pressure_pa, minutes=a.minutes, drift_k=a.drift_k, noise_k=a.noise_k,
                correlation=a.registration.correlation, n_anomalies=len(a.anomalies))
    return pair, pngs, info


def stem_of(task: dict[str, Any]) -> str:
    """The input file's stem (its sidecar is ``<stem>.toml``)."""
    return os.path.splitext(os.path.basename(task["path"]))[0]


def _dedupe(messages: Iterable[str], root: str) -> list[str]:
    seen: list[str] = []
    for message in messages:
        text = _relativise(str(message), root)
        if text and text not in seen:
            seen.append(text)
    return seen


def _make_record(result: Any, task: dict[str, Any], render_warnings: Sequence[str], rendered: Any = None, *,
                 pair: Any = None, pair_info: dict[str, Any] | None = None) -> ImageRecord:
    """The content of result.json for one processed image (built from normalised JSON data).

    A pressurised image's pair anomalies follow its own in ``anomalies`` (ids continue the
    sequence), with ``pressure_pa``, ``cooling_k`` and ``cooling_max_k``; ``registration`` and
    ``pair`` are added for it alone.
    """
    from dataclasses import asdict, is_dataclass

    from ..metadata import meta_to_dict

    meta, frame, seg, analysis = result.meta, result.frame, result.segmentation, result.analysis
    stem, root = task["stem"], task["root"]
    meta_dict = meta_to_dict(meta)
    if isinstance(meta_dict, dict) and "sources" in meta_dict:
        meta_dict = dict(meta_dict)
        meta_dict["sources"] = [
            s if s == "command line" else _relativise(os.path.relpath(s, root) if os.path.isabs(s) else s, root)
            for s in meta_dict["sources"]
        ]
    params = seg.params
    params_dict = asdict(params) if is_dataclass(params) else dict(params)
    inside, outside = meta.air.inside_c, meta.air.outside_c
    delta_t = None if inside is None or outside is None else float(inside) - float(outside)
    anomalies = [asdict(a) for a in analysis.anomalies]
    if pair is not None:  # the leaks found by the pair, after the image's own anomalies
        anomalies += [{k: v for k, v in asdict(a).items() if k != "pattern"} for a in pair.analysis.anomalies]
    assumed = [  # SurveyMeta.assumed: what the metadata lacked and irseg assumed
        {"key": a.key, "value": a.value, "reason": _relativise(str(a.reason), root)}
        for a in getattr(meta, "assumed", ())
    ]
    warnings = _dedupe([*frame.warnings, *result.warnings, *analysis.warnings, *render_warnings], root)
    rows, cols = frame.temperature_c.shape
    record = {
        "irseg_version": __version__,
        "status": "ok",
        "image": task["image"],
        "source": task["rel"],
        "stem": stem,
        "fingerprint": task["fingerprint"],  # "outputs" follow from the stem (ImageRecord.outputs)
        "view": meta.surface.view,
        "delta_t_k": delta_t,
        "metadata": meta_dict,
        "parameters": {"segment": params_dict, "settings": task["settings"].to_dict()},
        "image_size": {"rows": int(rows), "cols": int(cols)},
        "pixels": {
            "n_dead": int(frame.n_dead),
            "n_nan": int(frame.n_nan),
            "n_masked": int(frame.mask.sum()),
        },
        "segmentation": {
            "n_regions": int(seg.n_regions),
            "iterations": int(seg.iterations),
            "converged": bool(seg.converged),
            "message": _relativise(str(seg.message), root),
        },
        "analysis": {
            "pixel_m": analysis.pixel_m,
            "pixel_area_m2": analysis.pixel_area_m2,
            "h_w_m2k": analysis.h_w_m2k,
            "n_anomalies": len(anomalies),
            # roof moisture: where to confirm (irseg.repairs.confirm_points); read by the survey files
            "confirm_points": [asdict(p) for p in getattr(result, "confirm_points", ())],
            # the overlay's colour ranges: the image's own, and the one drawn (a survey's common range)
            "display_range_c": None if rendered is None else list(rendered.own_range_c),
            "overlay_range_c": None if rendered is None else list(rendered.range_c),
        },
        "warnings": warnings,
        "assumed": assumed,
        "anomalies": anomalies,
    }
    if pair_info is not None:
        record["pair"] = pair_info
        if pair is not None:
            record["registration"] = pair.analysis.registration.to_json()
    return ImageRecord.from_json(irio.normalise_json(record))
