"""The survey's anomaly record and its column table (a leaf: standard library and irseg.errors only).

One typed record, :class:`SurveyAnomaly`, carries an anomaly through the survey-level
outputs: :mod:`irseg.batch` builds it from each image's ``result.json`` and ranks it across
the survey, ``anomalies.csv`` and the ``anomalies`` list of ``summary.json`` are its
:func:`anomaly_table`, and :func:`irseg.report.render_report` reads it back from the summary.
It lives beside the report because the batch imports the report, never the other way
round; it loads neither the analysis nor OpenCV.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, fields
from typing import Any

from ..errors import ConfigError

__all__ = ["ANOMALY_COLUMNS", "CSV_DECIMALS", "CSV_DIALECTS", "SurveyAnomaly", "anomaly_table", "csv_rows"]

#: Columns of OUT/anomalies.csv and of the rows of summary.json's ``anomalies``, in order
#: (an interface: other tools read it).
ANOMALY_COLUMNS = (
    # the anomaly's name across the survey, first so that a row can be cited on its own
    "uid",
    "image", "anomaly", "kind", "cause", "reason", "area_m2", "area_low_m2", "area_high_m2",
    "mean_c", "min_c", "max_c", "reference_c", "delta_k", "excess_w", "excess_low_w", "excess_high_w",
    "excess_kwh_year", "f_rsi", "mould_risk", "centroid_row", "centroid_col",
    # ``rank`` (1 = act first; irseg.report._ranking) took the place of the former ``severity``
    "bbox_row0", "bbox_col0", "bbox_row1", "bbox_col1", "rank",
    # beyond the contract's list, appended so its order stays intact: the area in pixels is the one
    # area that is known when the shot's geometry is not
    "area_px",
    # the thermographer's review and the image's details (irseg.controls), appended
    "review", "note", "title", "element",
    # linear thermal bridges (issue 12): length and linear thermal transmittance psi with its band;
    # empty for area anomalies
    "length_m", "psi_w_mk", "psi_low_w_mk", "psi_high_w_mk",
    # pairs under a pressure difference (irseg.pairs), appended; empty for single-image anomalies
    "pressure_pa", "cooling_k", "cooling_max_k",
)


@dataclass(frozen=True)
class SurveyAnomaly:
    """One anomaly of a survey: its image, every field of :class:`irseg.analysis.Anomaly`, its survey rank.

    Field names are the column names of :data:`ANOMALY_COLUMNS`. The values are JSON data as
    written to the survey's files (floats rounded by :func:`irseg.io.normalise_json`, NaN as
    None), so every figure may be None; fields absent from a row read as None.

    Attributes
    ----------
    image : str
        The image's name in the survey's outputs.
    anomaly, kind, cause, reason, area_px, area_m2 ... bbox_col1, severity_score
        As :class:`irseg.analysis.Anomaly` (same names, same units).
    image_severity : int or None
        Rank within the image, 1 = repair first (``Anomaly.severity``; ``severity`` in result.json).
    rank : int or None
        Rank across the survey, 1 = act first (the ``rank`` column, by the rule of
        :mod:`irseg.report._ranking`); None until ranked, for an anomaly the review rejected and
        for one expected in the construction (a framing member).
    uid : str or None
        ``<stem>#<id>``: the image's output folder name (its file stem, unique in the survey) and
        the anomaly's id.
    review : str or None
        ``"accepted"``, ``"rejected"`` or ``"relabelled"`` by the thermographer's review; None
        when not reviewed. A rejected anomaly counts in no total and has no rank.
    note : str or None
        The review's note.
    title, element : str or None
        ``[image] title`` and ``element`` of the image's sidecar.
    length_m, psi_w_mk, psi_low_w_mk, psi_high_w_mk : float or None
        As :class:`irseg.analysis.Anomaly`: a linear thermal bridge's length (m) and its linear
        thermal transmittance ψ with its band, W/(m·K); None for area anomalies.
    pressure_pa, cooling_k, cooling_max_k : float or None
        An anomaly of a pair under a pressure difference (:mod:`irseg.pairs`): the pressure
        difference, Pa, and the mean and largest extra cooling between the shots, K (negative:
        warming, outside view); None for single-image anomalies.
    """

    image: str
    anomaly: int
    kind: str | None = None
    cause: str | None = None
    reason: str | None = None
    area_px: int | None = None
    area_m2: float | None = None
    area_low_m2: float | None = None
    area_high_m2: float | None = None
    mean_c: float | None = None
    min_c: float | None = None
    max_c: float | None = None
    reference_c: float | None = None
    delta_k: float | None = None
    excess_w: float | None = None
    excess_low_w: float | None = None
    excess_high_w: float | None = None
    excess_kwh_year: float | None = None
    f_rsi: float | None = None
    mould_risk: bool | None = None
    centroid_row: float | None = None
    centroid_col: float | None = None
    bbox_row0: int | None = None
    bbox_col0: int | None = None
    bbox_row1: int | None = None
    bbox_col1: int | None = None
    image_severity: int | None = None
    severity_score: float | None = None
    rank: int | None = None
    uid: str | None = None
    review: str | None = None
    note: str | None = None
    title: str | None = None
    element: str | None = None
    length_m: float | None = None
    psi_w_mk: float | None = None
    psi_low_w_mk: float | None = None
    psi_high_w_mk: float | None = None
    pressure_pa: float | None = None
    cooling_k: float | None = None
    cooling_max_k: float | None = None

    @classmethod
    def from_json(cls, data: Mapping[str, Any], *, where: str = "anomaly") -> SurveyAnomaly:
        """The record of a JSON object keyed by field name (a summary row, :meth:`to_json`).

        Parameters
        ----------
        data : mapping
            ``image`` and ``anomaly`` are required; other missing keys read as None and
            keys that are not fields are ignored.
        where : str
            Names the object in error messages (e.g. ``"summary.json: anomalies[3]"``).

        Raises
        ------
        ConfigError
            ``data`` is not a mapping, or a value has the wrong JSON type.
        """
        if not isinstance(data, Mapping):
            raise ConfigError(f"{where}: must be a JSON object of anomaly fields, got {type(data).__name__}")
        values = {name: _checked(data, name, kind, where) for name, kind in _KINDS.items()}
        return cls(**values)

    def to_json(self) -> dict[str, Any]:
        """Every field by name (JSON data; :meth:`from_json` reads it back to an equal record)."""
        return {name: getattr(self, name) for name in _KINDS}


def anomaly_table(
    records: Iterable[SurveyAnomaly], columns: Sequence[str] = ANOMALY_COLUMNS
) -> dict[str, list[Any]]:
    """The records as columns: ``{column: [value of each record]}``, ready for ``pandas.DataFrame``.

    Like :func:`skimage.measure.regionprops_table`, one list per requested property, all of
    the records' length, in the records' order.

    Parameters
    ----------
    records : iterable of SurveyAnomaly
    columns : sequence of str
        Field names, in order (default: the columns of ``anomalies.csv``).

    Returns
    -------
    dict of str to list

    Raises
    ------
    ConfigError
        A column that is not a field of :class:`SurveyAnomaly`.
    """
    unknown = [c for c in columns if c not in _KINDS]
    if unknown:
        raise ConfigError(
            f"anomaly_table: no column {', '.join(map(repr, unknown))}; choose from {', '.join(_KINDS)}"
        )
    rows = list(records)
    return {column: [getattr(r, column) for r in rows] for column in columns}


# --------------------------------------------------------------------------- anomalies.csv

#: Decimals written to anomalies.csv per column: what each value means, no more (summary.json keeps
#: full precision): area 0.001 m², heat flow 0.1 W, energy 1 kWh, temperatures and ΔT 0.01 K,
#: f_Rsi 0.01, centroid 0.1 px, length 0.01 m, ψ 0.001 W/(m·K).
CSV_DECIMALS = {
    **dict.fromkeys(("area_m2", "area_low_m2", "area_high_m2"), 3),
    **dict.fromkeys(("excess_w", "excess_low_w", "excess_high_w"), 1),
    "excess_kwh_year": 0,
    **dict.fromkeys(("mean_c", "min_c", "max_c", "reference_c", "delta_k"), 2),
    "f_rsi": 2,
    **dict.fromkeys(("centroid_row", "centroid_col"), 1),
    "length_m": 2,
    **dict.fromkeys(("psi_w_mk", "psi_low_w_mk", "psi_high_w_mk"), 3),
    **dict.fromkeys(("cooling_k", "cooling_max_k"), 2),
    "pressure_pa": 1,
}

#: CSV dialects of anomalies.csv: name -> (cell separator, decimal mark). ``rfc4180`` is the default;
#: ``excel-eu`` suits spreadsheets set to a decimal-comma locale.
CSV_DIALECTS = {"rfc4180": (",", "."), "excel-eu": (";", ",")}


def _csv_value(column: str, value: Any, decimal: str) -> Any:
    if value is None:
        return None
    if column == "mould_risk":
        return "yes" if value else "no"
    digits = CSV_DECIMALS.get(column)
    if digits is None or isinstance(value, bool) or not isinstance(value, (int, float)):
        return value
    if not math.isfinite(float(value)):
        return None
    text = f"{float(value):.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")  # never "-0.00"
    return text.replace(".", decimal)


def csv_rows(records: Iterable[SurveyAnomaly], dialect: str = "rfc4180",
             columns: Sequence[str] = ANOMALY_COLUMNS) -> list[dict[str, Any]]:
    """The rows of anomalies.csv: values rounded by :data:`CSV_DECIMALS`, ``mould_risk`` yes/no/empty.

    Parameters
    ----------
    records : iterable of SurveyAnomaly
    dialect : {"rfc4180", "excel-eu"}
        The decimal mark of the rounded numbers (see :data:`CSV_DIALECTS`).
    columns : sequence of str

    Raises
    ------
    ConfigError
        An unknown dialect.
    """
    if dialect not in CSV_DIALECTS:
        raise ConfigError(f"anomalies.csv: no CSV dialect {dialect!r}; the csv_dialect setting takes "
                          f"{' or '.join(CSV_DIALECTS)}")
    decimal = CSV_DIALECTS[dialect][1]
    table = anomaly_table(records, columns)
    return [{c: _csv_value(c, v, decimal) for c, v in zip(table, values)} for values in zip(*table.values())]


# --------------------------------------------------------------------------- JSON types

#: JSON type of each field, from the annotations: (allowed Python types, null allowed).
_TYPES: dict[str, tuple[type, ...]] = {"str": (str,), "int": (int,), "float": (int, float), "bool": (bool,)}
_KINDS: dict[str, tuple[str, bool]] = {
    f.name: (str(f.type).split(" | ")[0], str(f.type).endswith("| None")) for f in fields(SurveyAnomaly)
}


def _checked(data: Mapping[str, Any], name: str, kind: tuple[str, bool], where: str) -> Any:
    base, nullable = kind
    if name not in data and not nullable:
        raise ConfigError(f"{where}: the key {name!r} is missing; write the file again with irseg")
    value = data.get(name)
    if value is None and nullable:
        return None
    if isinstance(value, _TYPES[base]) and (base == "bool" or not isinstance(value, bool)):
        return value
    null = " or null" if nullable else ""
    raise ConfigError(f"{where}: {name} = {value!r} must be a JSON {base}{null}; write the file again with irseg")
