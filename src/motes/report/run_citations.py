"""What to cite for a classification, a fit or a grid: gathered from the result.

Each function reads what the run used from its result (the template sets and
bands of a classification; the materials, mixing rule, phase function,
sampler and bands of a fit or a grid) and hands it to
:func:`motes.citations.run_references`, which holds the references
themselves. :func:`format_citations` gives the lines the command line prints;
the report page (:mod:`motes.report.html_page`) shows the same list.
"""

from __future__ import annotations

from pathlib import Path

from ..citations import Reference, format_references, run_references

__all__ = ["classification_citations", "fit_citations", "grid_citations", "format_citations"]


def format_citations(refs) -> str:
    """The references as the block of text the command line prints."""
    return "\n".join(format_references(refs))


def _band_triple(band) -> tuple[str, str, str]:
    return band.name, band.system, band.source


def _bands_by_name(names) -> list[tuple[str, str, str]]:
    """(name, system, source) of standard bands by identifier; unknown names keep only their name."""
    from ..errors import MotesError
    from ..photometry.bands import get_band

    out = []
    for name in names:
        try:
            out.append(_band_triple(get_band(name)))
        except (MotesError, LookupError, ValueError):
            out.append((name, "", ""))
    return out


def classification_citations(result, *, evolution=None) -> tuple[Reference, ...]:
    """What to cite for a :class:`~motes.companion.Classification`.

    Parameters
    ----------
    result : Classification
    evolution : str or os.PathLike, optional
        The evolutionary-model table given with ``--evolution``.

    Returns
    -------
    tuple of Reference
    """
    settings = result.settings
    kinds = {r.kind for r in result.rankings}
    sequence = None
    if "sequence" in kinds:
        user_file = getattr(settings, "sequence_file", None)
        sequence = str(user_file) if user_file else "built-in"
    user = [f"spectral library ranked as '{r.source}'" for r in result.rankings if r.kind == "library"]
    user = list(dict.fromkeys(user))
    if evolution is not None:
        user.append(f"evolutionary-model table {evolution}")
    bands = []
    if result.photometry is not None:
        bands = [_band_triple(row.band) for row in result.photometry.rows]
    observed = {b[0] for b in bands}
    mapped = sorted({t for r in result.rankings for t in r.template_bands if t and t not in observed})
    bands += _bands_by_name(mapped)
    law = settings.extinction_law if settings is not None and settings.extinction else None
    prior = getattr(settings, "type_prior", None)
    prior = getattr(prior, "name", prior) if sequence else None
    boundness = getattr(result, "boundness", None)
    line_of_sight = None
    if boundness is not None:      # its background reading is reddened with the classification's law
        line_of_sight = "galaxy" if "Juri" in str(getattr(boundness, "prior", "")) else "uniform"
        law = law or getattr(settings, "extinction_law", None)
    return run_references(sequence=sequence, type_prior=prior, boundness_prior=line_of_sight,
                          bayes_factors=boundness is not None, bands=bands, vega=result.photometry is not None,
                          extinction_law=law, user_data=user)


def _description_references(description, sampler=None, bands=(), user=()) -> tuple[Reference, ...]:
    materials = [(m.name, m.provenance, m.path) for m in description.materials]
    return run_references(materials=materials, mixing=description.mixing, mie=True,
                          phase=description.geometry.phase, sampler=sampler, bayes_factors=sampler is not None,
                          bands=bands, user_data=user)


def _star_data(description) -> list[str]:
    if description.star.spectrum is not None:
        return ["the stellar spectrum given in [star]"]
    return []


def fit_citations(result, spec=None) -> tuple[Reference, ...]:
    """What to cite for a :class:`~motes.dust.fit.results.FitResult`.

    Parameters
    ----------
    result : FitResult
    spec : FitSpec, optional
        The fit description; default: read again from ``result.source``.
        When it cannot be read, the list names the materials without their
        references and says so.
    """
    bands = [_band_triple(b) for b in result.observations.bands]
    if spec is None:
        spec = _read(result.source, "fit")
    if spec is None:
        names = sorted({m for model in result.models for m in model.materials})
        return run_references(mie=True, sampler={}, bands=bands,
                              user_data=[f"optical constants of {n} (the description {result.source} could not "
                                         "be read again to name their source)" for n in names])
    sampler = {"kind": spec.sampler.kind, "bound": spec.sampler.bound, "sample": spec.sampler.sample}
    return _description_references(spec.description, sampler, bands, _star_data(spec.description))


def grid_citations(summary) -> tuple[Reference, ...]:
    """What to cite for a :class:`~motes.dust.grid.summary.GridSummary`.

    The grid description is parsed again from the text the store's manifest
    keeps (relative paths resolved beside the description's original place);
    when its files cannot be found any more, the materials are named without
    their references.
    """
    from ..dust.grid.store import GridStore

    manifest = GridStore.open(summary.store).manifest
    # store keys of polarised-intensity rows are "<band>_polarised" (motes.dust.observations.row_keys)
    bands = _bands_by_name(dict.fromkeys(b.removesuffix("_polarised") if p == "polarised" else b
                                         for b, p in zip(summary.bands, manifest.get("observations", {}).get(
                                             "intensity", ["total"] * len(summary.bands)))))
    spec = None
    source = manifest.get("source", "<string>")
    if manifest.get("description"):
        from ..dust.grid.spec import parse_grid_description
        from ..errors import MotesError

        base = Path(source).parent if source != "<string>" else Path(".")
        try:
            spec = parse_grid_description(manifest["description"], base_dir=base, source=source)
        except (MotesError, OSError, ValueError):
            spec = None
    if spec is None:
        return run_references(mie=True, bands=bands,
                              user_data=[f"optical constants of {n} (the grid description's files could not be "
                                         "read again to name their source)" for n in summary.materials])
    custom = spec.description.custom_bands or {}     # user bands by their own definition (top-hat, curve file)
    bands = [_band_triple(custom[name]) if name in custom else triple
             for name, triple in zip((t[0] for t in bands), bands)]
    return _description_references(spec.description, None, bands, _star_data(spec.description))


def _read(source, kind):
    from ..errors import MotesError

    if not source or source == "<string>" or not Path(source).is_file():
        return None
    try:
        if kind == "fit":
            from ..dust.fit.spec import read_fit_description

            return read_fit_description(source)
    except (MotesError, OSError, ValueError):
        return None
    return None
