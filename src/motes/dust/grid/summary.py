"""Summaries of a grid store: best mixtures and chi-square profiles along every axis.

Everything is computed by streaming the store's Parquet parts one at a time
(reading only the columns needed), so a store of any size is summarised in
flat memory.

* **Best mixtures**: the N rows of lowest chi2, with
  Delta chi2 = chi2 - chi2_min and the relative likelihood exp(-Delta chi2 / 2).
* **Profiles**: for each material and each fraction value on the grid, the best
  chi2 reached by any point with that fraction (a profile over all other
  parameters), likewise for each porosity, a_min, q and a_max value.
* **Relative likelihood per value**: the sum of exp(-Delta chi2 / 2) over all
  points with that value, and its share of the total. With every grid point
  weighted equally this is the grid's version of a marginal posterior under a
  prior uniform on the grid points; it depends on the grid's spacing (a log
  grid in a_min is a log-uniform prior), so read it as a guide, not as
  the evidence that ``motes fit`` computes.

Profile reading (Wilks 1938): Delta chi2 <= 1 along one axis marks the
conventional 68% profile interval; a material whose absence costs
Delta chi2 > 4 is disfavoured to leave out at about 2 sigma. Both assume the
errors are Gaussian and the model adequate (chi2_min near the degrees of freedom).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from astropy.table import Table

from ...errors import GridError
from ...files import atomic_write
from ...parameters import GRAIN_PARAMETERS, PARAMETERS
from .spec import AXES
from .store import GridStore, fraction_column, model_column

__all__ = ["GridSummary", "summarize_grid", "band_label", "ABSENCE_DELTA_CHI2", "PROFILE_VS_EVIDENCE_NOTE"]

#: Why "leaving it out costs Delta chi2" here and a ``motes fit`` evidence verdict can disagree.
PROFILE_VS_EVIDENCE_NOTE = (
    "'leaving it out costs Delta chi2' is a profile: the best grid point without the material against the "
    "best with it, over this grid's points only (its fixed q, a_min and porosity values). motes fit's "
    "verdict (ln B) instead averages the likelihood over the prior: it explores q, a_min and porosity "
    "continuously and charges the prior volume an extra fraction adds (an Occam factor), so a material "
    "'disfavoured' to leave out here can be 'undecided' there")

#: Delta chi2 above which leaving a material out is called "disfavoured" (about 2 sigma
#: for one parameter, Wilks 1938; common practice, no single source for the threshold).
ABSENCE_DELTA_CHI2 = 4.0


@dataclass(frozen=True)
class GridSummary:
    """Summary of a grid store.

    Attributes
    ----------
    store : str
        The store folder.
    n_points, n_rows : int
        Points in the grid; rows present (less when the run is unfinished).
    chi2_min : float
        Lowest chi2 in the store.
    dof : int
        Degrees of freedom of each point's fit (detections minus the scale).
    materials, bands : tuple of str
    best : astropy.table.Table
        The best rows (lowest chi2 first) with ``delta_chi2`` and ``relative_likelihood``.
    fraction_profiles : astropy.table.Table
        material, fraction, n_points, best_chi2, delta_chi2, relative_likelihood, share.
    axis_profiles : astropy.table.Table
        axis, value, n_points, best_chi2, delta_chi2, relative_likelihood, share.
    observations : dict
        The data the grid was compared to (from the store's manifest).
    notes : tuple of str
        Caveats and warnings for the reader.
    provenance : dict
        What produced the store's numbers (motes version, mixing rule, geometry,
        star, grains, size distribution; :meth:`ModelDescription.provenance`),
        empty for a store that does not record it.
    """

    store: str
    n_points: int
    n_rows: int
    chi2_min: float
    dof: int
    materials: tuple[str, ...]
    bands: tuple[str, ...]
    best: Table
    fraction_profiles: Table
    axis_profiles: Table
    observations: dict
    notes: tuple[str, ...] = field(default=())
    provenance: dict = field(default_factory=dict)

    @property
    def band_labels(self) -> tuple[str, ...]:
        """The bands for tables and text: ``"2mass_h (polarised)"`` for a polarised-intensity row,
        whose store key is ``"2mass_h_polarised"``."""
        return tuple(band_label(b) for b in self.bands)

    @property
    def complete(self) -> bool:
        return self.n_rows == self.n_points

    def write_tables(self, folder) -> list:
        """Write the best mixtures and the profiles as ECSV tables into ``folder``.

        Returns
        -------
        list of pathlib.Path
            ``grid_best.ecsv``, ``grid_fraction_profiles.ecsv``, ``grid_axis_profiles.ecsv``.
        """
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        written = []
        for name, table in (("grid_best", self.best), ("grid_fraction_profiles", self.fraction_profiles),
                            ("grid_axis_profiles", self.axis_profiles)):
            table = table.copy(copy_data=False)
            table.meta.update({"store": self.store, "chi2_min": self.chi2_min, "dof": self.dof,
                               "n_rows": self.n_rows, "n_points": self.n_points, "notes": list(self.notes)})
            # version, mixing rule, geometry, star, grains, sizes (stores written before 0.1 lack it)
            table.meta.update(self.provenance or {"provenance": "not recorded by the store"})
            path = folder / f"{name}.ecsv"
            with atomic_write(path) as tmp:
                table.write(tmp, format="ascii.ecsv", overwrite=True)
            written.append(path)
        return written


def summarize_grid(store, top: int = 10) -> GridSummary:
    """Summarise a grid store (finished or not) by streaming its parts.

    Parameters
    ----------
    store : str, os.PathLike or GridStore
        The store folder.
    top : int
        Number of best mixtures to keep.

    Returns
    -------
    GridSummary

    Raises
    ------
    motes.errors.GridError
        When ``store`` is not a grid store or holds no finished rows.
    """
    if not isinstance(store, GridStore):
        store = GridStore.open(store)
    if not isinstance(top, int) or top < 1:
        raise GridError(f"top must be a positive integer, got {top!r}")
    man = store.manifest
    materials = tuple(man["materials"])
    bands = tuple(man["bands"])
    divisions = int(man["fraction_divisions"])
    axes = {name: np.asarray(man["axes"][name], dtype=float) for name in _axis_names(man)}

    # pass 1: chi2_min and the best rows (all columns of at most `top` rows kept)
    best = None
    n_rows = n_bad = 0
    dof = None
    for table in store.iter_tables():
        chi2 = table.column("chi2").to_numpy()
        n_rows += len(chi2)
        finite = np.isfinite(chi2)
        n_bad += int(np.count_nonzero(~finite))
        if dof is None and len(chi2):
            dof = int(table.column("dof")[0].as_py())
        idx = np.flatnonzero(finite)
        if idx.size > top:
            idx = idx[np.argpartition(chi2[idx], top - 1)[:top]]
        part = table.take(idx).to_pandas()
        best = part if best is None else _keep_best(best, part, top)
    if best is None or len(best) == 0:
        raise GridError(f"{store.path} holds no finished points with a finite chi2 yet")
    best = best.sort_values(["chi2", "key"], kind="stable").reset_index(drop=True)
    chi2_min = float(best["chi2"].iloc[0])

    # pass 2: profiles along every axis
    frac_cols = [fraction_column(m) for m in materials]
    n_levels = divisions + 1
    f_best = np.full((len(materials), n_levels), np.inf)
    f_like = np.zeros((len(materials), n_levels))
    f_count = np.zeros((len(materials), n_levels), dtype=np.int64)
    a_best = {a: np.full(v.size, np.inf) for a, v in axes.items()}
    a_like = {a: np.zeros(v.size) for a, v in axes.items()}
    a_count = {a: np.zeros(v.size, dtype=np.int64) for a, v in axes.items()}
    for table in store.iter_tables(frac_cols + list(axes) + ["chi2"]):
        chi2 = table.column("chi2").to_numpy()
        keep = np.isfinite(chi2)
        chi2 = chi2[keep]
        weight = np.exp(-0.5 * (chi2 - chi2_min))
        for j, col in enumerate(frac_cols):
            level = np.rint(table.column(col).to_numpy()[keep] * divisions).astype(np.int64)
            np.minimum.at(f_best[j], level, chi2)
            f_like[j] += np.bincount(level, weight, minlength=n_levels)
            f_count[j] += np.bincount(level, minlength=n_levels)
        for name, values in axes.items():
            col = table.column(name).to_numpy()[keep]
            order = np.argsort(values)
            pos = order[np.clip(np.searchsorted(values[order], col), 0, values.size - 1)]
            if np.any(values[pos] != col):
                raise GridError(f"{store.path}: column {name} holds values not in the manifest's axis")
            np.minimum.at(a_best[name], pos, chi2)
            a_like[name] += np.bincount(pos, weight, minlength=values.size)
            a_count[name] += np.bincount(pos, minlength=values.size)

    fraction_profiles = _fraction_table(materials, divisions, f_best, f_like, f_count, chi2_min, store.manifest)
    axis_profiles = _axis_table(axes, a_best, a_like, a_count, chi2_min)
    best_table = _best_table(best, materials, bands, chi2_min, tuple(axes))

    notes = []
    if n_rows < store.n_points:
        notes.append(f"the run is unfinished: {n_rows:,} of {store.n_points:,} points are in the store; "
                     "profiles cover those only")
    if n_bad:
        notes.append(f"{n_bad:,} points have a non-finite chi2 and are left out")
    if dof is not None and dof > 0 and chi2_min > 2 * dof + 3 * np.sqrt(2 * dof):
        notes.append(f"chi2_min = {chi2_min:.1f} for {dof} degrees of freedom: no grid point fits well, "
                     "so Delta chi2 intervals understate the uncertainty")
    if len(fraction_profiles) and np.any(np.asarray(fraction_profiles["fraction"]) == 0.0):
        notes.append(PROFILE_VS_EVIDENCE_NOTE)   # only when some material's absence is judged
    grains = str(store.manifest.get("provenance", {}).get("grains", "spheres"))
    if grains.startswith("hollow spheres"):
        notes.append(f"grains are modelled as a distribution of {grains} (Min, Hovenier & de Koter 2005), "
                     "an idealisation of irregular grains, so fractions are model-dependent")
    else:
        notes.append("grains are modelled as Mie spheres; real grains are irregular and porous in ways Mie "
                     "theory does not capture, so fractions are model-dependent")
    notes.append("relative likelihood shares weight every grid point equally, i.e. a prior uniform on the "
                 "grid; they change with the grid spacing and are not the Bayesian evidence of motes fit")
    return GridSummary(store=str(store.path), n_points=store.n_points, n_rows=n_rows, chi2_min=chi2_min,
                       dof=-1 if dof is None else dof, materials=materials, bands=bands, best=best_table,
                       fraction_profiles=fraction_profiles, axis_profiles=axis_profiles,
                       observations=dict(store.manifest.get("observations", {})), notes=tuple(notes),
                       provenance=dict(store.manifest.get("provenance", {})))


def band_label(key: str) -> str:
    """A store's row key as a reader's label: ``"2mass_h_polarised"`` -> ``"2mass_h (polarised)"``."""
    suffix = "_polarised"
    return key[: -len(suffix)] + " (polarised)" if key.endswith(suffix) else key


def _keep_best(a, b, top):
    import pandas as pd

    both = pd.concat([a, b], ignore_index=True)
    return both.sort_values(["chi2", "key"], kind="stable").head(top)


def _fraction_table(materials, divisions, best, like, count, chi2_min, manifest) -> Table:
    rows = {k: [] for k in ("material", "fraction", "n_points", "best_chi2", "delta_chi2",
                            "relative_likelihood", "share")}
    bounds = manifest.get("fraction_bounds") or [[0, divisions]] * len(materials)
    for j, name in enumerate(materials):
        lo, hi = bounds[j]
        total = like[j].sum()
        for level in range(lo, hi + 1):
            if count[j, level] == 0:
                continue
            rows["material"].append(name)
            rows["fraction"].append(level / divisions)
            rows["n_points"].append(int(count[j, level]))
            rows["best_chi2"].append(best[j, level])
            rows["delta_chi2"].append(best[j, level] - chi2_min)
            rows["relative_likelihood"].append(like[j, level])
            rows["share"].append(like[j, level] / total if total > 0 else np.nan)
    table = Table(rows)
    table["fraction"].description = "volume fraction of the solid"
    table["relative_likelihood"].description = "sum of exp(-delta_chi2/2) over points with this fraction"
    table["share"].description = "relative_likelihood / its sum over this material's fractions"
    return table


def _axis_table(axes, best, like, count, chi2_min) -> Table:
    rows = {k: [] for k in ("axis", "value", "n_points", "best_chi2", "delta_chi2",
                            "relative_likelihood", "share")}
    for name, values in axes.items():
        total = like[name].sum()
        for i, v in enumerate(values):
            if count[name][i] == 0:
                continue
            rows["axis"].append(name)
            rows["value"].append(float(v))
            rows["n_points"].append(int(count[name][i]))
            rows["best_chi2"].append(best[name][i])
            rows["delta_chi2"].append(best[name][i] - chi2_min)
            rows["relative_likelihood"].append(like[name][i])
            rows["share"].append(like[name][i] / total if total > 0 else np.nan)
    table = Table(rows)
    # one unit per row (the rows are different quantities): "um" for a_min, a_max, "" for pure numbers
    table.add_column([PARAMETERS[str(a)].unit_text for a in table["axis"]], name="unit", index=2)
    table["value"].description = ("porosity: vacuum fraction; a_min, a_max: um; q: size slope; f_max: largest "
                                  "vacuum-core volume fraction (hollow spheres)")
    return table


def _axis_names(manifest) -> tuple[str, ...]:
    """The store's non-composition axes: AXES, then f_max when the grid has that axis."""
    return AXES + tuple(n for n in GRAIN_PARAMETERS if n in manifest["axes"])


def _best_table(best, materials, bands, chi2_min, axis_names=AXES) -> Table:
    table = Table()
    table["rank"] = np.arange(1, len(best) + 1)
    table["key"] = best["key"].to_numpy()
    for m in materials:
        table[fraction_column(m)] = best[fraction_column(m)].to_numpy()
    for a in axis_names:
        table[a] = best[a].to_numpy()
    table["a_min"].unit = table["a_max"].unit = "um"
    table["chi2"] = best["chi2"].to_numpy()
    table["delta_chi2"] = table["chi2"] - chi2_min
    table["relative_likelihood"] = np.exp(-0.5 * table["delta_chi2"])
    table["dof"] = best["dof"].to_numpy()
    table["scale"] = best["scale"].to_numpy()
    for b in bands:
        table[model_column(b)] = best[model_column(b)].to_numpy()
    return table
