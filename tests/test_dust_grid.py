"""Grid machinery: enumeration, point counts, store guarantees, parallel runs, summaries.

Most tests here plug a cheap analytic stand-in into the grid runner (through
its one ``model_factory`` hook) so that they exercise the machinery in
milliseconds; the tests against the real Mie model are in
``test_dust_grid_model.py``.
"""

from __future__ import annotations

import itertools
import math
import textwrap

import numpy as np
import pyarrow.parquet as pq
import pytest

from motes.dust.grid.compositions import SimplexGrid, count_compositions
from motes.dust.model.sampling import SizeSampling
from motes.dust.grid.spec import AXES, parse_grid_description, read_grid_description
from motes.dust.grid.run import GridRunSettings, describe_dry_run, run_grid
from motes.dust.grid.workers import GridEvaluator
from motes.dust.grid.store import GridStore
from motes.dust.grid.summary import summarize_grid
from motes.errors import GridError, InputError
from motes.optics.constants import bundled_material_names

BANDS = ("2mass_j", "2mass_h", "2mass_ks", "wise_w1", "wise_w2")


class StandInModel:
    """Analytic stand-in for DiskColourModel: smooth in every parameter, cheap, deterministic."""

    def __init__(self, n_materials, wavelength):
        j = np.arange(n_materials)[:, None]
        self.wavelength = np.asarray(wavelength)[None, :]
        self.reflectance = 1.0 + 0.6 * np.sin(1.3 * j + 2.1 * self.wavelength * (1 + 0.3 * j))   # [K, B]

    def flux_ratio(self, fractions, porosity, a_min, q, a_max=None):
        base = np.asarray(fractions) @ self.reflectance
        size = (self.wavelength / (self.wavelength + np.asarray(a_min)[:, None])) ** (np.asarray(q)[:, None] - 2.5)
        return 1e-4 * base * (1.0 - 0.6 * np.asarray(porosity))[:, None] * size


def standin_factory(spec, observations):
    return StandInModel(len(spec.materials), observations.wavelength)


TRUTH = {"fractions": [0.5, 0.3, 0.2], "porosity": 0.3, "a_min": 2.0, "q": 3.5}


def write_photometry(folder, n_materials=3, rng=None, truth=TRUTH):
    """Disk photometry drawn from the stand-in at a known truth (2% errors)."""
    from motes.photometry.bands import get_band

    wave = np.array([get_band(b).pivot_wavelength for b in BANDS])
    model = StandInModel(n_materials, wave).flux_ratio(np.array([truth["fractions"]]), np.array([truth["porosity"]]),
                                                       np.array([truth["a_min"]]), np.array([truth["q"]]))[0]
    error = 0.02 * model
    value = model + (rng.normal(0, 1, model.size) * error if rng is not None else 0.0)
    path = folder / "disk.csv"
    lines = ["band,value,error"] + [f"{b},{float(v)!r},{float(e)!r}" for b, v, e in zip(BANDS, value, error)]
    path.write_text("\n".join(lines) + "\n")
    return path


SOURCES = {"silica": "silica_amorphous", "carbon": "carbon_amorphous", "ice": "water_ice_crystalline"}


def grid_text(materials=("silica", "carbon", "ice"), step="0.1", porosity="[0.0, 0.3, 0.6]",
              a_min="[1.0, 2.0, 4.0]", extra=""):
    # labels without a bundled file (e.g. "m3" in counting tests) name silica's constants: the
    # description is parsed whole, so every material must load
    bundled = bundled_material_names()
    mats = "\n".join(f'[[materials]]\nname = "{m}"\n'
                      f'source = "{SOURCES.get(m, m if m in bundled else "silica_amorphous")}"\n'
                      for m in materials)
    return textwrap.dedent(f"""\
        [data]
        photometry = "disk.csv"

        [star]
        teff = 5600.0

        {mats}
        [grid]
        fraction_step = {step}
        porosity = {porosity}
        a_min = {a_min}
        """) + extra


