"""What a paper must cite for one run: motes, and the data and methods the run used.

:func:`run_references` takes what a run used, as plain values (no motes
object: this module sits in the basement), and returns one
:class:`Reference` per thing to cite, in a fixed order: motes; the dwarf
sequence, the type prior and the boundness test's sources; the optical
constants, one per measurement; the effective-medium rule; the Mie solver and
the phase-function model; the nested sampler and its methods; the filter
curves and the Vega spectrum; the extinction law; the user's own data. The
report layer (:mod:`motes.report.run_citations`) gathers those values from a
result; the command line prints :func:`format_references` and the report page
shows the same list.

Where each reference text comes from is stated beside it:

* motes: ``CITATION.cff`` at the top of the repository (a test compares);
* the dwarf sequence: the ``CITE`` block of the sequence file's header
  (``motes/data/dwarf_sequence.txt``), read at run time;
* optical constants: the ``citation``/``reference``/``source``/``license``
  header lines of each material's file, read at run time;
* dynesty: the list its own ``dynesty.dynesty._get_citations`` builds
  (dynesty 3.1.0), copied here so that no private function is called;
* miepython: the citation its README asks for (miepython 3.3.0 metadata);
* dust_extinction: the citation its README asks for (version 1.7), and each
  law's paper as named in that law's docstring;
* the type prior, the boundness test, the Bruggeman rule, the Henyey-Greenstein
  phase function and the Vega spectrum: the references the motes module that
  uses them states (Maxwell Garnett 1904 is from memory);
* others are marked ``from memory`` where they are, and every printed list
  says that such references were written down without the paper at hand.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass
from importlib import metadata, resources
from pathlib import Path
from typing import Iterable, Mapping

from . import __version__

__all__ = [
    "Reference",
    "MOTES_CITATION",
    "run_references",
    "format_references",
    "software_versions",
    "sequence_citation",
    "material_citation",
]


@dataclass(frozen=True)
class Reference:
    """One thing a paper using the run should cite.

    Attributes
    ----------
    topic : str
        What was used, in words (``"dwarf sequence"``, ``"optical constants: iron"``).
    text : str
        The reference as it would go into a bibliography (authors, year, journal, volume, page).
    link : str
        DOI, ADS or web address, ``""`` if none is known.
    note : str
        Why it is cited, or a caveat (e.g. "from memory: check before publishing").
    """

    topic: str
    text: str
    link: str = ""
    note: str = ""

    def line(self) -> str:
        """The reference on one line: ``topic: text [link] (note)``."""
        out = f"{self.topic}: {self.text}"
        if self.link:
            out += f" [{self.link}]"
        if self.note:
            out += f" ({self.note})"
        return out


#: motes itself, as in CITATION.cff (title, authors, version, licence; tests/test_citations.py compares).
MOTES_CITATION = {
    "title": "motes: photometric typing of faint companions and Mie-scattering dust-mixture fits of "
             "debris-disk colours",
    "authors": "the motes developers",
    "version": __version__,
    "license": "BSD-3-Clause",
}

_FROM_MEMORY = "reference from memory: check before publishing"

# dynesty 3.1.0, dynesty/dynesty.py, _get_citations and the internal samplers' `citations`
_DYNESTY_CORE = (
    Reference("nested sampler", "Speagle 2020, MNRAS 493, 3132 (dynesty)",
              "https://ui.adsabs.harvard.edu/abs/2020MNRAS.493.3132S"),
    Reference("nested sampler", "Koposov et al. 2024, dynesty (software, Zenodo)",
              "https://doi.org/10.5281/zenodo.3348367"),
    Reference("nested sampling", "Skilling 2004, AIP Conf. Proc. 735, 395",
              "https://ui.adsabs.harvard.edu/abs/2004AIPC..735..395S"),
    Reference("nested sampling", "Skilling 2006, Bayesian Analysis 1, 833",
              "https://projecteuclid.org/euclid.ba/1340370944"),
)
_DYNESTY_DYNAMIC = (Reference("dynamic nested sampling", "Higson et al. 2019, Statistics and Computing 29, 891",
                              "https://doi.org/10.1007/s11222-018-9844-0"),)
_DYNESTY_BOUND = {
    "single": (Reference("bounding (single ellipsoid)", "Mukherjee, Parkinson & Liddle 2006, ApJ 638, L51",
                         "https://ui.adsabs.harvard.edu/abs/2006ApJ...638L..51M"),),
    "multi": (Reference("bounding (multiple ellipsoids)", "Feroz, Hobson & Bridges 2009, MNRAS 398, 1601",
                        "https://ui.adsabs.harvard.edu/abs/2009MNRAS.398.1601F"),),
    "balls": (Reference("bounding (balls)", "Buchner 2016, Statistics and Computing 26, 383",
                        "https://ui.adsabs.harvard.edu/abs/2014arXiv1407.5459B"),
              Reference("bounding (balls)", "Buchner 2019, PASP 131, 108005",
                        "https://ui.adsabs.harvard.edu/abs/2017arXiv170704476B")),
}
_DYNESTY_BOUND["cubes"] = tuple(Reference("bounding (cubes)", r.text, r.link) for r in _DYNESTY_BOUND["balls"])
_SLICE = (Reference("sampling (slices)", "Neal 2003, Annals of Statistics 31, 705",
                    "https://projecteuclid.org/euclid.aos/1056562461"),
          Reference("sampling (slices)", "Handley, Hobson & Lasenby 2015, MNRAS 450, L61",
                    "https://ui.adsabs.harvard.edu/abs/2015MNRAS.450L..61H"),
          Reference("sampling (slices)", "Handley, Hobson & Lasenby 2015, MNRAS 453, 4384",
                    "https://ui.adsabs.harvard.edu/abs/2015MNRAS.453.4384H"))
_DYNESTY_SAMPLE = {
    "rwalk": (Reference("sampling (random walk)", "Skilling 2006, Bayesian Analysis 1, 833",
                        "https://projecteuclid.org/euclid.ba/1340370944"),),
    "slice": _SLICE,
    "rslice": _SLICE,
}
# dynesty gives a name, a year and a link per reference; the journal, volume and page written out
# above are read from the ADS bibcode of the link, except Skilling 2006, Higson et al. 2019,
# Buchner 2016/2019 and Neal 2003, whose links carry none: those are from memory.

# dust_extinction 1.7: README ("Please cite Gordon 2024, JOSS, 9(100), 7023") and each law's docstring;
# G23's journal reference (its docstring says "in press") is the one motes.companion.extinction states.
_EXTINCTION_PACKAGE = Reference("extinction law (software)", "Gordon 2024, JOSS 9(100), 7023 (dust_extinction)",
                                "https://doi.org/10.21105/joss.07023")
_EXTINCTION_LAWS = {
    "G23": "Gordon et al. 2023, ApJ 950, 86",
    "F19": "Fitzpatrick, Massa, Gordon et al. 2019, ApJ 886, 108",
    "G16": "Gordon et al. 2016, ApJ 826, 104",
    "CCM89": "Cardelli, Clayton & Mathis 1989, ApJ 345, 245",
    "F99": "Fitzpatrick 1999, PASP 111, 63",
    "O94": "O'Donnell 1994, ApJ 422, 158",
}

_MIXING = {
    # stated in motes.optics.mixing
    "bruggeman": Reference("effective medium (Bruggeman rule)", "Bruggeman 1935, Annalen der Physik 416, 636"),
    # from memory
    "maxwell_garnett": Reference("effective medium (Maxwell Garnett rule)",
                                 "Maxwell Garnett 1904, Phil. Trans. R. Soc. Lond. A 203, 385",
                                 note=_FROM_MEMORY),
}
# stated in motes.dust.model.geometry
_HENYEY_GREENSTEIN = Reference("phase function (Henyey-Greenstein)", "Henyey & Greenstein 1941, ApJ 93, 70")

# miepython 3.3.0 README, "Citation"; Wiscombe 1980 as stated in motes.optics.mie
_MIE = (
    Reference("Mie solver", "Prahl, miepython: Pure python calculation of Mie scattering (software, Zenodo)",
              "https://doi.org/10.5281/zenodo.7949263"),
    Reference("Mie series truncation", "Wiscombe 1980, Applied Optics 19, 1505",
              note="the algorithm miepython implements"),
)
_BOHREN_HUFFMAN = Reference("Mie theory and amplitude conventions",
                            "Bohren & Huffman 1983, Absorption and Scattering of Light by Small Particles (Wiley)")

# stated in motes.companion.type_prior (the densities its "field" prior is built from)
_FIELD_TYPE_PRIOR = (
    Reference("type prior (space densities)", "Reylé et al. 2021, A&A 650, A201"),
    Reference("type prior (space densities)", "Mamajek 2016, \"Fraction of stars by spectral type in the solar "
              "vicinity\", figshare 3206527"),
    Reference("type prior (space densities)", "Cruz et al. 2007, AJ 133, 439"),
)

# stated in motes.companion.boundness (each marked "from memory" there)
_GALACTIC_MODEL = (
    Reference("line-of-sight prior (Galactic stellar density)", "Jurić et al. 2008, ApJ 673, 864", note=_FROM_MEMORY),
    Reference("line-of-sight prior (Sun's Galactocentric distance)", "Bland-Hawthorn & Gerhard 2016, ARA&A 54, 529",
              note=_FROM_MEMORY),
)
_DUST_LAYER = (
    Reference("reddening of the background reading (dust scale height)", "Marshall et al. 2006, A&A 453, 635",
              note=_FROM_MEMORY),
    Reference("reddening of the background reading (dust scale height)", "Drimmel & Spergel 2001, ApJ 556, 181",
              note=_FROM_MEMORY),
)
# stated in motes.dust.fit.evidence
_EVIDENCE_SCALE = Reference("reading of Bayes factors", "Kass & Raftery 1995, JASA 90, 773")

# stated in motes.photometry.bands
_VEGA = Reference("Vega spectrum", "Bohlin & Gilliland 2004, AJ 127, 3508 (CALSPEC alpha_lyr_stis_003)",
                  note="the spectrum every Vega zero point is computed from")
_PYPHOT = Reference("filter curves and Vega spectrum (software)", "Fouesneau, pyphot (software)",
                    "https://github.com/mfouesneau/pyphot", note="the library that carries the curves motes uses")

#: Reference of a photometric system's curves, by motes facility prefix (the part of a band
#: identifier before "_"). 2MASS: as in docs/GUIDE (Cohen, Wheaton & Megeath 2003); WISE: as
#: stated in motes.photometry.band_names (Wright et al. 2010); MKO: as stated there (Tokunaga,
#: Simons & Vacca 2002, from memory); the others from memory. Systems not listed (pyphot carries
#: no provenance per curve) get "cite the curves' original source" and the curve key.
_SYSTEMS = {
    "2mass": ("2MASS relative spectral responses", "Cohen, Wheaton & Megeath 2003, AJ 126, 1090", ""),
    "wise": ("WISE relative spectral responses", "Wright et al. 2010, AJ 140, 1868", ""),
    "mko": ("MKO near-infrared filters", "Tokunaga, Simons & Vacca 2002, PASP 114, 180", _FROM_MEMORY),
    "spitzer-irac": ("Spitzer/IRAC", "Fazio et al. 2004, ApJS 154, 10", _FROM_MEMORY),
    "gaia-dr2": ("Gaia DR2 passbands", "Evans et al. 2018, A&A 616, A4", _FROM_MEMORY),
    "gaia-dr2rev": ("Gaia DR2 passbands", "Evans et al. 2018, A&A 616, A4", _FROM_MEMORY),
    "bessell": ("Bessell UBVRI", "Bessell 1990, PASP 102, 1181", _FROM_MEMORY),
}


def software_versions() -> dict[str, str]:
    """Versions of motes, Python and the libraries a run may use (``"not installed"`` if absent).

    Read from the installed distributions' metadata: nothing is imported.

    Returns
    -------
    dict of str to str
    """
    import platform

    out = {"motes": __version__, "python": platform.python_version()}
    for name in ("numpy", "scipy", "astropy", "matplotlib", "dynesty", "miepython", "numba", "pyphot",
                 "dust_extinction", "pyarrow"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def sequence_citation(path=None) -> str | None:
    """The ``CITE`` block of a dwarf-sequence file's header, as one line (None when it has none).

    Parameters
    ----------
    path : str or os.PathLike, optional
        A sequence file; default the bundled ``motes/data/dwarf_sequence.txt``.
    """
    try:
        if path is None:
            text = (resources.files("motes.data") / "dwarf_sequence.txt").read_text(encoding="utf-8")
        else:
            text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return None
    lines, inside = [], False
    for raw in text.splitlines():
        if not raw.startswith("#"):
            break
        body = raw[1:].strip()
        if inside and (not body or (body.isupper() and not raw.startswith("#  "))):
            break
        if inside:
            lines.append(body)
        elif body == "CITE":
            inside = True
    return " ".join(lines) or None


def material_citation(name: str, provenance: str, path: str | None = None) -> Reference:
    """The reference of one material's optical constants, from its file's provenance lines.

    Parameters
    ----------
    name : str
        The material's label in the run.
    provenance : str
        ``key: value`` lines (as :attr:`motes.optics.material.Material.provenance`).
    path : str, optional
        File the constants were read from (named when the file gives no reference).
    """
    fields = {}
    for line in provenance.splitlines():
        key, sep, value = line.partition(":")
        if sep and key.strip() and key.strip() not in fields:
            fields[key.strip()] = value.strip()
    topic = f"optical constants: {name}"
    reference = fields.get("reference") or fields.get("citation")
    if not reference:
        where = f" ({path})" if path else ""
        return Reference(topic, f"your file{where} names no reference: cite the measurement it comes from")
    links = re.findall(r"\[(https?://[^\]\s]+)\]", reference)
    text = re.sub(r"\s*\[https?://[^\]]*\]", "", reference).strip()
    source = fields.get("source", "")
    via = "data via the refractiveindex.info database" if "refractiveindex.info" in source else (
        f"data via {source}" if source else "")
    licence = fields.get("license", "")
    licence = licence.split(" (")[0] if licence else ""
    note = "; ".join(n for n in (via, f"licence {licence}" if licence else "") if n)
    return Reference(topic, text, links[0] if links else "", note)


def _database_reference() -> Reference:
    return Reference("optical-constants database", "Polyanskiy 2024, Scientific Data 11, 94 "
                     "(refractiveindex.info database of optical constants)",
                     "https://refractiveindex.info", _FROM_MEMORY)


def _band_references(bands: list[tuple[str, str, str]], vega: bool) -> list[Reference]:
    groups: dict[str, list[tuple[str, str, str]]] = {}
    for band in bands:
        groups.setdefault(band[0].partition("_")[0].lower(), []).append(band)
    out = []
    for facility, members in groups.items():
        used = ", ".join(sorted(dict.fromkeys(n for n, _, _ in members)))
        if facility in _SYSTEMS:
            topic, text, note = _SYSTEMS[facility]
            out.append(Reference(f"filter curves: {topic} ({used})", text, note=note))
            continue
        system = members[0][1]
        kind = f"{system} " if system and not system.startswith("user") else "user band "
        sources = list(dict.fromkeys(src for _, _, src in members if src))
        keys = [re.search(r"curve '([^']+)'", src) for src in sources]
        if sources and all(keys):
            names = ", ".join(k.group(1) for k in keys)
            text = f"pyphot filter library, curve{'s' if len(keys) > 1 else ''} {names}"
            note = "cite the curves' original source"
        else:
            text = "; ".join(sources) or "no curve source recorded"
            note = "cite where its definition comes from"
        out.append(Reference(f"filter curves: {kind}({used})", text, note=note))
    if any("pyphot" in src for _, _, src in bands):
        out.append(Reference("filter curves and Vega spectrum (software)" if vega else "filter curves (software)",
                             _PYPHOT.text, _PYPHOT.link, _PYPHOT.note))
    return out


def run_references(*, sequence: str | None = None, type_prior: str | None = None,
                   boundness_prior: str | None = None, bayes_factors: bool = False,
                   materials: Iterable[tuple[str, str, str | None]] = (),
                   mixing: str | None = None, mie: bool = False, phase: str | None = None,
                   sampler: Mapping | None = None, bands: Iterable[tuple[str, str, str]] = (),
                   vega: bool = False, extinction_law: str | None = None,
                   user_data: Iterable[str] = ()) -> tuple[Reference, ...]:
    """Everything to cite for a run that used these.

    Parameters
    ----------
    sequence : str, optional
        ``"built-in"`` for the bundled dwarf sequence, else the path of the
        user's sequence file; None when no sequence was used.
    type_prior : str, optional
        Name of the spectral-type prior (``"field"`` is built from published
        space densities; ``"flat"`` and user knots cite nothing).
    boundness_prior : {"galaxy", "uniform"}, optional
        Line-of-sight prior of the photometric boundness test, when it ran
        (``"galaxy"`` cites the Galactic model; both cite the dust layer).
    bayes_factors : bool
        Bayes factors were read on the Kass & Raftery scale (fit, boundness).
    materials : iterable of (name, provenance, path)
        Each material's label, provenance lines and file.
    mixing : {"bruggeman", "maxwell_garnett"}, optional
        The effective-medium rule.
    mie : bool
        Mie efficiencies or phase functions were computed.
    phase : {"mie", "hg"}, optional
        The phase-function model.
    sampler : mapping, optional
        ``{"kind": "static" | "dynamic", "bound": ..., "sample": ...}`` of the nested sampler.
    bands : iterable of (name, system, source)
        Every band the run used (identifier, system, curve source).
    vega : bool
        Vega zero points were used.
    extinction_law : str, optional
        Name of the ``dust_extinction`` law used.
    user_data : iterable of str
        Descriptions of user-supplied data to cite (e.g. "spectral library folder lib/").

    Returns
    -------
    tuple of Reference
        motes first, then the data and methods in the order above; a reference
        needed twice (Skilling 2006 for nested sampling and random walks) is listed once.

    Examples
    --------
    >>> refs = run_references(extinction_law="G23")
    >>> for r in refs[1:]:
    ...     print(r.line())
    extinction law G23: Gordon et al. 2023, ApJ 950, 86
    extinction law (software): Gordon 2024, JOSS 9(100), 7023 (dust_extinction) [https://doi.org/10.21105/joss.07023]
    """
    refs = [Reference("motes", f"{MOTES_CITATION['authors']}, {MOTES_CITATION['title']}, "
                      f"version {MOTES_CITATION['version']} (software, {MOTES_CITATION['license']})",
                      note="see CITATION.cff")]
    if sequence == "built-in":
        refs.append(Reference("dwarf sequence", sequence_citation() or "Pecaut & Mamajek 2013, ApJS 208, 9",
                              "https://ui.adsabs.harvard.edu/abs/2013ApJS..208....9P"))
    elif sequence:
        cite = sequence_citation(sequence)
        refs.append(Reference("dwarf sequence", cite or f"your sequence file {sequence}: the file names nothing "
                                                        "to cite (no CITE section), cite its source"))
    if type_prior == "field":
        refs += _FIELD_TYPE_PRIOR
    if boundness_prior == "galaxy":
        refs += _GALACTIC_MODEL
    if boundness_prior:
        refs += _DUST_LAYER
    if bayes_factors:
        refs.append(_EVIDENCE_SCALE)
    via_database = False
    by_text: dict[str, list] = {}
    for name, provenance, path in materials:      # materials sharing one file are cited once, named together
        ref = material_citation(name, provenance, path)
        by_text.setdefault(ref.text, []).append((name, ref))
        via_database |= "refractiveindex.info" in (provenance or "")
    for group in by_text.values():
        ref = group[0][1]
        refs.append(dataclasses.replace(ref, topic="optical constants: " + ", ".join(n for n, _ in group)))
    if via_database:
        refs.append(_database_reference())
    if mixing in _MIXING:
        refs.append(_MIXING[mixing])
    if mie:
        refs += [*_MIE, _BOHREN_HUFFMAN]
    if phase == "hg":
        refs.append(_HENYEY_GREENSTEIN)
    if sampler is not None:
        refs += _DYNESTY_CORE
        if sampler.get("kind") == "dynamic":
            refs += _DYNESTY_DYNAMIC
        refs += _DYNESTY_BOUND.get(sampler.get("bound", ""), ())
        refs += _DYNESTY_SAMPLE.get(sampler.get("sample", ""), ())
    refs += _band_references(list(bands), vega)
    if vega:
        refs.append(_VEGA)
    if extinction_law:
        law = _EXTINCTION_LAWS.get(extinction_law)
        refs.append(Reference(f"extinction law {extinction_law}", law or f"the paper of law {extinction_law}"))
        refs.append(_EXTINCTION_PACKAGE)
    refs += [Reference("your data", text, note="cite where it comes from") for text in user_data]
    seen, out = set(), []
    for r in refs:
        if r.text not in seen:
            seen.add(r.text)
            out.append(r)
    return tuple(out)


def format_references(refs: Iterable[Reference]) -> list[str]:
    """The references as printed lines: a heading, then one ``- topic: text [link]`` line each."""
    refs = list(refs)
    lines = ["What to cite for this run:"]
    lines += [f"  - {r.line()}" for r in refs]
    if any(_FROM_MEMORY in r.note for r in refs):
        lines.append("  (references marked 'from memory' were written down without the paper at hand)")
    return lines
