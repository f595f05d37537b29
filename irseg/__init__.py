"""irseg: defect lists from building-envelope thermograms.

Subpackages and modules, one line each:

- ``irseg.errors``       -- the one exception and warning hierarchy (root :class:`IrsegError`).
- ``irseg.types``        -- frozen data passed between the stages.
- ``irseg.vocabulary``   -- causes, their labels and colours, stage names, views, cautions.
- ``irseg.io``           -- readers for open radiometric formats, bounded reads, atomic writers.
- ``irseg.metadata``     -- survey.toml / sidecar TOML: parse, validate, merge, resolve defaults once.
- ``irseg.radiometry``   -- band-limited Planck radiance, emissivity and reflected-temperature correction.
- ``irseg.segmentation`` -- Ambrosio–Tortorelli phase-field segmentation (smooth field + jump set + regions).
- ``irseg.analysis``     -- local sound reference, cause, area, excess heat loss, f_Rsi, confidence.
- ``irseg.pairs``        -- paired thermograms under a pressure difference: registration, ΔT, leaks.
- ``irseg.render``       -- annotated overlay and label images (arrays).
- ``irseg.report``       -- the self-contained HTML survey report.
- ``irseg.pipeline``     -- one image end to end (the only place the stages are chained).
- ``irseg.batch``        -- a whole survey: process pool or dask.distributed, resume, failures.
- ``irseg.scenes``       -- physics-based synthetic scenes and the bundled sample survey.
- ``irseg.cli``          -- the ``irseg`` command, a thin layer over the above.

``irseg.segment`` is the segmentation function (:func:`irseg.segmentation.segment`).

Public names are loaded lazily so that ``import irseg`` stays cheap in worker
processes.
"""

from __future__ import annotations

import importlib
from typing import Any

from ._version import __version__
from .errors import (
    CalibrationError,
    ConfigError,
    ConvergenceWarning,
    InputError,
    IrsegError,
    IrsegWarning,
    MetadataError,
    MetadataWarning,
    OutputError,
    SolverError,
    UnsupportedFormatError,
)

# public name -> module that defines it
_LAZY = {
    "segment": "irseg.segmentation",
    "Segmentation": "irseg.segmentation",
    "read_thermogram": "irseg.io",
    "load_metadata": "irseg.metadata",
    "calibrate": "irseg.radiometry",
    "analyse": "irseg.analysis",
    "Analysis": "irseg.analysis",
    "Anomaly": "irseg.analysis",
    "process_image": "irseg.pipeline",
    "process_array": "irseg.pipeline",
    "render_result": "irseg.pipeline",
    "process_pair": "irseg.pipeline",
    "analyse_pair": "irseg.pairs",
    "run_survey": "irseg.batch",
    "SurveyAnomaly": "irseg.batch",
    "ImageRecord": "irseg.batch",
    "anomaly_table": "irseg.batch",
}

__all__ = [
    "__version__",
    "IrsegError",
    "ConfigError",
    "MetadataError",
    "InputError",
    "UnsupportedFormatError",
    "CalibrationError",
    "SolverError",
    "OutputError",
    "IrsegWarning",
    "ConvergenceWarning",
    "MetadataWarning",
    *_LAZY,
]


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'irseg' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
