"""The self-contained HTML survey report (irseg.report).

Checked with independent tools: the standard library's ``html.parser`` for structure and
escaping, ``base64`` + imageio for the embedded pictures, and a real headless browser
(Debian's chromium) for loading, image decoding and a screenshot.
"""

from __future__ import annotations

import base64
import io
import os
import re
import shutil
import subprocess
from dataclasses import fields
from html.parser import HTMLParser
from importlib import resources
from types import SimpleNamespace

import cv2
import imageio.v3 as iio
import numpy as np
import pytest

from irseg.errors import ConfigError
from irseg.render import render_overlay
from irseg.report import render_report
from irseg.vocabulary import CAUTIONS
from irseg.types import Air, SurveyMeta, Surface, ThermalFrame

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2 [V]
DASH = "—"

COLUMNS = (
    "image anomaly kind cause reason area_m2 area_low_m2 area_high_m2 mean_c min_c max_c reference_c "
    "delta_k excess_w excess_low_w excess_high_w excess_kwh_year f_rsi mould_risk centroid_row "
    "centroid_col bbox_row0 bbox_col0 bbox_row1 bbox_col1 rank"
).split()


# --------------------------------------------------------------------------- fixtures


def overlay_png(seed: int, name: str) -> tuple[bytes, tuple[int, ...]]:
    """A real overlay (irseg.render) encoded by OpenCV as PNG."""
    rng = np.random.default_rng(seed)
    t = 18.0 + rng.normal(0.0, 0.3, size=(24, 32))
    labels = np.zeros((24, 32), np.int32)
    labels[4:10, 5:12] = 1
    t[4:10, 5:12] -= 3.0
    meta = SurveyMeta(surface=Surface(view="interior"), air=Air(inside_c=21.0, outside_c=1.0))
    # ThermalFrame loses its meta field in issue 10 (the overlay takes the metadata as an argument)
    extra = {"meta": meta} if "meta" in {f.name for f in fields(ThermalFrame)} else {}
    frame = ThermalFrame(path=name, temperature_c=t, mask=np.zeros(t.shape, bool), **extra)
    anomaly = SimpleNamespace(
        anomaly=1, cause="missing_insulation", centroid_row=6.5, centroid_col=8.0,
        bbox_row0=4, bbox_col0=5, bbox_row1=10, bbox_col1=12,
    )
    rgb = render_overlay(
        frame, SimpleNamespace(edges=np.zeros(t.shape, bool)),
        SimpleNamespace(labels=labels, anomalies=(anomaly,), pixel_m=0.02),
        meta,
    )
    ok, buf = cv2.imencode(".png", np.ascontiguousarray(rgb[:, :, ::-1]))
    assert ok
    return buf.tobytes(), rgb.shape


def anomaly_row(image: str, aid: int, rank: int | None, **values) -> dict:
    row = dict.fromkeys(COLUMNS)
    row.update(
        image=image, anomaly=aid, kind="cold", cause="missing_insulation", reason="cold bay between studs",
        area_m2=0.40, area_low_m2=0.36, area_high_m2=0.44, mean_c=15.2, min_c=14.0, max_c=16.1,
        reference_c=18.0, delta_k=-2.8, excess_w=12.5, excess_low_w=9.0, excess_high_w=16.0,
        excess_kwh_year=900.0, f_rsi=0.71, mould_risk=False, centroid_row=6.5, centroid_col=8.0,
        bbox_row0=4, bbox_col0=5, bbox_row1=10, bbox_col1=12, rank=rank,
    )
    row.update(values)
    return row


HOSTILE = '<script>alert("x")</script>.tif'


