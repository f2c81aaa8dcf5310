"""The report page of classify, fit and grid summarize, and what to cite for a run.

Every page is parsed in the default suite (stdlib ``html.parser``): well
formed, every section present, every embedded figure a PNG that decodes, no
resource fetched from anywhere. One test also renders the pages in a real
headless browser (Debian's ``chromium``): the page loads, every image has
decoded with a non-zero size, no console error; it skips, saying so, where no
browser is installed.
"""

from __future__ import annotations

import base64
import io
import os
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from motes.citations import (MOTES_CITATION, format_references, material_citation, run_references,
                             sequence_citation, software_versions)
from motes.cli import main
from motes.report.html_page import SECTION_IDS

REPO = Path(__file__).resolve().parents[1]

_VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr",
         "path", "rect", "circle", "line", "polyline", "polygon", "use", "stop", "ellipse"}


class _PageChecker(HTMLParser):
    """Collects what the page holds and every structural problem it meets."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.problems = [], []
        self.ids, self.images, self.scripts, self.links, self.fetching = set(), [], 0, [], []
        self.section_headings, self._in_h2, self.style = {}, None, ""
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if "id" in attrs:
            if attrs["id"] in self.ids:
                self.problems.append(f"duplicate id {attrs['id']!r}")
            self.ids.add(attrs["id"])
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        if tag == "script":
            self.scripts += 1
        if tag == "link":
            self.fetching.append(f"<link {attrs}>")
        for key in ("src", "srcset", "data", "poster"):
            if key in attrs and not str(attrs[key]).startswith("data:"):
                self.fetching.append(f"<{tag} {key}={attrs[key]!r}>")
        if tag == "a":
            self.links.append(attrs.get("href", ""))
        if tag == "h2" and self.stack and self.stack[-1][0] == "section":
            self._in_h2 = self.stack[-1][1]
        if tag == "style":
            self._in_style = True
        if tag not in _VOID:
            self.stack.append((tag, attrs.get("id")))

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in _VOID:
            self.stack.pop()

    def handle_endtag(self, tag):
        if tag in _VOID:
            return
        if not self.stack or self.stack[-1][0] != tag:
            self.problems.append(f"</{tag}> closes {self.stack[-1][0] if self.stack else 'nothing'}")
            return
        self.stack.pop()
        if tag == "h2":
            self._in_h2 = None
        if tag == "style":
            self._in_style = False

    def handle_data(self, data):
        if self._in_h2:
            self.section_headings[self._in_h2] = self.section_headings.get(self._in_h2, "") + data
        if self._in_style:
            self.style += data


def check_page(path: Path) -> tuple[_PageChecker, str]:
    """Parse a report page and assert what every page must satisfy; return the parser and the text."""
    import matplotlib.image as mpimg

    text = path.read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>")
    page = _PageChecker()
    page.feed(text)
    page.close()
    assert not page.problems, page.problems[:5]
    assert page.stack == [], f"unclosed elements: {page.stack}"
    for sid, heading in SECTION_IDS.items():
        assert sid in page.ids, f"section {sid} missing"
        assert page.section_headings.get(sid, "").strip() == heading
    assert page.scripts == 0 and page.fetching == [], page.fetching
    assert "@import" not in page.style and "url(" not in page.style
    for src in page.images:
        prefix = "data:image/png;base64,"
        assert src.startswith(prefix), src[:40]
        data = base64.b64decode(src[len(prefix):], validate=True)
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        pixels = mpimg.imread(io.BytesIO(data), format="png")     # decodes the whole image
        assert pixels.shape[0] > 50 and pixels.shape[1] > 50
    assert all(link.startswith(("https://", "http://", "#")) for link in page.links), page.links
    return page, text


def _section(text: str, sid: str) -> str:
    start = text.index(f'<section id="{sid}">')
    return text[start:text.index("</section>", start)]


# ------------------------------------------------------------------ runs (one each per module)
@pytest.fixture(scope="module")
def classify_run(tmp_path_factory):
    from motes.demo import companion as demo_companion

    base = tmp_path_factory.mktemp("classify")
    demo_companion.write_inputs(base / "demo")
    out = base / "run"
    argv = ["classify", str(base / "demo" / demo_companion.TARGET_FILE), "--output", str(out)]
    return argv, out


@pytest.fixture(scope="module")
def fit_run(tmp_path_factory):
    import motes.dust.fit.problem as fit_problem
    from dust_fit_toys import toy_factory, write_toy_fit

    base = tmp_path_factory.mktemp("fit")
    truth = {"fractions": {"alpha": 0.6, "beta": 0.4}, "porosity": 0.3, "a_min": 2.0, "q": 3.5}
    path = write_toy_fit(base, truth, materials=("alpha", "beta"), rng=np.random.default_rng(5),
                         sampler="nlive = 40\ndlogz = 1.0\nseed = 2\n",
                         parameters='porosity = 0.3\nq = 3.5\n'
                                    'a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }\n')
    out = base / "run"
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(fit_problem, "build_colour_model", toy_factory)     # analytic stand-in: seconds, not minutes
        yield ["fit", str(path), "--output", str(out), "--workers", "1", "--quiet"], out


@pytest.fixture(scope="module")
def grid_run(tmp_path_factory):
    import motes.dust.grid.run
    from test_dust_grid import grid_text, standin_factory, write_photometry

    base = tmp_path_factory.mktemp("grid")
    write_photometry(base, rng=np.random.default_rng(7))
    path = base / "grid.toml"
    path.write_text(grid_text(step="0.25", extra="chunk_size = 40\n"))
    store = base / "store"
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(motes.dust.grid.run, "build_disk_model", standin_factory)
        assert main(["grid", str(path), "--output", str(store), "--workers", "1", "--quiet", "--no-summary"]) == 0
        yield ["grid", "summarize", str(store), "--top", "3", "--output", str(base / "summary")], base / "summary"


def _run(argv, capsys):
    capsys.readouterr()
    assert main(argv) == 0, capsys.readouterr().err
    return capsys.readouterr().out


def test_classify_page(classify_run, capsys):
    argv, out = classify_run
    printed = _run(argv, capsys)
    path = out / "velmora_b_classification_report.html"
    assert f"wrote {path}" in printed
    page, text = check_page(path)
    assert len(page.images) == len(list(out.glob("*.png"))) >= 2    # every figure written (SED, types, ...)
    assert "What to cite for this run:" in printed and "Pecaut &amp; Mamajek 2013, ApJS 208, 9" in text
    assert "2024.05.15" in _section(text, "cite") and "Bohlin &amp; Gilliland 2004" in _section(text, "cite")
    assert "Cohen, Wheaton &amp; Megeath 2003" in _section(text, "cite")
    # every number printed on screen is on the page: the printed text is there whole
    import html

    assert html.escape(printed.split("What to cite")[0].strip(), quote=True) in text
    results = _section(text, "results")
    assert "Rule:" in results and "consistent with a companion" in results
    inputs = _section(text, "inputs")                     # the target file and its photometry table, whole
    assert html.escape(Path(argv[1]).read_text().strip(), quote=True) in inputs
    table = Path(argv[1]).parent / "companion_photometry.ecsv"
    assert html.escape(table.read_text().strip(), quote=True) in inputs
    assert "Speagle" not in _section(text, "cite") and "miepython" not in _section(text, "cite")
    versions = _section(text, "versions")
    for name in ("numpy", "scipy", "astropy", "dynesty", "miepython", "pyphot", "dust_extinction"):
        assert f"<td>{name}</td>" in versions


def test_fit_page(fit_run, capsys):
    argv, out = fit_run
    printed = _run(argv, capsys)
    path = out / "report.html"
    assert str(path) in printed.split("Files written:")[1]
    page, text = check_page(path)
    assert len(page.images) == len(list(out.glob("*.png"))) >= 3    # colours, corner(s), evidence
    summary = (out / "summary.txt").read_text()
    assert "What to cite for this run:" in summary and "Speagle 2020, MNRAS 493, 3132" in summary
    cite = _section(text, "cite")
    for needle in ("Speagle 2020", "zenodo.3348367", "Feroz, Hobson &amp; Bridges 2009", "miepython",
                   "Franta", "Bruggeman 1935", "Cohen, Wheaton &amp; Megeath 2003"):
        assert needle in cite, needle
    assert "Vega spectrum" not in cite                  # disk/star ratios need no Vega zero point
    assert "Verdict rule" in _section(text, "results") and "Mie spheres" in _section(text, "caveats")
    assert "[sampler]" in _section(text, "inputs") and "nlive = 40" in _section(text, "inputs")


def test_grid_page(grid_run, capsys):
    argv, out = grid_run
    printed = _run(argv, capsys)
    path = out / "grid_report.html"
    assert f"  {path}" in printed
    page, text = check_page(path)
    assert len(page.images) == len(list(out.glob("*.png"))) == 3
    cite = _section(text, "cite")
    assert "Warren and Brandt" in cite or "Warren" in cite
    assert "Hagemann" in cite and "Franta" in cite and "Speagle" not in cite
    assert "What to cite for this run:" in printed and "Wilks 1938" in _section(text, "results")
    assert "fraction_step = 0.25" in _section(text, "inputs")          # the description, as the store keeps it


def test_page_is_written_atomically_and_refuses_an_unwritable_folder(tmp_path):
    from motes.errors import InputError
    from motes.report.html_page import _write

    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(InputError, match="cannot write the report page"):
        _write(blocker / "report.html", "<!DOCTYPE html>")
    _write(tmp_path / "ok" / "report.html", "<!DOCTYPE html>")
    assert sorted(p.name for p in (tmp_path / "ok").iterdir()) == ["report.html"]   # no temporary left


# ------------------------------------------------------------------ what to cite
def _cff_value(key: str) -> str:
    text = (REPO / "CITATION.cff").read_text()
    match = re.search(rf"^\s*-?\s*{key}:\s*\"?(.*?)\"?\s*$", text, re.M)
    assert match, key
    return match.group(1)


def test_motes_citation_matches_citation_cff():
    assert MOTES_CITATION["title"] == _cff_value("title")
    assert MOTES_CITATION["version"] == _cff_value("version")
    assert MOTES_CITATION["license"] == _cff_value("license")
    assert MOTES_CITATION["authors"] == _cff_value("name")


def test_sequence_citation_is_read_from_the_sequence_file(tmp_path):
    text = sequence_citation()
    assert text.startswith("Pecaut & Mamajek 2013, ApJS 208, 9") and "version 2024.05.15" in text
    plain = tmp_path / "seq.txt"
    plain.write_text("# my sequence\nspt teff\nM0 3850\n")
    assert sequence_citation(plain) is None
    refs = run_references(sequence=str(plain))
    assert "cite its source" in refs[1].text


@pytest.mark.parametrize("name", ["carbon_amorphous", "carbon_soot", "iron", "magnetite", "methane_ice",
                                  "silica_amorphous", "water_ice_crystalline"])
def test_every_bundled_material_names_its_measurement(name):
    from motes.optics.constants import load_material

    material = load_material(name)
    ref = material_citation(material.name, material.provenance, material.path)
    assert ref.link.startswith("https://") and "[" not in ref.text and "CC0" in ref.note
    assert re.search(r"(19|20)\d\d", ref.text)


def test_material_without_reference_says_so():
    ref = material_citation("mine", "material: my silicate", "mine.dat")
    assert "mine.dat" in ref.text and "names no reference" in ref.text


def test_run_references_follow_what_was_used():
    bands = [("mko_lp", "MKO", "top-hat"), ("2mass_j", "2MASS", "pyphot filter library, curve '2MASS_J'")]
    refs = run_references(sampler={"kind": "dynamic", "bound": "multi", "sample": "rwalk"}, extinction_law="G23",
                          mixing="maxwell_garnett", mie=True, phase="hg", vega=True, bands=bands,
                          boundness_prior="galaxy", bayes_factors=True, type_prior="field")
    texts = [r.text for r in refs]
    assert refs[0].topic == "motes" and len(texts) == len(set(texts))
    joined = "\n".join(format_references(refs))
    for needle in ("Speagle 2020", "Higson et al. 2019", "Feroz, Hobson & Bridges 2009",
                   "Gordon et al. 2023, ApJ 950, 86", "Gordon 2024, JOSS", "Maxwell Garnett 1904",
                   "Henyey & Greenstein 1941", "Tokunaga, Simons & Vacca 2002", "Bohlin & Gilliland 2004",
                   "Cohen, Wheaton & Megeath 2003", "Jurić et al. 2008", "Kass & Raftery 1995",
                   "Reylé et al. 2021", "from memory"):
        assert needle in joined, needle
    assert joined.count("Skilling 2006") == 1          # nested sampling and random walk: cited once
    bare = run_references()
    assert [r.topic for r in bare] == ["motes"]


def test_software_versions_name_the_libraries():
    versions = software_versions()
    for name in ("motes", "numpy", "scipy", "astropy", "dynesty", "miepython", "pyphot", "dust_extinction"):
        assert versions[name] and versions[name] != "not installed"


# ------------------------------------------------------------------ a real browser
_CHROMIUM = next((p for p in (shutil.which("chromium"), "/usr/bin/chromium") if p and os.path.exists(p)), None)
_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
          "--disable-background-networking", "--disable-component-update", "--disable-sync",
          "--enable-logging=stderr", "--v=0", "--virtual-time-budget=10000", "--window-size=1100,2400"]

#: Injected into a copy of the page (the page itself has no script): after loading, record how
#: many images decoded with a non-zero size.
_PROBE = ("<script>window.addEventListener('load', function () {"
          "var imgs = Array.prototype.slice.call(document.images);"
          "var ok = imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length;"
          "document.body.setAttribute('data-images', ok + '/' + imgs.length);"
          "document.body.setAttribute('data-sections', document.querySelectorAll('main > section').length);"
          "});</script>")


def _browser(page: Path, tmp_path: Path, *extra) -> subprocess.CompletedProcess:
    profile = tmp_path / f"profile-{page.stem}"
    return subprocess.run([_CHROMIUM, *_FLAGS, f"--user-data-dir={profile}", *extra, page.as_uri()],
                          capture_output=True, text=True, timeout=120)


def _console_messages(stderr: str) -> list[str]:
    """Console lines of chromium's log. It logs every level as ``INFO:CONSOLE``, so all count: the
    page has no script and the probe logs nothing, so any line is an error or a warning."""
    return [line for line in stderr.splitlines() if ":CONSOLE" in line]


def _probe(page_text: str) -> str:
    return page_text.replace("</body>", _PROBE + "</body>")


@pytest.mark.skipif(_CHROMIUM is None, reason="no headless browser: install Debian's chromium "
                                              "(apt-get install chromium) to render the report pages")
def test_pages_render_in_a_real_browser(classify_run, fit_run, grid_run, tmp_path, capsys):
    pages = []
    for argv, out, name in ((*classify_run, "velmora_b_classification_report.html"), (*fit_run, "report.html"),
                            (*grid_run, "grid_report.html")):
        if not (out / name).is_file():
            _run(argv, capsys)
        pages.append(out / name)

    # the checks see a console error and a broken image when there are some (so "none" below means something)
    control = tmp_path / "control.html"
    control.write_text(_probe("<!DOCTYPE html><html><body><img src='missing.png'><main><section></section></main>"
                              "<script>console.error('motes-probe-error')</script></body></html>"))
    run = _browser(control, tmp_path, "--dump-dom")
    assert any("motes-probe-error" in line for line in _console_messages(run.stderr)), run.stderr[-2000:]
    assert 'data-images="0/1"' in run.stdout, run.stdout[:1000]

    for page in pages:
        n_images = page.read_text(encoding="utf-8").count('<img src="data:image/png;base64,')
        probe = tmp_path / page.name
        probe.write_text(_probe(page.read_text(encoding="utf-8")), encoding="utf-8")
        run = _browser(probe, tmp_path, "--dump-dom")
        assert run.returncode == 0, run.stderr[-2000:]
        body = re.search(r"<body[^>]*>", run.stdout)
        assert body, run.stdout[:500]
        assert f'data-images="{n_images}/{n_images}"' in body.group(0), body.group(0)
        assert f'data-sections="{len(SECTION_IDS)}"' in body.group(0)
        assert not _console_messages(run.stderr), _console_messages(run.stderr)
        assert "What to cite" in run.stdout

        shot = tmp_path / f"{page.stem}.png"
        run = _browser(page, tmp_path, f"--screenshot={shot}")
        assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
        import matplotlib.image as mpimg

        pixels = mpimg.imread(shot)
        assert pixels.shape[:2] == (2400, 1100)
        assert np.std(pixels[..., :3]) > 0.05             # text, tables and figures drawn, not a blank page
        keep = os.environ.get("MOTES_KEEP_SCREENSHOTS")
        if keep:
            shutil.copy(shot, Path(keep) / shot.name)


def test_svg_figures_are_inlined_and_other_formats_skipped(tmp_path):
    from matplotlib.figure import Figure

    from motes.report.html_page import PageTable, render_page

    fig = Figure(figsize=(3, 2))
    fig.subplots().plot([1, 2, 3], [1, 4, 9])
    for suffix in ("svg", "png", "pdf"):
        fig.savefig(tmp_path / f"curve.{suffix}")
    text = render_page(title="a <test> & check", inputs=[("file", "x<y>.toml")], results_html="",
                       tables=[PageTable("t", ("a [mag]", "b"), ((1.5, None), (float("nan"), True)))],
                       figures=[tmp_path / "curve.svg", tmp_path / "curve.png", tmp_path / "curve.pdf"],
                       caveats=["c"], notes=[], printed="line <1>\nline 2", files=[], references=[])
    page_path = tmp_path / "page.html"
    page_path.write_text(text, encoding="utf-8")
    page, text = check_page(page_path)
    assert len(page.images) == 1 and text.count("<svg") == 1 and "curve.pdf" not in text
    assert "a &lt;test&gt; &amp; check" in text and "line &lt;1&gt;" in text and "x&lt;y&gt;.toml" in text
    assert "<td>yes</td>" in text and '<td class="num">1.5</td>' in text


def test_citations_when_the_description_cannot_be_read_again(tmp_path):
    from types import SimpleNamespace

    from motes.photometry.bands import get_band
    from motes.report.run_citations import fit_citations

    result = SimpleNamespace(source=str(tmp_path / "gone.toml"),
                             observations=SimpleNamespace(bands=(get_band("2mass_j"),)),
                             models=(SimpleNamespace(materials=("ice", "silica")),))
    refs = fit_citations(result)
    joined = "\n".join(format_references(refs))
    assert "Speagle 2020" in joined and "miepython" in joined and "Cohen, Wheaton & Megeath 2003" in joined
    assert "optical constants of ice" in joined and "could not be read again" in joined


def test_grid_citations_name_every_user_band_by_its_definition(tmp_path):
    """Issue 14: a grid's list named one user band as 'no curve source recorded' and dropped the other."""
    from test_dust_grid import grid_text, quiet, standin_factory

    from motes.dust.grid.run import run_grid
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.summary import summarize_grid
    from motes.report.run_citations import grid_citations

    (tmp_path / "disk.csv").write_text("band,value,error,limit_sigma\n2mass_j,1.0,0.05,\n2mass_h,1.1,0.05,\n"
                                       "NB3p1,0.9,0.05,\nLp,1.2,,3\n")
    extra = ('[bands.NB3p1]\nshape = "top-hat"\ncentre_um = 3.1\nwidth_um = 0.1\n\n'
             '[bands.Lp]\nshape = "top-hat"\ncentre_um = 3.78\nwidth_um = 0.7\n')
    (tmp_path / "grid.toml").write_text(grid_text(materials=("silica", "ice"), step="0.5", porosity="[0.0]",
                                                  a_min="[1.0]", extra=extra))
    run_grid(read_grid_description(tmp_path / "grid.toml"), tmp_path / "store", quiet(workers=1),
             model_factory=standin_factory)
    joined = "\n".join(format_references(grid_citations(summarize_grid(tmp_path / "store"))))
    assert "user band (NB3p1): top-hat, centre 3.1 um" in joined and "user band (Lp): top-hat, centre 3.78 um" in joined
    assert "no curve source recorded" not in joined


def test_pdf_only_figures_are_shown_from_an_in_memory_png(tmp_path, capsys):
    """``--figure-formats pdf`` alone: the page still shows every figure; no PNG file is written."""
    from motes.demo import companion as demo_companion

    demo_companion.write_inputs(tmp_path / "in")
    out = tmp_path / "run"
    _run(["classify", str(tmp_path / "in" / demo_companion.TARGET_FILE), "--output", str(out),
          "--figure-formats", "pdf"], capsys)
    pdfs = sorted(out.glob("*.pdf"))
    assert len(pdfs) >= 2 and not list(out.glob("*.png"))
    page, text = check_page(out / "velmora_b_classification_report.html")
    assert len(page.images) == len(pdfs)          # each decoded as a PNG by check_page
    for pdf in pdfs:
        assert f"{pdf.name} (shown here as PNG; the file is PDF)" in text
