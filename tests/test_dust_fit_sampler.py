"""Sampler wiring: analytic evidences, the simplex prior, and the fit's likelihood end to end."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import log_ndtr
from scipy.stats import kstest

from motes.dust.fit.run import FitRunSettings, prepare_fit, run_fit
from motes.dust.fit.spec import SamplerSettings, read_fit_description
from motes.dust.fit.sampler import open_pool, run_nested_model
from motes.dust.fit.priors import ParameterSpace, Prior, dirichlet_from_cube

from dust_fit_toys import toy_factory, write_toy_fit


class _GaussianInBox:
    """ln L = ln N(x; mu, sigma^2 I) in d dimensions; prior uniform on [-a, a]^d."""

    def __init__(self, d, sigma, a, mu):
        self.d, self.sigma, self.a, self.mu = d, sigma, a, np.asarray(mu, float)

    def __call__(self, x):
        r = (np.asarray(x) - self.mu) / self.sigma
        return float(-0.5 * r @ r - self.d * math.log(self.sigma * math.sqrt(2 * math.pi)))

    def ln_z(self):
        # Z = (2a)^-d prod_i [Phi((a - mu_i)/sigma) - Phi((-a - mu_i)/sigma)]  (exact, box-truncated Gaussian)
        mass = 0.0
        for m in self.mu:
            hi, lo = (self.a - m) / self.sigma, (-self.a - m) / self.sigma
            mass += math.log(math.exp(log_ndtr(hi)) - math.exp(log_ndtr(lo)))
        return mass - self.d * math.log(2 * self.a)


class _Box:
    def __init__(self, a):
        self.a = a

    def __call__(self, u):
        return (2 * np.asarray(u) - 1) * self.a


@pytest.mark.parametrize("d, sigma, a, mu", [
    (2, 0.1, 5.0, (0.3, -1.0)),
    (4, 0.5, 3.0, (0.0, 1.0, 2.4, -0.5)),   # one coordinate near the box edge: truncation matters
])
def test_analytic_evidence_gaussian_in_box(tmp_path, d, sigma, a, mu):
    """Gaussian likelihood in a uniform box (the dynesty test-suite's classic, Speagle 2020 sec. 8):
    ln Z recovered within 3 sigma of dynesty's own reported error."""
    like = _GaussianInBox(d, sigma, a, mu)
    settings = SamplerSettings(nlive=200, dlogz=0.05, seed=11)
    with open_pool(1, like, _Box(a)) as pool:
        run = run_nested_model(d, settings, tmp_path / "state.dynesty", pool=pool, progress=False)
    assert abs(run.ln_z - like.ln_z()) < 3 * run.ln_z_err, (run.ln_z, like.ln_z(), run.ln_z_err)
    # the checkpoint was written, and resuming a finished run changes nothing
    with open_pool(1, like, _Box(a)) as pool:
        again = run_nested_model(d, settings, tmp_path / "state.dynesty", pool=pool, progress=False)
    assert again.resumed and again.ln_z == run.ln_z


def test_dirichlet_map_is_uniform_on_the_simplex(rng):
    """Normalised -ln u draws are Dirichlet(1,1,1): each f_i ~ Beta(1, K-1), CDF 1 - (1-x)^(K-1)."""
    f = dirichlet_from_cube(rng.uniform(size=(20000, 3)))
    assert np.allclose(f.sum(axis=1), 1.0)
    for i in range(3):
        stat = kstest(f[:, i], lambda x: 1 - (1 - x) ** 2)
        assert stat.pvalue > 1e-3
    # and pairs are exchangeable: P(f_0 > f_1) = 1/2 (binomial, 5 sigma)
    frac = np.mean(f[:, 0] > f[:, 1])
    assert abs(frac - 0.5) < 5 * 0.5 / math.sqrt(f.shape[0])


def test_parameter_space_layout():
    space = ParameterSpace(("x", "y"), porosity=Prior("uniform", 0.0, 0.5), a_min=Prior("log-uniform", 1.0, 4.0),
                           q=Prior("fixed", value=3.5), systematic=Prior("uniform", 0.0, 0.2))
    assert space.names == ("fraction_x", "fraction_y", "porosity", "a_min", "systematic")
    assert space.n_effective == 1 + 3 + 1
    theta = space.transform(np.array([0.5, 0.25, 0.5, 0.5, 1.0]))
    assert theta[:2] == pytest.approx([1 / 3, 2 / 3])
    assert theta[2] == pytest.approx(0.25)
    assert theta[3] == pytest.approx(2.0)          # geometric middle of [1, 4]
    p = space.unpack(theta)
    assert p["q"][0] == 3.5 and p["systematic"][0] == pytest.approx(0.2)


def test_single_material_model_has_no_fraction_coordinate():
    space = ParameterSpace(("x",))
    assert space.n_fraction_dims == 0 and space.names[0] == "porosity"
    assert np.all(space.unpack(space.transform(np.full(space.ndim, 0.5)))["fractions"] == 1.0)


def _toy_description(tmp_path, rng, materials, params, model_set="list", models='[["alpha"]]'):
    truth = {"fractions": {"alpha": 0.7, "beta": 0.3}, "porosity": 0.3, "a_min": 2.0, "q": 3.5}
    return write_toy_fit(tmp_path, truth, materials, rng=rng, parameters=params, model_set=model_set,
                         sampler="nlive = 150\ndlogz = 0.05\nseed = 5\n",
                         extra_toml="") if model_set != "list" else _with_list(
        write_toy_fit(tmp_path, truth, materials, rng=rng, parameters=params, model_set="list",
                      sampler="nlive = 150\ndlogz = 0.05\nseed = 5\n"), models)


def _with_list(path, models):
    text = path.read_text().replace('set = "list"\n', f'set = "list"\nlist = {models}\n')
    path.write_text(text)
    return path


def test_fit_evidence_matches_direct_integration_one_parameter(tmp_path, rng):
    """End to end through run_fit: one material, porosity free, scale marginalised.
    Z = integral over porosity of the scale-marginalised likelihood (uniform prior), by scipy.quad."""
    params = ('porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }\na_min = 2.0\nq = 3.5\n')
    path = _toy_description(tmp_path, rng, ("alpha", "beta"), params, models='[["alpha"]]')
    spec = read_fit_description(path)
    _, handles = prepare_fit(spec, toy_factory)
    problem = handles[0].build()
    lnl = lambda p: float(problem.ln_likelihood(np.array([[p]]))[0])
    ref = lnl(0.3)
    z = quad(lambda p: math.exp(lnl(p) - ref) / 0.8, 0.0, 0.8, epsrel=1e-10, limit=200)[0]
    ln_z_ref = ref + math.log(z)
    result = run_fit(spec, FitRunSettings(output=tmp_path / "run", progress=False),
                     model_factory=toy_factory, echo=lambda *a: None)
    m = result.models[0]
    assert abs(m.ln_z - ln_z_ref) < 3 * m.ln_z_err, (m.ln_z, ln_z_ref, m.ln_z_err)


def test_fit_evidence_matches_direct_integration_two_fractions(tmp_path, rng):
    """Two materials, only their fractions free: Dirichlet(1,1) is uniform in f_alpha on [0, 1]."""
    params = "porosity = 0.3\na_min = 2.0\nq = 3.5\n"
    path = _toy_description(tmp_path, rng, ("alpha", "beta"), params, models='[["alpha", "beta"]]')
    spec = read_fit_description(path)
    _, handles = prepare_fit(spec, toy_factory)
    problem = handles[0].build()
    lnl = lambda f: float(problem.ln_likelihood(np.array([[f, 1 - f]]))[0])
    ref = lnl(0.7)
    z = quad(lambda f: math.exp(lnl(f) - ref), 0.0, 1.0, epsrel=1e-10, points=[0.7], limit=200)[0]
    result = run_fit(spec, FitRunSettings(output=tmp_path / "run", progress=False),
                     model_factory=toy_factory, echo=lambda *a: None)
    m = result.models[0]
    assert abs(m.ln_z - (ref + math.log(z))) < 3 * m.ln_z_err


def test_sampled_scale_gives_the_same_evidence(tmp_path, rng):
    """Sampling ln s under the same log-uniform prior must give the marginalised ln Z (within errors)."""
    params = "porosity = 0.3\na_min = 2.0\nq = 3.5\n"
    path = _toy_description(tmp_path, rng, ("alpha", "beta"), params, models='[["alpha", "beta"]]')
    text = path.read_text()
    runs = []
    for treatment in ("marginalise", "sample"):
        p = tmp_path / f"{treatment}.toml"
        p.write_text(text + f'\n[scale]\nlower = 1e-7\nupper = 1e-1\ntreatment = "{treatment}"\n')
        res = run_fit(p, FitRunSettings(output=tmp_path / treatment, progress=False),
                      model_factory=toy_factory, echo=lambda *a: None)
        runs.append(res.models[0])
    a, b = runs
    assert abs(a.ln_z - b.ln_z) < 3 * math.hypot(a.ln_z_err, b.ln_z_err)
    # and the posterior of the scale agrees. Equal-weight samples from a nested run repeat points
    # (effective size ~ nlive x a few, here >~ 300), so a median's standard error is ~1.25 sd / sqrt(300)
    # ~ 0.07 sd; 0.25 sd is ~3.5 of those.
    sa, sb = np.log(a.column("scale")), np.log(b.column("scale"))
    assert abs(np.median(sa) - np.median(sb)) < 0.25 * max(sa.std(), sb.std())
