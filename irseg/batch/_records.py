"""Plain records passed between the survey's main process and its workers (a leaf of irseg.batch).

The process pool, the dask path and the worker all import from here, never from each other,
so the execution back-ends stay free of import cycles. :class:`ImageRecord` is the typed
content of one image's ``result.json``; its anomalies are :class:`irseg.report.SurveyAnomaly`
records (the report's leaf module, which imports nothing heavy).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from .._shared import DEFAULT_MAX_PIXELS
from ..errors import ConfigError
from ..report._table import SurveyAnomaly

__all__ = ["SurveySettings", "ImageFailure", "ImageOutcome", "ImageRecord", "worker_died"]


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
    show_jumps : bool
        Draw the jump set on the overlays.
    range_c : "auto", "survey" or (lo_c, hi_c)
        Colour range of the overlays (``"survey"``: redrawn with the survey's range after the run).
    """

    overrides: dict[str, dict[str, Any]] = field(default_factory=dict)
    format: str | None = None
    max_pixels: int = DEFAULT_MAX_PIXELS
    cmap: str = "inferno"
    show_jumps: bool = False
    range_c: str | tuple[float, float] = "auto"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready copy (sorted when serialised); the overlay keys only when not the default."""
        out: dict[str, Any] = {
            "overrides": {s: dict(v) for s, v in self.overrides.items()},
            "format": self.format,
            "max_pixels": int(self.max_pixels),
            "cmap": self.cmap,
        }
        if self.show_jumps:
            out["show_jumps"] = True
        if self.range_c != "auto":
            out["range_c"] = self.range_c if isinstance(self.range_c, str) else [float(v) for v in self.range_c]
        return out


@dataclass(frozen=True)
class ImageFailure:
    """One input that could not be processed.

    Attributes
    ----------
    image : str
        The input as named in the outputs (file name, or relative path when names repeat);
        the ``file`` column of failures.csv and summary.json.
    stage : str
        ``read``, ``metadata``, ``calibrate``, ``segment``, ``analyse``, ``render``,
        ``write`` or ``worker`` (the worker process died).
    message : str
        One line: what failed and what to do.
    traceback : str or None
        Full traceback text, shown with the verbose setting.
    """

    image: str
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
    record : ImageRecord or None
        The content of ``result.json`` when ok.
    failure : ImageFailure or None
        When failed.
    skipped : bool
        True when ``resume`` found complete, matching outputs and did not recompute.
    timings : dict of str to float
        Seconds per stage (empty for skipped images).
    overlay_png, labels_png : bytes or None
        Encoded images, from the worker to the writer; dropped once written.
    difference_png, pair_labels_png : bytes or None
        The pair pictures of a pressurised image whose pair was analysed (irseg.pairs).
    """

    index: int
    image: str
    stem: str
    status: str
    record: ImageRecord | None = None
    failure: ImageFailure | None = None
    skipped: bool = False
    timings: dict[str, float] = field(default_factory=dict)
    overlay_png: bytes | None = field(default=None, repr=False)
    labels_png: bytes | None = field(default=None, repr=False)
    difference_png: bytes | None = field(default=None, repr=False)
    pair_labels_png: bytes | None = field(default=None, repr=False)


#: Sections of result.json kept as JSON objects (provenance; the survey tables do not read them).
_DETAIL_KEYS = ("metadata", "parameters", "image_size", "pixels", "segmentation", "analysis")
#: Sections only a pressurised image's result.json has (irseg.pairs): absent, not null, elsewhere.
_PAIR_KEYS = ("registration", "pair")


