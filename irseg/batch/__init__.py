"""A whole survey: many thermograms, in parallel, with resume and per-image failures.

:func:`run_survey` collects the images, runs :func:`irseg.pipeline.process_image` on each
(in this process, in a process pool, or on a dask.distributed cluster), writes the
per-image outputs as results arrive, then rebuilds the survey-level files from the
per-image records::

    OUT/<stem>/labels.png    16-bit, pixel = anomaly id
    OUT/<stem>/overlay.png   annotated thermogram
    OUT/<stem>/result.json   written last: the image's completion marker (an ImageRecord)
    OUT/anomalies.csv  OUT/summary.json  OUT/report.html  OUT/failures.csv  OUT/run.log
    OUT/.irseg-outputs       manifest: the files irseg wrote (only these are replaced or removed)
    OUT/.irseg-lock          locked while a run writes to OUT

Files a folder search leaves out are :class:`SkippedFile` records (``scan_inputs``), listed
with the reason in run.log, summary.json (``skipped``) and the report.

Every anomaly of the survey is a :class:`SurveyAnomaly`; :func:`anomaly_table` turns them
into columns (``pandas.DataFrame(anomaly_table(result.anomalies))`` is anomalies.csv).

Modules: ``_inputs`` (finding images, skipped files, output names), ``_records`` (plain records shared by
the back-ends), ``_settings`` (settings, checked up front), ``_resume`` (fingerprints,
complete images), ``_worker`` (one image, in a worker), ``_pool`` / ``_dask`` (back-ends),
``_loop`` (accepting and writing each image), ``_summary`` (survey tables),
``_survey_files`` (the survey-level files), ``_survey`` (:func:`run_survey`).
"""

from __future__ import annotations

from ..report import ANOMALY_COLUMNS, SurveyAnomaly, anomaly_table
from ._inputs import InputImage, SkippedFile, SurveyInputs, collect_inputs, scan_inputs
from ._records import ImageFailure, ImageOutcome, ImageRecord, SurveySettings
from ._resume import fingerprint_input
from ._summary import FAILURE_COLUMNS
from ._survey import SurveyResult, run_survey

__all__ = [
    "ANOMALY_COLUMNS",
    "FAILURE_COLUMNS",
    "SurveyAnomaly",
    "anomaly_table",
    "ImageRecord",
    "SurveySettings",
    "ImageFailure",
    "ImageOutcome",
    "SurveyResult",
    "InputImage",
    "SkippedFile",
    "SurveyInputs",
    "collect_inputs",
    "scan_inputs",
    "fingerprint_input",
    "run_survey",
]
