"""A whole survey: many thermograms, in parallel, with resume and per-image failures.

:func:`run_survey` collects the images, runs :func:`irseg.pipeline.process_image` on each
(in this process, in a process pool, or on a dask.distributed cluster), writes the
per-image outputs as results arrive, then rebuilds the survey-level files from the
per-image records::

    OUT/<stem>/labels.png    16-bit, pixel = anomaly id
    OUT/<stem>/overlay.png   annotated thermogram
    OUT/<stem>/result.json   written last: the image's completion marker
    OUT/anomalies.csv  OUT/summary.json  OUT/report.html  OUT/failures.csv  OUT/run.log

Modules: ``_inputs`` (finding images, output names), ``_records`` (plain records shared by
the back-ends), ``_worker`` (one image, in a worker), ``_pool`` / ``_dask`` (back-ends),
``_summary`` (survey tables), ``_survey`` (:func:`run_survey`).
"""

from __future__ import annotations

from ._inputs import InputImage, collect_inputs
from ._records import ImageFailure, ImageOutcome, SurveySettings
from ._summary import ANOMALY_COLUMNS, FAILURE_COLUMNS
from ._survey import SurveyResult, fingerprint_input, run_survey

__all__ = [
    "ANOMALY_COLUMNS",
    "FAILURE_COLUMNS",
    "SurveySettings",
    "ImageFailure",
    "ImageOutcome",
    "SurveyResult",
    "InputImage",
    "collect_inputs",
    "fingerprint_input",
    "run_survey",
]
