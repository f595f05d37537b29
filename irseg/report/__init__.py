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
from ._first_page import RANKING_RULE, summary_figures, top_actions
from ._ranking import MAX_BAND_RATIO, is_expected, is_repeat, rank_anomalies, rank_basis, rank_key
from ._table import ANOMALY_COLUMNS, CSV_DECIMALS, CSV_DIALECTS, SurveyAnomaly, anomaly_table, csv_rows

__all__ = ["render_report", "EMBED_LIMIT", "SurveyAnomaly", "anomaly_table", "ANOMALY_COLUMNS", "CSV_DIALECTS", "CSV_DECIMALS", "csv_rows",
           "rank_anomalies", "rank_key", "rank_basis", "is_expected", "is_repeat", "MAX_BAND_RATIO"]

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


JPEG_SIGNATURE = b"\xff\xd8\xff"

#: The job's details in the order the report shows them: ([survey] key, label).
SURVEY_FIELDS = (("site", "Site"), ("client", "Client"), ("reference", "Reference"), ("date", "Date"),
                 ("inspector", "Inspector"), ("camera", "Camera"), ("weather", "Weather"),
                 ("purpose", "Purpose"), ("notes", "Notes"))

#: An image's details shown under its heading: ([image] key, label).
IMAGE_FIELDS = (("element", "Element"), ("time", "Time"), ("notes", "Notes"))


def _photo_uri(image: str, data: Any) -> str:
    blob = bytes(data)
    if blob.startswith(JPEG_SIGNATURE):
        kind = "jpeg"
    elif blob.startswith(PNG_SIGNATURE):
        kind = "png"
    else:
        raise ConfigError(f"report: the photo given for image {image!r} is neither JPEG nor PNG data")
    return f"data:image/{kind};base64," + base64.b64encode(blob).decode("ascii")


def _pairs(details: Any, order: tuple[tuple[str, str], ...]) -> list[tuple[str, str]]:
    """``(label, text)`` of the details given, in the report's order."""
    if not isinstance(details, Mapping):
        return []
    return [(label, str(details[key])) for key, label in order
            if isinstance(details.get(key), str) and details[key].strip()]


def _data_uri(image: str, png: Any) -> str:
    data = bytes(png)
    if not data.startswith(PNG_SIGNATURE):
        raise ConfigError(
            f"report: the overlay given for image {image!r} is not PNG data "
            "(pass the bytes of overlay.png as written by irseg.io.encode_png)"
        )
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def _rank_order(record: SurveyAnomaly) -> tuple:
    """Survey rank (unranked last), then image and id."""
    return (math.inf if record.rank is None else record.rank, record.image, record.anomaly)


#: Beyond this many images the report links each overlay file (``<stem>/overlay.png``, relative
#: to the report) instead of embedding it: at about 180 KB an overlay, 2 000 embedded images
#: would make a page of some 360 MB (benchmarks/bench_report.py measures both ways).
EMBED_LIMIT = 200


def _breakable(value: Any) -> Any:
    """Text with break opportunities after ``_``, ``-``, ``.`` and ``/`` (file names wrap at word parts)."""
    from markupsafe import Markup, escape

    text = str(escape(_text(value)))
    for ch in "_-/":
        text = text.replace(ch, ch + "<wbr>")
    return Markup(text)


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


def _pair_sections(summary: Mapping[str, Any], images: list[dict[str, Any]], anomalies: list[SurveyAnomaly],
                   differences: Mapping[str, bytes], link: bool) -> list[dict[str, Any]]:
    """One section per pair of ``summary["pairs"]`` (irseg.pairs): both overlays, the difference, the leaks."""
    by_name = {str(i.get("image")): i for i in images}
    out = []
    for k, row in enumerate(_list(summary, "pairs")):
        if not isinstance(row, Mapping):
            raise ConfigError(f"report: summary['pairs'][{k}] must be an object, got {type(row).__name__}")
        pair = dict(row)
        name, reference = str(pair.get("image")), str(pair.get("reference"))
        pair["pressed"] = by_name.get(name, {})
        pair["ambient"] = by_name.get(reference, {})
        png = differences.get(name)
        if link and isinstance(pair.get("difference"), str):
            pair["difference_uri"] = pair["difference"]
        else:
            pair["difference_uri"] = _data_uri(name, png) if png is not None else None
        pair["leaks"] = sorted((a for a in anomalies if a.image == name and a.pressure_pa is not None),
                               key=lambda a: a.anomaly)
        reg = pair.get("registration")
        pair["registration"] = dict(reg) if isinstance(reg, Mapping) else None
        for key in ("status", "message", "pressure_pa", "minutes", "drift_k"):
            pair.setdefault(key, None)
        out.append(pair)
    return out


