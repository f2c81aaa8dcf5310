"""The flux-scale prior: a fit whose data need a scale outside ``[scale]`` stops before sampling.

The demo cases use the demo's own fit description and photometry with the
real Mie model on a coarse size quadrature (``TINY_SIZES``: colours off by a
few per cent, which moves the best scale by as much, far less than the
decades these checks are about).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from motes.dust.fit.problem import ProblemHandle, read_fit_photometry
from motes.dust.fit.run import FitRunSettings, prepare_fit, run_fit
from motes.dust.fit.scale_check import N_DRAWS, _prior_points, check_scale_prior, scale_bound_notes
from motes.dust.fit.spec import read_fit_description
from motes.errors import FitError

from dust_fit_toys import toy_factory, write_toy_fit
from test_dust_grid import TINY_SIZES

DATA = Path(__file__).resolve().parents[1] / "src" / "motes" / "demo" / "data"
TRUTH = {"fractions": {"alpha": 0.5, "beta": 0.3, "gamma": 0.2}, "porosity": 0.3, "a_min": 2.0, "q": 3.5}


def coarse_factory(spec, materials, bands):
    """The description's real model (exact path, one node per band) on the coarse size quadrature."""
    from motes.dust.model.colours import DiskColourModel

    d = spec.description.subset(materials)
    return DiskColourModel(d.materials, bands, star_teff=d.star.teff, star_spectrum=d.star.spectrum,
                           mixing=d.mixing, matrix=d.matrix, geometry=d.geometry, method="exact",
                           a_max=d.a_max, wavelength_nodes=1, size_sampling=TINY_SIZES)


def _demo_copy(folder: Path, normalise: bool = False, default_scale: bool = False) -> Path:
    shutil.copy(DATA / "disk_fit.toml", folder / "disk_fit.toml")
    spec = read_fit_description(DATA / "disk_fit.toml")
    obs = read_fit_photometry(spec)
    value, error = obs.value, obs.error
    if normalise:                            # ratios divided by the first band: data of order one
        value, error = value / value[0], error / value[0]
    rows = "".join(f"{b},{float(v)!r},{float(e)!r},contrast_ratio\n" for b, v, e in zip(obs.band_names, value, error))
    (folder / "disk_photometry.csv").write_text("band,value,error,kind\n" + rows)
    text = (folder / "disk_fit.toml").read_text().replace("disk_photometry.ecsv", "disk_photometry.csv")
    if default_scale:
        text = text.replace("[scale]\nlower = 1e-8\nupper = 1.0\n", "")
        assert "[scale]" not in text
    (folder / "disk_fit.toml").write_text(text)
    return folder / "disk_fit.toml"


def _full_problem(path):
    spec = read_fit_description(path)
    handle = ProblemHandle(spec, spec.models[0], model_factory=coarse_factory)
    return spec, handle.build()


def test_demo_fit_passes_and_its_best_prior_point_gives_no_bound_note(tmp_path):
    spec, problem = _full_problem(_demo_copy(tmp_path))
    check_scale_prior(problem, spec.models[0].name, spec.source)          # does not raise
    theta = _prior_points(problem.space)
    scale, chi2, _ = problem.best_scale_fit(theta)
    i = int(np.argmin(chi2))
    assert spec.scale.lower < scale[i] < spec.scale.upper
    assert scale_bound_notes(problem, spec.models[0].name, theta[i], float(scale[i])) == []


def test_demo_ratios_normalised_to_one_band_are_refused_with_the_default_prior(tmp_path):
    spec, problem = _full_problem(_demo_copy(tmp_path, normalise=True, default_scale=True))
    assert (spec.scale.lower, spec.scale.upper) == (1e-12, 1.0)
    with pytest.raises(FitError) as info:
        check_scale_prior(problem, spec.models[0].name, spec.source)
    message = str(info.value)
    assert "silica+water_ice+carbon+iron" in message and str(spec.source) in message
    assert "above the upper bound of the [scale] prior [1e-12, 1]" in message
    assert f"at {N_DRAWS} points spread over the prior" in message
    median = float(message.split("flux scale of about ")[1].split(" ")[0])
    assert median > 1.0


def test_run_fit_stops_before_sampling_when_the_data_need_a_scale_outside_the_prior(tmp_path, rng):
    path = write_toy_fit(tmp_path, TRUTH, rng=rng, scale=1e3)            # toy ratios ~1: scale ~1e3
    out = tmp_path / "run"
    with pytest.raises(FitError, match=r"flux scale of about \d+ .*above the upper bound.*\[1e-12, 1\]"):
        run_fit(path, FitRunSettings(output=out, workers=1, progress=False), model_factory=toy_factory)
    assert not out.exists()                                               # nothing sampled, nothing written
    faint = tmp_path / "faint"
    faint.mkdir()
    below = write_toy_fit(faint, TRUTH, rng=rng, scale=1e-14)
    with pytest.raises(FitError, match="below the lower bound"):
        prepare_fit(read_fit_description(below), toy_factory)


def test_bound_note_fires_only_when_the_bound_cuts_into_the_scale_likelihood(tmp_path, rng):
    path = write_toy_fit(tmp_path, TRUTH, rng=rng, scale=1e-4)
    _, handles = prepare_fit(read_fit_description(path), toy_factory)
    problem = handles[0].build()
    theta = _prior_points(problem.space)
    scale, chi2, _ = problem.best_scale_fit(theta)
    i = int(np.argmin(chi2))
    assert scale_bound_notes(problem, "toy", theta[i], float(scale[i])) == []
    # the same data with the upper bound 2% above that best scale (3% errors on 8 bands): the bound cuts in
    path.write_text(path.read_text() + f"\n[scale]\nlower = 1e-8\nupper = {1.02 * float(scale[i])!r}\n")
    _, handles = prepare_fit(read_fit_description(path), toy_factory)
    notes = scale_bound_notes(handles[0].build(), "toy", theta[i], float(scale[i]))
    assert len(notes) == 1 and "upper bound" in notes[0] and "widen [scale]" in notes[0]
