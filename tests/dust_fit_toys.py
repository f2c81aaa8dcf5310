"""Analytic stand-ins for the disk-colour model, for fast tests of the fit machinery.

The stand-in has the forward model's interface (``materials``, ``bands``,
``flux_ratio(fractions, porosity, a_min, q, a_max=None)``) and smooth, cheap,
identifiable colours; it is no physics. It lives at module level so that worker
processes (spawned) can unpickle the factory.
"""

from __future__ import annotations

import numpy as np

# per-material spectral shape: ln r = c0 + c1 ln(lambda) + c2 ln(lambda)^2
SHAPES = {"alpha": (0.0, 0.0, 0.0), "beta": (0.3, 1.0, -0.3), "gamma": (0.5, -0.5, 0.8), "delta": (0.2, 0.3, 0.1)}

TOY_BANDS = ("cousins_r", "cousins_i", "2mass_j", "2mass_h", "2mass_ks", "wise_w1", "spitzer-irac_3.6", "wise_w2")


class _Material:
    def __init__(self, name):
        self.name = name
        self.density = 2.0


class ToyColourModel:
    """r_b = (sum_k f_k S_k(lambda_b)) (1 - 0.6 P) lambda_b^(-(q - 3.5)/2) (1 + 0.3 ln(a_min) ln(lambda_b))."""

    def __init__(self, materials, bands):
        self.materials = tuple(_Material(m) for m in materials)
        self.bands = tuple(bands)
        lam = np.array([b.pivot_wavelength for b in self.bands])
        x = np.log(lam)
        self.basis = np.array([np.exp(c0 + c1 * x + c2 * x * x) for c0, c1, c2 in (SHAPES[m] for m in materials)])
        self.lam = lam
        self.notes = ("toy stand-in model (tests only)",)

    def flux_ratio(self, fractions, porosity, a_min, q, a_max=None):
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        n = f.shape[0]
        p, a, qq = (np.broadcast_to(np.asarray(v, dtype=float), (n,)) for v in (porosity, a_min, q))
        base = f @ self.basis
        return (base * (1 - 0.6 * p[:, None]) * self.lam[None, :] ** (-(qq[:, None] - 3.5) * 0.5)
                * (1 + 0.3 * np.log(a[:, None]) * np.log(self.lam[None, :])))


def toy_factory(spec, materials, bands):
    """``model_factory`` for :func:`motes.dust.fit.run.run_fit`."""
    return ToyColourModel(materials, bands)


def write_toy_fit(folder, truth, materials=("alpha", "beta", "gamma"), *, rng, noise=0.03,
                  scale=1e-4, extra_toml="", sampler="nlive = 60\ndlogz = 0.5\n",
                  parameters=None, model_set="each-removed", limits=()):
    """Write toy photometry (from ``truth``) and a fit description; return the description path."""
    from motes.photometry.bands import get_band

    bands = [get_band(n) for n in TOY_BANDS]
    model = ToyColourModel(list(truth["fractions"]), bands)
    r = model.flux_ratio([list(truth["fractions"].values())], truth["porosity"], truth["a_min"], truth["q"])[0] * scale
    value = r * (1 + noise * rng.normal(size=r.size))
    lines = ["band,value,error,limit_sigma"]
    for name, v, e in zip(TOY_BANDS, value, noise * r):
        if name in limits:
            lines.append(f"{name},{3 * e:.6e},,3")
        else:
            lines.append(f"{name},{v:.6e},{e:.6e},")
    (folder / "toy.csv").write_text("\n".join(lines) + "\n")
    # the toy model ignores the optical constants; the description still names real ones
    mats = "\n".join(f'[[materials]]\nname = "{m}"\nsource = "silica_amorphous"\n' for m in materials)
    params = parameters or (
        'porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }\n'
        'a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }\n'
        'q = { prior = "uniform", lower = 3.0, upper = 4.5 }\n')
    text = (f'[data]\nphotometry = "toy.csv"\n\n[star]\nteff = 5000.0\n\n{mats}\n'
            f"[parameters]\n{params}\n[models]\nset = \"{model_set}\"\n\n[sampler]\n{sampler}\n{extra_toml}")
    path = folder / "toy_fit.toml"
    path.write_text(text)
    return path
