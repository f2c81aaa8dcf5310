"""``motes classify``: rank spectral types of a companion from its photometry."""

from __future__ import annotations

import argparse

from .figure_options import add_figure_formats_option, figure_formats

__all__ = ["register"]

_EPILOG = """\
examples:
  motes classify companion_target.toml
        distance-known and colours-only rankings against the built-in dwarf sequence
  motes classify companion_target.toml --fit colours --output run1/
        colours only (ignore the parallax), results into run1/
  motes classify target.toml --treat-as NIRC2.Kp=2mass_ks --treat-as NIRC2.J=2mass_j
        compare instrument bands with the sequence's standard bands (said in the output)
  motes classify target.toml --library my_spectra/ --fit-extinction
        also rank a folder of labelled spectra; marginalise A_V (uniform 0-5 mag)
  motes classify target.toml --evolution models.csv --age "0.1:0.02 Gyr"
        also the mass (Teff, L) at that age from your evolutionary-model table
  motes classify target.toml --separation 1.2 --source-density 450 --cmd 2mass_h-2mass_ks:2mass_ks
        is it bound? prior odds from the separation and the source counts; an extra CMD
  motes classify target.toml --settings classify.toml
        settings from the [classify] table of a TOML file (flags override it)

outputs (in --output, default ./<target>_classify): <target>_classification.ecsv (all
ranked rows, summary in the header), <target>_classification_sed.png (measured SED with
the three best templates), <target>_classification_types.png (probability vs type),
<target>_classification_estimates.ecsv (numeric estimates: type median, HDI, peaks, Teff,
mass, distance, fit p-value), <target>_classification_report.txt (the printed report),
<target>_classification_report.html (one self-contained page: inputs, results, tables,
figures, caveats, what to cite, versions).
With the host's distance: <target>_classification_boundness.ecsv (photometric boundness test:
Bayes factor at the host's distance vs anywhere on the line of sight, prior odds, P(bound), both
readings) and <target>_classification_cmd_<b1>-<b2>_<b3>.png (colour-magnitude diagram).
The target file format is described in docs/photometry.md; the method, the modes and the
spectral-library folder convention in docs/companion.md.
"""


def _pair(text: str) -> tuple[str, str]:
    observed, sep, standard = text.partition("=")
    if not sep or not observed.strip() or not standard.strip():
        raise argparse.ArgumentTypeError(f"expected OBSERVED=STANDARD, e.g. NIRC2.Kp=2mass_ks, got {text!r}")
    return observed.strip(), standard.strip()


def _mode(text: str) -> str:
    """``--fit`` word; both spellings of the trade, "colours" and "colors", mean the same."""
    return "colours" if text.lower() == "colors" else text.lower()


def _range(text: str) -> tuple[str, str]:
    lo, sep, hi = text.partition("-")
    if not sep:
        lo, sep, hi = text.partition(":")
    if not sep or not lo.strip() or not hi.strip():
        raise argparse.ArgumentTypeError(f"expected FIRST-LAST, e.g. M0-T9, got {text!r}")
    return lo.strip(), hi.strip()


