"""Text and files of ``motes optics``: one dust mixture's optics per band.

:func:`format_mixture_optics` renders a :class:`motes.dust.model.mixture.MixtureOptics`
for the terminal; :func:`write_mixture_outputs` writes its per-band table
(ECSV, written to a temporary name and renamed) and the two figures of
:mod:`motes.report.optics_figures`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..dust.model.mixture import MixtureOptics
from ..files import atomic_write

__all__ = ["format_mixture_optics", "write_mixture_outputs"]


def format_mixture_optics(result: MixtureOptics) -> str:
    """The text ``motes optics`` prints."""
    o, p = result.optics, result.parameters
    mats = result.description.material_names
    ref = o.bands[result.reference]
    w = max([14] + [len(b) + 2 for b in o.bands])     # the band column fits the longest identifier
    lines = [result.model_summary,
             "mixture: " + ", ".join(f"{n} {f:.3g}" for n, f in zip(mats, p.fractions))
             + f"; porosity {p.porosity:.3g}; sizes {p.a_min:g}-{p.a_max:g} µm, q = {p.q:g}",
             f"mixture density: {o.density:.4g} g cm^-3" if np.isfinite(o.density)
             else "mixture density: unknown (a material has no bulk density)",
             "",
             f"{'band':<{w}}{'pivot[µm]':>9}  {'m_eff (n + ik)':<22}{'R [1/sr]':>11}"
             f"{'colour[mag]':>12}{'albedo':>8}{'g':>7}{'Q_ext':>7}"]
    colours = result.colours
    for i, band in enumerate(o.bands):
        m = o.m_pivot[i]
        lines.append(f"{band:<{w}}{o.pivot[i]:9.4f}  {m.real:7.4f} + {m.imag:9.3e}i   {o.flux_ratio[i]:11.4e}"
                     f"{colours[i]:12.4f}{o.albedo[i]:8.4f}{o.g[i]:7.3f}{o.q_ext[i]:7.3f}")
    lines.append(f"(R: disk/star flux ratio per unit total grain cross-section; colour: mag relative to {ref}; "
                 "albedo and g: cross-section weighted, band averaged; exact Mie path)")
    if o.polarised_flux_ratio is not None:
        lines.append("")
        lines.append(f"{'band':<{w}}{'pivot[µm]':>9}  {'R_pol [1/sr]':>12}{'R [1/sr]':>12}{'P = R_pol/R':>13}")
        degree = o.degree_of_polarisation
        for i, band in enumerate(o.bands):
            lines.append(f"{band:<{w}}{o.pivot[i]:9.4f}  {o.polarised_flux_ratio[i]:12.4e}{o.flux_ratio[i]:12.4e}"
                         f"{degree[i]:+13.4f}")
        lines.append("(polarised intensity from -S12 = (|S1|^2 - |S2|^2)/2, integrated like R; P: degree of "
                     "linear polarisation, > 0 perpendicular to the scattering plane, < 0 parallel)")
    if result.blowout is not None:
        lines.append("")
        lines.append(result.blowout.message)
    lines.append("")
    lines.extend(f"Note: {n}" for n in result.notes)
    return "\n".join(lines)


def write_mixture_outputs(result: MixtureOptics, folder, stem: str = "optics", figures: bool = True,
                          formats=None) -> list[Path]:
    """Write the per-band table (ECSV) and the figures (each in every one of ``formats``, default PNG);
    return the paths."""
    from .colours_figure import scattering_angles_text
    from .figure_files import figure_paths
    from .optics_figures import plot_efficiencies, plot_reflectance

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    table_path = folder / f"{stem}_bands.ecsv"
    with atomic_write(table_path) as tmp:
        result.to_table().write(tmp, format="ascii.ecsv", overwrite=True)
    out.append(table_path)
    if figures:
        p = result.parameters
        title = ", ".join(f"{n} {f:.2g}" for n, f in zip(result.description.material_names, p.fractions)) \
            + f"; porosity {p.porosity:.2g}; a = {p.a_min:g}–{p.a_max:g} µm, q = {p.q:g}"
        angles = scattering_angles_text(tuple(getattr(getattr(result.description, "geometry", None),
                                                      "angles_deg", ()) or ()))
        mie_note = f"Mie spheres, {angles}; real grains are not Mie spheres."
        plot_reflectance(folder / f"{stem}_reflectance.png", result.spectrum_wavelength,
                         result.spectrum_flux_ratio, result.bands, result.optics.flux_ratio,
                         title + "\n" + angles, notes=(mie_note,), formats=formats)
        out += figure_paths(folder / f"{stem}_reflectance.png", formats)
        plot_efficiencies(folder / f"{stem}_efficiencies.png", result.radius, result.q_ext,
                          result.q_sca, result.optics.pivot, list(result.optics.bands),
                          title, p.a_min, p.a_max, formats=formats)
        out += figure_paths(folder / f"{stem}_efficiencies.png", formats)
        if result.optics.polarised_flux_ratio is not None and result.spectrum_polarised_ratio is not None:
            from .optics_figures import plot_polarisation

            plot_polarisation(folder / f"{stem}_polarisation.png", result.spectrum_wavelength,
                              result.spectrum_flux_ratio, result.spectrum_polarised_ratio,
                              result.bands, result.optics.flux_ratio,
                              result.optics.polarised_flux_ratio, title + "\n" + angles,
                              notes=(mie_note,), formats=formats)
            out += figure_paths(folder / f"{stem}_polarisation.png", formats)
    return out