def make_summary() -> tuple[dict, dict]:
    names = ["hall_ceiling_0003.tif", "west_wall_0001.tif", HOSTILE]
    overlays, shapes = {}, {}
    for k, name in enumerate(names):
        overlays[name], shapes[name] = overlay_png(k, name)
    anomalies = [  # deliberately not in rank order
        anomaly_row("west_wall_0001.tif", 2, 4, cause="thermal_bridge", excess_kwh_year=120.0),
        anomaly_row("hall_ceiling_0003.tif", 1, 1, mould_risk=True, cause="moisture"),
        anomaly_row(HOSTILE, 1, 3, reason='<img src=x onerror="alert(1)">'),
        anomaly_row(
            "west_wall_0001.tif", 1, 2, cause="air_leakage", area_m2=None, area_low_m2=None,
            area_high_m2=None, excess_w=None, excess_low_w=None, excess_high_w=None,
            excess_kwh_year=None, f_rsi=None, mould_risk=None, delta_k=None, reason=None,
        ),
    ]
    images = [
        {"image": n, "status": "ok", "view": "interior", "delta_t_k": 20.0,
         "n_anomalies": sum(a["image"] == n for a in anomalies),
         "warnings": ["inside–outside difference 8.0 K is below 10 K"] if n == "west_wall_0001.tif" else [],
         "overlay": f"{n[:-4]}/overlay.png", "result": f"{n[:-4]}/result.json"}
        for n in names
    ]
    images.append({"image": "broken.tif", "status": "failed", "view": None, "delta_t_k": None,
                   "n_anomalies": None, "warnings": [], "overlay": None, "result": None})
    summary = {
        "irseg_version": "0.1.0",
        "images": images,
        "totals_by_cause": {
            "missing_insulation": {"count": 1, "area_m2": 0.4, "excess_w": 12.5, "excess_kwh_year": 900.0},
            "moisture": {"count": 1, "area_m2": 0.4, "excess_w": 12.5, "excess_kwh_year": 900.0},
            "thermal_bridge": {"count": 1, "area_m2": 0.4, "excess_w": 12.5, "excess_kwh_year": 120.0},
            "air_leakage": {"count": 1, "area_m2": None, "excess_w": None, "excess_kwh_year": None},
        },
        "totals": {"count": 4, "area_m2": 1.2, "excess_w": 37.5, "excess_kwh_year": 1920.0},
        "anomalies": anomalies,
        "failures": [{"file": "broken.tif", "stage": "read", "message": "broken.tif: truncated TIFF <strip 3>"}],
        "warnings": [{"image": "west_wall_0001.tif", "message": "inside–outside difference 8.0 K is below 10 K"}],
        "cautions": ["Batch note: two images were taken through glazing."],
    }
    return summary, overlays


