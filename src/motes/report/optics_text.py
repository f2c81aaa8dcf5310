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
    lines = [result.model_summary,
             "mixture: " + ", ".join(f"{n} {f:.3g}" for n, f in zip(mats, p.fractions))
             + f"; porosity {p.porosity:.3g}; sizes {p.a_min:g}-{p.a_max:g} um, q = {p.q:g}",
             f"mixture density: {o.density:.4g} g cm^-3" if np.isfinite(o.density)
             else "mixture density: unknown (a material has no bulk density)",
             "",
             f"{'band':<14}{'pivot um':>9}  {'m_eff (n + ik)':<22}{'R [1/sr]':>11}"
             f"{'colour':>9}{'albedo':>8}{'g':>7}{'Q_ext':>7}"]
    colours = result.colours
    for i, band in enumerate(o.bands):
        m = o.m_pivot[i]
        lines.append(f"{band:<14}{o.pivot[i]:9.4f}  {m.real:7.4f} + {m.imag:9.3e}i   {o.flux_ratio[i]:11.4e}"
                     f"{colours[i]:9.4f}{o.albedo[i]:8.4f}{o.g[i]:7.3f}{o.q_ext[i]:7.3f}")
    lines.append(f"(R: disk/star flux ratio per unit total grain cross-section; colour: mag relative to {ref}; "
                 "albedo and g: cross-section weighted, band averaged; exact Mie path)")
    if result.blowout is not None:
        lines.append("")
        lines.append(result.blowout.message)
    lines.append("")
    lines.extend(f"Note: {n}" for n in result.notes)
    return "\n".join(lines)


def write_mixture_outputs(result: MixtureOptics, folder, stem: str = "optics", figures: bool = True) -> list[Path]:
    """Write the per-band table (ECSV) and the two figures; return the paths."""
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
            + f"; porosity {p.porosity:.2g}; a = {p.a_min:g}-{p.a_max:g} um, q = {p.q:g}"
        out.append(plot_reflectance(folder / f"{stem}_reflectance.png", result.spectrum_wavelength,
                                    result.spectrum_flux_ratio, result.bands, result.optics.flux_ratio, title,
                                    notes=("Mie spheres at the stated scattering angles; real grains are not "
                                           "Mie spheres.",)))
        out.append(plot_efficiencies(folder / f"{stem}_efficiencies.png", result.radius, result.q_ext,
                                     result.q_sca, result.optics.pivot, list(result.optics.bands),
                                     title, p.a_min, p.a_max))
    return out
