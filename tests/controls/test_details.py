"""Job and image details, and visible photos (issue 13).

External checks: TOML 1.0 dates (``tomllib`` parses ``date = 2026-01-14`` as a date), the JPEG
and PNG signatures (ITU-T T.81 annex B: SOI marker FF D8; PNG specification section 5.2),
OpenCV's decoder for the embedded photo, the standard library's ``html.parser``, and a real
headless browser (Debian's chromium) loading the report.
"""

from __future__ import annotations

import base64
import csv
import json
import re
from html.parser import HTMLParser

import cv2
import numpy as np
import pytest
from tests.report.test_report import CHECK_SCRIPT, find_chromium, run_chromium
from tests.support.survey import make_survey

from irseg.batch import run_survey, scan_inputs
from irseg.controls import find_photo, photo_thumbnail
from irseg.errors import InputError, MetadataError
from irseg.metadata import load_metadata, parse_metadata_text
from irseg.types import ImageDetails, SurveyDetails

SURVEY_DETAILS = """
[survey]
site = "Larchfield test house (invented)"
client = "Example Housing Co-operative"
reference = "LF-2026-01"
date = 2026-01-14
inspector = "A. Thermographer"
camera = "uncooled microbolometer, 320 x 240"
weather = "overcast, 1 °C, light wind"
purpose = "insulation survey before retrofit"
"""


SURFACE = '[surface]\nemissivity = 0.9\nreflected_c = 20.0\nview = "interior"\n'


def test_survey_and_image_sections_are_free_text(tmp_path):
    (tmp_path / "survey.toml").write_text(SURFACE + SURVEY_DETAILS, encoding="utf-8")
    (tmp_path / "lf01.toml").write_text(
        '[image]\ntitle = "Lounge, north wall"\nelement = "north wall"\ntime = 2026-01-14T21:40:00\n'
        'photo = "IMG_0412.jpg"\n', encoding="utf-8")
    meta = load_metadata(tmp_path / "lf01.tiff")
    assert meta.survey == SurveyDetails(
        site="Larchfield test house (invented)", client="Example Housing Co-operative", reference="LF-2026-01",
        date="2026-01-14", inspector="A. Thermographer", camera="uncooled microbolometer, 320 x 240",
        weather="overcast, 1 °C, light wind", purpose="insulation survey before retrofit",
    )
    # a TOML local date-time (TOML 1.0, "Local Date-Time") is kept as its ISO 8601 text [M]
    assert meta.image == ImageDetails(title="Lounge, north wall", element="north wall", time="2026-01-14T21:40:00",
                                      photo="IMG_0412.jpg")
    assert load_metadata(tmp_path / "other.tiff").image == ImageDetails()


def test_details_sit_in_their_own_file(tmp_path):
    (tmp_path / "survey.toml").write_text('[image]\ntitle = "x"\n', encoding="utf-8")
    with pytest.raises(MetadataError, match=r"survey.toml: \[image\] describes one image; move it to that image's"):
        load_metadata(tmp_path / "a.tiff")
    (tmp_path / "survey.toml").write_text("", encoding="utf-8")
    (tmp_path / "a.toml").write_text('[survey]\nsite = "x"\n', encoding="utf-8")
    with pytest.raises(MetadataError, match=r"a.toml: \[survey\] describes the whole job; move it to survey.toml"):
        load_metadata(tmp_path / "a.tiff")


@pytest.mark.parametrize(
    "text, message",
    [
        ('[survey]\nclinet = "x"\n', "[survey] has no key 'clinet'; did you mean 'client'?"),
        ("[image]\ntitle = 3\n", "[image] title = 3 is not text; write it in quotes"),
        ('[site]\nname = "x"\n', "unknown section [site]"),
    ],
)
def test_detail_errors_name_the_file_and_the_key(text, message):
    with pytest.raises(MetadataError) as info:
        parse_metadata_text(text, source="lf01.toml")
    assert str(info.value).startswith("lf01.toml: ") and message in str(info.value)


