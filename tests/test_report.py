"""The verification report: one self-contained HTML file that parses, whose every image is embedded
and decodes, whose key numbers match summary.json, and that a real browser (headless Chromium)
renders to a page of the expected size that is not blank."""
from __future__ import annotations

import base64
import io
import json
import os
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pytest
from PIL import Image

from elastofe.cli import main
from tests.conftest import write_case
from tests.test_compare import CASE, points_csv


class Collect(HTMLParser):
    """Every start tag with its attributes, and the text inside tagged (data-key) elements."""

    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.keyed: list[tuple[str, str, str]] = []   # (key, value, text)
        self._open: list = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if "data-key" in a:
            self._open.append([a["data-key"], a.get("data-value"), ""])

    def handle_data(self, data):
        for o in self._open:
            o[2] += data

    def handle_endtag(self, tag):
        if self._open and tag in ("td", "div", "span"):
            self.keyed.append(tuple(self._open.pop()))


def resolve(doc, key: str):
    for part in key.split("."):
        doc = doc[int(part)] if isinstance(doc, list) else doc[part]
    return doc


def fake_study(units: dict) -> dict:
    """A study.json in the shape the convergence study writes (levels, quantities, lines)."""
    return {
        "title": "bar", "units": units, "ratio": 1.5, "method": "three levels, GCI with Fs = 1.25",
        "levels": [{"level": i + 1, "size": s, "nodes": n, "elements": n // 2, "dofs": 3 * n, "h": s, "wall_s": 0.5}
                   for i, (s, n) in enumerate([(10.0, 400), (6.67, 1100), (4.44, 3300)])],
        "quantities": {"max_displacement": {"status": "assessed", "kind": "displacement", "unit": "mm",
                                            "values": [0.00498, 0.004995, 0.0049985], "dofs": [1200, 3300, 9900],
                                            "observed_order": 2.1, "extrapolated": 0.0050001, "gci_fine": 0.0006,
                                            "band": [0.004996, 0.005001], "convergence": "monotonic",
                                            "singular": False, "advice": ""}},
        "lines": {}, "plots": {},
    }


@pytest.fixture(scope="module")
def report(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("rep")
    rng = np.random.default_rng(3)
    pts = np.vstack([np.column_stack([np.linspace(0, 100, 9), np.zeros(9), np.zeros(9)]),
                     rng.uniform([0, -5, -5], [100, 5, 5], (12, 3))])
    points_csv(d / "ref.csv", pts)
    path = write_case(d / "bar.toml", CASE.format(bar=parts["bar"], extra="""
        [reference]
        label = "exact solution of the bar"
        tolerance = "1%"
        [[reference.scalar]]
        quantity = "max_von_mises"
        value = "10 MPa"
        [[reference.points]]
        file = "ref.csv"
        """))
    out = d / "out"
    out.mkdir()
    (out / "study.json").write_text(json.dumps(fake_study({"length": "mm", "stress": "MPa"})))
    assert main(["report", str(path), "--out", str(out), "-q"]) == 0
    html = (out / "report.html").read_text(encoding="utf-8")
    return out, html, json.loads((out / "summary.json").read_text())


def test_html_parses_and_images_decode(report):
    out, html, _ = report
    p = Collect()
    p.feed(html)
    p.close()
    imgs = [a for t, a in p.tags if t == "img"]
    # two pictures, one line plot, the convergence plot, the comparison line plot, 4 scatters, scalars
    assert len(imgs) >= 8
    for a in imgs:
        src = a["src"]
        assert src.startswith("data:image/png;base64,"), src[:40]
        with Image.open(io.BytesIO(base64.b64decode(src.split(",", 1)[1]))) as im:
            im.load()
            assert im.size[0] >= 300 and im.size[1] >= 200
            # not a blank image: many colours
            assert len(im.convert("RGB").getcolors(maxcolors=1 << 20) or []) > 20
    # nothing refers to the network or to another file
    for t, a in p.tags:
        for k in ("src", "href"):
            if k in a:
                v = a[k]
                assert not v.startswith(("http:", "https:", "//")), (t, a)
                assert k != "href" or v.startswith("#"), (t, a)      # only links within the page
    assert "<script" not in html.lower()


def test_key_numbers_match_the_summary(report):
    _, html, doc = report
    p = Collect()
    p.feed(html)
    keys = {k for k, _, _ in p.keyed}
    for must in ("max_displacement.value", "max_von_mises.value", "mesh.nodes", "mesh.elements",
                 "equilibrium_error", "material.E", "supports.0.area", "loads.0.area", "comparison.compared"):
        assert must in keys, must
    for key, value, text in p.keyed:
        want = resolve(doc, key)
        assert float(value) == pytest.approx(float(want), rel=1e-12, abs=0), key
        # the shown text starts with the value to 5 significant figures (or 3 digits for e-notation)
        shown = text.strip().split(" ")[0].replace(",", "")
        assert float(shown) == pytest.approx(float(want), rel=5e-3 if "e" in shown else 5e-5), (key, text)


def test_sections_and_checks_present(report):
    out, html, doc = report
    for heading in ("The model", "Results", "Pictures", "Along the lines", "Mesh convergence",
                    "Comparison with the reference results", "Plausibility checks", "Traceability"):
        assert f". {heading}</h2>" in html, heading
    assert "no substitute for the judgement of a licensed engineer" in html
    assert doc["inputs"]["geometry_file"]["sha256"] in html
    assert doc["inputs"]["case_file"]["sha256"] in html
    p = Collect()
    p.feed(html)
    shown = {a["data-check"] for t, a in p.tags if "data-check" in a}
    assert shown == set(doc["checks"])
    for name, c in doc["checks"].items():
        assert f"data-check='{name}'><span class=\"badge\"" in html.replace('"', '"')
        i = html.index(f"data-check='{name}'")
        assert f">{c['status']}</span>" in html[i:i + 200]
    pics = json.loads((out / "pictures.json").read_text())
    # the scale factor stated in the report is the one used
    assert f"magnified {pics['scale']:.5g} times" in html
    assert "0.0049985" in html and "monotonic" in html            # the convergence table
    assert "exact solution of the bar" in html


def test_pictures_mark_a_visible_peak(report):
    out, _, doc = report
    pics = json.loads((out / "pictures.json").read_text())
    assert [p["file"] for p in pics["pictures"]] == ["picture-von-mises.png", "picture-displacement.png"]
    vm = pics["pictures"][0]
    assert vm["peak_value"] == pytest.approx(doc["max_von_mises"]["value"], rel=1e-6)
    if pics["renderer"].startswith("pyvista"):
        assert all(p["peak_visible"] for p in pics["pictures"])


def test_matplotlib_fallback(report, tmp_path, monkeypatch):
    out, _, _ = report
    for f in ("summary.json", "result.vtu", "line-axis.csv"):
        shutil.copy(out / f, tmp_path / f)
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")
    from elastofe.report import write_report

    html = write_report(tmp_path).read_text()
    assert "matplotlib" in html and "fallback" in html
    for f in ("picture-von-mises.png", "picture-displacement.png"):
        with Image.open(tmp_path / f) as im:
            im.load()
            assert len(im.convert("RGB").getcolors(maxcolors=1 << 20) or []) > 20


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser") or shutil.which("google-chrome")


def _run_chromium(args: list[str], timeout: float = 120.0) -> subprocess.CompletedProcess:
    exe = _chromium()
    base = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--no-first-run",
            "--disable-dev-shm-usage", "--allow-file-access-from-files"]
    return subprocess.run(base + args, capture_output=True, text=True, timeout=timeout,
                          env=dict(os.environ, HOME=os.environ.get("HOME", "/tmp")))


@pytest.mark.skipif(_chromium() is None, reason="chromium is not installed here (CI installs it: apt-get install chromium)")
def test_browser_renders_the_report(report, tmp_path):
    out, html, _ = report
    # A screenshot of the page at a fixed window size: the expected size, and not blank.
    shot = tmp_path / "shot.png"
    cp = _run_chromium([f"--screenshot={shot}", "--window-size=1200,1600", (out / "report.html").as_uri()])
    assert shot.is_file(), cp.stderr[-2000:]
    with Image.open(shot) as im:
        assert im.size == (1200, 1600)
        rgb = np.asarray(im.convert("RGB"), dtype=float)
    nonwhite = (rgb < 245).any(axis=2).mean()
    assert nonwhite > 0.15, nonwhite              # text, tables and the page background
    assert rgb.std() > 20
    # The laid-out page: its height and that every image decoded in the browser (naturalWidth).
    probe = tmp_path / "probe.html"
    probe.write_text(html.replace("</body>", "<script>var im=[].map.call(document.images,function(i){return "
                                  "i.complete&&i.naturalWidth>0?1:0});document.body.insertAdjacentHTML('beforeend',"
                                  "'<pre id=\"probe\">'+JSON.stringify({h:document.body.scrollHeight,"
                                  "w:document.body.scrollWidth,n:im.length,ok:im.reduce(function(a,b){return a+b},0)})"
                                  "+'</pre>')</script></body>"), encoding="utf-8")
    cp = _run_chromium(["--window-size=1200,1600", "--virtual-time-budget=5000", "--dump-dom", probe.as_uri()])
    start = cp.stdout.rindex('<pre id="probe">') + len('<pre id="probe">')   # the last: after the script
    info = json.loads(cp.stdout[start:cp.stdout.index("</pre>", start)].replace("&quot;", '"'))
    n_img = html.count("<img ")
    assert info["n"] == n_img and info["ok"] == n_img, info
    assert info["w"] <= 1200                       # no horizontal overflow at this width
    assert info["h"] > 4000, info                  # a long page: eight sections with figures


@pytest.mark.slow
def test_demo_ends_with_its_report(tmp_path, capsys):
    out = tmp_path / "lever"
    assert main(["demo", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert text.rstrip().endswith(str(out / "report.html"))
    html = (out / "report.html").read_text(encoding="utf-8")
    doc = json.loads((out / "summary.json").read_text())
    comp = json.loads((out / "comparison.json").read_text())
    # The shipped reference is labelled as a finer run of our own, in the case and in the file.
    assert "finer run of elastofe itself" in comp["label"] and "finer run of elastofe itself" in html
    assert any("FINER RUN OF ELASTOFE ITSELF" in n for n in comp["sets"][0]["notes"])
    assert comp["sets"][0]["points"] == 55 and comp["points_outside"] == 0
    # The demo mesh against the finer one: displacements within 1 %, stresses within 5 % of the
    # largest reference value (our own tolerances for a factor-2 refinement, away from the root corner).
    assert comp["verdict"] == "agree", [(q, e["max_relative_difference"]) for q, e in comp["sets"][0]["quantities"].items()]
    assert doc["comparison"]["verdict"] == "agree"
    assert "comparison-line-mid-span.png" in comp["plots"]


def test_line_plot_overlays_the_beam_estimate(report, tmp_path):
    """With beam-theory estimates in the summary (the shape the estimates write), the line plot gets
    a third panel with the FE normal stress and the M y / I line, and the report a table."""
    out, _, doc = report
    from elastofe.report.document import section_estimates
    from elastofe.report.plots import line_plot, read_line_csv

    cols = read_line_csv(out / "line-axis.csv")
    s = cols["s"].tolist()
    est = {"beam": {"lines": {"axis": {"samples": {"s": s, "y": [0.0] * len(s), "estimate": [10.0] * len(s),
                                                   "fe": cols["sxx"].tolist()},
                                       "estimate_extremes": [10.0, 10.0], "fe_extremes": [10.0, 10.0],
                                       "fe_departure_from_linear": 0.0}},
                    "load_point_deflection": {"estimate": 0.005, "fe": 0.0050011, "relative_difference": 0.00022},
                    "points": {}, "notes": [], "sources": "flexure formula"}}
    drawn = line_plot("axis", cols, dict(doc, estimates=est), tmp_path / "with-estimate.png")
    assert drawn["estimate"] is True
    with Image.open(tmp_path / "with-estimate.png") as im:
        im.load()
        plain = line_plot("axis", cols, doc, tmp_path / "plain.png")
        with Image.open(tmp_path / "plain.png") as im2:
            assert im.size[1] > im2.size[1]            # the third panel
    assert plain["estimate"] is False
    html = section_estimates(dict(doc, estimates=est))
    assert "Beam-theory estimates" in html and "0.0050011" in html and "flexure formula" in html


def test_study_found_next_to_the_case_and_only_for_the_same_case(report, tmp_path):
    out, _, doc = report
    from elastofe.report.document import find_study

    run = tmp_path / "run"
    run.mkdir()
    case_file = tmp_path / "bracket.toml"
    case_file.write_text("# stand-in\n")
    summary = dict(doc, case_file=str(case_file))
    assert find_study(run, summary)[0] is None
    sdir = tmp_path / "bracket-study"                  # the study command's default folder
    sdir.mkdir()
    st = dict(fake_study(doc["units"]), case_file=str(case_file))
    (sdir / "study.json").write_text(json.dumps(st))
    found, where = find_study(run, summary)
    assert found["levels"][2]["dofs"] == 9900 and where == sdir
    (sdir / "study.json").write_text(json.dumps(dict(st, case_file=str(tmp_path / "other.toml"))))
    assert find_study(run, summary)[0] is None          # another case's study is not shown
