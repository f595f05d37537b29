"""The self-contained HTML survey report.

:func:`render_report` turns the survey summary (the content of ``summary.json``, written by
:mod:`irseg.batch`) and the overlay PNGs of the images into one HTML page with no external
resources: styles are inline and every overlay is embedded as a base64 ``data:`` URI, so the
file can be mailed, archived or printed as it is. The page is built from the jinja2 template
``irseg/report/templates/report.html`` (package data, loaded with :mod:`importlib.resources`)
with autoescaping on, so image names and messages can never inject markup.

The summary's anomaly rows are read as :class:`SurveyAnomaly` records (module ``_table``, a
leaf shared with :mod:`irseg.batch`, which builds the rows with :func:`anomaly_table`).
Nothing here touches the filesystem except reading the package's own template; the batch
writes the returned text atomically.
"""

from __future__ import annotations

import base64
import math
from collections.abc import Mapping, Sequence
from importlib import resources
from typing import Any

from ..errors import ConfigError
from ..vocabulary import CAUSE_COLOURS, CAUSE_LABELS, CAUSES, CAUTIONS
from ._table import ANOMALY_COLUMNS, SurveyAnomaly, anomaly_table

__all__ = ["render_report", "SurveyAnomaly", "anomaly_table", "ANOMALY_COLUMNS"]

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
DASH = "—"

_TOTAL_KEYS = ("count", "area_m2", "excess_w", "excess_kwh_year", "n_unmeasured")

# --------------------------------------------------------------------------- formatting


def _is_number(value: Any) -> bool:
    if isinstance(value, bool) or value is None:
        return False
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _num(value: Any, digits: int = 1) -> str:
    """A number with ``digits`` decimals, thousands separated; "—" for null, NaN or non-numbers.

    Small non-zero values that would print as zero keep two significant digits instead
    (0.0034 m² prints as "0.0034", not "0.00").
    """
    if not _is_number(value):
        return DASH
    v = float(value)
    if v != 0 and abs(v) < 0.5 * 10.0**-digits:
        small = min(8, 1 - math.floor(math.log10(abs(v))))
        if round(v, small) != 0:
            digits = small
    if round(v, digits) == 0:
        v = 0.0  # never print "-0.0"
    return f"{v:,.{digits}f}"


def _band(low: Any, high: Any, digits: int = 1) -> str:
    """``low–high``; "—" when either end is null."""
    if not (_is_number(low) and _is_number(high)):
        return DASH
    return f"{_num(low, digits)}–{_num(high, digits)}"


def _yesno(value: bool | None) -> str:
    if value is None:
        return DASH
    return "yes" if value else "no"


def _text(value: Any) -> str:
    if value is None or (isinstance(value, str) and not value.strip()):
        return DASH
    return str(value)


def _cause_label(cause: Any) -> str:
    return CAUSE_LABELS.get(str(cause), _text(cause))


def _cause_colour(cause: Any) -> str:
    r, g, b = CAUSE_COLOURS.get(str(cause), CAUSE_COLOURS["unclassified"])
    return f"#{r:02x}{g:02x}{b:02x}"


# --------------------------------------------------------------------------- view model


def _data_uri(image: str, png: Any) -> str:
    data = bytes(png)
    if not data.startswith(PNG_SIGNATURE):
        raise ConfigError(
            f"report: the overlay given for image {image!r} is not PNG data "
            "(pass the bytes of overlay.png as written by irseg.io.encode_png)"
        )
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def _severity_key(record: SurveyAnomaly) -> tuple:
    """Survey rank (unranked last), then image and id."""
    return (math.inf if record.severity is None else record.severity, record.image, record.anomaly)


def _list(summary: Mapping[str, Any], key: str) -> Sequence[Any]:
    value = summary.get(key)
    if value is None:
        return []
    if isinstance(value, (str, bytes)) or not isinstance(value, Sequence):
        raise ConfigError(f"report: summary[{key!r}] must be a list, got {type(value).__name__}")
    return value


def _totals_rows(by_cause: Mapping[str, Any]) -> list[dict[str, Any]]:
    order = [c for c in CAUSES if c in by_cause] + sorted(str(c) for c in by_cause if c not in CAUSES)
    rows = []
    for cause in order:
        t = by_cause.get(cause) or {}
        rows.append({"cause": cause, **{k: t.get(k) for k in _TOTAL_KEYS}})
    return rows


