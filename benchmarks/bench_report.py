"""Benchmark: the survey report for 50 and 2 000 images, embedded vs linked overlays.

Not a test: it prints the report's size, the time irseg takes to write it, and the time headless
Chromium takes to the first contentful paint and to the end of its load, for each case. Usage::

    python benchmarks/bench_report.py
    python benchmarks/bench_report.py --sizes 50 500 2000 --repeats 3

Survey (invented): small frames (48 x 64 pixels of an interior wall with one cold bay), drawn by
irseg.render at the overlay's usual size (the layout enlarges small frames to about 480 pixels);
``--distinct`` overlays are drawn and reused in turn, so a 2 000-image page holds real PNG bytes
without drawing 2 000 pictures. Beyond ``irseg.report.EMBED_LIMIT`` images the report links each
overlay by its relative path; the "embedded" rows force embedding for comparison (what the report
did before issue 14).

Browser: Debian's ``/usr/bin/chromium`` (``--headless --dump-dom``), the paint time read from the
page's own ``performance.getEntriesByType("paint")`` by a script added to a copy of the report.
"""

from __future__ import annotations

import argparse
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np

import irseg.report as report
from irseg.io import encode_png
from irseg.render import render_overlay
from irseg.types import Air, SurveyMeta, Surface, ThermalFrame

PROBE = """<script>
function irsegReport() {
  var paint = performance.getEntriesByType('paint').filter(function (e) {
    return e.name === 'first-contentful-paint'; });
  var nav = performance.getEntriesByType('navigation')[0];
  var out = document.createElement('pre');
  out.textContent = 'fcp=' + (paint.length ? paint[0].startTime : -1) + ';load=' + (nav ? nav.loadEventStart : -1);
  document.body.appendChild(out);
}
window.addEventListener('load', function () {
  requestAnimationFrame(function () { requestAnimationFrame(function () { setTimeout(irsegReport, 50); }); });
});
</script>"""


def _overlay(seed: int) -> bytes:
    rng = np.random.default_rng(seed)
    t = 18.5 + rng.normal(0.0, 0.08, (48, 64))
    labels = np.zeros((48, 64), np.int32)
    r0, c0 = 8 + seed % 10, 10 + seed % 20
    labels[r0:r0 + 16, c0:c0 + 20] = 1
    t[labels == 1] -= 2.5
    meta = SurveyMeta(surface=Surface(view="interior"), air=Air(inside_c=20.0, outside_c=0.0))
    frame = ThermalFrame(path=f"wall_{seed:04d}.tif", temperature_c=t, mask=np.zeros(t.shape, bool))
    anomaly = SimpleNamespace(anomaly=1, cause="missing_insulation", centroid_row=r0 + 8.0, centroid_col=c0 + 10.0,
                              bbox_row0=r0, bbox_col0=c0, bbox_row1=r0 + 16, bbox_col1=c0 + 20)
    rgb = render_overlay(frame, SimpleNamespace(edges=None),
                         SimpleNamespace(labels=labels, anomalies=(anomaly,), pixel_m=0.01), meta)
    return encode_png(rgb)


def _survey(n: int, pngs: list[bytes], folder: Path) -> tuple[dict, dict]:
    images, anomalies, overlays = [], [], {}
    for k in range(n):
        name, stem = f"wall_{k:04d}.tif", f"wall_{k:04d}"
        images.append({"image": name, "status": "ok", "view": "interior", "delta_t_k": 20.0, "n_anomalies": 1,
                       "warnings": [], "overlay": f"{stem}/overlay.png", "result": f"{stem}/result.json"})
        anomalies.append({"image": name, "anomaly": 1, "uid": f"{stem}#1", "kind": "cold",
                          "cause": "missing_insulation", "reason": "compact cold area", "area_m2": 0.03,
                          "excess_w": 1.5 + k % 7, "excess_low_w": 1.0 + k % 7, "excess_high_w": 2.0 + k % 7,
                          "excess_kwh_year": 6.0 + k % 30, "mould_risk": False, "rank": k + 1})
        overlays[name] = pngs[k % len(pngs)]
        (folder / stem).mkdir(exist_ok=True)
        (folder / stem / "overlay.png").write_bytes(overlays[name])
    return {"irseg_version": "bench", "images": images, "anomalies": anomalies}, overlays


def _browser(exe: str, page: Path, profile: Path) -> tuple[float, float, float]:
    t0 = time.perf_counter()
    proc = subprocess.run([exe, "--headless", "--no-sandbox", "--disable-gpu", f"--user-data-dir={profile}",
                           "--virtual-time-budget=60000", "--dump-dom", page.as_uri()],
                          capture_output=True, text=True, timeout=900, check=False)
    wall = time.perf_counter() - t0
    found = re.search(r"fcp=([-\d.]+);load=([-\d.]+)", proc.stdout)
    if not found:
        return float("nan"), float("nan"), wall
    return float(found.group(1)), float(found.group(2)), wall


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[50, 2000], help="numbers of images")
    parser.add_argument("--repeats", type=int, default=3, help="browser runs per case (median)")
    parser.add_argument("--distinct", type=int, default=20, help="distinct overlays drawn and reused")
    parser.add_argument("--chromium", default="/usr/bin/chromium", help="the headless browser")
    args = parser.parse_args(argv)
    exe = shutil.which(args.chromium) or args.chromium
    pngs = [_overlay(k) for k in range(args.distinct)]
    print(f"overlay PNG: median {statistics.median(len(p) for p in pngs) / 1024:.0f} KB "
          f"(48 x 64 frames drawn at the overlay's size); embed limit {report.EMBED_LIMIT} images")
    print(f"{'images':>7} {'overlays':>9} {'size MB':>9} {'write s':>8} {'first paint ms':>15} "
          f"{'load ms':>9} {'browser s':>10}")
    limit = report.EMBED_LIMIT
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.sizes:
            folder = Path(tmp) / f"survey_{n}"
            folder.mkdir()
            summary, overlays = _survey(n, pngs, folder)
            modes = [("embedded", 10**9), ("linked", 0)] if n > limit else [("embedded", limit)]
            for mode, embed_limit in modes:
                report.EMBED_LIMIT = embed_limit
                t0 = time.perf_counter()
                html = report.render_report(summary, overlays)
                write_s = time.perf_counter() - t0
                page = folder / f"report_{mode}.html"
                page.write_text(html.replace("</body>", PROBE + "</body>"), encoding="utf-8")
                runs = [_browser(exe, page, Path(tmp) / f"profile_{n}_{mode}_{r}") for r in range(args.repeats)]
                fcp, load, wall = (statistics.median(v) for v in zip(*runs))
                print(f"{n:>7} {mode:>9} {len(html.encode('utf-8')) / 2**20:>9.1f} {write_s:>8.2f} {fcp:>15.0f} "
                      f"{load:>9.0f} {wall:>10.1f}")
            report.EMBED_LIMIT = limit
    return 0


if __name__ == "__main__":
    sys.exit(main())
