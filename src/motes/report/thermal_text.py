"""Text and files of the thermal side of ``motes optics``: grain temperatures and the thermal SED.

:func:`format_thermal` renders a :class:`motes.dust.model.thermal.ThermalResult`
for the terminal; :func:`write_thermal_outputs` writes its band table and its
temperature table (ECSV, written to temporary names and renamed together) and
the figure of :func:`motes.report.thermal_figures.plot_thermal`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..dust.model.thermal import ThermalResult
from ..files import atomic_writes

__all__ = ["format_thermal", "write_thermal_outputs", "scattered_flux_ratio"]


def _where(result: ThermalResult) -> str:
    r = result.settings.radius_au
    if len(r) == 1:
        return f"ring at {r[0]:g} au"
    return f"belt {r[0]:g}-{r[1]:g} au, surface density ∝ r^{result.settings.surface_density_index:g}"


def format_thermal(result: ThermalResult, printed_notes=()) -> str:
    """The thermal part of what ``motes optics`` prints.

    ``printed_notes``: notes already printed (by the scattered-light part), left out here so
    that each note is printed once.
    """
    s = result.settings
    w = max([20] + [len(n) + 2 for n in result.band_names])
    mass = (f"{result.dust_mass_mearth:.3g} M_earth" if np.isfinite(result.dust_mass_mearth)
            else "mass unknown (a material has no density)")
    seen = f"seen from {s.distance_pc:g} pc" if s.distance_pc else "no distance given: fluxes at 1 pc"
    lines = ["", f"thermal emission: {_where(result)}; star {result.luminosity:g} L_sun; dust {mass}, "
                 f"{result.cross_section_au2:.4g} au^2 of grain cross-section; {seen}",
             f"  fractional luminosity L_dust/L*: {result.fractional_luminosity:.4g}",
             f"  dust temperature from the F_nu peak: {result.dust_temperature:.1f} K; blackbody radius "
             f"{result.blackbody_radius:.3g} au; radius / blackbody radius: {result.radius_ratio:.3g}"
             + ("" if len(s.radius_au) == 1 else " (cross-section-weighted mean radius)"),
             "",
             f"{'band':<{w}}{'pivot [µm]':>10}{'disk [mJy]':>13}{'star [mJy]':>13}{'disk/star':>12}"]
    for i, name in enumerate(result.band_names):
        lines.append(f"{name:<{w}}{result.band_pivot[i]:10.4g}{1e3 * result.band_disk[i]:13.4g}"
                     f"{1e3 * result.band_star[i]:13.4g}{result.excess[i]:12.4g}")
    lines.append("(disk/star: the excess over the photosphere in the band; photon-counting band averages, "
                 "no colour correction)")
    j_show = [0] if result.radii.size == 1 else [0, result.radii.size - 1]
    for j in j_show:
        t_bb = float(result.blackbody_temperature[j])
        lines += ["", f"grain temperature against size at {result.radii[j]:.4g} au (blackbody {t_bb:.1f} K):",
                  f"  {'a [µm]':>10}{'T [K]':>9}{'T/T_bb':>8}{'<Q_abs>*':>10}{'<Q_abs>_T':>11}"]
        step = max(1, result.sizes.size // 10)
        for i in list(range(0, result.sizes.size, step)) + ([result.sizes.size - 1]
                                                            if (result.sizes.size - 1) % step else []):
            lines.append(f"  {result.sizes[i]:10.4g}{result.temperature[i, j]:9.1f}"
                         f"{result.temperature[i, j] / t_bb:8.3f}{result.q_abs_star[i]:10.3g}"
                         f"{result.q_abs_own[i, j]:11.3g}")
    if result.flags:
        lines.append("")
        lines.extend(f"Flag: {f}" for f in result.flags)
    lines.append("")
    lines.extend(f"Note: {n}" for n in result.notes if n not in set(printed_notes))
    return "\n".join(lines)


def scattered_flux_ratio(result: ThermalResult, flux_ratio_per_cross_section) -> np.ndarray:
    """Scattered-light disk/star flux ratio of the same dust: ``sigma_tot R_b <r^-2>``.

    Parameters
    ----------
    result : ThermalResult
    flux_ratio_per_cross_section : ndarray[n_bands] [sr^-1]
        ``BandOptics.flux_ratio`` of the same mixture (per unit grain cross-section).

    Returns
    -------
    ndarray[n_bands]
        For optically thin dust the scattered flux is ``F* sigma Q_sca p / r^2``
        (star flux at the grains times their cross-section, per steradian,
        divided by the observer's flux dilution relative to the star).
    """
    w = result.node_cross_section.sum(axis=0) / result.cross_section_au2
    inv_r2 = float(np.sum(w / result.radii**2))
    return result.cross_section_au2 * np.asarray(flux_ratio_per_cross_section) * inv_r2


def write_thermal_outputs(result: ThermalResult, folder, stem: str = "optics", figures: bool = True,
                          scattered=None, provenance=None, formats=None) -> list[Path]:
    """Write the thermal band table, the temperature table and the figure; return the paths.

    Parameters
    ----------
    result : ThermalResult
    folder : path-like
    stem : str
    figures : bool
    scattered : (sequence of Band, ndarray[n_bands]), optional
        The scattered-light bands and their disk/star flux ratios
        (:func:`scattered_flux_ratio`), drawn beside the thermal SED.
    provenance : dict, optional
        What produced the numbers (:meth:`ModelDescription.provenance`), added to
        both tables' ``meta``.
    formats : sequence of str or str, optional
        Figure formats (``--figure-formats``); default PNG.
    """
    from .figure_files import figure_paths
    from .thermal_figures import plot_thermal

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    tables = [(folder / f"{stem}_thermal_bands.ecsv", result.to_table()),
              (folder / f"{stem}_grain_temperatures.ecsv", result.temperature_table())]
    if provenance:     # what produced the numbers (scattering angles play no part in thermal emission)
        extra = {k: v for k, v in provenance.items() if k not in ("phase_function", "scattering_angles_deg")}
        for _, table in tables:
            table.meta.update({k: v for k, v in extra.items() if k not in table.meta})
    with atomic_writes([p for p, _ in tables]) as tmps:
        for tmp, (_, table) in zip(tmps, tables):
            table.write(tmp, format="ascii.ecsv", overwrite=True)
    out = [p for p, _ in tables]
    if figures:
        plot_thermal(folder / f"{stem}_thermal.png", result, scattered=scattered, formats=formats)
        out += figure_paths(folder / f"{stem}_thermal.png", formats)
    return out