REAL_MODEL = """
[model]
method = "exact"          # one wavelength node per band, grains up to 10 um
wavelength_nodes = 1
a_max = 10.0
"""

#: Coarse size quadrature: the real Mie model at a tiny fraction of its converged cost (colours
#: off by up to a few per cent; these tests check the grid machinery, not the optics).
TINY_SIZES = SizeSampling(c0=0.03, c_max=0.1, t_knee=10.0, t_knee2=10.0, growth=0.0, growth2=0.0,
                          gauss_nodes=2, bin_width=0.5)


def tiny_real_factory(spec, observations):
    """The real DiskColourModel of the description, with the coarse size quadrature TINY_SIZES."""
    from motes.dust.model.colours import DiskColourModel

    d = spec.description
    return DiskColourModel(d.materials, observations.bands, star_teff=d.star.teff, star_spectrum=d.star.spectrum,
                           mixing=d.mixing, matrix=d.matrix, geometry=d.geometry, method="exact", a_max=d.a_max,
                           wavelength_nodes=d.wavelength_nodes, size_sampling=TINY_SIZES)


def write_real_grid(folder, rng, step="0.25", chunk_size=4):
    """A small grid for the real Mie model (use with tiny_real_factory), with data drawn from it."""
    text = grid_text(step=step, porosity="[0.0, 0.5]", a_min="[0.5, 2.0]", extra=f"chunk_size = {chunk_size}\n")
    text = text.replace("[grid]", REAL_MODEL + "\n[grid]")
    path = folder / "grid.toml"
    path.write_text(text)
    (folder / "disk.csv").write_text("band,value,error\n" + "".join(f"{b},1,1\n" for b in BANDS))
    spec = parse_grid_description(text, base_dir=folder)
    from motes.dust.observations import read_disk_photometry

    model = tiny_real_factory(spec, read_disk_photometry(folder / "disk.csv"))
    truth = model.flux_ratio(np.array([[0.4, 0.2, 0.4]]), 0.3, 1.2, 3.5)[0]
    error = 0.03 * truth
    value = truth + rng.normal(0.0, 1.0, truth.size) * error
    lines = ["band,value,error"] + [f"{b},{float(v)!r},{float(e)!r}" for b, v, e in zip(BANDS, value, error)]
    (folder / "disk.csv").write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def grid_file(tmp_path, rng):
    write_photometry(tmp_path, rng=rng)
    path = tmp_path / "grid.toml"
    path.write_text(grid_text(extra="chunk_size = 40\n"))
    return path


def quiet(**kw):
    return GridRunSettings(progress=False, **kw)


def read_sorted(store):
    table = GridStore.open(store).read_table().to_pandas()
    return table.sort_values("key").reset_index(drop=True)


# ----------------------------------------------------------------------------- counting
@pytest.mark.parametrize("k, step", [(1, "0.5"), (2, "0.1"), (3, "0.05"), (4, "0.05"), (5, "0.25"),
                                     (4, '"1/12"'), (6, "0.1")])
def test_point_count_is_the_combinatorial_formula_times_the_other_axes(tmp_path, k, step):
    (tmp_path / "disk.csv").write_text("band,value,error\n2mass_j,1,0.1\n")
    text = grid_text(materials=[f"m{i}" for i in range(k)], step=step, porosity="[0.0, 0.2, 0.4, 0.6]",
                     a_min="{ start = 0.5, stop = 8.0, num = 5, spacing = \"log\" }", extra="q = [3.0, 3.5]\n")
    spec = parse_grid_description(text, base_dir=tmp_path)
    n = spec.simplex.divisions
    # C(1/step + K - 1, K - 1) mixtures ("stars and bars"; e.g. Feller 1968, ch. II.5)
    expected = math.comb(n + k - 1, k - 1) * 4 * 5 * 2 * 1
    assert spec.n_points == expected
    assert count_compositions(n, k) == math.comb(n + k - 1, k - 1)