@dataclass(frozen=True)
class ImageRecord:
    """The content of one image's ``result.json``, written last as the image's completion marker.

    Attributes
    ----------
    image, source, stem : str
        Name in the outputs, path relative to the survey root, output folder under OUT.
    fingerprint : str
        ``"sha256:<hex>"`` of the input, its metadata files, the settings and the version.
    irseg_version : str
    view : str or None
        ``interior`` or ``exterior``.
    delta_t_k : float or None
        Inside minus outside air temperature, K.
    anomalies : tuple of SurveyAnomaly
        In id order; ``image_severity`` set, ``severity`` None (the survey ranks them).
    warnings : tuple of str
        Every stage's warnings, without repeats and without the survey's root folder.
    assumed : tuple of dict
        ``{"key", "value", "reason"}``: each value irseg assumed because the metadata lacked it.
    metadata, parameters, image_size, pixels, segmentation, analysis : dict
        JSON sections recording how the image was processed.
    registration : dict or None
        A pressurised image whose pair was analysed: ``{shift_px: [row, col], rotation_deg, scale,
        rms_px, overlap}``, the transform that maps the reference onto this image (irseg.pairs).
    pair : dict or None
        A pressurised image (``[pressure]`` in its sidecar): ``reference``, ``status`` (``"ok"`` or
        ``"failed"``), ``message`` when failed, and the pressure, drift, noise and leak count when ok.

    Notes
    -----
    Values are normalised JSON data (:func:`irseg.io.normalise_json`), so a record read back
    from its file equals the one written: a resumed survey rebuilds the same tables.
    """

    image: str
    source: str
    stem: str
    fingerprint: str
    irseg_version: str
    view: str | None
    delta_t_k: float | None
    anomalies: tuple[SurveyAnomaly, ...]
    warnings: tuple[str, ...]
    assumed: tuple[dict[str, Any], ...]
    metadata: dict[str, Any]
    parameters: dict[str, Any]
    image_size: dict[str, Any]
    pixels: dict[str, Any]
    segmentation: dict[str, Any]
    analysis: dict[str, Any]
    registration: dict[str, Any] | None = None
    pair: dict[str, Any] | None = None

    @property
    def outputs(self) -> dict[str, str]:
        """The image's files, relative to OUT (the pair pictures when its pair was analysed)."""
        names = [("labels", "png"), ("overlay", "png"), ("result", "json")]
        if self.registration is not None:
            names += [("pair_labels", "png"), ("difference", "png")]
        return {name: f"{self.stem}/{name}.{ext}" for name, ext in names}

    @classmethod
    def from_json(cls, data: Any) -> ImageRecord:
        """The record of a ``result.json`` object (normalised JSON data).

        Raises
        ------
        ConfigError
            Not the object irseg writes (a key missing, a wrong type, status not ``"ok"``).
        """
        where = "result.json"
        if not isinstance(data, Mapping) or data.get("status") != "ok":
            raise ConfigError(f"{where}: not the record of a processed image; delete the file to recompute the image")
        image = _typed(data, "image", str, where)
        anomalies = tuple(
            _anomaly_from_result(image, row, f"{where}: anomalies[{k}]")
            for k, row in enumerate(_typed(data, "anomalies", list, where))
        )
        assumed = _typed(data, "assumed", list, where, missing=[])  # absent from older records
        if not all(isinstance(a, Mapping) for a in assumed):
            raise ConfigError(f"{where}: assumed must hold objects; delete the file to recompute the image")
        return cls(
            image=image,
            source=_typed(data, "source", str, where),
            stem=_typed(data, "stem", str, where),
            fingerprint=_typed(data, "fingerprint", str, where),
            irseg_version=_typed(data, "irseg_version", str, where),
            view=_typed(data, "view", str, where, missing=None),
            delta_t_k=_typed(data, "delta_t_k", (int, float), where, missing=None),
            anomalies=anomalies,
            warnings=tuple(str(w) for w in _typed(data, "warnings", list, where)),
            assumed=tuple(dict(a) for a in assumed),
            **{key: dict(_typed(data, key, Mapping, where)) for key in _DETAIL_KEYS},
            **{key: _optional_object(data, key, where) for key in _PAIR_KEYS},
        )

    def to_json(self) -> dict[str, Any]:
        """The ``result.json`` object; :meth:`from_json` reads it back to an equal record."""
        return {
            "irseg_version": self.irseg_version,
            "status": "ok",
            "image": self.image,
            "source": self.source,
            "stem": self.stem,
            "fingerprint": self.fingerprint,
            "outputs": self.outputs,
            "view": self.view,
            "delta_t_k": self.delta_t_k,
            **{key: getattr(self, key) for key in _DETAIL_KEYS},
            **{key: getattr(self, key) for key in _PAIR_KEYS if getattr(self, key) is not None},
            "warnings": list(self.warnings),
            "assumed": [dict(a) for a in self.assumed],
            "anomalies": [_anomaly_to_result(a) for a in self.anomalies],
        }


# result.json holds each anomaly as irseg.analysis.Anomaly's fields: no image, and
# ``severity`` is the rank within the image (SurveyAnomaly.image_severity).
# The survey-level fields (uid, the review, the image's details) are set when the survey files are
# built (irseg.batch._summary), never stored per image: a review changes no image's record.
_SURVEY_ONLY = ("image", "severity", "image_severity", "rank", "uid", "review", "note", "title", "element")


def _anomaly_from_result(image: str, row: Any, where: str) -> SurveyAnomaly:
    if not isinstance(row, Mapping):
        raise ConfigError(f"{where}: must be an object; delete the file to recompute the image")
    values = {key: value for key, value in row.items() if key not in _SURVEY_ONLY}
    return SurveyAnomaly.from_json({**values, "image": image, "image_severity": row.get("severity")}, where=where)


#: Fields of a leak found by a pair (irseg.pairs): in result.json only for such anomalies.
_PAIR_ONLY = ("pressure_pa", "cooling_k", "cooling_max_k")


def _anomaly_to_result(anomaly: SurveyAnomaly) -> dict[str, Any]:
    row = {key: value for key, value in anomaly.to_json().items()
           if key not in _SURVEY_ONLY and not (key in _PAIR_ONLY and value is None)}
    row["severity"] = anomaly.image_severity
    return row


def _typed(data: Mapping[str, Any], key: str, kind: Any, where: str, **default: Any) -> Any:
    """``data[key]`` checked against ``kind``; ``missing=`` is returned for an absent or null value."""
    value = data.get(key)
    if value is None and "missing" in default:
        return default["missing"]
    if not isinstance(value, kind) or isinstance(value, bool):
        raise ConfigError(f"{where}: {key} = {value!r} is not what irseg writes; delete the file to recompute the image")
    return value


def _optional_object(data: Mapping[str, Any], key: str, where: str) -> dict[str, Any] | None:
    value = data.get(key)
    if value is None:
        return None
    if not isinstance(value, Mapping):
        raise ConfigError(f"{where}: {key} = {value!r:.60} is not what irseg writes; delete the file to "
                          "recompute the image")
    return dict(value)


def worker_died(task: dict[str, Any]) -> ImageOutcome:
    """The outcome of a task whose worker process died (out of memory, a native crash)."""
    failure = ImageFailure(
        image=task["image"],
        stage="worker",
        message="the worker process died while processing this image (out of memory or a crash); "
        "lower the max_pixels setting or the jobs setting, or run it alone with jobs = 1 and the verbose setting",
    )
    return ImageOutcome(task["index"], task["image"], task["stem"], "failed", failure=failure)
