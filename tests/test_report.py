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
from elastofe.files import sha256_file
from elastofe.report.numbers import fmt, parse
from tests.conftest import write_case
from tests.test_compare import CASE, points_csv


class Collect(HTMLParser):
    """Every start tag with its attributes, and the text inside tagged (data-key) elements."""

    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.keyed: list[tuple[str, str, str]] = []   # (key, value, text)
        self.keyed_attrs: list[tuple[str, str, str, dict]] = []
        self._open: list = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if "data-key" in a:
            self._open.append([a["data-key"], a.get("data-value"), "", a])

    def handle_data(self, data):
        for o in self._open:
            o[2] += data

    def handle_endtag(self, tag):
        if self._open and tag in ("td", "div", "span"):
            k, v, text, attrs = self._open.pop()
            self.keyed.append((k, v, text))
            self.keyed_attrs.append((k, v, text, attrs))


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
    path = write_case(d / "bar.toml", CASE.replace("nu = 0.3", "nu = 0.3\nyield_strength = 250.0\ndensity = 7.85e-9")
                      .format(bar=parts["bar"], extra="""
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
    st = fake_study({"length": "mm", "stress": "MPa"})
    st.update(case_sha256=sha256_file(path), geometry_sha256=sha256_file(parts["bar"]))   # a current study
    (out / "study.json").write_text(json.dumps(st))
    assert main(["report", str(path), "--out", str(out), "-q"]) == 0
    html = (out / "report.html").read_text(encoding="utf-8")
    return out, html, json.loads((out / "summary.json").read_text())


def test_html_parses_and_images_decode(report):
    out, html, _ = report
    p = Collect()
    p.feed(html)
    p.close()
    imgs = [a for t, a in p.tags if t == "img"]
    # model, mesh, 4 von Mises, displacement, utilisation; line plot, convergence plot, comparison plots
    assert len(imgs) >= 14
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
    # the only scripts are the inline 3D view and its data: no source files, no address
    for t, a in p.tags:
        if t == "script":
            assert "src" not in a
    assert "http://" not in html and "https://" not in html


def test_key_numbers_match_the_summary(report):
    _, html, doc = report
    p = Collect()
    p.feed(html)
    keys = {k for k, _, _ in p.keyed}
    for must in ("max_displacement.value", "governing_peak.value", "governing_peak.utilisation", "mesh.nodes",
                 "mesh.elements", "equilibrium_error", "material.E", "material.density", "supports.0.area",
                 "loads.0.area", "comparison.compared", "regions.root.surfaces.0.area"):
        assert must in keys, must
    for key, value, text, attrs in p.keyed_attrs:
        want = float(resolve(doc, key))
        assert float(value) == pytest.approx(want, rel=1e-12, abs=0), key
        shown = parse(text.strip().split("\u202f")[0].split(" ")[0])
        if "data-noise" in attrs:                  # shown as 0: round-off below the stated tolerance
            assert shown == 0 and abs(want) <= float(attrs["data-noise"]), (key, text)
            continue
        factor = float(attrs.get("data-factor", 1.0))
        figures = 2 if key.endswith("equilibrium_error") else 3 if key.endswith(("utilisation", "margin")) else 4
        # the shown number is the value (times its unit factor) to the significant figures of its kind
        assert shown == pytest.approx(want * factor, rel=0.51 * 10 ** (1 - figures)), (key, text)


def test_sections_and_checks_present(report):
    out, html, doc = report
    for heading in ("Conclusion", "The model as applied", "Results", "Pictures", "3D view", "Along the lines",
                    "Mesh convergence", "Comparison with the reference results", "Plausibility checks", "Traceability"):
        assert f". {heading}</h2>" in html, heading
    # a table of contents linking every section, and the caution once
    p = Collect()
    p.feed(html)
    ids = {a["id"] for t, a in p.tags if t == "h2"}
    links = {a["href"][1:] for t, a in p.tags if t == "a" and a.get("href", "").startswith("#")}
    assert ids <= links
    assert html.count(doc["caution"]) == 1
    assert doc["inputs"]["geometry_file"]["sha256"] in html
    assert doc["inputs"]["case_file"]["sha256"] in html
    shown = {a["data-check"] for t, a in p.tags if "data-check" in a}
    assert shown == set(doc["checks"])
    for name, c in doc["checks"].items():
        i = html.index(f"data-check='{name}'")
        label = {"skip": "cannot judge"}.get(c["status"], c["status"])
        assert f">{label}</span>" in html[i:i + 200]
    # the conclusion names every verdict
    verdicts = {a["data-verdict"] for t, a in p.tags if "data-verdict" in a}
    assert verdicts == {"equilibrium", "mesh convergence", "beam-theory estimate", "comparison with the reference",
                        "plausibility checks", "yield margin"}
    pics = json.loads((out / "pictures.json").read_text())
    # the scale factor stated in the report is the one used
    assert f"magnified <b>{fmt(pics['scale'])} times</b>" in html
    assert "0.0049985" in html and "monotonic" in html            # the convergence table (a current study)
    assert "exact solution of the bar" in html
    # numbers for people: E with thousands separators, the density in kg/m³, no Python e-notation
    assert "200,000\u202fMPa" in html and "7,850\u202fkg/m³" in html
    import re

    visible = re.sub(r"<pre>.*?</pre>|<script.*?</script>|<[^>]*>", " ", html, flags=re.S)
    assert not re.search(r"\d[eE][+-]\d", visible), re.search(r".{40}\d[eE][+-]\d.{20}", visible)


def test_utilisation_field_in_the_result(report):
    """result.vtu carries von Mises over the yield strength (250 MPa in the case) at every node."""
    import meshio

    out, _, doc = report
    m = meshio.read(str(out / "result.vtu"))
    np.testing.assert_allclose(m.point_data["utilisation"], m.point_data["von_mises"] / 250.0, rtol=1e-12)
    assert doc["governing_peak"]["utilisation"] == pytest.approx(doc["governing_peak"]["value"] / 250.0, rel=1e-12)


def test_pictures_show_what_their_captions_say(report):
    out, html, doc = report
    pics = json.loads((out / "pictures.json").read_text())
    by = {p["file"]: p for p in pics["pictures"]}
    assert {"picture-model.png", "picture-mesh.png", "picture-von-mises.png", "picture-displacement.png",
            "picture-utilisation.png"} <= set(by)
    # the model picture marks every support the case names, one symbol per held direction at each point,
    # and one arrow for the tip force
    model = by["picture-model.png"]
    assert ([s["region"] for s in model["supports"]] == [s["region"] for s in doc["supports"]]
            == ["root", "side", "bottom"])
    for s in model["supports"]:
        assert s["points"] >= 3 and s["symbols"] == s["points"] * len(s["fix"])
    assert [ld["arrows"] for ld in model["loads"]] == [1]
    # the von Mises pictures mark the overall peak with the summary's value
    vm = by["picture-von-mises.png"]
    peak = next(m for m in vm["marks"] if "peak" in m["name"])
    assert peak["value"] == pytest.approx(doc["governing_peak"]["overall"]["value"], rel=1e-9)
    # each peak is seen from the view named for it (checked by a ray toward the viewer); the iso view sees them all
    assert pics["views"]["iso"]["sees_peaks"]
    for p in pics["pictures"]:
        for m in p["marks"]:
            for v, seen in zip(p["views"], m["visible"]):
                if v == "iso" or v == m["name"] or (v == "overall peak" and "governs" in m["name"]):
                    assert seen, (p["file"], v, m["name"])
    # a scale stopped at the governing peak: its top is the governing value, above it the over-range colour
    for p in pics["pictures"]:
        if p.get("over_range"):
            top = doc["governing_peak"]["value"] * (100 * 1 / 250.0 if p["field"] == "utilisation" else 1.0)
            assert p["clim"][1] == pytest.approx(top, rel=1e-9)
    # every picture the report names is embedded
    for f in by:
        assert f in html


def test_matplotlib_fallback(report, tmp_path, monkeypatch):
    out, _, _ = report
    for f in ("summary.json", "result.vtu", "boundary.vtu", "line-axis.csv", ".elastofe-case.json"):
        shutil.copy(out / f, tmp_path / f)
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")
    from elastofe.report import write_report

    html = write_report(tmp_path).read_text()
    assert "matplotlib" in html and "fallback" in html
    ours = json.loads((out / "pictures.json").read_text())
    theirs = json.loads((tmp_path / "pictures.json").read_text())
    # the same plan: the same pictures, symbols and arrows, whichever draws them
    assert [p["file"] for p in theirs["pictures"]] == [p["file"] for p in ours["pictures"]]
    assert theirs["pictures"][0]["supports"] == ours["pictures"][0]["supports"]
    for p in theirs["pictures"]:
        with Image.open(tmp_path / p["file"]) as im:
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


@pytest.mark.skipif(_chromium() is None,
                    reason="chromium is not installed here (CI installs it: apt-get install chromium)")
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
    assert info["h"] > 4000, info                  # a long page: ten sections with figures


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
    assert comp["verdict"] == "agree", [(q, e["max_relative_difference"])
                                        for q, e in comp["sets"][0]["quantities"].items()]
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
    assert "Beam-theory estimates" in html and "0.005001" in html and "flexure formula" in html
    assert "within 10% of beam theory" in html


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


def _with_study(out, tmp_path, study: dict):
    """A copy of the report's folder with ``study`` as its study.json."""
    d = tmp_path / "copy"
    shutil.copytree(out, d)
    (d / "study.json").write_text(json.dumps(study))
    return d


def test_stale_study_and_comparison_are_left_out(report, tmp_path, monkeypatch):
    """A study of other case file contents, and a comparison.json that is not the one this run
    wrote, are named stale and not shown (issue 13: staleness by the case record's hashes)."""
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")     # the pictures are not what is tested here
    from elastofe.report import write_report

    out, _, doc = report
    st = dict(fake_study(doc["units"]), case_sha256="0" * 64, geometry_sha256=doc["inputs"]["geometry_file"]["sha256"])
    d = _with_study(out, tmp_path, st)
    comp = json.loads((d / "comparison.json").read_text())
    comp["verdict"] = "disagree"                         # another run's (or an edited) file
    (d / "comparison.json").write_text(json.dumps(comp))
    html = write_report(d).read_text()
    assert "0.0049985" not in html                        # the study's values are left out
    assert "stale, left out" in html and "other case file contents" in html
    assert "comparison.json is not the file this run wrote" in html
    assert "Reference: <b>exact solution of the bar" not in html
    # a study with no hashes at all (an earlier version) is not shown either
    (d / "study.json").write_text(json.dumps(fake_study(doc["units"])))
    html = write_report(d).read_text()
    assert "0.0049985" not in html and "records no hashes" in html


def test_a_singular_governing_peak_is_named_in_the_headline(report, tmp_path, monkeypatch):
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")
    from elastofe.report import write_report
    from elastofe.report.verdicts import study_quantity_of_governing

    out, _, doc = report
    st = fake_study(doc["units"])
    st.update(case_sha256=doc["inputs"]["case_file"]["sha256"],
              geometry_sha256=doc["inputs"]["geometry_file"]["sha256"])
    gov = doc["governing_peak"]
    name = "peak_away_from_supports_and_loads" if gov["basis"] == "away" else "max_von_mises"
    st["quantities"][name] = {"status": "assessed", "kind": "stress", "unit": "MPa", "values": [9.0, 9.6, 10.3],
                              "convergence": "growing", "singular": True, "cause": "a re-entrant edge (h^-0.3)",
                              "advice": "grows on every level"}
    st["singular"] = [name]
    assert study_quantity_of_governing(doc, st)[0] == name
    html = write_report(_with_study(out, tmp_path, st)).read_text()
    head = html[:html.index("<nav")]
    assert "marks this peak singular" in head and "re-entrant edge" in head


@pytest.mark.skipif(_chromium() is None,
                    reason="chromium is not installed here (CI installs it: apt-get install chromium)")
def test_pdf_of_the_report(report, tmp_path, monkeypatch):
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")
    from elastofe.report import write_report

    out, _, _ = report
    d = tmp_path / "copy"
    shutil.copytree(out, d)
    write_report(d, pdf=True)
    data = (d / "report.pdf").read_bytes()
    assert data[:5] == b"%PDF-"
    pages = data.count(b"/Type /Page") - data.count(b"/Type /Pages")
    assert pages >= 5, pages                          # ten sections with pictures do not fit on fewer


def test_pdf_without_a_browser_is_refused_before_solving(report, tmp_path, monkeypatch, capsys):
    _, _, doc = report
    monkeypatch.setenv("ELASTOFE_CHROMIUM", str(tmp_path / "no-such-browser"))
    assert main(["report", doc["case_file"], "--pdf", "--out", str(tmp_path / "o")]) == 2
    assert "--pdf" in capsys.readouterr().err and not (tmp_path / "o" / "summary.json").exists()


def test_numbers_for_people():
    from elastofe.report.numbers import coordinates, qty, vec

    assert fmt(200000.0) == "200,000" and fmt(7850.0) == "7,850" and fmt(81.01523) == "81.02"
    assert fmt(0.2207374) == "0.2207" and fmt(0.3, 3) == "0.3" and fmt(9.99996) == "10"
    assert fmt(5.1076e-14, 2) == "5.1×10⁻¹⁴" and parse("5.1×10⁻¹⁴") == pytest.approx(5.1e-14)
    assert parse("200,000") == 200000.0
    # large values to their significant figures only (a stress in Pa, a modulus in psi)
    assert fmt(157582830.0) == "157,600,000" and fmt(48728.4) == "48,730" and fmt(29007548.0) == "29,010,000"
    assert fmt(-157582830.0) == "-157,600,000" and fmt(99995.0) == "100,000" and fmt(1203.079) == "1,203"
    # counts are shown whole (11,691 DOF, not 11,690)
    from elastofe.report.document import held_text, num

    assert ">11,691<" in num(11691, "mesh.dofs")
    # an elastic support's stiffness per area carries its unit: 50 N/mm^3 = 184,198 lbf/in^3
    # (1 lbf = 4.4482216152605 N, 1 in = 25.4 mm, both exact by definition)
    sp = {"frame": "elastic", "normal_stiffness": 50 / 4.4482216152605 * 25.4 ** 3, "tangential_stiffness": 0.0}
    assert held_text(sp, "lbf", "in") == ("elastic: normal stiffness 184,200\u202flbf/in³, tangential "
                                          "0\u202flbf/in³ (per unit area)")
    # round-off noise shown as zero against its reference (the load), real values kept
    assert vec([-4.63e-10, 2004.36, 3.3e-10], "N", ref=2004.36) == "(0, 2,004, 0)\u202fN"
    assert qty(4.9e-14, "N", ref=1000.0) == "0\u202fN" and qty(4.9e-3, "N", ref=1000.0) == "0.0049\u202fN"
    assert coordinates([12.507795, 19.332917, 1e-13], 155.7, "mm") == "(12.51, 19.33, 0)\u202fmm"


def test_section_frame_of_a_line():
    """A constant stress state sampled along y: the cutting plane's normal is the direction of the
    largest normal stress across the line (x here), σn = σxx and τ = σxy exactly (tensor
    transformation, common practice); a rotated line gives the rotated components."""
    from elastofe.report.plots import in_frame, section_frame

    k = 5
    sig = {"xx": 80.0, "yy": 5.0, "zz": 1.0, "xy": -7.0, "yz": 0.5, "xz": 2.0}
    cols = {"x": np.zeros(k), "y": np.linspace(0, 10, k), "z": np.zeros(k)}
    cols.update({"s" + c: np.full(k, v) for c, v in sig.items()})
    fr = section_frame(cols)
    # the largest normal stress across the line: the principal direction of the x-z part [[80, 2], [2, 1]]
    w, v = np.linalg.eigh(np.array([[80.0, 2.0], [2.0, 1.0]]))
    n_exact = np.array([v[0, 1], 0.0, v[1, 1]]) * np.sign(v[0, 1])
    np.testing.assert_allclose(fr["n"], n_exact, atol=1e-4)
    sig["xz"] = 0.0
    cols["sxz"] = np.zeros(k)
    fr = section_frame(cols)
    np.testing.assert_allclose(fr["n"], [1, 0, 0], atol=1e-12)
    np.testing.assert_allclose(fr["normal"], 80.0) and np.testing.assert_allclose(fr["shear"], -7.0)
    got = in_frame(sig, fr)
    assert got["normal"] == pytest.approx(80.0) and got["shear"] == pytest.approx(-7.0)
    # the beam's axis, when given, is the normal: here z, so σn = σzz and τ = σyz
    fr = section_frame(cols, prefer=np.array([0.0, 0.3, 1.0]))
    np.testing.assert_allclose(fr["n"], [0, 0, 1], atol=1e-12)
    assert in_frame(sig, fr)["normal"] == pytest.approx(1.0) and in_frame(sig, fr)["shear"] == pytest.approx(0.5)


def test_estimate_verdicts_say_why():
    """A deflection 39 % off beam theory at 10 mm from the held end of a 40 mm deep arm is explained
    (within one depth: Saint-Venant's principle, common practice); the same difference at mid-span is
    not; within 10 % agrees."""
    from elastofe.report.verdicts import estimate_rows

    e = {"axis": {"length_to_load": 135.0},
         "points": {"root": {"station": 10.0, "fibre": 19.5, "deflection": {"estimate": -0.0017, "fe": -0.00237},
                             "bending_stress": {"estimate": 82.46, "fe": 81.06}},
                    "mid": {"station": 70.0, "fibre": 19.5, "deflection": {"estimate": -0.05, "fe": -0.07}}}}
    rows = {r["what"].split(" (")[0]: r for r in estimate_rows(e, "mm")}
    assert rows["deflection at point 'root'"]["status"] == "explained"
    assert "Saint-Venant" in rows["deflection at point 'root'"]["why"]
    assert rows["bending stress at point 'root'"]["status"] == "pass"
    assert rows["deflection at point 'mid'"]["status"] == "warn"


@pytest.mark.slow
def test_model_picture_of_load_cases_with_bearing_and_a_spread_load(tmp_path):
    """The lever with two load cases (elastofe/models/lever/lever-cases.toml): the model picture draws the pin
    bearing as arrows spread over the loaded half of the hole, the side force at its point with lines
    to the hole, gravity, no arrow for the temperature change; the stress pictures use the envelope
    and the governing combination's displacements."""
    from pathlib import Path

    case = Path(__file__).resolve().parent.parent / "elastofe" / "models" / "lever" / "lever-cases.toml"
    out = tmp_path / "cases"
    assert main(["report", str(case), "--out", str(out), "-q"]) in (0, 4)
    doc = json.loads((out / "summary.json").read_text())
    pics = json.loads((out / "pictures.json").read_text())
    model = pics["pictures"][0]
    loads = {ld["kind"]: ld for ld in model["loads"]}
    assert loads["bearing"]["arrows"] >= 8 and loads["gravity"]["arrows"] == 1
    assert loads["spread"]["arrows"] == 1 and loads["spread"]["lines"] >= 4 and loads["spread"]["moments"] == 0
    assert loads["temperature"]["arrows"] == 0
    assert (len(model["supports"]) == len(doc["supports"]) == 1
            and model["supports"][0]["symbols"] == 3 * model["supports"][0]["points"])
    gov = doc["governing_peak"]
    assert pics["deformed_by"] == f"displacement-{gov['load_case']}"
    vm = next(p for p in pics["pictures"] if p["file"] == "picture-von-mises.png")
    assert vm["field"] == "von_mises-envelope"
    assert vm["clim"][1] == pytest.approx(gov["overall"]["value"], rel=1e-9)
    # the deformed shape's case is named as what it is: a load case or a combination
    assert f"({doc['load_cases'][gov['load_case']]['kind']} '{gov['load_case']}')" in vm["title"]
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "Pin bearing" in html and "load case or combination <b>" + gov["load_case"] in html


def test_study_records_the_hashes_of_its_inputs(report):
    """study.json carries the sha256 of the case file and geometry it was made from (the report's
    staleness test compares them with the run's case record)."""
    from elastofe.case import load_case
    from elastofe.studies.convergence import study_identity

    _, _, doc = report
    ident = study_identity(load_case(doc["case_file"]))
    assert ident == {"case_sha256": doc["inputs"]["case_file"]["sha256"],
                     "geometry_sha256": doc["inputs"]["geometry_file"]["sha256"]}


def test_geometry_unit_row_names_the_unit_read_and_the_case_unit():
    """A STEP file in mm solved in an m-N case: the row says the file's numbers were read in mm and
    scaled to m by 0.001 (1 mm = 0.001 m, the SI prefix milli), not "mm → mm"."""
    from elastofe.report.document import geometry_unit_text

    geo = {"file": "part.step", "file_unit": "mm", "unit": "mm", "unit_origin": "file", "length_unit": "m",
           "scale": 0.001}
    text = geometry_unit_text(geo, "m")
    assert text.startswith("mm (stated in the file) → m, scale ")
    assert parse(text.rsplit("scale ", 1)[1]) == pytest.approx(0.001, rel=1e-12)
    # A mesh file without a unit, read in geometry.unit = "mm" for an in-lbf case: 1 in = 25.4 mm
    # exactly (international inch, 1959).
    geo = {"file": "part.msh", "file_unit": None, "unit": "mm", "unit_origin": "case", "length_unit": "in",
           "scale": 1 / 25.4}
    text = geometry_unit_text(geo, "in")
    assert text.startswith("mm (geometry.unit of the case) → in, scale ")
    assert parse(text.rsplit("scale ", 1)[1]) == pytest.approx(1 / 25.4, rel=1e-3)


def test_pictures_and_comparison_give_every_value_its_unit(tmp_path):
    """In an in-lbf case the caption's peaks and colour-scale stop carry psi, and the comparison's
    worst point, its values and the allowed difference carry in and psi (values from the in-lbf
    probe of the mm-N cantilever: 48,728 psi peak, tolerance 0.1 % of 22,880 psi = 22.88 psi)."""
    from elastofe.report.document import section_comparison, section_pictures

    Image.new("RGB", (4, 4)).save(tmp_path / "picture-von-mises-capped.png")
    s = {"units": {"length": "in", "force": "lbf", "stress": "psi", "moment": "lbf·in"},
         "geometry": {"size": 7.923}, "max_displacement": {"value": 0.085}}
    pics = {"renderer": "test", "scale": 5, "views": {}, "pictures": [{
        "file": "picture-von-mises-capped.png", "kind": "field", "title": "von Mises", "field": "von_mises",
        "clim": [679.6, 44605.17], "over_range": True, "over_range_area": 0.016,
        "marks": [{"name": "overall peak", "value": 48727.97, "at": [0.1294, 0.2493, 0.7874], "visible": [True]}]}]}
    text = section_pictures(pics, s, tmp_path)
    assert "overall peak 48,730\u202fpsi at (0.1294, 0.2493, 0.7874)\u202fin" in text
    assert "governing peak (44,610\u202fpsi)" in text
    e = {"unit": "psi", "tolerance": "0.1%", "allowed_difference": 22.88, "compared": 11, "snapped": 0,
         "outside": 0, "within": 11, "max_abs_difference": 9.6e-7, "max_relative_difference": 4.2e-11,
         "rms_relative_difference": 2e-11, "verdict": "agree",
         "worst": {"at": [3.937, 0.1969, 0.0], "reference": 22850.4, "ours": 22850.4}}
    comp = {"label": "probe", "verdict": "agree", "within_tolerance": 11, "compared": 11, "points_outside": 0,
            "rule": "", "snap_distance": 0.079, "scalars": [], "plots": [],
            "sets": [{"file": "ref.csv", "kind": "points", "sha256": "0" * 64, "points": 11,
                      "quantities": {"sxx": e}}]}
    text = section_comparison(comp, "", tmp_path, "in")
    assert "(3.937, 0.1969, 0)\u202fin: 22,850\u202fpsi → 22,850\u202fpsi" in text
    assert "(±22.9\u202fpsi)" in text and "9.6×10⁻⁷\u202fpsi" in text


def test_a_singular_peak_keeps_a_failed_yield_check_failed_in_the_conclusion(report):
    """The conclusion must agree with summary.json's checks: an L bracket's corner peak at 153 % of yield
    (yield check FAIL, exit 4) that the study marks singular was shown as 'yield margin: warn'. Singular
    turns a pass into a warning, never a fail into one."""
    import copy

    from elastofe.report.document import conclusion_rows

    _, _, doc = report
    st = fake_study(doc["units"])
    gov = doc["governing_peak"]
    name = "peak_away_from_supports_and_loads" if gov["basis"] == "away" else "max_von_mises"
    st["quantities"][name] = {"status": "assessed", "kind": "stress", "unit": "MPa", "values": [9.0, 9.6, 10.3],
                              "convergence": "growing", "singular": True, "cause": "a re-entrant edge (h^-0.3)",
                              "advice": "grows on every level"}
    st["singular"] = [name]
    for status, shown in (("fail", "fail"), ("warn", "warn"), ("pass", "warn")):
        s = copy.deepcopy(doc)
        s["checks"]["yield"]["status"] = status
        s["governing_peak"]["utilisation"] = 1.53
        row = {r["name"]: r for r in conclusion_rows(s, st, "", None, "")}["yield margin"]
        assert row["status"] == shown and "singular" in row["figure"]


def test_a_governing_peak_the_study_cannot_judge_is_no_pass(report):
    """When the coarse levels of a study have no node two elements away from every support and load
    (a short bar held at both ends under pressure on its top face: all of its nodes on the 5 mm mesh),
    the peak away from them is on too few levels to judge (status 'missing'); if that peak governs the
    run, the conclusion's mesh-convergence row said 'pass' for it."""
    import copy

    from elastofe.report.document import conclusion_rows

    _, _, doc = report
    s = copy.deepcopy(doc)
    s["governing_peak"]["basis"] = "away"
    s["governing_peak"]["load_case"] = None
    st = fake_study(doc["units"])
    st["quantities"]["peak_away_from_supports_and_loads"] = {
        "status": "missing", "kind": "stress", "unit": "MPa", "values": [None, None, 10.3],
        "singular": False, "advice": "not available on three or more of the finest levels"}
    row = {r["name"]: r for r in conclusion_rows(s, st, "", None, "")}["mesh convergence"]
    assert row["status"] == "warn" and "cannot judge" in row["figure"]


def test_yield_row_says_why_it_warns_below_yield(report):
    """A governing peak below yield with a yield check that warns (a peak next to a support in another
    load case above yield: the probe's bar, 225.9 MPa governing, 262.6 MPa at the clamp in 'a', yield
    250 MPa) showed 'warn' beside '90.4 % of yield' without the reason."""
    import copy

    from elastofe.report.document import conclusion_rows

    _, _, doc = report
    s = copy.deepcopy(doc)
    s["governing_peak"]["utilisation"] = 0.904
    s["checks"]["yield"].update(status="warn", why="but next to a support or load the peak reaches 262.6 MPa "
                                                   "in 'a', above yield")
    row = {r["name"]: r for r in conclusion_rows(s, None, "", None, "")}["yield margin"]
    assert row["status"] == "warn" and "next to a support or load the peak reaches 262.6 MPa" in row["figure"]


def test_load_case_pictures_give_their_values_units(tmp_path):
    """With load cases the pictures show the fields von_mises-envelope and displacement-CASE: their
    captions carry psi and in as the single-case ones do (values from the in-lbf L-bracket probe with
    load cases 'push', 'down' and the combination 'both': envelope peak 76,990 psi, 0.447 in in 'down')."""
    from elastofe.report.document import section_pictures

    for name in ("picture-von-mises-capped.png", "picture-displacement.png"):
        Image.new("RGB", (4, 4)).save(tmp_path / name)
    s = {"units": {"length": "in", "force": "lbf", "stress": "psi", "moment": "lbf·in"},
         "geometry": {"size": 5.099}, "max_displacement": {"value": 0.3456}}
    pics = {"renderer": "test", "scale": 1, "views": {}, "deformed_by": "displacement-down", "pictures": [
        {"file": "picture-von-mises-capped.png", "kind": "field", "title": "von Mises envelope",
         "field": "von_mises-envelope", "clim": [0.0, 67880.0], "over_range": True, "over_range_area": 0.00543,
         "marks": [{"name": "overall peak", "value": 76985.6, "at": [3.9038, 0.5, 0.25], "visible": [True]}]},
        {"file": "picture-displacement.png", "kind": "field", "title": "Displacement magnitude",
         "field": "displacement-down", "marks": [{"name": "largest displacement", "value": 0.447,
                                                  "at": [0.0, 0.0, 3.0], "visible": [True]}]}]}
    text = section_pictures(pics, s, tmp_path)
    assert "overall peak 76,990\u202fpsi at" in text
    assert "governing peak (67,880\u202fpsi)" in text
    assert "largest displacement 0.447\u202fin at" in text


def test_headline_displacement_is_the_largest_of_all_load_cases(tmp_path):
    """With load cases summary.json's top-level max_displacement is the first case's ('push', 0.3456 in);
    the headline and the results give the largest of every load case and combination (0.447 in in
    'down', in-lbf L-bracket probe), tagged with its summary key, and the first case's rows say whose
    they are; the loads table gives each case's own total."""
    from elastofe.report.document import largest_displacement, section_header, section_model, section_results

    cases = {"push": {"kind": "load case", "applied_force": [100.0, 0, 0], "applied_moment": [0, 300.0, -50.0],
                      "max_displacement": {"value": 0.3456, "at": [0, 0.5, 3], "vector": [0.2967, 0, 0.1772]}},
             "down": {"kind": "load case", "applied_force": [0, 0, -200.0], "applied_moment": [-100.0, 25.0, 0],
                      "max_displacement": {"value": 0.447, "at": [0, 0, 3], "vector": [-0.3259, 0, -0.3059]}},
             "both": {"kind": "combination", "applied_force": [150.0, 0, -300.0],
                      "applied_moment": [-150.0, 487.5, -75.0],
                      "max_displacement": {"value": 0.1986, "at": [0, 0, 3], "vector": [0.1, 0, -0.17]}}}
    s = {"title": "L", "units": {"length": "in", "force": "lbf", "stress": "psi", "moment": "lbf·in",
                                 "energy": "lbf·in"},
         "geometry": {"size": 5.099}, "load_case": "push", "load_cases": cases,
         "max_displacement": cases["push"]["max_displacement"], "max_von_mises": {"value": 1.0, "at": [0, 0, 0]},
         "applied_force": [100.0, 0, 0], "applied_moment": [0, 300.0, -50.0], "loads": [],
         "reactions": {"base": {"force": [-100.0, 0, 0], "moment": [0, -300.0, 50.0]}},
         "strain_energy": 14.83, "checks": {}, "material": {}, "governing_peak": {},
         "mesh": {"nodes": 11407, "elements": 6068, "dofs": 34221, "order": 2}}
    for c in cases.values():
        c["max_von_mises"] = {"value": 1.0, "at": [0, 0, 0]}
    md, key, case = largest_displacement(s)
    assert (md["value"], key, case) == (0.447, "load_cases.down.max_displacement.value", "down")
    head = section_header(s, None, "now", "pass")
    assert 'data-key="load_cases.down.max_displacement.value"' in head and "0.447\u202fin" in head
    assert "0.3456" not in head
    res = section_results(s, None)
    assert "largest displacement (all load cases)" in res and "0.447\u202fin" in res
    assert "reaction on 'base' (load case 'push')" in res and "strain energy (load case 'push')" in res
    model = section_model(s, {}, tmp_path)
    assert "total applied in 'down'" in model and "total applied in 'both'" in model


def test_model_picture_frames_arrows_standing_off_the_part():
    """A force on the top of an upright is drawn as an arrow ending on the face and starting 22 % of the
    part size above it (in-lbf L-bracket probe: the tail and its label were outside the picture). The
    camera of the model picture frames the part, every arrow's both ends, label anchors and support
    symbols: each lies within the half-height (parallel scale) and half-width of the view."""
    from elastofe.report.scene import fit_view, model_points

    part = np.array([[x, y, z] for x in (0, 4) for y in (0, 1) for z in (0, 0.25)]
                    + [[x, y, z] for x in (0, 0.25) for y in (0, 1) for z in (0, 3)], dtype=float)
    tail, tip = [0.125, 0.5, 4.12], [0.125, 0.5, 3.0]
    model = {"loads": [{"arrows": [[tail, tip]], "moments": [], "lines": [], "label_at": tail}],
             "supports": [{"symbols": [{"at": [4.0, 0.5, 0.1], "to": [4.3, 0.5, 0.1]}]}]}
    pts = model_points(model, part)
    assert pts.shape == (part.shape[0] + 5, 3)
    aspect = 650 / 620
    for d in ([0.58, -0.58, 0.58], [-0.58, 0.58, -0.58]):
        v = fit_view(pts, np.asarray(d), aspect)
        for q in (tail, tip, [4.3, 0.5, 0.1]):
            r = np.asarray(q) - v["focal"]
            assert abs(r @ v["up"]) <= v["parallel_scale"] * (1 + 1e-12)
            assert abs(r @ v["right"]) <= v["parallel_scale"] * aspect * (1 + 1e-12)
        # labels are written rightward from their anchor: the model view keeps room at its right for them
        from elastofe.report.render import MODEL_LABEL_ROOM

        v = fit_view(pts, np.asarray(d), aspect, MODEL_LABEL_ROOM)
        assert (np.asarray(tail) - v["focal"]) @ v["right"] <= (
            v["parallel_scale"] * aspect * (1 - 2 * MODEL_LABEL_ROOM) * (1 + 1e-12))
        # the part alone would leave the arrow's tail out of the frame (what the picture did)
        v0 = fit_view(part, np.asarray(d), aspect)
        assert abs((np.asarray(tail) - v0["focal"]) @ v0["up"]) > v0["parallel_scale"]


@pytest.mark.gmsh
def test_two_materials_report_the_part_overall_peak_and_cap_at_the_highest_governing_peak(tmp_path):
    """A cantilever of steel (x 0-50, yield 355 MPa) bonded to aluminium (x 50-100, yield 100 MPa),
    300 N across the tip: the aluminium governs by utilisation, the steel carries the higher stress.
    The report names the material its overall and away rows belong to, gives the steel's peak, marks
    the part's overall peak (summary max_von_mises) in the pictures and stops their colour scale at the
    highest governing peak of the materials, not at the aluminium's (which painted the whole steel half
    red as "next to supports or loads"). The aluminium's peak at the interface against beam theory
    sigma = M c / I = 300 N * 50 mm * 5 mm / (10^4/12 mm^4) = 90 MPa (Timoshenko, Strength of
    Materials, simple bending), within 10 % on this coarse mesh."""
    from tests.conftest import write_step

    step = write_step(tmp_path / "two.step", lambda occ: (occ.addBox(0, 0, 0, 50, 10, 10),
                                                          occ.addBox(50, 0, 0, 50, 10, 10)))
    case = write_case(tmp_path / "two.toml", f"""
        [geometry]
        file = "{step}"
        [[material]]
        name = "steel"
        E = "210 GPa"
        nu = 0.3
        yield_strength = "355 MPa"
        at = [[25, 5, 5]]
        [[material]]
        name = "alu"
        E = "70 GPa"
        nu = 0.33
        yield_strength = "100 MPa"
        at = [[75, 5, 5]]
        [mesh]
        size = 4
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "xyz"
        [[load]]
        region = "tip"
        force = [0, -300, 0]
        """)
    out = tmp_path / "out"
    assert main(["report", str(case), "--out", str(out), "-q"]) in (0, 4)
    doc = json.loads((out / "summary.json").read_text())
    g = doc["governing_peak"]
    assert g["material"] == "alu" and g["value"] == pytest.approx(90.0, rel=0.10)
    steel = g["by_material"]["steel"]
    assert doc["max_von_mises"]["value"] > steel["value"] > g["value"]
    pics = json.loads((out / "pictures.json").read_text())
    capped = [p for p in pics["pictures"] if p["file"].startswith("picture-von-mises-capped")]
    assert capped
    for p in capped:
        assert p["clim"][1] == pytest.approx(steel["value"], rel=1e-12)
        marks = {m["name"]: m for m in p["marks"]}
        assert marks["overall peak"]["value"] == pytest.approx(doc["max_von_mises"]["value"], rel=1e-6)
        assert marks["governing peak"]["value"] == pytest.approx(g["value"], rel=1e-6)
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "overall von Mises peak in material 'alu'" in html
    assert 'data-key="governing_peak.by_material.steel.value"' in html
    assert "stops at the highest governing peak of the materials" in html


def test_convergence_of_the_governing_peak_follows_its_material():
    """A steel-aluminium cantilever (probe: 300 N across the tip, 3 levels): the aluminium governs by
    utilisation (87.2 MPa, converged), the steel's overall peak sits on the clamped edge (180 -> 179 ->
    185 MPa, oscillatory). The conclusion's convergence row follows the study quantity of the governing
    material, not the part's overall peak in the other material."""
    from elastofe.report.verdicts import study_quantity_of_governing

    s = {"load_case": None, "governing_peak": {
        "value": 87.2, "basis": "overall", "load_case": None, "material": "alu",
        "by_material": {"steel": {"value": 170.2, "basis": "away"}, "alu": {"value": 87.2, "basis": "overall"}}}}
    study = {"quantities": {
        "max_von_mises": {"values": [180.34, 178.56, 185.38], "convergence": "oscillatory"},
        "peak_away_from_supports_and_loads": {"values": [157.48, 167.64, 170.2], "convergence": "monotonic"},
        "governing_peak.by_material.alu": {"values": [87.127, 87.162, 87.202], "convergence": "converged"}}}
    name, q = study_quantity_of_governing(s, study)
    assert name == "governing_peak.by_material.alu" and q["values"][-1] == pytest.approx(87.2, rel=1e-3)
    del study["quantities"]["governing_peak.by_material.alu"]
    assert study_quantity_of_governing(s, study) is None   # cannot judge, rather than the steel's peak
    # ... and the conclusion says so: no pass on a study none of whose quantities follows that peak
    from elastofe.report.document import conclusion_rows

    s.update(units={"length": "mm", "force": "N", "stress": "MPa"}, checks={}, material={})
    study["levels"] = [{}, {}, {}]
    row = next(r for r in conclusion_rows(s, study, "", None, "") if r["name"] == "mesh convergence")
    assert row["status"] == "skip" and "cannot judge" in row["figure"]


def test_a_governing_peak_at_a_reentrant_edge_is_no_pass_on_yield():
    """The L-bracket probe (in-lbf, far end of the base clamped, 100 lbf along x on the upright): the
    governing peak 32,720 psi, 93.5 % of a 35 ksi yield, lies within one element of the inner corner
    (a 270 deg re-entrant edge, whose stress is unbounded in linear elasticity: Williams, J. Appl.
    Mech. 19, 1952). The sharp_edge check warns; the yield-margin row must not read pass and the
    headline names why."""
    from elastofe.report.document import conclusion_rows, section_header

    s = {"title": "L", "units": {"length": "in", "force": "lbf", "stress": "psi"}, "geometry": {"size": 5.099},
         "max_displacement": {"value": 0.3456, "at": [0, 0.5, 3]}, "material": {"yield_strength": 35000.0},
         "governing_peak": {"value": 32720.0, "basis": "overall", "utilisation": 32720.0 / 35000.0,
                            "margin": 35000.0 / 32720.0 - 1, "why": "the overall peak lies away"},
         "checks": {"yield": {"status": "pass"}, "sharp_edge": {
             "status": "warn", "why": "the governing peak lies within one element of a re-entrant sharp edge",
             "details": {"governing_on_reentrant_edge": False, "governing_next_to_reentrant_edge": True}}}}
    row = next(r for r in conclusion_rows(s, None, "", None, "") if r["name"] == "yield margin")
    assert row["status"] == "warn" and "re-entrant sharp edge" in row["figure"]
    assert "re-entrant sharp edge" in section_header(s, None, "now", "warn")
    s["checks"]["sharp_edge"]["details"]["governing_next_to_reentrant_edge"] = False   # the peak away from it
    row = next(r for r in conclusion_rows(s, None, "", None, "") if r["name"] == "yield margin")
    assert row["status"] == "pass"


def test_a_peak_tag_near_the_top_hangs_below_it():
    """A peak near the top edge of the frame (steel-aluminium probe: the clamped steel's top edge) had its
    tag drawn over the picture's title. Tags whose height above the centre would enter the title room
    hang below the peak; lower ones stay above it."""
    from elastofe.report.render import TITLE_ROOM, tag_below

    ps = 60.0                                   # half the view's height [mm]
    limit = ps * (1 - 2 * TITLE_ROOM)           # the highest tag outside the title room
    assert tag_below(limit * 1.01, ps) and not tag_below(limit * 0.99, ps) and not tag_below(-ps, ps)


def test_effective_mass_round_off_reads_as_zero(tmp_path):
    """A mode's effective mass share of 1.7e-11 along an axis it does not move along is the eigen
    solver's round-off: the table shows 0 %, a real share keeps its figures."""
    from elastofe.report.document import section_eigen

    s = {"modes": [{"number": 1, "frequency": 83.34, "effective_mass": [1.72e-13, 0.604, 1.7e-11],
                    "cumulative_effective_mass": [1.72e-13, 0.604, 1.7e-11]}],
         "modes_info": {"method": "test"}}
    html = section_eigen(s, {}, tmp_path)
    assert "10⁻" not in html and "e-1" not in html
    assert "60.4\u202f%" in html and html.count(">0\u202f%<") >= 2


def test_a_wide_band_on_the_governing_peak_is_no_pass(report):
    """An oscillating governing peak with a 10 % GCI (the two-material probe's clamped edge) read pass
    in the conclusion; above 5 % (common practice) the row warns and says to refine, below it passes."""
    import copy

    from elastofe.report.document import conclusion_rows

    _, _, doc = report
    s = copy.deepcopy(doc)
    s["governing_peak"].update(basis="overall", load_case=None)
    s["governing_peak"].pop("by_material", None)
    for gci, status in ((0.103, "warn"), (0.013, "pass")):
        st = fake_study(doc["units"])
        st["quantities"]["max_von_mises"] = {
            "status": "assessed", "kind": "stress", "unit": "MPa", "values": [100.0, 93.0, 97.0],
            "convergence": "oscillatory", "gci_fine": gci, "band": [90.0, 104.0], "singular": False, "advice": ""}
        row = {r["name"]: r for r in conclusion_rows(s, st, "", None, "")}["mesh convergence"]
        assert row["status"] == status, row["figure"]
        assert ("the band is wide" in row["figure"]) is (status == "warn")