def _age(text: str) -> tuple[float, float]:
    """``"0.1:0.02 Gyr"`` -> (0.1, 0.02) in Gyr."""
    import re

    import astropy.units as u

    match = re.fullmatch(r"\s*([0-9.eE+-]+)\s*:\s*([0-9.eE+-]+)\s*([A-Za-z]+)\s*", text)
    try:
        scale = u.Unit(match.group(3)).to(u.Gyr) if match else None
        age, error = float(match.group(1)) * scale, float(match.group(2)) * scale
    except (AttributeError, TypeError, ValueError, u.UnitsError):
        raise argparse.ArgumentTypeError(f"expected AGE:ERROR UNIT, e.g. '0.1:0.02 Gyr' or '40:10 Myr', "
                                         f"got {text!r}") from None
    return age, error


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "classify",
        help="rank spectral types (and Teff) of a companion from its photometry",
        description=(
            "Calibrate a target's photometry (as `motes photometry` does) and rank spectral types "
            "against the built-in mean dwarf sequence (G0-Y4; Y rows in MKO J/K), optionally a folder of "
            "labelled spectra, "
            "and blackbodies as a fallback for bands nothing else covers. Each template is fitted with "
            "one magnitude offset shared by all bands: with the host's distance known the offset has a "
            "Gaussian prior of the distance-modulus error (plus the templates' luminosity scatter); in "
            "the colours-only mode it is free. Upper limits enter through the probability of a "
            "non-detection, never as detections. Prints the ranked tables, a continuous type estimate "
            "with its 68% interval, Teff and mass, a check of the colours-only distance against the "
            "host's, flags and caveats; writes an ECSV table and two figures."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("target", metavar="TARGET", help="target description (TOML) with its photometry table")
    p.add_argument("--fit", choices=("auto", "distance", "colours", "both"), default=None, type=_mode,
                   help="distance: use the host distance; colours (or colors): offset free; both; auto "
                        "(default) = both when a distance is known, else colours")
    p.add_argument("--library", metavar="DIR", help="folder of labelled spectra to rank as well")
    p.add_argument("--treat-as", metavar="OBS=STD", action="append", type=_pair, default=None,
                   help="compare observed band OBS with the sequence's standard band STD (repeatable); "
                        "never done implicitly")
    p.add_argument("--fit-extinction", metavar="AV_MAX", nargs="?", type=float, const=5.0, default=None,
                   help="marginalise A_V with a uniform prior on [0, AV_MAX] mag (default 5)")
    p.add_argument("--extinction-law", metavar="LAW", default=None,
                   help="dust_extinction law for --fit-extinction (default G23)")
    p.add_argument("--template-scatter", metavar="MAG", type=float, default=None,
                   help="per-band intrinsic scatter of the templates (default 0.10 mag; in the colours-only "
                        "mode the dwarf sequence's scatter is marginalised over colour_scatter_range, "
                        "0.02-0.30 mag, set in a --settings file, and this value gives its chi2)")
    p.add_argument("--luminosity-scatter", metavar="MAG", type=float, default=None,
                   help="shared absolute-magnitude scatter at fixed type (default 0.30 mag)")
    p.add_argument("--types", metavar="FIRST-LAST", type=_range, default=None,
                   help="restrict the dwarf sequence, e.g. M0-T9 (default: all of G0-Y4)")
    p.add_argument("--type-prior", metavar="PRIOR", default=None,
                   help="prior over the sequence's types: field (default: space density of nearby dwarfs per "
                        "subtype), flat, or knots TYPE=WEIGHT,... e.g. 'M0=1,L0=0.3,T8=0.3' (linear between, "
                        "zero outside); the flat-prior result is printed beside it")
    p.add_argument("--type-prior-modes", metavar="MODES", default=None,
                   help="modes the type prior enters: colours (default), distance, or colours,distance")
    p.add_argument("--blackbody", choices=("auto", "always", "never"), default=None,
                   help="blackbody templates: auto (default) when some band is used by nothing else")
    p.add_argument("--bb-radius", metavar="RJUP", type=float, default=None,
                   help="radius for blackbodies [R_Jup]: gives them an absolute scale")
    p.add_argument("--evolution", metavar="FILE",
                   help="evolutionary-model table (CSV/ECSV: age, mass, Teff, log L, absolute magnitudes): "
                        "also print the mass at the age given by --age (docs/companion.md)")
    p.add_argument("--age", metavar="AGE:ERROR UNIT", type=_age, default=None,
                   help="the system's age and 1-sigma for --evolution, e.g. '0.1:0.02 Gyr' or '40:10 Myr'")
    p.add_argument("--seed", metavar="N", type=int, default=None,
                   help="seed of the Monte Carlo of --evolution (default: a fixed seed, reproducible)")
    p.add_argument("--settings", metavar="FILE", help="TOML file with a [classify] table of settings")
    p.add_argument("--separation", metavar="ARCSEC", type=float, default=None,
                   help="companion-host separation [arcsec]: gives the prior odds and P(bound) of the "
                        "photometric boundness test")
    p.add_argument("--source-density", metavar="PER_DEG2", type=float, default=None,
                   help="sources per deg^2 at least as bright as the companion around the host (default: the "
                        "built-in counts model)")
    p.add_argument("--galactic", metavar="L,B", type=_galactic, default=None,
                   help="Galactic longitude and latitude of the host [deg] (default: from ra_deg/dec_deg of the "
                        "target's [host])")
    p.add_argument("--distance-prior", choices=("auto", "galaxy", "uniform"), default=None,
                   help="line-of-sight prior of the background reading (default auto: galaxy with coordinates, "
                        "else uniform in volume)")
    p.add_argument("--distance-limit", metavar="PC", type=float, default=None,
                   help="far end of the line-of-sight prior [pc] (default 30000 galaxy, 1000 uniform)")
    p.add_argument("--no-boundness", action="store_true", help="skip the photometric boundness test")
    p.add_argument("--cmd", metavar="B1-B2:B3", type=_cmd, action="append", default=None,
                   help="colour-magnitude diagram of B1 - B2 against M_B3 (repeatable; default J-Ks against J, "
                        "e.g. 2mass_j-2mass_ks:2mass_j)")
    p.add_argument("--output", "-o", metavar="DIR", default=None,
                   help="folder for the table and figures (default: ./<target stem>_classify)")
    p.add_argument("--csv", action="store_true", help="also write the ranking as CSV")
    p.add_argument("--no-figures", action="store_true", help="do not draw the figures")
    add_figure_formats_option(p)
    p.add_argument("--top", metavar="N", type=int, default=8, help="rows printed per ranking (default 8)")
    p.add_argument("--cache", metavar="DIR", default=None,
                   help="cache folder for synthetic library magnitudes (default: $MOTES_CACHE_DIR, else "
                        "$XDG_CACHE_HOME/motes, else ~/.cache/motes); 'none' keeps it in memory")
    p.set_defaults(func=_run_restoring_stdout)


def _galactic(text: str) -> tuple[float, float]:
    try:
        l_deg, b_deg = (float(v) for v in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected L,B in degrees, e.g. 120.5,-32.1, got {text!r}") from None
    return l_deg, b_deg


def _cmd(text: str) -> tuple[str, str, str]:
    colour, sep, mag = text.partition(":")
    first, dash, second = colour.partition("-")
    if not (sep and dash and first.strip() and second.strip() and mag.strip()):
        raise argparse.ArgumentTypeError(f"expected B1-B2:B3, e.g. 2mass_j-2mass_ks:2mass_j, got {text!r}")
    return first.strip(), second.strip(), mag.strip()


def _boundness_settings(args, target):
    """BoundnessSettings from --settings' [boundness] table, the flags and the host's coordinates."""
    import tomllib

    from ..companion import BoundnessSettings
    from ..errors import InputError

    doc = {}
    if args.settings:
        from pathlib import Path

        try:
            doc = dict(tomllib.loads(Path(args.settings).read_text(encoding="utf-8")).get("boundness", {}))
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
            raise InputError(f"cannot read settings: {exc}", args.settings) from None
    if args.separation is not None:
        doc.pop("separation_mas", None)
        doc["separation_arcsec"] = args.separation
    if args.source_density is not None:
        doc.pop("source_density_arcsec2", None)
        doc["source_density_deg2"] = args.source_density
    if args.distance_prior is not None:
        doc["distance_prior"] = args.distance_prior
    if args.distance_limit is not None:
        doc["distance_limit_pc"] = args.distance_limit
    if args.galactic is not None:
        doc["galactic_l_deg"], doc["galactic_b_deg"] = args.galactic
    return BoundnessSettings.from_mapping(doc, args.settings if args.settings else None, target)


def _check_cmd_bands(args, result) -> None:
    """Refuse --cmd bands that are not detected sequence bands, before anything is written."""
    from ..companion.sequence import SEQUENCE_BANDS
    from ..errors import InputError

    if not args.cmd:
        return
    if not __import__("math").isfinite(result.photometry.distance_modulus):
        raise InputError("--cmd needs the host's distance (a colour-magnitude diagram is in absolute magnitudes)")
    mapping = dict(result.settings.band_map)
    detected = {}
    for r in result.photometry.rows:
        if not r.is_limit:
            detected[r.band.name] = mapping.get(r.band.name, r.band.name)
            detected.setdefault(mapping.get(r.band.name, r.band.name), mapping.get(r.band.name, r.band.name))
    for bands in args.cmd:
        for name in bands:
            if detected.get(name) not in SEQUENCE_BANDS:
                raise InputError(f"--cmd band {name!r} must be a detected band that the dwarf sequence tabulates "
                                 f"({', '.join(SEQUENCE_BANDS)}); detected: "
                                 f"{', '.join(r.band.name for r in result.photometry.rows if not r.is_limit)}")
        if bands[0] == bands[1]:
            raise InputError(f"--cmd colour needs two different bands, got {bands[0]!r} twice")


def _settings(args):
    from ..companion import ClassifySettings

    base = {}
    if args.settings:
        base = {f: getattr(ClassifySettings.from_toml(args.settings), f)
                for f in ClassifySettings.__dataclass_fields__}
    overrides = {
        "mode": args.fit,
        "band_map": tuple(args.treat_as) if args.treat_as else None,
        "template_scatter": args.template_scatter,
        "luminosity_scatter": args.luminosity_scatter,
        "type_range": args.types,
        "type_prior": args.type_prior,
        "type_prior_modes": (tuple(m.strip() for m in args.type_prior_modes.split(","))
                             if args.type_prior_modes else None),
        "blackbody": args.blackbody,
        "blackbody_radius_rjup": args.bb_radius,
        "extinction_law": args.extinction_law,
    }
    if args.fit_extinction is not None:
        overrides.update(extinction=True, av_max=args.fit_extinction)
    merged = {**base, **{k: v for k, v in overrides.items() if v is not None}}
    return ClassifySettings(**merged)


def _evolution(args, target):
    """The evolutionary table of --evolution (None without it); --age must come with it."""
    from ..errors import InputError

    if (args.evolution is None) != (args.age is None):
        raise InputError("--evolution and --age go together: a mass at an age needs both a model table and an age")
    if args.evolution is None:
        return None
    from ..companion import read_evolution_table

    return read_evolution_table(args.evolution, target.bands)


def _run_restoring_stdout(args) -> int:
    """:func:`_run`, with sys.stdout restored even when it stops with an error mid-report."""
    import sys

    stdout = sys.stdout
    try:
        return _run(args)
    finally:
        sys.stdout = stdout


def _run(args) -> int:
    from ..companion import classify, read_library
    from ..errors import InputError
    from ..photometry import calibrate, read_target
    from ..report.companion_text import format_classification, write_classification

    if args.top < 1:
        raise InputError(f"--top must be at least 1, got {args.top}")
    settings = _settings(args)
    target = read_target(args.target)
    photometry = calibrate(target)
    evolution = _evolution(args, target)
    library = None
    if args.library:
        cache = "default" if args.cache is None else (None if args.cache.lower() == "none" else args.cache)
        library = read_library(args.library, cache_dir=cache)
    result = classify(photometry, settings, library=library)
    import math

    if not args.no_boundness and math.isfinite(photometry.distance_modulus) and settings.mode != "colours":
        from ..companion import with_boundness

        result = with_boundness(result, _boundness_settings(args, target))
    _check_cmd_bands(args, result)
    masses = None
    if evolution is not None:   # before anything is printed or written
        import numpy as np

        from ..companion import masses_at_age
        from ..companion.evolution import MONTE_CARLO_SEED

        rng = np.random.default_rng(MONTE_CARLO_SEED if args.seed is None else args.seed)
        masses = masses_at_age(evolution, photometry, *args.age, rng)
    import contextlib
    import io
    import sys

    printed = io.StringIO()   # everything printed from here on is saved as <stem>_report.txt
    tee = contextlib.redirect_stdout(_Tee(sys.stdout, printed))
    tee.__enter__()
    print(format_classification(result, top=args.top))
    print()
    if masses is not None:
        from ..report.motion_text import format_masses_at_age

        print(format_masses_at_age(masses))
        print()
    from ..files import default_output_folder

    folder = args.output or default_output_folder(args.target, "classify")
    paths = write_classification(result, folder, csv=args.csv)
    if not args.no_figures:
        from ..report.companion_figures import write_companion_figures

        paths += write_companion_figures(result, folder, formats=figure_formats(args))
        if math.isfinite(photometry.distance_modulus) and settings.mode != "colours":
            import os

            from ..report.companion_figures import default_cmd_bands, plot_colour_magnitude
            from ..report.companion_text import classification_file_stem

            for bands in (args.cmd or [default_cmd_bands(result)]):
                if bands is not None:
                    name = f"{classification_file_stem(result.target)}_cmd_{'-'.join(bands[:2])}_{bands[2]}.png"
                    from ..report.figure_files import figure_paths

                    cmd_path = os.path.join(folder, name)
                    plot_colour_magnitude(result, cmd_path, bands=bands, formats=figure_formats(args))
                    paths += figure_paths(cmd_path, figure_formats(args))
    from ..report.html_page import write_classification_page
    from ..report.run_citations import classification_citations, format_citations

    references = classification_citations(result, evolution=args.evolution)
    print(format_citations(references) + "\n")
    tee.__exit__(None, None, None)
    from ..report.companion_text import write_classification_report

    paths.append(write_classification_report(printed.getvalue(), result, folder))
    paths.append(write_classification_page(result, folder, files=paths, references=references, options=vars(args),
                                           top=args.top, printed=printed.getvalue()))
    for path in paths:
        print(f"wrote {path}")
    return 0


class _Tee:
    """A text stream writing to several streams (the terminal and the saved report)."""

    def __init__(self, *streams):
        self.streams = streams

    def write(self, text):
        for stream in self.streams:
            stream.write(text)
        return len(text)

    def flush(self):
        for stream in self.streams:
            stream.flush()