class Collector(HTMLParser):
    """Collects tags with attributes, and the text of each anomaly-table row."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.rows: list[list[str]] = []
        self._table_depth = 0
        self._in_target = False
        self._row: list[str] | None = None
        self._cell: list[str] | None = None
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "table" and a.get("id") == "anomaly-table":
            self._in_target = True
        if self._in_target and tag == "tr" and "anomaly-row" in (a.get("class") or ""):
            self._row = []
        if self._row is not None and tag == "td":
            self._cell = []
        if tag == "br" and self._cell is not None:
            self._cell.append(" ")

    def handle_endtag(self, tag):
        if tag == "td" and self._cell is not None and self._row is not None:
            self._row.append(" ".join("".join(self._cell).split()))
            self._cell = None
        if tag == "tr" and self._row is not None:
            self.rows.append(self._row)
            self._row = None
        if tag == "table":
            self._in_target = False

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)


def parse(html: str) -> Collector:
    p = Collector()
    p.feed(html)
    p.close()
    return p


# --------------------------------------------------------------------------- tests


def test_one_table_row_per_anomaly_sorted_by_severity():
    summary, overlays = make_summary()
    p = parse(render_report(summary, overlays))
    assert len(p.rows) == len(summary["anomalies"])
    ranks = [int(r[0]) for r in p.rows]
    assert ranks == sorted(ranks) == [1, 2, 3, 4]
    # rank, image, id, cause ... in the documented column order
    assert p.rows[0][1:4] == ["hall_ceiling_0003.tif", "1", "moisture"]
    assert p.rows[1][1:4] == ["west_wall_0001.tif", "1", "air leakage"]
    assert p.rows[0][-2:] == ["yes", "mould risk"]  # mould risk, and the rule that ranked it


def test_every_overlay_is_embedded_and_decodes_to_the_rendered_picture():
    summary, overlays = make_summary()
    p = parse(render_report(summary, overlays))
    srcs = [a["src"] for tag, a in p.tags if tag == "img"]
    assert len(srcs) == len(overlays)
    prefix = "data:image/png;base64,"
    decoded = []
    for src in srcs:
        assert src.startswith(prefix)
        data = base64.b64decode(src[len(prefix):], validate=True)
        assert data.startswith(PNG_SIGNATURE)
        decoded.append(iio.imread(io.BytesIO(data)))
    expected = {iio.imread(io.BytesIO(b)).tobytes() for b in overlays.values()}
    assert {d.tobytes() for d in decoded} == expected
    assert all(d.ndim == 3 and d.shape[2] == 3 for d in decoded)


def test_page_loads_nothing_from_outside():
    summary, overlays = make_summary()
    html = render_report(summary, overlays)
    p = parse(html)
    for tag, attrs in p.tags:
        for key in ("src", "href", "action", "data", "poster"):
            value = (attrs.get(key) or "").strip().lower()
            assert not value.startswith(("http:", "https:", "//", "file:", "ftp:")), (tag, key, value)
            if key == "href" and value:
                assert value.startswith("#"), value  # only links within the page
            if key == "src" and key in attrs:
                assert value.startswith("data:image/png;base64,")
    assert not [t for t, _ in p.tags if t in ("script", "link", "iframe", "object", "embed")]
    assert "@import" not in html and "url(" not in html
    assert "http://" not in html and "https://" not in html


def test_hostile_names_and_messages_are_escaped():
    summary, overlays = make_summary()
    html = render_report(summary, overlays)
    p = parse(html)
    assert not [t for t, _ in p.tags if t == "script"]
    assert all(a.get("src", "").startswith("data:") for t, a in p.tags if t == "img")
    assert not any("onerror" in a for _, a in p.tags)
    assert "&lt;script&gt;" in html
    text = "".join(p.text)
    assert HOSTILE in text  # shown as text, intact
    assert '<img src=x onerror="alert(1)">' in text
    assert "truncated TIFF <strip 3>" in text


def test_safety_and_estimate_cautions_are_present():
    summary, overlays = make_summary()
    text = " ".join("".join(parse(render_report(summary, overlays)).text).split())
    for phrase in (
        "at least two",  # at least two people on a roof at night (ASTM C1153, section 1.1 safety warning) [V]
        "edge protection",  # working at height [CP]
        "electrical",  # energised equipment (ASTM E1862/E1933 warnings [V])
        "depressuris",  # combustion appliances during fan depressurisation [CP]
        "estimates",
        "low–high",
        "contact or invasive",
        "R_si = 0.25",  # design f_Rsi convention, ISO 13788 worst-case R_si [V] (as quoted by a secondary source)
        "local building codes",
        "licensed",
        "Batch note: two images were taken through glazing.",  # the summary's own cautions too
    ):
        assert phrase in text, phrase
    for caution in CAUTIONS:
        assert " ".join(caution.split()) in text


def test_null_numbers_render_as_a_dash():
    summary, overlays = make_summary()
    p = parse(render_report(summary, overlays))
    row = next(r for r in p.rows if r[1] == "west_wall_0001.tif" and r[2] == "1")
    # rank, image, id, cause, area, ΔT, W, kWh/year, f_Rsi, mould risk, ranked by (short cells: no reason)
    assert row[4] == DASH  # no band shown when the value is null
    assert row[5] == DASH and row[6] == DASH
    assert row[7:10] == [DASH, DASH, DASH]
    assert row[10] == "area"  # no energy figure: ranked by area


def test_area_in_pixels_is_shown_when_the_geometry_is_unknown():
    summary, overlays = make_summary()
    row_data = next(a for a in summary["anomalies"] if a["image"] == "west_wall_0001.tif" and a["anomaly"] == 1)
    row_data["area_px"] = 37  # area_m2 is None for this row: the pixel count is the only area known
    p = parse(render_report(summary, overlays))
    row = next(r for r in p.rows if r[1] == "west_wall_0001.tif" and r[2] == "1")
    assert row[4] == f"{DASH} 37 px"
    other = next(r for r in p.rows if r[1] == "west_wall_0001.tif" and r[2] == "2")
    assert "px" not in other[4]  # with m² known, no pixel count


def test_small_values_are_not_shown_as_zero():
    summary, overlays = make_summary()
    summary["anomalies"][0].update(area_m2=0.0034, area_low_m2=0.0029, area_high_m2=0.0041, excess_w=-0.00001)
    p = parse(render_report(summary, overlays))
    row = next(r for r in p.rows if r[1] == "west_wall_0001.tif" and r[2] == "2")
    assert row[4] == "0.0034"  # two significant digits, not "0.00"
    assert row[6] == "-0.000010"


def test_totals_failures_and_warnings_are_listed():
    summary, overlays = make_summary()
    text = " ".join(" ".join(parse(render_report(summary, overlays)).text).split())
    # grand totals: count, m² (2 decimals), W (whole watts), kWh/year (thousands separated)
    assert "All causes 4 1.20 38 1,920" in text
    assert "missing insulation 1 0.40 12 900" in text  # 12.5 W rounds half to even
    assert "broken.tif" in text and "read" in text
    assert "inside–outside difference 8.0 K is below 10 K" in text
    assert "All causes" in text


def test_empty_survey_still_renders_the_cautions():
    summary = {"irseg_version": "0.1.0", "images": [], "totals_by_cause": {}, "totals": {},
               "anomalies": [], "failures": [], "warnings": [], "cautions": []}
    p = parse(render_report(summary, {}))
    text = "".join(p.text)
    assert p.rows == []
    assert "No anomalies found." in text
    assert "edge protection" in text


def test_bad_inputs_raise_config_errors():
    summary, overlays = make_summary()
    with pytest.raises(ConfigError, match="not PNG"):
        render_report(summary, {**overlays, "west_wall_0001.tif": b"GIF89a..."})
    with pytest.raises(ConfigError, match="mapping"):
        render_report([summary], overlays)  # type: ignore[arg-type]
    with pytest.raises(ConfigError, match="anomalies"):
        render_report({**summary, "anomalies": "none"}, overlays)


def test_anomaly_rows_are_read_as_typed_records():
    summary, overlays = make_summary()
    summary["anomalies"][2]["area_m2"] = "0.40 m2"  # text where JSON has a number
    with pytest.raises(ConfigError, match=r"anomalies'\]\[2\]: area_m2 = '0.40 m2' must be a JSON float"):
        render_report(summary, overlays)
    summary, overlays = make_summary()
    summary["anomalies"][0]["mould_risk"] = 1  # an integer is not a JSON boolean
    with pytest.raises(ConfigError, match="mould_risk"):
        render_report(summary, overlays)
    summary, overlays = make_summary()
    del summary["anomalies"][1]["image"]
    with pytest.raises(ConfigError, match="'image' is missing"):
        render_report(summary, overlays)


def test_page_names_settings_not_command_line_flags():
    # irseg's rule for library text: name "the <name> setting", never a flag of the command line [CP]
    summary, overlays = make_summary()
    page = re.sub(r"<style>.*?</style>", "", render_report(summary, overlays), flags=re.S)  # CSS uses --names
    text = " ".join("".join(parse(page).text).split())
    assert "resume setting" in text  # the failures and warnings sections say how to finish
    assert re.search(r"(?<![\w-])--[a-z]", text) is None


def test_templates_ship_as_package_data():
    root = resources.files("irseg.report").joinpath("templates")
    assert root.joinpath("report.html").is_file()
    assert root.joinpath("report.css").is_file()


# --------------------------------------------------------------------------- real browser

CHECK_SCRIPT = """
<script>
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var ok = imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length;
  var rows = document.querySelectorAll('#anomaly-table tbody tr.anomaly-row').length;
  var out = document.createElement('pre');
  out.id = 'irseg-check';
  out.textContent = 'images=' + imgs.length + ';loaded=' + ok + ';rows=' + rows;
  document.body.appendChild(out);
});
</script>
"""


def find_chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


def run_chromium(exe: str, profile, *args: str) -> subprocess.CompletedProcess:
    cmd = [
        exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--hide-scrollbars", f"--user-data-dir={profile}", *args,
    ]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=180, check=False)


@pytest.mark.browser
@pytest.mark.slow
def test_report_opens_in_a_headless_browser(tmp_path):
    exe = find_chromium()
    if exe is None:
        pytest.skip("chromium not found; install Debian's chromium to run the browser test")
    summary, overlays = make_summary()
    html = render_report(summary, overlays)
    page = tmp_path / "report.html"
    page.write_text(html, encoding="utf-8")
    # test-only copy with a checking script; the report itself contains no script
    wrapper = tmp_path / "report-check.html"
    assert html.count("</body>") == 1
    wrapper.write_text(html.replace("</body>", CHECK_SCRIPT + "</body>"), encoding="utf-8")

    dom = run_chromium(exe, tmp_path / "profile1", "--virtual-time-budget=10000", "--dump-dom", wrapper.as_uri())
    assert dom.returncode == 0, dom.stderr[-2000:]
    check = parse(dom.stdout)
    marker = [t for t in "".join(check.text).split() if t.startswith("images=")]
    assert marker, "the checking script did not run: " + dom.stdout[:500]
    fields = dict(kv.split("=") for kv in marker[0].split(";"))
    assert int(fields["images"]) == len(overlays)
    assert fields["loaded"] == fields["images"], f"broken images: {fields}"
    assert int(fields["rows"]) == len(summary["anomalies"])

    shot = tmp_path / "shot.png"
    res = run_chromium(exe, tmp_path / "profile2", f"--screenshot={shot}", "--window-size=1280,2000", page.as_uri())
    assert res.returncode == 0, res.stderr[-2000:]
    data = shot.read_bytes()
    assert data.startswith(PNG_SIGNATURE)
    img = iio.imread(io.BytesIO(data))
    assert img.shape[0] == 2000 and img.shape[1] == 1280
    rgb = img[..., :3].reshape(-1, 3)
    assert rgb.std() > 20  # not a blank page
    assert len(np.unique(rgb[::7], axis=0)) > 200  # text plus the embedded thermograms


def test_sentences_of_the_first_page_are_spaced():
    # a sentence ends with ". " before the next: a template block that ate the space ran two sentences
    # together ("...without an estimate.No location shows a mould risk")
    import re

    summary, overlays = make_summary()
    summary["anomalies"][1]["mould_risk"] = False  # the "No location" branch
    text = re.sub(r"<[^>]+>", "", render_report(summary, overlays))  # the words as a reader sees them run
    assert "No location" in text
    assert not re.search(r"[a-z)]\.[A-Z]", text), re.findall(r".{30}[a-z)]\.[A-Z].{20}", text)
