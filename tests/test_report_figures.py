"""The redrawn figures: one house style, formats on request, and what each figure must (not) show.

Each figure is drawn from small inputs (the demo companion, stand-in grid and
fit results, synthetic posterior samples) and its artists are inspected:
labels that do not overlap, axes with the stated scales and limits, panels
that are left out, legends that name what they must.
"""

from __future__ import annotations

import dataclasses
import math

import matplotlib
import numpy as np
import pytest

import motes.report
from motes.errors import InputError
from motes.report.figure_files import check_formats, figure_paths, save_figure
from motes.report.figure_style import HOUSE_RC, house_style, new_figure


def _builders():
    return [n for n in motes.report.__all__ if n.startswith("plot_")]


# ------------------------------------------------------------------ house style and files
@pytest.mark.parametrize("name", _builders())
def test_every_figure_builder_draws_in_the_house_style(name):
    assert getattr(getattr(motes.report, name), "__house_style__", False), f"{name} is not wrapped in house_style"


def test_house_style_is_undone_after_drawing():
    before = dict(matplotlib.rcParams)

    @house_style
    def draw():
        assert matplotlib.rcParams["font.size"] == HOUSE_RC["font.size"]
        assert matplotlib.rcParams["image.cmap"] == "cividis"
        return new_figure(2)

    fig = draw()
    assert fig.get_size_inches()[0] == pytest.approx(7.1)
    assert dict(matplotlib.rcParams) == before


def test_save_figure_writes_each_format(tmp_path):
    fig = new_figure(1)
    fig.subplots().plot([1, 2], [3, 4])
    first = save_figure(fig, tmp_path / "sub" / "f.png", formats="png,pdf,svg")
    assert first == tmp_path / "sub" / "f.png"
    heads = {p.suffix: p.read_bytes()[:5] for p in figure_paths(tmp_path / "sub" / "f.png", ("png", "pdf", "svg"))}
    assert heads[".png"][:4] == b"\x89PNG" and heads[".pdf"] == b"%PDF-" and heads[".svg"].startswith(b"<?xml")
    assert sorted(p.name for p in (tmp_path / "sub").iterdir()) == ["f.pdf", "f.png", "f.svg"]   # no temporaries
    pdf = (tmp_path / "sub" / "f.pdf").read_bytes()
    assert b"/FontFile2" in pdf and b"/Type3" not in pdf          # fonts embedded as TrueType (pdf.fonttype 42)


def test_unknown_figure_format_is_one_clear_error():
    with pytest.raises(InputError, match="unknown figure format 'jpeg'; allowed: png, pdf, svg"):
        check_formats("png,jpeg")
    assert check_formats(["PDF", ".png", "pdf"]) == ("pdf", "png")


def test_every_drawing_command_has_the_figure_formats_option():
    from motes.cli import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    for command in ("fit", "grid", "classify", "optics", "motion"):
        options = {s for a in sub.choices[command]._actions for s in a.option_strings}
        assert "--figure-formats" in options, command


