"""``motes materials``: list bundled and user materials, show one, check a file."""

from __future__ import annotations

import argparse

__all__ = ["register"]

_EPILOG = """\
examples:
  motes materials                                  every bundled and user material
  motes materials show water_ice_crystalline       full provenance of one material
  motes materials show iron --plot iron.png        ... and plot its n and k
  motes materials check my_silicate.dat            validate a file, list every problem
  motes materials check tholin.txt --wavelength-unit cm-1 --plot tholin.png
  motes materials check film.dat --columns "eps1 eps2"

User materials: put n,k files (*.dat or *.txt) in folders listed in the
environment variable MOTES_MATERIALS_PATH (separated by ':' on Linux/macOS,
';' on Windows); they are found by file name (without suffix) and take
precedence over bundled files of the same name. File format: docs/materials.md.
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "materials",
        help="list optical-constant files (bundled and your own) and check new ones",
        description=(
            "List the materials motes can use in dust models, with their wavelength range, "
            "bulk density and where the data come from; show one material's full provenance; "
            "or check an n,k (or eps1,eps2) file for problems and plot n and k. Without a "
            "subcommand, lists the materials."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.set_defaults(func=_run_list)
    sub = p.add_subparsers(dest="materials_command", metavar="SUBCOMMAND")

    ls = sub.add_parser("list", help="list bundled and user materials (the default)",
                        description="List bundled and user materials with range, density and source.")
    ls.set_defaults(func=_run_list)

    show = sub.add_parser(
        "show", help="show one material in full",
        description="Print a material's range, sampling, density and full provenance header.",
        epilog="example: motes materials show methane_ice --plot ch4.png",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    show.add_argument("name", help="material name (see `motes materials`) or a file path")
    show.add_argument("--plot", metavar="FILE", help="save a plot of n and k (PNG, PDF, ...)")
    show.set_defaults(func=_run_show)

    check = sub.add_parser(
        "check", help="validate an n,k file and report its range and problems",
        description=(
            "Read FILE as motes would, list every problem found (with line numbers), the "
            "covered wavelength range and advice on missing header entries. Exit status 2 "
            "when the file cannot be used."),
        epilog=("examples:\n  motes materials check my_silicate.dat\n"
                "  motes materials check data.txt --wavelength-unit eV --plot nk.png"),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    check.add_argument("file", help="the n,k (or eps1,eps2) text file")
    check.add_argument("--wavelength-unit", metavar="UNIT",
                       help="unit of the first column if the file has no 'wavelength_unit' header: "
                            "um, nm, angstrom, cm-1 or eV (default um)")
    check.add_argument("--columns", metavar="KIND",
                       help="'n k' or 'eps1 eps2' if the file has no 'columns' header (default 'n k')")
    check.add_argument("--plot", metavar="FILE", help="save a plot of n and k (PNG, PDF, ...)")
    check.set_defaults(func=_run_check)


def _short_source(provenance: str) -> str:
    """'material - citation' from a provenance text (reference start if no citation)."""
    fields = dict(line.split(": ", 1) for line in provenance.splitlines() if ": " in line)
    cite = fields.get("citation") or fields.get("reference") or fields.get("source") or ""
    text = " - ".join(t for t in (fields.get("material", ""), cite) if t) or "no provenance header"
    return text if len(text) <= 80 else text[:77] + "..."


def _run_list(args) -> int:
    import os

    from ..errors import OpticalConstantsError
    from ..optics.constants import (
        MATERIALS_PATH_VARIABLE,
        bundled_materials_folder,
        list_materials,
        read_optical_constants,
    )

    entries = list_materials()
    print(f"bundled materials: {bundled_materials_folder()}")
    user = os.environ.get(MATERIALS_PATH_VARIABLE, "")
    print(f"user folders ({MATERIALS_PATH_VARIABLE}): {user or 'none set'}")
    print()
    header = (f"{'name':24s} {'origin':8s} {'range [um]':>16s} {'points':>6s} {'density [g cm^-3]':>17s}"
              "  source")
    print(header)
    print("-" * len(header))
    for e in entries:
        origin = e.origin + ("*" if e.shadowed else "")
        try:
            m = read_optical_constants(e.path)
        except OpticalConstantsError as exc:
            reason = exc.reason.split(" (and ")[0]
            reason = reason if len(reason) <= 60 else reason[:57] + "..."
            where = f"{exc.where}: " if exc.where else ""
            print(f"{e.name:24s} {origin:8s} INVALID ({where}{reason}); see `motes materials check {e.path}`")
            continue
        lo, hi = m.wavelength_range
        dens = f"{m.density:.3g}" if m.density == m.density else "?"
        print(f"{e.name:24s} {origin:8s} {lo:7.3g} - {hi:6.3g} {m.wavelength.size:6d} {dens:>17s}  "
              f"{_short_source(m.provenance)}")
    if any(e.shadowed for e in entries):
        print("\n* hidden by a user file of the same name (user folders take precedence)")
    print("\ndensity in g/cm3. Fractions in motes are volume fractions of the solid; porosity is the "
          "vacuum fraction of the whole grain.")
    print("Astronomical silicates, refractory organics and most ices are not bundled: bring your own "
          "n,k files (docs/materials.md).")
    return 0


def _print_material(m) -> None:
    lo, hi = m.wavelength_range
    print(f"name:     {m.name}")
    print(f"file:     {m.path}")
    print(f"range:    {lo:.4g} - {hi:.4g} um, {m.wavelength.size} points")
    dens = f"{m.density:g} g/cm3" if m.density == m.density else "unknown"
    print(f"density:  {dens} ({m.density_source})")
    print(f"n:        {m.n.min():.4g} - {m.n.max():.4g}")
    kpos = m.k[m.k > 0]
    krange = f"{kpos.min():.3g} - {kpos.max():.3g}" if kpos.size else "all 0"
    zeros = int((m.k == 0).sum())
    print(f"k:        {krange}" + (f" ({zeros} points with k = 0)" if zeros and kpos.size else ""))
    if m.provenance:
        print("provenance:")
        for line in m.provenance.splitlines():
            print(f"  {line}")


def _run_show(args) -> int:
    from ..optics.constants import load_material

    m = load_material(args.name)
    _print_material(m)
    if args.plot:
        from ..report.materials_figures import plot_optical_constants

        print(f"plot written to {plot_optical_constants(m, args.plot)}")
    return 0


def _run_check(args) -> int:
    from ..errors import OpticalConstantsError
    from ..optics.constants import check_optical_constants

    material, problems, advice = check_optical_constants(
        args.file, wavelength_unit=args.wavelength_unit, columns=args.columns)
    if problems:
        print(f"{args.file}: {len(problems)} problem(s){' (first 20 shown)' if len(problems) >= 20 else ''}:")
        for p in problems:
            print(f"  {p}")
        raise OpticalConstantsError("file cannot be used as it is; fix the problems listed above",
                                    path=args.file)
    print(f"{args.file}: OK")
    _print_material(material)
    for a in advice:
        print(f"note: {a}")
    if args.plot:
        from ..report.materials_figures import plot_optical_constants

        print(f"plot written to {plot_optical_constants(material, args.plot)}")
    return 0