def test_guide_example_four_components_at_five_percent():
    # GUIDE §7: 4 components at 5% give 1,771 mixtures
    assert SimplexGrid.from_step(4, 20).size == 1771


def test_enumeration_is_exact_unique_and_invertible():
    grid = SimplexGrid.from_step(4, 10)
    parts = grid.unrank(np.arange(grid.size))
    assert parts.shape == (math.comb(13, 3), 4)
    assert np.all(parts.sum(axis=1) == 10) and np.all(parts >= 0)
    assert len({tuple(p) for p in parts}) == grid.size
    np.testing.assert_array_equal(grid.rank(parts), np.arange(grid.size))
    assert tuple(parts[0]) == (10, 0, 0, 0) and tuple(parts[-1]) == (0, 0, 0, 10)


def test_bounded_enumeration_matches_brute_force():
    bounds = [(1, 5), (0, 10), (2, 3)]
    grid = SimplexGrid.from_step(3, 10, bounds)
    brute = {c for c in itertools.product(range(11), repeat=3)
             if sum(c) == 10 and all(lo <= x <= hi for x, (lo, hi) in zip(c, bounds))}
    parts = grid.unrank(np.arange(grid.size))
    assert {tuple(p) for p in parts} == brute and len(parts) == len(brute)
    np.testing.assert_array_equal(grid.rank(parts), np.arange(grid.size))


def test_keys_decode_to_every_point_once_with_exact_fractions(grid_file):
    spec = read_grid_description(grid_file)
    pts = spec.points(np.arange(spec.n_points))
    # fractions are integers / n: they sum to 1 up to one rounding of the division
    np.testing.assert_allclose(pts.fractions.sum(axis=1), 1.0, rtol=0, atol=1e-15)
    combos = {tuple(np.rint(f * 10).astype(int)) + (p, a, q, m)
              for f, p, a, q, m in zip(pts.fractions, pts.porosity, pts.a_min, pts.q, pts.a_max)}
    assert len(combos) == spec.n_points
    parts = np.rint(pts.fractions * spec.simplex.divisions).astype(int)
    ip = np.searchsorted(spec.porosity, pts.porosity)
    ia = np.searchsorted(spec.a_min, pts.a_min)
    np.testing.assert_array_equal(spec.key_of(parts, ip, ia, 0, 0), pts.keys)


def test_fraction_bounds_and_step_parsing(tmp_path):
    (tmp_path / "disk.csv").write_text("band,value,error\n2mass_j,1,0.1\n")
    spec = parse_grid_description(grid_text(extra="[grid.fraction_bounds]\nice = [0.0, 0.3]\n"), base_dir=tmp_path)
    pts = spec.points(np.arange(spec.n_points))
    assert pts.fractions[:, 2].max() == pytest.approx(0.3)
    brute = sum(1 for c in itertools.product(range(11), repeat=3) if sum(c) == 10 and c[2] <= 3)
    assert spec.n_compositions == brute
    with pytest.raises(InputError, match="not a whole number"):
        parse_grid_description(grid_text(step="0.03"), base_dir=tmp_path)
    with pytest.raises(InputError, match="unknown material"):
        parse_grid_description(grid_text(extra="[grid.fraction_bounds]\niron = [0, 1]\n"), base_dir=tmp_path)


# ----------------------------------------------------------------------------- bad input
def test_zero_points_is_refused(tmp_path):
    (tmp_path / "disk.csv").write_text("band,value,error\n2mass_j,1,0.1\n")
    bounds = "[grid.fraction_bounds]\nsilica = [0.0, 0.2]\ncarbon = [0.0, 0.2]\nice = [0.0, 0.2]\n"
    with pytest.raises(GridError, match="no points"):
        parse_grid_description(grid_text(extra=bounds), base_dir=tmp_path)
    with pytest.raises(GridError, match="no points"):
        parse_grid_description(grid_text(a_min="[]"), base_dir=tmp_path)