def test_classify_writes_the_chosen_formats_and_refuses_an_unknown_one(tmp_path, capsys):
    from motes.cli import main
    from motes.demo import companion as demo_companion

    demo_companion.write_inputs(tmp_path / "in")
    target = str(tmp_path / "in" / demo_companion.TARGET_FILE)
    assert main(["classify", target, "--output", str(tmp_path / "run"), "--figure-formats", "png,pdf"]) == 0
    names = {p.name for p in (tmp_path / "run").iterdir()}
    assert {"velmora_b_classification_sed.pdf", "velmora_b_classification_types.pdf",
            "velmora_b_classification_sed.png"} <= names
    capsys.readouterr()
    with pytest.raises(SystemExit) as exc:
        main(["classify", target, "--output", str(tmp_path / "run2"), "--figure-formats", "tiff"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "unknown figure format 'tiff'; allowed: png, pdf, svg" in err
    assert not (tmp_path / "run2").exists()


# ------------------------------------------------------------------ label placement
def test_labels_avoid_each_other_and_the_points():
    from motes.report.label_placement import boxes_overlap, marker_boxes, place_labels

    fig = new_figure(1)
    ax = fig.subplots()
    x = np.array([1.0, 1.05, 1.1, 2.0, 2.02, 3.0])          # clustered points, long labels
    y = np.array([1.0, 1.02, 0.98, 2.0, 2.05, 1.5])
    ax.plot(x, y, "o", ms=5)
    ax.set_xlim(0.5, 3.5)
    ax.set_ylim(0.5, 2.5)
    points = marker_boxes(ax, ax.lines)
    labels = place_labels(ax, list(zip(x, y)), [f"band_{i}_long" for i in range(x.size)], obstacles=points)
    boxes = [t.get_window_extent() for t in labels]
    boxes = [(b.x0, b.y0, b.x1, b.y1) for b in boxes]
    for i, a in enumerate(boxes):
        assert not any(boxes_overlap(a, b) for b in boxes[i + 1:]), f"label {i} overlaps another"
        assert not any(boxes_overlap(a, p) for p in points), f"label {i} covers a point"


# ------------------------------------------------------------------ companion
@pytest.fixture(scope="module")
def classification(tmp_path_factory):
    from motes.companion import ClassifySettings, classify
    from motes.demo import companion as demo_companion
    from motes.photometry import calibrate, read_target

    folder = tmp_path_factory.mktemp("companion")
    demo_companion.write_inputs(folder)
    return classify(calibrate(read_target(folder / demo_companion.TARGET_FILE)), ClassifySettings(mode="auto"))


def test_companion_sed_labels_clear_of_points_with_band_widths_and_residuals(classification):
    from matplotlib.collections import LineCollection

    from motes.report.companion_sed import draw_companion_sed
    from motes.report.figure_style import figure_band_name
    from motes.report.label_placement import boxes_overlap

    fig, labels, points = draw_companion_sed(classification)
    boxes = [(b.x0, b.y0, b.x1, b.y1) for b in (t.get_window_extent() for t in labels)]
    # bands by their display names ("2MASS J"); user bands (NB3p1, Lp) as the target file names them
    assert [t.get_text() for t in labels] == [figure_band_name(r.band.name) for r in classification.photometry.rows]
    assert "2MASS J" in [t.get_text() for t in labels] and "Lp" in [t.get_text() for t in labels]
    for i, a in enumerate(boxes):
        assert not any(boxes_overlap(a, b) for b in boxes[i + 1:]), labels[i].get_text()
        assert not any(boxes_overlap(a, p) for p in points), labels[i].get_text()
    main, residual = fig.axes[0], fig.axes[1]
    # horizontal bars: the band widths of the measured points
    horizontal = [seg for c in main.collections if isinstance(c, LineCollection) for seg in c.get_segments()
                  if np.ptp(seg[:, 1]) == 0 and np.ptp(seg[:, 0]) > 0]
    assert len(horizontal) >= len(classification.photometry.rows)
    assert residual.get_ylabel() == "data / template"
    # the sequence has no values in NB3p1 and L': said in the figure
    texts = " ".join(t.get_text() for t in residual.texts)
    assert "NB3p1" in texts and "Lp" in texts and "no template value" in texts
    # the blackbody's residuals (grey circles) have their legend entry: a dashed line with a circle
    entry = [h for h, t in zip(*main.get_legend_handles_labels()) if t.startswith("best blackbody")]
    assert len(entry) == 1 and entry[0].get_marker() == "o" and entry[0].get_linestyle() == "--"
    assert any(t.startswith("best blackbody") and "data / blackbody" in t for t in main.get_legend_handles_labels()[1])


def test_band_display_names():
    from motes.photometry.band_names import display_name
    from motes.report.figure_style import figure_band_name

    assert display_name("2mass_ks") == "2MASS Ks" and display_name("mko_lp") == "MKO L′"
    assert display_name("jwst-nircam_f444w") == "JWST NIRCam F444W" and display_name("sdss_g") == "SDSS g"
    assert display_name("spitzer-irac_3.6") == "Spitzer IRAC 3.6 µm" and display_name("my_band") == "my_band"
    assert figure_band_name("2mass_h_polarised") == figure_band_name("2mass_h (polarised)") == "2MASS H (polarised)"


def test_cmd_type_labels_clear_of_the_companion(classification, tmp_path):
    """The sequence's type labels (L0 sits under the demo companion) do not hide under its marker."""
    from matplotlib.text import Annotation

    import motes.report.companion_figures as cf
    from motes.report.label_placement import boxes_overlap, marker_boxes

    kept = {}
    original = cf.save_figure

    def keep(fig, path, formats=None):
        kept["fig"] = fig
        return original(fig, path, formats=formats)

    cf.save_figure = keep
    try:
        cf.plot_colour_magnitude(classification, tmp_path / "cmd.png")
    finally:
        cf.save_figure = original
    ax = kept["fig"].axes[0]
    star = [ln for ln in ax.lines if ln.get_marker() == "*"]
    assert len(star) == 1
    companion = marker_boxes(ax, star)
    labels = [t for t in ax.texts if isinstance(t, Annotation) and t.get_text()]
    assert "L0" in [t.get_text() for t in labels]
    for t in labels:
        bb = t.get_window_extent()
        assert not any(boxes_overlap((bb.x0, bb.y0, bb.x1, bb.y1), c) for c in companion), t.get_text()


def test_type_probability_axis_legend_and_normalisation(classification):
    from motes.companion.spectral_types import type_code
    from motes.report.companion_types import draw_type_probability, probable_type_range

    fig = draw_type_probability(classification, truth="L0.5")
    ax = fig.axes[0]
    lo, hi = ax.get_xlim()
    ranges = [probable_type_range(r.grid["type_code"], r.grid["probability"]) for r in classification.rankings
              if r.kind == "sequence"]
    assert lo == pytest.approx(min(a for a, _ in ranges) - 1.0)
    assert hi == pytest.approx(max(b for _, b in ranges) + 1.0)
    legend = " | ".join(t.get_text() for t in fig.axes[1].get_legend().get_texts())
    assert legend.count("68%:") == 2 and legend.count("median") == 2 and "invented truth L0.5" in legend
    assert "sum to 1" in ax.get_ylabel() and "integrate to 1" in ax.get_ylabel()
    assert any(np.allclose(line.get_xdata(), type_code("L0.5")) for line in ax.lines)


def test_probable_type_range_leaves_out_the_stated_tails():
    from motes.report.companion_types import probable_type_range

    codes = np.arange(0.0, 100.0, 0.1)
    p = np.exp(-0.5 * ((codes - 50.0) / 2.0) ** 2)
    lo, hi = probable_type_range(codes, p, tail=0.0025)
    # Gaussian: 0.25% beyond 2.807 sigma on each side (standard normal table)
    assert lo == pytest.approx(50.0 - 2.807 * 2.0, abs=0.15)
    assert hi == pytest.approx(50.0 + 2.807 * 2.0, abs=0.15)


def test_companion_figures_in_png_and_pdf(classification, tmp_path):
    from motes.report import write_companion_figures

    paths = write_companion_figures(classification, tmp_path, stem="c", formats=("png", "pdf"))
    assert [p.name for p in paths] == ["c_sed.png", "c_sed.pdf", "c_types.png", "c_types.pdf"]
    assert all(p.stat().st_size > 5_000 for p in paths)


# ------------------------------------------------------------------ corner
def _model_result(materials, n=4000, seed=5):
    from motes.dust.fit.results import ModelResult

    rng = np.random.default_rng(seed)
    k = len(materials)
    f = rng.dirichlet(np.full(k, 5.0), size=n)
    cols = [f[:, i] for i in range(k)] + [rng.uniform(0, 0.8, n), np.exp(rng.normal(0.5, 0.3, n)),
                                          rng.normal(3.6, 0.1, n), np.exp(rng.normal(-9.0, 0.2, n))]
    names = tuple(f"fraction_{m}" for m in materials) + ("porosity", "a_min", "q", "scale")
    samples = np.column_stack(cols)
    best = dict(zip(names, samples[0]))
    return ModelResult(name="+".join(materials), materials=tuple(materials), ln_z=0.0, ln_z_err=0.1, n_calls=1,
                       n_iterations=1, information=0.0, parameter_names=names[:-1], sample_names=names,
                       samples=samples, best=best)


def test_corner_two_materials_has_no_fraction_pair_and_no_scale_row():
    from motes.report.corner_figure import draw_corner

    fig = draw_corner(_model_result(("silica", "ice")), truth={"fractions": {"silica": 0.5}, "porosity": 0.3})
    grid = [ax for ax in fig.axes if ax.get_subplotspec() is not None]
    assert len(grid) == 4 * 4                          # fraction silica, porosity, log a_min, q
    bottom = [ax.get_xlabel() for ax in grid[-4:]]
    assert bottom == ["fraction silica", "porosity", "log10 a_min [µm]", "size slope q"]
    insets = [ax for ax in fig.axes if ax.get_subplotspec() is None]
    assert [ax.get_xlabel() for ax in insets] == ["log10 scale (nuisance)"]
    assert "39% and 86%" in fig._suptitle.get_text()
    assert all(t.get_fontsize() >= 6 for ax in grid for t in ax.get_xticklabels() + ax.get_yticklabels())


def test_corner_of_a_joint_fit_labels_the_ring_radius_and_keeps_the_thermal_scale_as_a_nuisance():
    import dataclasses

    from motes.report.corner_figure import draw_corner

    base = _model_result(("silica", "ice"))
    rng = np.random.default_rng(6)
    n = base.samples.shape[0]
    samples = np.column_stack([base.samples, rng.normal(60.0, 3.0, n), np.exp(rng.normal(3.0, 0.2, n))])
    names = base.sample_names + ("ring_radius", "thermal_scale")
    model = dataclasses.replace(base, sample_names=names, samples=samples, best=dict(zip(names, samples[0])))
    fig = draw_corner(model)
    grid = [ax for ax in fig.axes if ax.get_subplotspec() is not None]
    assert len(grid) == 5 * 5 and grid[-1].get_xlabel() == "ring radius [au]"
    insets = [ax.get_xlabel() for ax in fig.axes if ax.get_subplotspec() is None]
    assert insets == ["log10 scale (nuisance)", "log10 thermal scale [au²] (nuisance)"]


def test_corner_three_materials_keeps_every_fraction():
    from motes.report.corner_figure import draw_corner

    fig = draw_corner(_model_result(("a", "b", "c")))
    assert len([ax for ax in fig.axes if ax.get_subplotspec() is not None]) == 6 * 6


def test_credible_levels_enclose_the_stated_probability():
    from motes.report.corner_figure import CORNER_LEVELS, credible_levels

    # a 2-D unit Gaussian on a fine grid: the region above each threshold holds 1 - exp(-k^2/2)
    x = np.linspace(-6, 6, 601)
    xx, yy = np.meshgrid(x, x)
    density = np.exp(-0.5 * (xx ** 2 + yy ** 2))
    levels = credible_levels(density)
    for level, threshold in zip(sorted(CORNER_LEVELS, reverse=True), levels):
        assert density[density >= threshold].sum() / density.sum() == pytest.approx(level, abs=2e-3)
    assert CORNER_LEVELS == pytest.approx((0.3935, 0.8647), abs=1e-4)


# ------------------------------------------------------------------ disk colours
def _fit_like(model):
    """A FitResult-like object around one ModelResult, with a colour table on toy bands."""
    from types import SimpleNamespace

    from astropy.table import Table

    from motes.photometry import get_band

    bands = [get_band(n) for n in ("2mass_j", "2mass_h", "2mass_ks", "wise_w1")]
    lam = np.array([b.pivot_wavelength for b in bands])
    value = 1e-4 * lam ** 0.5
    colours = Table({"model_median": value * 1.01, "model_lo68": value * 0.97, "model_hi68": value * 1.05})
    model = dataclasses.replace(model, colours=colours)
    obs = SimpleNamespace(wavelength=lam, bands=bands, is_limit=np.zeros(4, bool), value=value, error=0.05 * value,
                          normalisation="flux ratio")
    return SimpleNamespace(observations=obs, models=(model,), notes=("geometry: scattering angles 90 deg, mie",))


def test_colour_figure_draws_the_spectrum_and_residuals():
    from motes.dust.fit.curves import ModelCurve
    from motes.report.colours_figure import draw_colours

    result = _fit_like(_model_result(("a", "b")))
    wl = np.geomspace(1.0, 4.0, 50)
    curve = ModelCurve(model=result.models[0].name, wavelength=wl, median=1e-4 * wl ** 0.5,
                       lo68=0.9e-4 * wl ** 0.5, hi68=1.1e-4 * wl ** 0.5, best=1e-4 * wl ** 0.5, n_draws=8,
                       angles_deg=(90.0,))
    fig = draw_colours(result, curves={curve.model: curve})
    ax, residual = fig.axes[0], fig.axes[1]
    assert any(len(line.get_xdata()) == 50 for line in ax.lines)            # the monochromatic curve
    assert not any(len(line.get_xdata()) == 4 and line.get_linestyle() not in ("None", "none")
                   for line in ax.lines), "band values joined by a line"
    assert "scattering angle 90°" in ax.get_title()
    assert residual.get_xlabel() == "wavelength [µm]" and "σ" in residual.get_ylabel()
    fig.draw_without_rendering()
    labels = [t.get_text() for t in residual.get_xticklabels() if t.get_text()]
    assert labels and all("$" not in t and "^" not in t for t in labels)    # plain numbers
    without = draw_colours(result, curves=None)
    assert "not evaluated" in without.axes[0].get_legend().get_title().get_text()


def test_scattering_angles_text():
    from motes.report.colours_figure import scattering_angles_text

    assert scattering_angles_text((60.0, 90.0)) == "scattering angles (averaged) 60°, 90°"
    assert scattering_angles_text((), ["geometry: scattering angles 90 deg, mie phase"]) == "scattering angle 90°"
    assert scattering_angles_text() == "scattering angles not recorded"


# ------------------------------------------------------------------ grid
@pytest.fixture(scope="module")
def grid_summary(tmp_path_factory):
    from test_dust_grid import grid_text, quiet, standin_factory, write_photometry

    from motes.dust.grid.run import run_grid
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.summary import summarize_grid

    folder = tmp_path_factory.mktemp("grid")
    write_photometry(folder, rng=np.random.default_rng(3))
    (folder / "grid.toml").write_text(grid_text(extra="chunk_size = 40\n"))
    run_grid(read_grid_description(folder / "grid.toml"), folder / "store", quiet(workers=1),
             model_factory=standin_factory)
    return summarize_grid(folder / "store")


def _figure_of(plot, summary, tmp_path, **kw):
    """Draw with ``plot`` and return its Figure (captured from save_figure)."""
    import motes.report.grid_figures as gf

    captured = {}
    original = gf.save_figure

    def capture(fig, path, formats=None):
        captured["fig"] = fig
        return original(fig, path, formats=formats)

    gf.save_figure = capture
    try:
        plot(summary, tmp_path / "f.png", **kw)
    finally:
        gf.save_figure = original
    return captured["fig"]


def test_grid_profiles_linear_axis_and_stems_inside_the_physical_range(grid_summary, tmp_path):
    from motes.report.grid_figures import _DELTA_CHI2_TOP, plot_fraction_profiles

    truth = {"fractions": {"silica": 0.5, "carbon": 0.3, "ice": 0.2}}
    fig = _figure_of(plot_fraction_profiles, grid_summary, tmp_path, truth=truth)
    n = len(grid_summary.materials)
    tops, bottoms = fig.axes[:n], fig.axes[n:2 * n]
    for ax in tops:
        assert ax.get_yscale() == "linear" and ax.get_ylim()[1] <= _DELTA_CHI2_TOP
    for ax in bottoms:
        segments = [s for c in ax.collections for s in c.get_segments()]
        xs = np.array([s[:, 0] for s in segments])
        assert np.all(xs >= 0.0) and np.all(xs <= 1.0)                    # nothing at negative fractions
        widths = {c.get_linewidth()[0] for c in ax.collections}
        assert len(widths) == 1                                           # one width for every stem
        ticks = [t for t in ax.get_xticks() if ax.get_xlim()[0] <= t <= ax.get_xlim()[1]]
        assert all(abs(t * 20 - round(t * 20)) < 1e-9 for t in ticks)      # round ticks (multiples of 0.05)


def test_grid_best_models_log_wavelength_band_labels_and_porosity_spelled(grid_summary, tmp_path):
    from motes.report.grid_figures import plot_best_models

    fig = _figure_of(plot_best_models, grid_summary, tmp_path, truth={"fractions": {"silica": 0.5}, "porosity": 0.3})
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert all("p=" not in t for t in legend) and any("porosity" in t for t in legend)
    from motes.report.figure_style import figure_band_name

    assert {t.get_text() for t in ax.texts} == {figure_band_name(b) for b in grid_summary.bands}   # "2MASS J"
    assert "invented truth" in ax.get_legend().get_title().get_text()
    # the legend sits outside the axes, clear of the data points
    fig.canvas.draw()
    box, frame = ax.get_legend().get_window_extent(), ax.get_window_extent()
    assert box.x0 >= frame.x1


def test_grid_figures_write_each_format(grid_summary, tmp_path):
    from motes.report.grid_figures import write_grid_figures

    paths = write_grid_figures(grid_summary, tmp_path, formats=("png", "pdf"))
    assert sorted(p.name for p in paths) == sorted(f"grid_{n}.{s}" for n in ("fraction_profiles", "axis_profiles",
                                                                            "best_models") for s in ("png", "pdf"))


# ------------------------------------------------------------------ demo truth
def test_demo_truths_are_the_generators():
    import importlib.util
    from pathlib import Path

    from motes.demo import companion, disk_grid

    examples = Path(__file__).resolve().parents[1] / "examples"

    def load(name):
        spec = importlib.util.spec_from_file_location(name, examples / f"{name}.py")
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        return module

    disk = load("make_disk_demo")
    assert disk_grid.DEMO_DISK_TRUTH["fractions"] == disk.TRUTH["fractions"]
    for key in ("porosity", "a_min", "q"):
        assert math.isclose(disk_grid.DEMO_DISK_TRUTH[key], disk.TRUTH[key])
    assert companion.DEMO_TRUTH_TYPE == load("make_photometry_demo").COMPANION_TYPE


# ------------------------------------------------------------------ band names in the optics, thermal and band figures
@pytest.fixture
def drawn_figures(monkeypatch):
    """Every Figure saved while the test runs (Figure.savefig captured, files still written)."""
    from matplotlib.figure import Figure

    drawn = []
    original = Figure.savefig

    def capture(self, *args, **kwargs):
        drawn.append(self)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", capture)
    return drawn


def _texts(fig):
    """All text of a figure: axes texts and legend entries."""
    out = [t.get_text() for ax in fig.axes for t in ax.texts] + [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        if ax.get_legend() is not None:
            out += [t.get_text() for t in ax.get_legend().get_texts()]
    return out


def test_optics_figures_name_bands_by_display_name(drawn_figures, tmp_path):
    from motes.photometry import get_band
    from motes.report.optics_figures import plot_efficiencies, plot_polarisation, plot_reflectance

    bands = [get_band("2mass_ks"), get_band("mko_lp")]
    lam = np.geomspace(1.5, 4.5, 30)
    ratio = np.array([0.01, 0.008])
    plot_reflectance(tmp_path / "r.png", lam, 1e-2 / lam, bands, ratio, "t")
    radius = np.geomspace(0.1, 10.0, 20)
    q = np.ones((2, radius.size))
    plot_efficiencies(tmp_path / "e.png", radius, 2 * q, q, np.array([2.16, 3.76]), ["2mass_ks", "mko_lp"], "t")
    plot_polarisation(tmp_path / "p.png", lam, 1e-2 / lam, 1e-3 / lam, bands, ratio, 0.1 * ratio, "t")
    reflectance, efficiencies, polarisation = (_texts(f) for f in drawn_figures)
    assert {"2MASS Ks", "MKO L′ (approx.)"} <= set(reflectance)
    assert {"2MASS Ks (2.16 µm)", "MKO L′ (3.76 µm)"} <= set(efficiencies)
    assert {"2MASS Ks", "MKO L′ (approx.)"} <= set(polarisation)
    for texts in (reflectance, efficiencies, polarisation):
        assert not any("2mass_ks" in t or "mko_lp" in t for t in texts)


def test_thermal_figure_names_bands_by_display_name_and_writes_each_format(drawn_figures, tmp_path):
    from types import SimpleNamespace

    from motes.report.thermal_figures import plot_thermal

    lam = np.geomspace(0.5, 3000.0, 200)
    star = 10.0 * lam ** -2.0
    disk = 1e-3 * lam ** 2 * np.exp(-lam / 60.0) + 1e-12
    stand_in = SimpleNamespace(   # the attributes of ThermalResult the figure reads
        settings=SimpleNamespace(distance_pc=25.0), spectrum_wavelength=lam, spectrum_star=star, spectrum_disk=disk,
        band_names=("wise_w4", "herschel-pacs_70", "mm_1.3"), band_pivot=np.array([22.2, 71.5, 1300.0]),
        band_disk=np.interp([22.2, 71.5, 1300.0], lam, disk), fractional_luminosity=1e-3, dust_temperature=80.0,
        radius_ratio=3.0, sizes=np.geomspace(1.0, 1000.0, 10), radii=np.array([60.0]),
        temperature=np.linspace(70.0, 36.0, 10)[:, None], blackbody_temperature=np.array([35.9]), flags=())
    first = plot_thermal(tmp_path / "thermal.png", stand_in, formats=("png", "pdf"))
    assert first == tmp_path / "thermal.png" and (tmp_path / "thermal.pdf").exists()
    texts = _texts(drawn_figures[0])
    assert {"WISE W4", "Herschel PACS 70 µm", "mm_1.3"} <= set(texts)     # a user band keeps its own name
    assert not any("wise_w4" in t or "herschel-pacs_70" in t for t in texts)
    sed = drawn_figures[0].axes[0]
    assert sed.xaxis.get_major_formatter()(100.0, 0) == "100"               # plain numbers, not 10^2


def test_band_figure_titles_display_name_and_identifier(drawn_figures, tmp_path):
    from motes.photometry import get_band
    from motes.report.band_figures import plot_band

    plot_band(get_band("mko_lp"), tmp_path / "lp.png")
    assert drawn_figures[-1].axes[0].get_title() == "MKO L′ (mko_lp) (approximate)"
    plot_band(get_band("2mass_ks"), tmp_path / "ks.png")
    assert drawn_figures[-1].axes[0].get_title() == "2MASS Ks (2mass_ks)"


def test_thermal_sed_figure_of_a_joint_fit(tmp_path):
    import dataclasses

    import astropy.units as u
    from astropy.table import Table

    from motes.report import plot_thermal_fit

    lam = np.array([22.0, 70.0, 160.0, 500.0])
    value = np.array([10.0, 120.0, 60.0, 9.0]) * 1e-3
    t = Table({"band": ["wise_w4", "herschel-pacs_70", "herschel-pacs_160", "herschel-spire_500"],
               "pivot_wavelength": lam * u.um, "value": value * u.Jy, "error": 0.05 * value * u.Jy,
               "is_limit": [False, False, False, True], "limit_sigma": [np.nan, np.nan, np.nan, 3.0],
               "star_flux": 0.1 * (22.0 / lam) ** 2 * u.Jy})
    for name, f in (("model_median", 1.0), ("model_lo68", 0.95), ("model_hi68", 1.05), ("model_lo95", 0.9),
                    ("model_hi95", 1.1), ("model_best", 1.01)):
        t[name] = value * f * u.Jy
    model = dataclasses.replace(_model_result(("silica", "ice")), thermal_fluxes=t)
    png = plot_thermal_fit(model, tmp_path / "thermal_sed.png")
    assert png.is_file() and png.stat().st_size > 10_000
    with pytest.raises(ValueError, match="no thermal fluxes"):
        plot_thermal_fit(_model_result(("silica", "ice")), tmp_path / "none.png")


@pytest.mark.parametrize("names", [("porosity", "a_min", "scale", "thermal_scale"),
                                   ("porosity", "a_min", "q", "scale", "thermal_scale"),
                                   ("porosity", "a_min", "q", "ring_radius", "scale")])
def test_corner_texts_do_not_overlap(names):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from motes.report.corner_figure import draw_corner

    base = _model_result(("silica", "ice"))
    rng = np.random.default_rng(7)
    n = base.samples.shape[0]
    pool = {"porosity": rng.uniform(0, 0.8, n), "a_min": np.exp(rng.normal(0.5, 0.3, n)),
            "q": rng.normal(3.6, 0.1, n), "ring_radius": rng.normal(60.0, 3.0, n),
            "scale": np.exp(rng.normal(-9.0, 0.2, n)), "thermal_scale": np.exp(rng.normal(3.0, 0.2, n))}
    samples = np.column_stack([pool[k] for k in names])
    model = dataclasses.replace(base, sample_names=names, samples=samples, best=dict(zip(names, samples[0])))
    fig = draw_corner(model, truth={"porosity": 0.3})
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    grid = [ax for ax in fig.axes if ax.get_subplotspec() is not None and ax.axison]     # drawn panels
    insets = [ax for ax in fig.axes if ax.get_subplotspec() is None]
    texts = [fig._suptitle] + [ax.title for ax in grid if ax.get_title()]
    texts += [t for ax in insets for t in [ax.xaxis.label] + ax.get_xticklabels() if t.get_text()]
    texts += [t for ax in grid for t in ax.get_xticklabels() + ax.get_yticklabels() if t.get_text()]
    boxes = [t.get_window_extent(renderer) for t in texts]
    for a in range(len(boxes)):
        for b in range(a + 1, len(boxes)):
            assert not boxes[a].overlaps(boxes[b]), (texts[a].get_text(), texts[b].get_text())
    for box in boxes:                              # nothing beyond the figure (the tight bbox would grow)
        assert box.x0 >= -1 and box.x1 <= fig.bbox.width + 1
