"""run_fit on a stand-in model: outputs, resume rules, workers, bad inputs."""

from __future__ import annotations

import json

import numpy as np
import pytest
from astropy.table import Table

from motes.cli import main as cli_main
from motes.dust.fit.run import FitRunSettings, run_fit
from motes.dust.fit.spec import parse_fit_description, read_fit_description
from motes.errors import FitError, InputError
from motes.report.fit_text import write_fit_report

from dust_fit_toys import toy_factory, write_toy_fit

TRUTH = {"fractions": {"alpha": 0.6, "beta": 0.4, "gamma": 0.0}, "porosity": 0.3, "a_min": 2.0, "q": 3.6}
QUIET = dict(echo=lambda *a: None)


@pytest.fixture
def toy_fit(tmp_path, rng):
    return write_toy_fit(tmp_path, TRUTH, rng=rng, sampler="nlive = 50\ndlogz = 0.5\nseed = 3\n")


def test_outputs_and_skip_of_finished_models(tmp_path, toy_fit):
    out = tmp_path / "run"
    res = run_fit(toy_fit, FitRunSettings(output=out, progress=False), model_factory=toy_factory, **QUIET)
    res = write_fit_report(res)
    names = {m.name for m in res.models}
    assert names == {"alpha+beta+gamma", "beta+gamma", "alpha+gamma", "alpha+beta"}
    for f in ("ranking.ecsv", "verdicts.ecsv", "summary.txt", "colours.png", "evidence.png", "fit_state.json"):
        assert (out / f).is_file(), f
    assert list(out.glob("corner_*.png"))
    ranking = Table.read(out / "ranking.ecsv")
    assert list(ranking["model"]) == [m.name for m in res.models]
    assert np.all(np.diff(ranking["ln_z"]) <= 0)
    for m in res.models:
        folder = out / "models" / m.name
        for f in ("result.json", "samples.ecsv", "parameters.ecsv", "colours.ecsv"):
            assert (folder / f).is_file()
        for f in ("samples.ecsv", "parameters.ecsv", "colours.ecsv"):
            meta = Table.read(folder / f).meta       # what produced the table
            assert {"motes_version", "mixing", "phase_function", "scattering_angles_deg", "star", "grains",
                    "size_distribution", "optical_constants"} <= set(meta), f
            assert [s.split(":")[0] for s in meta["optical_constants"]] == list(m.materials)
        assert m.samples.shape[1] == len(m.sample_names) and "scale" in m.sample_names
        assert np.all(np.isfinite(m.samples))
        assert m.dof == 8 - (len(m.materials) - 1 + 3 + 1)
    summary = (out / "summary.txt").read_text()
    for needle in ("Verdict rule", "Mie spheres", "hide water ice", "Files written", "95% upper limit"):
        assert needle in summary
    # a second run reads every model back without sampling
    again = run_fit(toy_fit, FitRunSettings(output=out, progress=False),
                    model_factory=toy_factory, **QUIET)
    for a, b in zip(res.models, again.models):
        assert a.name == b.name and a.ln_z == b.ln_z and np.allclose(a.samples, b.samples)
    sessions = json.loads((out / "models" / "alpha+beta" / "result.json").read_text())["sessions"]
    assert len(sessions) == 1