def test_large_grid_needs_confirmation_and_writes_nothing(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    with pytest.raises(GridError, match="--yes"):
        run_grid(spec, out, quiet(workers=1, max_points=spec.n_points - 1), model_factory=standin_factory)
    assert not out.exists()


@pytest.mark.parametrize("text, match", [
    ("[grid]\nfraction_step = 0.1\n", "materials"),
    ("[[materials]]\nname = 'a'\n", r"\[grid\]"),
    ("not toml = = 1", "TOML"),
    ("[data]\nphotometry='disk.csv'\n[[materials]]\nname='a'\n[grid]\nfraction_step=0.1\nporosity=[0.1]\n", "a_min"),
    ("[data]\nphotometry='disk.csv'\n[[materials]]\nname='a'\n[grid]\nfraction_step=0.1\nporosity=[1.2]\n"
     "a_min=[1]\n", "porosity"),
    ("[data]\nphotometry='disk.csv'\n[[materials]]\nname='a'\n[grid]\nfraction_step=0.1\nporosity=[0]\n"
     "a_min=[1]\ncolour='blue'\n", "unknown key"),
])
def test_malformed_descriptions_name_the_problem(tmp_path, text, match):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(InputError, match=match) as info:
        read_grid_description(path)
    assert str(path) in str(info.value)


# ----------------------------------------------------------------------------- store
def test_serial_run_fills_the_store_with_direct_model_values(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    result = run_grid(spec, tmp_path / "store", quiet(workers=1), model_factory=standin_factory)
    assert result.n_computed == spec.n_points and result.n_resumed == 0
    table = read_sorted(tmp_path / "store")
    np.testing.assert_array_equal(table["key"], np.arange(spec.n_points))
    direct = GridEvaluator(spec, standin_factory).evaluate(np.arange(spec.n_points))
    for name, values in direct.items():
        np.testing.assert_array_equal(table[name].to_numpy(), values, err_msg=name)
    store = GridStore.open(tmp_path / "store")
    assert store.is_complete and store.manifest["grid_digest"] == spec.digest
    assert store.manifest["format_version"] >= 1 and store.manifest["motes_version"]


def test_resume_after_partial_run_equals_uninterrupted_run(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "full", quiet(workers=1), model_factory=standin_factory)
    partial = tmp_path / "partial"
    run_grid(spec, partial, quiet(workers=1), model_factory=standin_factory)
    # simulate a run that stopped after some chunks: remove every other part, leave a stale temp file
    parts = sorted((partial / "parts").glob("chunk-*.parquet"))
    for p in parts[1::2]:
        p.unlink()
    (partial / "parts" / ".chunk-0000001.parquet.tmp").write_bytes(b"half a file")
    result = run_grid(spec, partial, quiet(workers=1), model_factory=standin_factory)
    assert result.n_resumed == sum(pq.read_metadata(p).num_rows for p in parts[0::2])
    assert result.n_computed == spec.n_points - result.n_resumed
    assert not list((partial / "parts").glob(".*tmp"))
    a, b = read_sorted(tmp_path / "full"), read_sorted(partial)
    assert a["key"].is_unique and b["key"].is_unique
    assert a.equals(b)


def test_store_of_another_description_is_refused_and_left_untouched(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    run_grid(spec, out, quiet(workers=1), model_factory=standin_factory)
    before = {p.name: p.stat().st_mtime_ns for p in (out / "parts").iterdir()}
    manifest = (out / "manifest.json").read_bytes()
    other = grid_file.with_name("other.toml")
    other.write_text(grid_file.read_text().replace("0.6]", "0.5]"))
    spec2 = read_grid_description(other)
    with pytest.raises(GridError, match="another grid description.*--output.*--overwrite"):
        run_grid(spec2, out, quiet(workers=1), model_factory=standin_factory)
    assert {p.name: p.stat().st_mtime_ns for p in (out / "parts").iterdir()} == before
    assert (out / "manifest.json").read_bytes() == manifest
    # the data are part of the description: changing them is refused as well
    (tmp_path / "disk.csv").write_text((tmp_path / "disk.csv").read_text().replace("2mass_j,", "2mass_j, "))
    with pytest.raises(GridError, match="another grid description"):
        run_grid(read_grid_description(grid_file), out, quiet(workers=1), model_factory=standin_factory)
    # an explicit --overwrite starts afresh
    run_grid(spec2, out, quiet(workers=1, overwrite=True), model_factory=standin_factory)
    assert GridStore.open(out).manifest["grid_digest"] == spec2.digest


def test_folder_that_is_not_a_store_is_refused(grid_file, tmp_path):
    out = tmp_path / "papers"
    out.mkdir()
    (out / "draft.tex").write_text("keep me")
    with pytest.raises(GridError, match="not a motes grid store"):
        run_grid(read_grid_description(grid_file), out, quiet(workers=1, overwrite=True),
                 model_factory=standin_factory)
    assert (out / "draft.tex").read_text() == "keep me" and len(list(out.iterdir())) == 1


def test_second_writer_is_refused(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    run_grid(spec, out, quiet(workers=1), model_factory=standin_factory)
    with GridStore.open(out):
        with pytest.raises(GridError, match="another motes grid run"):
            GridStore.open(out).lock()


def test_two_local_processes_give_the_same_store_as_one(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "one", quiet(workers=1), model_factory=standin_factory)
    result = run_grid(spec, tmp_path / "two", quiet(workers=2), model_factory=standin_factory)
    assert result.where == "2 local processes"
    assert read_sorted(tmp_path / "one").equals(read_sorted(tmp_path / "two"))


def test_dry_run_counts_and_estimates_without_writing(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    lines = describe_dry_run(spec, out, quiet(workers=2), model_factory=standin_factory)
    text = "\n".join(lines)
    assert f"{spec.n_points:,} points" in text and "estimated run time with 2 local processes" in text
    assert "C(10 + 3 - 1, 3 - 1)" in text and "1,000,000" in text
    assert not out.exists()


# ----------------------------------------------------------------------------- summaries
def test_summary_matches_a_brute_force_reading_of_the_store(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "store", quiet(workers=1), model_factory=standin_factory)
    summary = summarize_grid(tmp_path / "store", top=5)
    df = read_sorted(tmp_path / "store")
    chi2_min = df["chi2"].min()
    assert summary.chi2_min == chi2_min and summary.complete
    np.testing.assert_array_equal(summary.best["chi2"], np.sort(df["chi2"].to_numpy())[:5])
    np.testing.assert_allclose(summary.best["delta_chi2"][0], 0.0)
    df["w"] = np.exp(-0.5 * (df["chi2"] - chi2_min))
    prof = summary.fraction_profiles
    for m in spec.materials:
        g = df.groupby(df[f"f_{m}"].round(9))
        rows = prof[prof["material"] == m]
        np.testing.assert_allclose(rows["best_chi2"], g["chi2"].min().to_numpy(), rtol=1e-12)
        np.testing.assert_allclose(rows["relative_likelihood"], g["w"].sum().to_numpy(), rtol=1e-10)
        np.testing.assert_allclose(np.sum(rows["share"]), 1.0, rtol=1e-12)
        assert min(rows["delta_chi2"]) == 0.0
    for a in AXES:
        rows = summary.axis_profiles[summary.axis_profiles["axis"] == a]
        np.testing.assert_allclose(rows["best_chi2"], df.groupby(a)["chi2"].min().to_numpy(), rtol=1e-12)
    # the noiseless-ish truth (2% noise) sits near the best point: the truth fractions are on the grid
    best = summary.best[0]
    assert abs(best["f_silica"] - 0.5) <= 0.2 and best["a_min"] == 2.0
    written = summary.write_tables(tmp_path / "out")
    assert [p.name for p in written] == ["grid_best.ecsv", "grid_fraction_profiles.ecsv", "grid_axis_profiles.ecsv"]
    # a material's absence is on the grid: the note on profiles vs evidence comes with it
    from motes.dust.grid.summary import PROFILE_VS_EVIDENCE_NOTE

    assert any(0.0 in list(prof[prof["material"] == m]["fraction"]) for m in spec.materials)
    assert PROFILE_VS_EVIDENCE_NOTE in summary.notes


def test_summary_of_an_unfinished_store_says_so(grid_file, tmp_path):
    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "store", quiet(workers=1), model_factory=standin_factory)
    for p in sorted((tmp_path / "store" / "parts").glob("chunk-*.parquet"))[2:]:
        p.unlink()
    summary = summarize_grid(tmp_path / "store")
    assert not summary.complete and "unfinished" in " ".join(summary.notes)


def test_grid_figures_are_written(grid_file, tmp_path):
    from motes.report.grid_figures import write_grid_figures

    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "store", quiet(workers=1), model_factory=standin_factory)
    paths = write_grid_figures(summarize_grid(tmp_path / "store"), tmp_path / "figs")
    assert {p.name for p in paths} == {"grid_fraction_profiles.png", "grid_axis_profiles.png", "grid_best_models.png"}
    assert all(p.stat().st_size > 10_000 for p in paths)


def test_demo_grid_description_reads_and_counts(tmp_path):
    from motes.demo import disk_grid
    from motes.dust.grid.workers import read_grid_observations

    disk_grid.write_inputs(tmp_path)
    spec = read_grid_description(tmp_path / "disk_grid.toml")
    # bounded compositions of 20 steps: silica 8..18, ice 0..10, carbon 0..3, iron 0..2 (brute force)
    expected = sum(1 for s, w, c, i in itertools.product(range(21), repeat=4)
                   if s + w + c + i == 20 and 8 <= s <= 18 and w <= 10 and c <= 3 and i <= 2)
    assert spec.n_compositions == expected
    assert spec.n_points == expected * 3 * 3 and spec.n_points <= 2000    # a small, quick grid
    obs = read_grid_observations(spec)
    assert len(obs.bands) == 8 and "NB3p1" in obs.band_names


@pytest.mark.slow
def test_demo_grid_runs(tmp_path):
    # slow: the first run builds the fast path's lookup tables (cached on disk afterwards)
    from motes.demo import disk_grid

    disk_grid.write_inputs(tmp_path)
    disk_grid.run(tmp_path)
    store = GridStore.open(tmp_path / "disk_grid_run")
    assert store.is_complete and (tmp_path / "disk_grid_run" / "summary" / "grid_best_models.png").is_file()


def test_scheduler_without_dask_installed_says_how_to_install(grid_file, tmp_path, monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "dask.distributed", None)      # import now raises ImportError
    with pytest.raises(GridError, match=r"pip install 'motes\[cluster\]'"):
        run_grid(read_grid_description(grid_file), tmp_path / "store",
                 quiet(scheduler="tcp://127.0.0.1:8786"), model_factory=standin_factory)
    assert not (tmp_path / "store").exists()


def test_spawned_workers_give_the_same_store(grid_file, tmp_path, monkeypatch):
    # Linux uses fork (workers inherit the driver's model); macOS and others use spawn: check that path too
    import motes.dust.grid.workers

    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "one", quiet(workers=1), model_factory=standin_factory)
    monkeypatch.setattr(motes.dust.grid.workers, "_start_method", lambda: "spawn")
    run_grid(spec, tmp_path / "spawned", quiet(workers=2), model_factory=standin_factory)
    assert read_sorted(tmp_path / "one").equals(read_sorted(tmp_path / "spawned"))