# --------------------------------------------------------------------------- photos


def _photo(path, rows=300, cols=400, colour=(40, 120, 200)) -> None:
    picture = np.zeros((rows, cols, 3), np.uint8)
    picture[:] = colour
    cv2.rectangle(picture, (50, 50), (150, 250), (10, 10, 10), -1)
    assert cv2.imwrite(str(path), picture)


def test_photo_found_by_key_or_by_name(tmp_path):
    _photo(tmp_path / "lf01_photo.jpg")
    _photo(tmp_path / "IMG_0412.png")
    assert find_photo(tmp_path / "lf01.tiff") == tmp_path / "lf01_photo.jpg"
    assert find_photo(tmp_path / "lf01.tiff", "IMG_0412.png") == tmp_path / "IMG_0412.png"
    assert find_photo(tmp_path / "lf02.tiff") is None
    thumb = photo_thumbnail(tmp_path / "lf01_photo.jpg", side_px=200)
    assert thumb[:3] == b"\xff\xd8\xff"  # a JPEG stream starts with the SOI marker FF D8 (ITU-T T.81, annex B) [M]
    assert cv2.imdecode(np.frombuffer(thumb, np.uint8), cv2.IMREAD_COLOR).shape == (150, 200, 3)
    (tmp_path / "fake_photo.jpg").write_bytes(b"not a picture")
    with pytest.raises(InputError, match="fake_photo.jpg: the photo is not a JPEG or PNG picture"):
        photo_thumbnail(tmp_path / "fake_photo.jpg")


def test_the_scan_leaves_photos_out_and_names_every_other_skipped_file(tmp_path):
    make_survey(tmp_path, 2, tiff=False)  # wall_00.npy, wall_01.npy
    _photo(tmp_path / "wall_00_photo.png")  # a PNG: a reader would claim it as a thermogram
    _photo(tmp_path / "site_view.jpg")
    (tmp_path / "wall_01.toml").write_text('[image]\nphoto = "site_view.jpg"\n', encoding="utf-8")
    _photo(tmp_path / "holiday.jpg")
    found = scan_inputs([tmp_path])
    assert [i.image for i in found.images] == ["wall_00.npy", "wall_01.npy"]
    assert [(s.file, s.reason) for s in found.skipped] == [("holiday.jpg", "not a thermogram (no reader for .jpg files)")]


# --------------------------------------------------------------------------- the report


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.text: list[str] = []
        self.images: list[dict[str, str]] = []

    def handle_data(self, data: str) -> None:
        self.text.append(data)

    def handle_starttag(self, tag, attrs) -> None:
        if tag == "img":
            self.images.append(dict(attrs))


def _survey_with_details(folder):
    paths = make_survey(folder, 3)
    with open(folder / "survey.toml", "a", encoding="utf-8") as handle:
        handle.write(SURVEY_DETAILS)
    (folder / "wall_00.toml").write_text(
        '[image]\ntitle = "Lounge, north wall"\nelement = "north wall"\ntime = "2026-01-14T21:40"\n'
        'photo = "IMG_0412.jpg"\n', encoding="utf-8")
    _photo(folder / "IMG_0412.jpg", 900, 1200)
    _photo(folder / "wall_01_photo.png", 240, 320, colour=(200, 160, 60))
    return paths