def _view_model(summary: Mapping[str, Any], overlays: Mapping[str, bytes],
                photos: Mapping[str, bytes], differences: Mapping[str, bytes] | None = None) -> dict[str, Any]:
    images = [dict(i) for i in _list(summary, "images")]
    every = sorted(
        (SurveyAnomaly.from_json(a, where=f"report: summary['anomalies'][{k}]")
         for k, a in enumerate(_list(summary, "anomalies"))),
        key=_rank_order,
    )
    anomalies = [a for a in every if a.review != "rejected"]
    rejected = [a for a in every if a.review == "rejected"]
    expected = [a for a in anomalies if is_expected(a)]
    repeated = [a for a in anomalies if is_repeat(a) and not is_expected(a)]
    defects = [a for a in anomalies if not (is_expected(a) or is_repeat(a))]
    link = len(images) > EMBED_LIMIT
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
        if link and isinstance(img.get("overlay"), str):
            img["overlay_uri"] = img["overlay"]
        else:
            img["overlay_uri"] = _data_uri(name, png) if png is not None else None
        img["causes"] = [c for c in CAUSES if any(a.cause == c for a in img["anomalies"])]
        photo = photos.get(name)
        img["photo_uri"] = _photo_uri(name, photo) if photo is not None else None
        details = img.get("details") if isinstance(img.get("details"), Mapping) else {}
        img["title"] = details.get("title") if isinstance(details.get("title"), str) else None
        img["details"] = _pairs(details, IMAGE_FIELDS)
        img.setdefault("photo", None)
        img.setdefault("n_rejected", 0)
    ok = [i for i in images if i.get("status") == "ok"]
    deltas = [float(i["delta_t_k"]) for i in ok if _is_number(i.get("delta_t_k"))]
    views = sorted({str(i["view"]) for i in ok if i.get("view")})
    extra = [str(c) for c in _list(summary, "cautions") if str(c) not in CAUTIONS]
    totals = summary.get("totals") or {}
    review = summary.get("review") if isinstance(summary.get("review"), Mapping) else {}
    titles = {str(i.get("image")): i["title"] for i in images if i.get("title")}
    return {
        "version": _text(summary.get("irseg_version")),
        "job": _pairs(summary.get("survey"), SURVEY_FIELDS),
        "rejected": rejected,
        "expected": expected,
        "repeated": repeated,
        "defects": defects,
        "figures": summary_figures(defects),
        "actions": top_actions(defects, titles),
        "ranking_rule": RANKING_RULE,
        "titles": titles,
        "linked": link,
        "embed_limit": EMBED_LIMIT,
        "review": {"file": review.get("file"), "entries": review.get("entries") or 0,
                   "applied": review.get("applied") or 0},
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
        "repairs": _repairs(summary.get("repairs")),
        "pairs": _pair_sections(summary, images, anomalies, differences or {}, link),
    }


def _repairs(data: Any) -> dict[str, Any] | None:
    """summary["repairs"] (irseg.repairs) with its lists and totals present; None without a plan."""
    if not isinstance(data, Mapping):
        return None
    out = dict(data)
    for key in ("by_element", "items", "confirm_points"):
        out[key] = [dict(row) for row in (out.get(key) or []) if isinstance(row, Mapping)]
    out["rows"] = out.pop("items")  # not "items": jinja2 would find the dict's method
    out["totals"] = dict(out["totals"]) if isinstance(out.get("totals"), Mapping) else {}
    for key in ("priced", "currency", "uncertainty", "working_margin_rel"):
        out.setdefault(key, None)
    return out


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
                       cause_colour=_cause_colour, breakable=_breakable, basis=rank_basis)
    return env


def render_report(
    summary: Mapping[str, Any], overlays: Mapping[str, bytes], *, photos: Mapping[str, bytes] | None = None,
    differences: Mapping[str, bytes] | None = None,
) -> str:
    """Render the survey report as one self-contained HTML page.

    Parameters
    ----------
    summary : mapping
        The survey summary in the ``summary.json`` schema: ``irseg_version``, ``images``
        (``image``, ``status``, ``view``, ``delta_t_k``, ``n_anomalies``, ``warnings``,
        ``overlay``, ``result``), ``totals_by_cause``, ``totals``, ``anomalies`` (rows as in
        ``anomalies.csv``, read with :meth:`SurveyAnomaly.from_json`), ``failures``, ``skipped``
        (``file``, ``reason``: what the input scan left out; may be absent), ``warnings`` and
        ``cautions``. Numbers may be null; they print as "—". Optional: ``survey`` (the job's
        ``[survey]`` details, shown first), ``details`` of each image (its ``[image]`` section),
        ``review`` (``file``, ``entries``, ``applied``), ``repairs`` (the repair plan of
        :mod:`irseg.repairs`: shown as the "Repair plan" section); anomaly rows whose ``review`` is
        ``"rejected"`` are listed apart, with their note, and counted nowhere else.
    overlays : mapping of str to bytes
        PNG bytes of each image's overlay, keyed by the image name (``images[i]["image"]``).
        Images without an entry are shown without a picture.
    photos : mapping of str to bytes, optional
        JPEG or PNG bytes of each image's visible photo (scaled; :func:`irseg.controls.photo_thumbnail`),
        shown beside its overlay.
    differences : mapping of str to bytes, optional
        PNG bytes of each pressurised image's ``difference.png`` (:mod:`irseg.pairs`), keyed by its
        name; with ``summary["pairs"]`` the report has a section per pair: both images side by
        side, the difference and the leaks.

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
    The anomaly table is sorted by the survey-wide ``rank`` (1 = act first), which the batch
    assigns with :func:`rank_anomalies`; framing members expected in the construction and
    rejected anomalies are listed apart. The page always carries :data:`CAUTIONS`; cautions in the
    summary are added after them. Beyond :data:`EMBED_LIMIT` images the overlays are linked by
    their relative path (``images[i]["overlay"]``) instead of embedded, so the page stays small;
    the report must then stay in the output folder beside the images' folders.
    """
    if not isinstance(summary, Mapping):
        raise ConfigError(f"report: summary must be a mapping (the content of summary.json), got {type(summary).__name__}")
    if not isinstance(overlays, Mapping):
        raise ConfigError(f"report: overlays must map image names to PNG bytes, got {type(overlays).__name__}")
    if photos is not None and not isinstance(photos, Mapping):
        raise ConfigError(f"report: photos must map image names to JPEG or PNG bytes, got {type(photos).__name__}")
    if differences is not None and not isinstance(differences, Mapping):
        raise ConfigError(f"report: differences must map image names to PNG bytes, got {type(differences).__name__}")
    model = _view_model(summary, overlays, photos or {}, differences)
    return _environment().get_template("report.html").render(**model)