def test_summary_and_page_name_files_as_the_user_gave_them(tmp_path, rng, monkeypatch):
    """Issue 14: summary.txt and report.html listed the photometry by its absolute path."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sub").mkdir()
    write_toy_fit(tmp_path / "sub", TRUTH, rng=rng,
                  sampler="nlive = 30\ndlogz = 2.0\nseed = 3\n")
    res = run_fit("sub/toy_fit.toml", FitRunSettings(output="run", progress=False), model_factory=toy_factory,
                  **QUIET)
    assert res.observations.path == "sub/toy.csv"
    write_fit_report(res, figures=False)
    for name in ("summary.txt", "report.html"):
        text = (tmp_path / "run" / name).read_text()
        assert "sub/toy.csv" in text and "sub/toy_fit.toml" in text, name
        assert str(tmp_path) not in text and str(tmp_path.resolve()) not in text, name


def test_absent_material_gets_a_small_upper_limit(tmp_path, toy_fit):
    res = run_fit(toy_fit, FitRunSettings(output=tmp_path / "run", progress=False),
                  model_factory=toy_factory, **QUIET)
    row = res.verdict_table[list(res.verdict_table["material"]).index("gamma")]
    # gamma is absent from the truth; its fraction in the full model is bounded well below 1
    assert 0 < row["fraction_upper95"] < 0.3
    assert res.verdict("gamma").verdict != "needed"


def test_other_description_is_refused_and_fresh_restarts(tmp_path, toy_fit):
    toy_fit.write_text(toy_fit.read_text().replace('set = "each-removed"', 'set = "list"\nlist = [["alpha"]]'))
    out = tmp_path / "run"
    run_fit(toy_fit, FitRunSettings(output=out, progress=False), model_factory=toy_factory, **QUIET)
    toy_fit.write_text(toy_fit.read_text().replace("seed = 3", "seed = 4"))
    with pytest.raises(FitError, match="another description"):
        run_fit(toy_fit, FitRunSettings(output=out, progress=False), model_factory=toy_factory,
                **QUIET)
    res = run_fit(toy_fit, FitRunSettings(output=out, fresh=True, progress=False),
                  model_factory=toy_factory, **QUIET)
    assert json.loads((out / "fit_state.json").read_text())["digest"] == read_fit_description(toy_fit).digest
    assert len(res.models) == 1


def test_run_of_an_older_format_version_is_not_resumed(tmp_path, toy_fit):
    """FIT_FORMAT_VERSION guards what a resumed sampler state may mix with (2 since the thermal fast path's
    likelihood changed, issue 13): a run folder stamped with another version is refused, --fresh restarts."""
    from motes.dust.fit.results import FIT_FORMAT_VERSION

    toy_fit.write_text(toy_fit.read_text().replace('set = "each-removed"', 'set = "list"\nlist = [["alpha"]]'))
    out = tmp_path / "run"
    run_fit(toy_fit, FitRunSettings(output=out, progress=False), model_factory=toy_factory, **QUIET)
    state = json.loads((out / "fit_state.json").read_text())
    assert state["format_version"] == FIT_FORMAT_VERSION == 2
    (out / "fit_state.json").write_text(json.dumps({**state, "format_version": 1}))
    with pytest.raises(FitError, match="another format"):
        run_fit(toy_fit, FitRunSettings(output=out, resume=True, progress=False), model_factory=toy_factory,
                **QUIET)
    run_fit(toy_fit, FitRunSettings(output=out, fresh=True, progress=False), model_factory=toy_factory, **QUIET)
    assert json.loads((out / "fit_state.json").read_text())["format_version"] == 2


def test_foreign_folder_is_not_touched(tmp_path, toy_fit):
    out = tmp_path / "busy"
    out.mkdir()
    (out / "thesis.tex").write_text("keep me")
    with pytest.raises(FitError, match="not empty"):
        run_fit(toy_fit, FitRunSettings(output=out, progress=False), model_factory=toy_factory, **QUIET)
    assert (out / "thesis.tex").read_text() == "keep me"


def test_two_workers_evaluate_the_likelihood(tmp_path, toy_fit):
    """A process pool of 2: both worker processes evaluate the likelihood, same ln Z within errors."""
    text = toy_fit.read_text().replace('set = "each-removed"', 'set = "list"\nlist = [["alpha", "beta"]]')
    toy_fit.write_text(text)
    one = run_fit(toy_fit, FitRunSettings(output=tmp_path / "one", progress=False),
                  model_factory=toy_factory, **QUIET).models[0]
    two = run_fit(toy_fit, FitRunSettings(output=tmp_path / "two", workers=2, progress=False),
                  model_factory=toy_factory, **QUIET).models[0]
    assert one.sessions[0]["processes"] == 1
    assert two.sessions[0]["processes"] == 2
    assert abs(one.ln_z - two.ln_z) < 3 * np.hypot(one.ln_z_err, two.ln_z_err)


# ------------------------------------------------------------------ bad input
def test_fewer_bands_than_free_parameters(tmp_path, rng):
    params = ('porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }\n'
              'a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }\n'
              'q = { prior = "uniform", lower = 3.0, upper = 4.5 }\n'
              'systematic = { prior = "uniform", lower = 0.0, upper = 0.2 }\n')
    path = write_toy_fit(tmp_path, TRUTH, ("alpha", "beta", "gamma", "delta"), rng=rng, parameters=params,
                         limits=("wise_w2",))
    # 4 materials: 3 fractions + 4 others + scale = 8 > 7 detected bands
    with pytest.raises(FitError, match="free parameters.*only 7 detected bands"):
        run_fit(path, FitRunSettings(output=tmp_path / "run"), model_factory=toy_factory, **QUIET)
    assert not (tmp_path / "run").exists()


@pytest.mark.parametrize("snippet, error, message", [
    ('[parameters]\nporosity = { prior = "uniform", lower = 0.5, upper = 0.5 }\n', InputError, "lower < upper"),
    ('[parameters]\na_min = { prior = "log-uniform", lower = 0.0, upper = 3.0 }\n', InputError, "lower > 0"),
    ('[parameters]\nq = { prior = "gaussian", lower = 3.0, upper = 4.0 }\n', InputError, "prior kind"),
    ('[parameters]\nwarp = 3\n', InputError, "unknown key"),
    ('[models]\nset = "list"\nlist = []\n', FitError, "needs list"),
    ('[models]\nset = "list"\nlist = [["iron"]]\n', FitError, "unknown material"),
    ('[models]\nset = "everything"\n', FitError, "set must be one of"),
    ('[scale]\nlower = 1.0\nupper = 1e-3\n', InputError, "lower < upper"),
    ('[sampler]\nnlive = 3\n', InputError, "nlive"),
    ('[sampler]\nkind = "fast"\n', InputError, "kind"),
])
def test_bad_descriptions(tmp_path, snippet, error, message):
    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-4,1e-5\n")
    base = '[data]\nphotometry = "d.csv"\n[star]\nteff = 5000.0\n[[materials]]\nname = "alpha"\n' \
           'source = "silica_amorphous"\n[[materials]]\nname = "beta"\nsource = "carbon_amorphous"\n'
    with pytest.raises(error, match=message) as err:
        parse_fit_description(base + snippet, base_dir=tmp_path, source="fit.toml")
    assert "fit.toml" in str(err.value)


def test_a_min_reaching_a_max(tmp_path, rng):
    params = 'a_min = { prior = "log-uniform", lower = 0.5, upper = 2000.0 }\n'
    path = write_toy_fit(tmp_path, TRUTH, rng=rng, parameters=params)
    with pytest.raises(FitError, match="a_max"):
        run_fit(path, FitRunSettings(output=tmp_path / "run"), model_factory=toy_factory, **QUIET)


def test_missing_sections_and_bad_toml(tmp_path):
    with pytest.raises(InputError, match="photometry"):
        parse_fit_description('[star]\nteff = 5000.0\n', base_dir=tmp_path)
    with pytest.raises(InputError, match="not valid TOML"):
        parse_fit_description('[data\n', base_dir=tmp_path)
    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-4,1e-5\n")
    with pytest.raises(InputError, match="materials"):
        parse_fit_description('[data]\nphotometry = "d.csv"\n', base_dir=tmp_path)


def test_cli_reports_errors_in_one_line(tmp_path, capsys):
    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-4,1e-5\n")
    path = tmp_path / "fit.toml"
    path.write_text('[data]\nphotometry = "d.csv"\n[star]\nteff = 5000.0\n[[materials]]\nname = "alpha"\n'
                    'source = "silica_amorphous"\n'
                    '[parameters]\nq = { prior = "uniform", lower = 4.0, upper = 3.0 }\n')
    assert cli_main(["fit", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "lower < upper" in err[0] and "fit.toml" in err[0]


def test_dynamic_sampler_runs_and_matches_static(tmp_path, rng):
    """kind = "dynamic" (dynesty's DynamicNestedSampler) gives the static run's ln Z within errors."""
    out = {}
    for kind in ("static", "dynamic"):
        folder = tmp_path / kind
        folder.mkdir()
        path = write_toy_fit(folder, TRUTH, rng=np.random.default_rng(9), model_set="list",
                             sampler=f'kind = "{kind}"\nnlive = 60\ndlogz = 0.3\nmaxbatch = 1\nnlive_batch = 30\n')
        path.write_text(path.read_text().replace('set = "list"', 'set = "list"\nlist = [["alpha", "beta"]]'))
        out[kind] = run_fit(path, FitRunSettings(output=folder / "run", progress=False),
                            model_factory=toy_factory, **QUIET).models[0]
    a, b = out["static"], out["dynamic"]
    assert abs(a.ln_z - b.ln_z) < 3 * np.hypot(a.ln_z_err, b.ln_z_err)