@pytest.mark.slow
def test_job_details_and_photos_appear_in_the_report(tmp_path):
    folder = tmp_path / "survey"
    _survey_with_details(folder)
    out = tmp_path / "out"
    result = run_survey([folder], out, jobs=1)
    assert result.n_failed == 0 and result.skipped == ()  # photos are neither failed nor skipped inputs
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["survey"]["client"] == "Example Housing Co-operative" and summary["survey"]["date"] == "2026-01-14"
    rows = {i["image"]: i for i in summary["images"]}
    assert rows["wall_00.npy"]["photo"] == "IMG_0412.jpg" and rows["wall_01.npy"]["photo"] == "wall_01_photo.png"
    assert rows["wall_02.tif"]["photo"] is None
    assert rows["wall_00.npy"]["details"]["title"] == "Lounge, north wall"
    with open(out / "anomalies.csv", newline="", encoding="utf-8") as handle:  # RFC 4180 via the csv module
        table = {r["image"]: r for r in csv.DictReader(handle)}
    assert (table["wall_00.npy"]["title"], table["wall_00.npy"]["element"]) == ("Lounge, north wall", "north wall")
    assert table["wall_01.npy"]["title"] == ""

    page = _Text()
    html = (out / "report.html").read_text(encoding="utf-8")
    page.feed(html)
    text = " ".join(" ".join(page.text).split())
    for value in ("Larchfield test house (invented)", "Example Housing Co-operative", "LF-2026-01", "2026-01-14",
                  "A. Thermographer", "insulation survey before retrofit", "Lounge, north wall",
                  "Element: north wall", "Time: 2026-01-14T21:40"):
        assert value in text, value
    photos = [i for i in page.images if i.get("alt", "").startswith("Photo of the view")]
    assert len(photos) == 2
    big = photos[0]["src"]
    assert big.startswith("data:image/jpeg;base64,")
    decoded = cv2.imdecode(np.frombuffer(base64.b64decode(big.split(",", 1)[1]), np.uint8), cv2.IMREAD_COLOR)
    assert decoded.shape == (480, 640, 3)  # the 900 x 1200 photo scaled to 640 on its long side
    assert text.index("Larchfield test house") < text.index("Survey conditions")  # on the first page


@pytest.mark.browser
@pytest.mark.slow
def test_job_details_and_photos_load_in_a_headless_browser(tmp_path):
    exe = find_chromium()
    if exe is None:
        pytest.skip("chromium not found; install Debian's chromium to run the browser test")
    folder = tmp_path / "survey"
    _survey_with_details(folder)
    out = tmp_path / "out"
    run_survey([folder], out, jobs=1)
    html = (out / "report.html").read_text(encoding="utf-8")
    script = CHECK_SCRIPT.replace(
        "'images=' + imgs.length",
        "'job=' + document.querySelectorAll('#job dd').length + ';photos=' + "
        "document.querySelectorAll('figure.photo img').length + ';images=' + imgs.length",
    )
    assert html.count("</body>") == 1 and "job=" in script
    wrapper = tmp_path / "report-check.html"
    wrapper.write_text(html.replace("</body>", script + "</body>"), encoding="utf-8")
    dom = run_chromium(exe, tmp_path / "profile", "--virtual-time-budget=10000", "--dump-dom", wrapper.as_uri())
    assert dom.returncode == 0, dom.stderr[-2000:]
    marker = re.search(r"job=(\d+);photos=(\d+);images=(\d+);loaded=(\d+);rows=(\d+)", dom.stdout)
    assert marker, "the checking script did not run: " + dom.stdout[:500]
    job, photos, images, loaded, rows = (int(g) for g in marker.groups())
    assert job == 8  # site, client, reference, date, inspector, camera, weather, purpose
    assert photos == 2 and images == 3 + 2 and loaded == images  # three overlays and two photos, all decoded
    assert rows == 3


def test_a_missing_photo_is_a_warning_not_a_failure(tmp_path):
    folder = tmp_path / "survey"
    make_survey(folder, 1, tiff=False)
    (folder / "wall_00.toml").write_text('[image]\nphoto = "missing.jpg"\n', encoding="utf-8")
    result = run_survey([folder], tmp_path / "out", jobs=1)
    assert result.n_failed == 0
    assert result.summary["warnings"] == [{"image": "wall_00.npy", "message": (
        "photo not shown: missing.jpg: cannot read the photo (No such file or directory); check it exists")}]
    assert "warning: wall_00.npy: photo not shown: missing.jpg" in (tmp_path / "out" / "run.log").read_text()
