"""Plain records passed between the survey's main process and its workers (a leaf of irseg.batch).

The process pool, the dask path and the worker all import from here, never from each other,
so the execution back-ends stay free of import cycles.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from .._shared import DEFAULT_MAX_PIXELS

__all__ = ["SurveySettings", "ImageFailure", "ImageOutcome", "worker_died"]


@dataclass(frozen=True)
class SurveySettings:
    """Settings that change results; part of every image's fingerprint.

    Attributes
    ----------
    overrides : dict
        ``{"section": {"key": value}}`` applied after the metadata files.
    format : str or None
        Forced reader name.
    max_pixels : int
        Pixel budget per image.
    cmap : str
        Colour map of the overlays.
    """

    overrides: dict[str, dict[str, Any]] = field(default_factory=dict)
    format: str | None = None
    max_pixels: int = DEFAULT_MAX_PIXELS
    cmap: str = "inferno"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready copy (sorted when serialised)."""
        return {
            "overrides": {s: dict(v) for s, v in self.overrides.items()},
            "format": self.format,
            "max_pixels": int(self.max_pixels),
            "cmap": self.cmap,
        }


@dataclass(frozen=True)
class ImageFailure:
    """One input that could not be processed.

    Attributes
    ----------
    file : str
        The input as named in the outputs (file name, or relative path when names repeat).
    stage : str
        ``read``, ``metadata``, ``calibrate``, ``segment``, ``analyse``, ``render``,
        ``write`` or ``worker`` (the worker process died).
    message : str
        One line: what failed and what to do.
    traceback : str or None
        Full traceback text, for ``-v``.
    """

    file: str
    stage: str
    message: str
    traceback: str | None = None


@dataclass(frozen=True)
class ImageOutcome:
    """What happened to one input.

    Attributes
    ----------
    index : int
        Position in the survey's input order.
    image, stem : str
        Name in the outputs, and its output folder under OUT.
    status : str
        ``"ok"`` or ``"failed"``.
    record : dict or None
        The content of ``result.json`` (normalised JSON data) when ok.
    failure : ImageFailure or None
        When failed.
    skipped : bool
        True when ``resume`` found complete, matching outputs and did not recompute.
    timings : dict of str to float
        Seconds per stage (empty for skipped images).
    overlay_png, labels_png : bytes or None
        Encoded images, from the worker to the writer; dropped once written.
    """

    index: int
    image: str
    stem: str
    status: str
    record: dict[str, Any] | None = None
    failure: ImageFailure | None = None
    skipped: bool = False
    timings: dict[str, float] = field(default_factory=dict)
    overlay_png: bytes | None = field(default=None, repr=False)
    labels_png: bytes | None = field(default=None, repr=False)



def worker_died(task: dict[str, Any]) -> ImageOutcome:
    """The outcome of a task whose worker process died (out of memory, a native crash)."""
    failure = ImageFailure(
        file=task["image"],
        stage="worker",
        message="the worker process died while processing this image (out of memory or a crash); "
        "lower the max_pixels setting or the jobs setting, or run it alone with jobs = 1 and the verbose setting",
    )
    return ImageOutcome(task["index"], task["image"], task["stem"], "failed", failure=failure)