def _view_model(summary: Mapping[str, Any], overlays: Mapping[str, bytes]) -> dict[str, Any]:
    images = [dict(i) for i in _list(summary, "images")]
    anomalies = sorted(
        (SurveyAnomaly.from_json(a, where=f"report: summary['anomalies'][{k}]")
         for k, a in enumerate(_list(summary, "anomalies"))),
        key=_severity_key,
    )
    anchors: dict[str, str] = {}
    for n, img in enumerate(images, start=1):
        for key in ("image", "status", "view", "delta_t_k", "n_anomalies"):
            img.setdefault(key, None)
        name = str(img.get("image", ""))
        anchors.setdefault(name, f"image-{n}")
        img["anchor"] = anchors[name]
        img["warnings"] = [str(w) for w in (img.get("warnings") or [])]
        img["anomalies"] = sorted((a for a in anomalies if a.image == name), key=lambda a: a.anomaly)
        png = overlays.get(name)
        img["overlay_uri"] = _data_uri(name, png) if png is not None else None
    ok = [i for i in images if i.get("status") == "ok"]
    deltas = [float(i["delta_t_k"]) for i in ok if _is_number(i.get("delta_t_k"))]
    views = sorted({str(i["view"]) for i in ok if i.get("view")})
    extra = [str(c) for c in _list(summary, "cautions") if str(c) not in CAUTIONS]
    totals = summary.get("totals") or {}
    return {
        "version": _text(summary.get("irseg_version")),
        "images": images,
        "n_ok": len(ok),
        "n_failed": sum(1 for i in images if i.get("status") == "failed"),
        "views": views,
        "delta_min": min(deltas) if deltas else None,
        "delta_max": max(deltas) if deltas else None,
        "n_missing_delta": len(ok) - len(deltas),
        "totals_by_cause": _totals_rows(summary.get("totals_by_cause") or {}),
        "totals": {k: totals.get(k) for k in _TOTAL_KEYS},
        "anomalies": anomalies,
        "anchors": anchors,
        "failures": [dict(f) for f in _list(summary, "failures")],
        "skipped": [dict(f) for f in _list(summary, "skipped")],
        "warnings": [dict(w) for w in _list(summary, "warnings")],
        "cautions": list(CAUTIONS) + list(dict.fromkeys(extra)),
    }


def _environment() -> Any:
    import jinja2  # here, so that importing irseg.report (for its records) stays cheap

    templates = resources.files(__name__).joinpath("templates")

    def load(name: str) -> str | None:
        entry = templates.joinpath(name)
        return entry.read_text(encoding="utf-8") if entry.is_file() else None

    env = jinja2.Environment(
        loader=jinja2.FunctionLoader(load),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(num=_num, band=_band, yesno=_yesno, text=_text, cause_label=_cause_label,
                       cause_colour=_cause_colour)
    return env


def render_report(summary: Mapping[str, Any], overlays: Mapping[str, bytes]) -> str:
    """Render the survey report as one self-contained HTML page.

    Parameters
    ----------
    summary : mapping
        The survey summary in the ``summary.json`` schema: ``irseg_version``, ``images``
        (``image``, ``status``, ``view``, ``delta_t_k``, ``n_anomalies``, ``warnings``,
        ``overlay``, ``result``), ``totals_by_cause``, ``totals``, ``anomalies`` (rows as in
        ``anomalies.csv``, read with :meth:`SurveyAnomaly.from_json`), ``failures``, ``skipped``
        (``file``, ``reason``: what the input scan left out; may be absent), ``warnings`` and
        ``cautions``. Numbers may be null; they print as "—".
    overlays : mapping of str to bytes
        PNG bytes of each image's overlay, keyed by the image name (``images[i]["image"]``).
        Images without an entry are shown without a picture.

    Returns
    -------
    str
        The HTML document (UTF-8 text). It loads nothing from outside: no scripts, no remote
        fonts, no links to other files; overlays are ``data:image/png;base64`` URIs.

    Raises
    ------
    ConfigError
        ``summary`` is not a mapping or one of its lists is not a list, an anomaly row has a value
        of the wrong JSON type, or an overlay is not PNG.

    Notes
    -----
    The anomaly table is sorted by the survey-wide ``severity`` rank (1 = repair first), which
    the batch assigns with :func:`irseg.analysis.severity_key`; rows without a rank come last.
    The page always carries :data:`CAUTIONS`; cautions in the summary are added after them.
    """
    if not isinstance(summary, Mapping):
        raise ConfigError(f"report: summary must be a mapping (the content of summary.json), got {type(summary).__name__}")
    if not isinstance(overlays, Mapping):
        raise ConfigError(f"report: overlays must map image names to PNG bytes, got {type(overlays).__name__}")
    model = _view_model(summary, overlays)
    return _environment().get_template("report.html").render(**model)
