"""A pair under a pressure difference counts each defect once (issue 16 with the survey totals).

Both shots of a pair see the same defects (missing insulation, framing, junctions). Energy is
conserved: the wall's extra heat loss does not double because it was photographed twice, so the
survey's defect figures of a pair must equal those of its ambient image alone (physics: one wall,
one loss). The pressurised shot's leaks are counted; they carry no heat estimate.
"""

import json
import shutil
from pathlib import Path

import pytest

from irseg.batch import run_survey
from irseg.vocabulary import REPEAT_MARK

SAMPLE = Path(__file__).resolve().parents[2] / "sample_images"
PAIR = ("lf10_lounge_east_wall_0pa", "lf11_lounge_east_wall_50pa")


def _survey(tmp_path: Path, stems: tuple[str, ...], name: str) -> dict:
    src = tmp_path / f"in_{name}"
    src.mkdir()
    for stem in stems:
        for suffix in (".tiff", ".toml"):
            shutil.copy(SAMPLE / f"{stem}{suffix}", src / f"{stem}{suffix}")
    shutil.copy(SAMPLE / "survey.toml", src / "survey.toml")
    run_survey([src], tmp_path / f"out_{name}", jobs=1)
    return json.loads((tmp_path / f"out_{name}" / "summary.json").read_text(encoding="utf-8"))


@pytest.mark.slow
def test_a_pair_counts_its_defects_once(tmp_path):
    alone = _survey(tmp_path, PAIR[:1], "alone")
    pair = _survey(tmp_path, PAIR, "pair")
    rows = pair["anomalies"]
    pressed = [r for r in rows if r["image"].startswith(PAIR[1])]
    own = [r for r in pressed if r["pressure_pa"] is None]
    leaks = [r for r in pressed if r["pressure_pa"] is not None]
    assert own and leaks
    # the pressurised shot's own anomalies say where they are counted, and are not ranked
    assert all(REPEAT_MARK in r["reason"] and r["rank"] is None for r in own)
    assert all(REPEAT_MARK not in r["reason"] and r["rank"] is not None for r in leaks)
    # the ambient shot keeps its anomalies and ranks
    ambient = [r for r in rows if r["image"].startswith(PAIR[0])]
    assert ambient and not any(REPEAT_MARK in r["reason"] for r in ambient)
    # one wall, one loss: the defect heat of the pair equals that of the ambient image alone
    assert pair["defects"]["excess_w"] == pytest.approx(alone["defects"]["excess_w"], rel=1e-9)
    assert pair["defects"]["count"] == alone["defects"]["count"] + len(leaks)
    assert pair["defects"]["n_repeated"] == sum(1 for r in own if "expected in framed construction" not in r["reason"])
    # the report lists them apart
    page = (tmp_path / "out_pair" / "report.html").read_text(encoding="utf-8")
    assert 'id="repeated"' in page
