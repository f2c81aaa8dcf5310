"""One self-contained HTML report page per run of ``classify``, ``fit`` and ``grid summarize``.

The page holds everything a reader of the run needs, in one file that opens
offline in any browser: the inputs, the verdicts with the rule that made them,
the tables, the figures (the PNG files the run wrote, embedded as base64
``data:`` addresses; SVG files inline; a figure saved as PDF alone by its PNG
copy kept in memory, never written), the caveats and notes, the complete
text the command printed, the files written, what to cite and the versions of
motes and its libraries. No script, font, style sheet or image is fetched from
anywhere: the styling is one ``<style>`` block of this module's own.

Every page has the same sections, in this order and with these ``id``
attributes (the tests parse the page and look for them): ``inputs``,
``results``, ``tables``, ``figures``, ``caveats``, ``output``, ``files``,
``cite``, ``versions``. A section with nothing to show says so.

The pages are written with :func:`motes.files.write_text_atomic`: a reader
never sees half a page.
"""

from __future__ import annotations

import base64
import dataclasses
import datetime
import html
import math
import re
from pathlib import Path
from typing import Iterable, Sequence

from ..citations import Reference, software_versions
from ..errors import InputError
from ..files import write_text_atomic
from .figure_files import page_preview

__all__ = [
    "SECTION_IDS",
    "PageTable",
    "render_page",
    "write_classification_page",
    "write_fit_page",
    "write_grid_page",
]

#: Section ids of every page, in page order (heading of each beside it).
SECTION_IDS = {
    "inputs": "Inputs",
    "results": "Results and verdicts",
    "tables": "Tables",
    "figures": "Figures",
    "caveats": "Caveats and notes",
    "output": "Printed output",
    "files": "Files written",
    "cite": "What to cite",
    "versions": "Versions",
}

_STYLE = """
:root { --ink: #1f2328; --muted: #5b6470; --rule: #d5d9de; --paper: #fcfcfa; --band: #f1f3f0;
        --accent: #7a3e1d; --good: #1e6b3a; --bad: #8c1d18; --open: #6b5a12; }
* { box-sizing: border-box; }
html { background: var(--paper); color: var(--ink); }
body { margin: 0 auto; max-width: 62rem; padding: 2rem 1.5rem 4rem;
       font: 16px/1.55 Georgia, "Times New Roman", serif; }
header { border-bottom: 3px double var(--accent); margin-bottom: 1.2rem; padding-bottom: .6rem; }
h1 { font-size: 1.65rem; margin: 0 0 .2rem; font-weight: normal; letter-spacing: .01em; }
.meta { color: var(--muted); font: .85rem/1.4 "DejaVu Sans", Verdana, sans-serif; margin: 0; }
nav { font: .85rem/1.6 "DejaVu Sans", Verdana, sans-serif; margin: 0 0 1.5rem; }
nav a { color: var(--accent); text-decoration: none; margin-right: 1.1rem; white-space: nowrap; }
nav a:hover { text-decoration: underline; }
section { margin: 2.2rem 0 0; }
h2 { font-size: 1.2rem; font-weight: normal; color: var(--accent); margin: 0 0 .7rem;
     padding-bottom: .15rem; border-bottom: 1px solid var(--rule); }
h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1.2rem; margin: 0; }
dl.facts dt { color: var(--muted); font: .88rem/1.55 "DejaVu Sans", Verdana, sans-serif; }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
table { border-collapse: collapse; margin: .3rem 0 1rem; font: .84rem/1.4 "DejaVu Sans Mono", Menlo, monospace; }
caption { text-align: left; font: italic .9rem/1.4 Georgia, serif; color: var(--muted); padding-bottom: .3rem; }
th, td { padding: .2rem .65rem; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
th { font-weight: bold; border-bottom: 2px solid var(--ink); }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
tbody tr:nth-child(even) { background: var(--band); }
.scroll { overflow-x: auto; }
.verdict { margin: .35rem 0; padding: .35rem .7rem; border-left: 4px solid var(--open); background: var(--band); }
.verdict .tag { font: bold .78rem/1 "DejaVu Sans", Verdana, sans-serif; text-transform: uppercase;
                letter-spacing: .05em; margin-right: .6rem; }
.verdict.good { border-color: var(--good); } .verdict.good .tag { color: var(--good); }
.verdict.bad { border-color: var(--bad); } .verdict.bad .tag { color: var(--bad); }
.verdict.open .tag { color: var(--open); }
.rule { color: var(--muted); font-size: .92rem; margin: .6rem 0 0; }
figure { margin: 0 0 1.6rem; }
figure img, figure svg { display: block; max-width: min(100%, 44rem); height: auto; border: 1px solid var(--rule);
                         background: #fff; }
figcaption { color: var(--muted); font-size: .9rem; }
pre { background: var(--band); border: 1px solid var(--rule); padding: .8rem 1rem; overflow-x: auto;
      font: .78rem/1.45 "DejaVu Sans Mono", Menlo, monospace; white-space: pre; }
ul.plain, ol.refs { padding-left: 1.3rem; } ol.refs li { margin-bottom: .35rem; }
.refs .topic { font: .85rem/1.4 "DejaVu Sans", Verdana, sans-serif; color: var(--muted); display: block; }
.refs .note { color: var(--muted); font-size: .9rem; }
.empty { color: var(--muted); font-style: italic; }
footer { margin-top: 3rem; color: var(--muted); font: .8rem/1.4 "DejaVu Sans", Verdana, sans-serif; }
@media print { body { max-width: none; padding: 0; } nav { display: none; } section { break-inside: avoid-page; } }
"""


def _e(value) -> str:
    return html.escape(str(value), quote=True)


@dataclasses.dataclass(frozen=True)
class PageTable:
    """A table for a report page.

    Attributes
    ----------
    caption : str
    columns : tuple of str
        Column headings (with units, e.g. ``"Teff [K]"``).
    rows : tuple of tuple
        Cells; numbers are right-aligned, ``None`` and non-finite floats print as "-".
    """

    caption: str
    columns: tuple
    rows: tuple


def _cell(value) -> tuple[str, bool]:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-", False
    if isinstance(value, bool):
        return ("yes" if value else "no"), False
    if isinstance(value, float):
        return (f"{value:.4g}" if abs(value) < 1e5 else f"{value:.4e}"), True
    if isinstance(value, int):
        return f"{value:,}", True
    try:                      # numpy scalars
        import numpy as np

        if isinstance(value, np.generic):
            return _cell(value.item())
    except ImportError:       # pragma: no cover
        pass
    return str(value), False


def _table_html(table: PageTable) -> str:
    head = "".join(f"<th>{_e(c)}</th>" for c in table.columns)
    body = []
    for row in table.rows:
        cells = []
        for value in row:
            text, numeric = _cell(value)
            cells.append(f'<td class="num">{_e(text)}</td>' if numeric else f"<td>{_e(text)}</td>")
        body.append(f"<tr>{''.join(cells)}</tr>")
    return (f'<div class="scroll"><table><caption>{_e(table.caption)}</caption>'
            f"<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table></div>")


def _astropy_table(table, caption: str, columns: Sequence[str] | None = None, max_rows: int | None = None) -> PageTable:
    """A :class:`PageTable` from an astropy Table (units in the headings)."""
    names = list(columns) if columns is not None else list(table.colnames)
    names = [n for n in names if n in table.colnames]
    heads = []
    for n in names:
        unit = table[n].unit
        heads.append(f"{n} [{unit}]" if unit is not None and str(unit) else n)
    n_rows = len(table) if max_rows is None else min(len(table), max_rows)
    rows = tuple(tuple(table[n][i] for n in names) for i in range(n_rows))
    if n_rows < len(table):
        caption += f" (first {n_rows} of {len(table)} rows; all in the table file)"
    return PageTable(caption, tuple(heads), rows)


_SVG_PROLOGUE = re.compile(r"^\s*(<\?xml[^>]*\?>\s*)?(<!DOCTYPE[^>]*>\s*)?", re.S)


def _figure_html(path: Path) -> str:
    path = Path(path)
    caption = f"<figcaption>{_e(path.name)}</figcaption>"
    if path.suffix.lower() == ".pdf":      # saved as PDF alone: the PNG copy kept in memory by save_figure
        data = page_preview(path)
        if data is None:   # _figures leaves such a PDF out
            raise InputError("the report page shows PNG or SVG figures, and this PDF has no PNG copy in "
                             "memory (it was not saved by this run)", path)
        caption = f"<figcaption>{_e(path.name)} (shown here as PNG; the file is PDF)</figcaption>"
        encoded = base64.b64encode(data).decode("ascii")
        return (f'<figure><img src="data:image/png;base64,{encoded}" alt="{_e(path.stem.replace("_", " "))}">'
                f"{caption}</figure>")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the figure for the report page: {exc}", path) from None
    if path.suffix.lower() == ".svg":
        return f"<figure>{_SVG_PROLOGUE.sub('', data.decode('utf-8'))}{caption}</figure>"
    encoded = base64.b64encode(data).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{encoded}" alt="{_e(path.stem.replace("_", " "))}">'
            f"{caption}</figure>")


def _verdict_html(tag: str, text: str, tone: str) -> str:
    return f'<div class="verdict {tone}"><span class="tag">{_e(tag)}</span>{_e(text)}</div>'


def _facts(pairs) -> str:
    items = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in pairs)
    return f'<dl class="facts">{items}</dl>' if items else '<p class="empty">none</p>'


def _list(items, cls="plain") -> str:
    items = list(items)
    if not items:
        return '<p class="empty">none</p>'
    return f'<ul class="{cls}">' + "".join(f"<li>{_e(i)}</li>" for i in items) + "</ul>"


def _references_html(refs: Iterable[Reference]) -> str:
    out = []
    for r in refs:
        link = f' <a href="{_e(r.link)}">{_e(r.link)}</a>' if r.link else ""
        note = f' <span class="note">({_e(r.note)})</span>' if r.note else ""
        out.append(f'<li><span class="topic">{_e(r.topic)}</span>{_e(r.text)}{link}{note}</li>')
    return '<ol class="refs">' + "".join(out) + "</ol>" if out else '<p class="empty">none</p>'


def render_page(*, title: str, inputs, results_html: str, tables: Sequence[PageTable], figures: Sequence,
                caveats: Sequence[str], notes: Sequence[str], printed: str, files: Sequence,
                references: Sequence[Reference], versions: dict | None = None, input_files=()) -> str:
    """The page as one HTML string (see the module notes for its sections).

    Parameters
    ----------
    title : str
    inputs : sequence of (str, str)
        Label and value of each input and setting.
    results_html : str
        Ready-made HTML of the results section (verdicts, estimates).
    tables : sequence of PageTable
    figures : sequence of path-like
        PNG (embedded as base64) or SVG (inlined) files; a PDF saved alone by
        :func:`~motes.report.figure_files.save_figure` is shown by its in-memory
        PNG copy; other files are skipped.
    caveats, notes : sequence of str
    printed : str
        The complete text the command printed.
    files : sequence of path-like
    references : sequence of Reference
    versions : dict, optional
        Default :func:`motes.citations.software_versions`.
    input_files : sequence of (str, str)
        Name and text of input files shown whole under the inputs (the description).
    """
    versions = software_versions() if versions is None else versions
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    shown = _figures(figures)
    body = {
        "inputs": _facts(inputs) + "".join(f"<h3>{_e(name)}</h3><pre>{_e(text.rstrip())}</pre>"
                                           for name, text in input_files),
        "results": results_html or '<p class="empty">none</p>',
        "tables": "".join(_table_html(t) for t in tables) or '<p class="empty">none</p>',
        "figures": "".join(_figure_html(p) for p in shown) or '<p class="empty">no figures were drawn</p>',
        "caveats": ("<h3>Caveats</h3>" + _list(caveats) + "<h3>Notes</h3>" + _list(notes)),
        "output": f"<pre>{_e(printed.rstrip())}</pre>",
        "files": _list(str(f) for f in files),
        "cite": _references_html(references),
        "versions": _table_html(PageTable("installed versions", ("package", "version"),
                                          tuple(versions.items()))),
    }
    nav = "".join(f'<a href="#{k}">{_e(v)}</a>' for k, v in SECTION_IDS.items())
    sections = "".join(f'<section id="{k}"><h2>{_e(SECTION_IDS[k])}</h2>{body[k]}</section>' for k in SECTION_IDS)
    return ("<!DOCTYPE html>\n"
            f'<html lang="en"><head><meta charset="utf-8">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{_e(title)}</title><style>{_STYLE}</style></head>"
            f"<body><header><h1>{_e(title)}</h1>"
            f'<p class="meta">motes {_e(versions.get("motes", "?"))} · written {_e(stamp)}</p></header>'
            f"<nav>{nav}</nav><main>{sections}</main>"
            "<footer>Written by motes. Self-contained: this page loads nothing from the network.</footer>"
            "</body></html>\n")


#: Input files larger than this [characters] are named, not shown.
_MAX_INPUT_CHARS = 200_000


def _input_file(path) -> list[tuple[str, str]]:
    """``[(heading, text)]`` of an input file that can still be read as text (else ``[]``)."""
    if not path or str(path) == "<string>":
        return []
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return []
    if len(text) > _MAX_INPUT_CHARS:
        return [(f"input file {path}", f"({len(text):,} characters: not shown here)")]
    return [(f"input file {path}", text)]


def _target_files(target) -> list[tuple[str, str]]:
    """A target description and the photometry table its ``[companion] photometry`` names."""
    out = _input_file(target)
    if out:
        import tomllib

        try:
            table = tomllib.loads(out[0][1]).get("companion", {}).get("photometry")
        except tomllib.TOMLDecodeError:
            table = None
        if isinstance(table, str):
            out += _input_file(Path(target).parent / table)
    return out


def _write(path: Path, text: str) -> Path:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        return write_text_atomic(path, text)
    except OSError as exc:
        raise InputError(f"cannot write the report page: {exc}", path) from None


# ------------------------------------------------------------------ classify
def _settings_pairs(settings) -> list[tuple[str, str]]:
    if settings is None or not dataclasses.is_dataclass(settings):
        return []
    def shown(value):
        # objects that describe themselves (a type prior) in words, plain values as written
        return value.describe() if callable(getattr(value, "describe", None)) else repr(value)

    return [(f"setting {f.name}", shown(getattr(settings, f.name))) for f in dataclasses.fields(settings)]


def _photometry_table(phot) -> PageTable:
    rows = []
    for r in phot.rows:
        rows.append((r.band.name, r.input_kind, f"{r.limit_sigma:g}-sigma limit" if r.is_limit else "detection",
                     ">" + f"{r.apparent_mag:.3f}" if r.is_limit else r.apparent_mag,
                     None if r.is_limit else r.apparent_mag_error,
                     "<" + f"{r.flux_jy:.4g}" if r.is_limit else r.flux_jy, r.flux_jy_error,
                     (">" + f"{r.absolute_mag:.3f}" if math.isfinite(r.absolute_mag) else None) if r.is_limit
                     else r.absolute_mag,
                     "yes" if r.host_synthesised else "no"))
    return PageTable("calibrated photometry (limits as '>' the limiting magnitude and '<' the limiting flux "
                     "density; the error of a limit's f_nu is its 1-sigma noise)",
                     ("band", "given as", "kind", "Vega mag [mag]", "error [mag]", "f_nu [Jy]", "error [Jy]",
                      "absolute mag [mag]", "host synthesised"), tuple(rows))


def _ranking_table(ranking, top: int) -> PageTable:
    rows = tuple((i, row.label, row.teff, row.mass, row.chi2, row.dof, row.probability, row.offset,
                  row.distance_pc, row.av) for i, row in enumerate(ranking.rows[:top], 1))
    offset = "dm [mag]" if ranking.mode == "colours" else "delta [mag]"
    caption = f"{ranking.source}, {ranking.mode} mode: bands {' '.join(ranking.bands)}"
    if len(ranking.rows) > top:
        caption += f" (best {top} of {len(ranking.rows)} rows; all in the table file)"
    return PageTable(caption, ("rank", "template", "Teff [K]", "mass [M_sun]", "chi2", "dof", "probability",
                               offset, "distance [pc]", "A_V [mag]"), rows)


def _option_pairs(options) -> list[tuple[str, str]]:
    """Command-line options that were given (None, False and callables left out)."""
    out = []
    for key, value in (options or {}).items():
        if value is None or value is False or callable(value):
            continue
        out.append((f"option {key}", "given" if value is True else str(value)))
    return out


def write_classification_page(result, folder, *, files=(), references=None, options=None, top: int = 8,
                              printed: str | None = None, masses=None, evolution=None,
                              stem: str | None = None) -> Path:
    """Write the report page of ``motes classify`` into ``folder``.

    Parameters
    ----------
    result : Classification
    folder : path-like
    files : sequence of path-like
        The files written (their PNG/SVG figures are embedded; the page adds itself).
    references : sequence of Reference, optional
        What to cite; default :func:`motes.report.run_citations.classification_citations`.
    options : mapping, optional
        The command-line options (``vars(args)``), shown with the inputs.
    top : int
        Rows per ranking, in the tables and the printed text (as ``--top``).
    printed : str, optional
        The text the command printed; default: the classification, the
        masses (if any) and the references, formatted as the command prints them.
    masses : MassesAtAge, optional
        The masses at an age (``--evolution``), for the default ``printed``.
    evolution : path-like, optional
        The evolutionary-model table (cited as user data when ``references`` is None).
    stem : str, optional
        File-name stem; default :func:`~motes.report.companion_text.classification_file_stem`.

    Returns
    -------
    pathlib.Path
        ``<stem>_report.html``.
    """
    from .companion_text import classification_file_stem, format_classification
    from .run_citations import classification_citations, format_citations

    folder = Path(folder)
    path = folder / f"{stem or classification_file_stem(result.target)}_report.html"
    if references is None:
        references = classification_citations(result, evolution=evolution)
    if printed is None:
        lines = [format_classification(result, top=top), ""]
        if masses is not None:
            from .motion_text import format_masses_at_age

            lines += [format_masses_at_age(masses), ""]
        printed = "\n".join(lines + [format_citations(references)])
    phot = result.photometry
    facts = [("target", result.target), ("modes", ", ".join(result.modes))]
    if phot is not None and math.isfinite(phot.distance_pc):
        facts.append(("host distance", f"{phot.distance_pc:.4g} ± {phot.distance_pc_error:.2g} pc "
                                       f"(distance modulus {phot.distance_modulus:.3f} ± "
                                       f"{phot.distance_modulus_error:.3f} mag)"))
    facts += _option_pairs(options) + _settings_pairs(result.settings)
    parts = []
    est = result.estimate
    if est is not None:
        parts.append(_verdict_html("type", f"{est.label} [{est.source}, {est.mode} mode]; "
                                           f"Teff {est.teff.format('.0f')}; mass {est.mass.format('.3f')}", "open"))
    else:
        parts.append(_verdict_html("type", "no estimate (no template with spectral types could be ranked)", "bad"))
    check = result.distance_check
    if check is not None:
        sigma = getattr(result.settings, "tension_sigma", None)
        parts.append(_verdict_html("distance", check.message, "good" if check.consistent else "bad"))
        if sigma is not None:
            parts.append(f'<p class="rule">Rule: consistent with a companion at the host\'s distance when the '
                         f"tension between the colours-only distance and the host's (the sigma printed) is at most "
                         f"{sigma:g} sigma (setting tension_sigma).</p>")
    bound = getattr(result, "boundness", None)
    if bound is not None and getattr(bound, "verdict", None):
        tone = {"bound": "good", "background": "bad"}.get(bound.verdict, "open")
        ln_b = bound.ln_bayes_factor
        text = (f"{bound.verdict}: B = {math.exp(ln_b):.4g} (ln B = {ln_b:+.2f})" if abs(ln_b) < 700
                else f"{bound.verdict}: ln B = {ln_b:+.1f}")
        if math.isfinite(getattr(bound, "p_bound", math.nan)):
            text += f", P(bound) = {bound.p_bound:.3g}"
        parts.append(_verdict_html("is it bound? (photometry)", text, tone))
        if getattr(bound, "rule", ""):
            parts.append(f'<p class="rule">Rule: {_e(bound.rule)}</p>')
    for flag in result.flags:
        parts.append(_verdict_html("flag", flag, "bad"))
    tables = ([_photometry_table(phot)] if phot is not None else []) + [_ranking_table(r, top)
                                                                        for r in result.rankings]
    html_text = render_page(
        title=f"motes classify: {result.target}", inputs=facts, results_html="".join(parts), tables=tables,
        figures=_figures(files), caveats=result.caveats, notes=result.notes, printed=printed,
        files=[*files, path], references=references, input_files=_target_files((options or {}).get("target")))
    return _write(path, html_text)


def _figures(files) -> list[Path]:
    """The figures a page shows: PNG and SVG files, and PDF files saved alone (their in-memory PNG copy)."""
    return [Path(f) for f in files if Path(f).suffix.lower() in (".png", ".svg")
            or (Path(f).suffix.lower() == ".pdf" and page_preview(f) is not None)]


# ------------------------------------------------------------------ fit
_VERDICT_TONE = {"needed": "good", "not needed": "bad"}


def write_fit_page(result, printed: str, references=(), folder=None) -> Path:
    """Write ``report.html`` of ``motes fit`` into the run folder.

    Parameters
    ----------
    result : FitResult
        With ``files`` as :func:`motes.report.fit_text.write_fit_report` sets them.
    printed : str
        The summary text (as printed and written to ``summary.txt``).
    references : sequence of Reference
    folder : path-like, optional
        Default ``result.run_dir``.

    Returns
    -------
    pathlib.Path
    """
    from ..dust.fit.evidence import VERDICT_RULE, parameter_unit

    folder = Path(folder) if folder is not None else Path(result.run_dir)
    path = folder / "report.html"
    obs = result.observations
    facts = [("description", result.source), ("photometry", obs.path or "-"),
             ("data", f"{len(obs.bands)} bands ({obs.n_detections} detections), {obs.normalisation}")]
    thermal = getattr(result, "thermal_observations", None)
    if thermal is not None:
        facts += [("thermal photometry", thermal.path),
                  ("thermal data", f"{len(thermal.bands)} bands ({thermal.n_detections} detections), flux densities; "
                                   "fitted jointly, each data set with its own flux scale")]
    facts += [(f"prior {name}", text) for name, text in result.priors]
    parts = []
    for v in result.verdicts:
        parts.append(_verdict_html(v.verdict, v.sentence(), _VERDICT_TONE.get(v.verdict, "open")))
    parts.append(f'<p class="rule">{_e(VERDICT_RULE)}</p>')
    if "driven_by" in result.verdict_table.colnames:
        for row in result.verdict_table:
            parts.append(f"<p>{_e(row['material'])}: ln B scattered alone {row['ln_b_scattered']:+.2f}, thermal alone "
                         f"{row['ln_b_thermal']:+.2f}, joint {row['ln_b']:+.2f}: driven by "
                         f"<b>{_e(row['driven_by'])}</b></p>")
    data_rows = tuple((b.name, b.pivot_wavelength, ">" if lim else "", val, None if lim else err)
                      for b, val, err, lim in zip(obs.bands, obs.value, obs.error, obs.is_limit))
    heads = ("band", "pivot [µm]", "limit", "value", "error")
    if getattr(obs, "has_polarised", False):
        data_rows = tuple((*row, "polarised" if p else "total") for row, p in zip(data_rows, obs.is_polarised))
        heads += ("intensity",)
    tables = [PageTable(f"data ({obs.normalisation}; limits marked '>', value = the limit)", heads, data_rows),
              _astropy_table(result.ranking, "models ranked by evidence (ln B = ln Z - ln Z(best))"),
              _astropy_table(result.verdict_table, "verdict per material")]
    for m in result.models[: min(2, len(result.models))]:
        rows = []
        for row in m.summary:
            unit = parameter_unit(row["parameter"])
            rows.append((f"{row['parameter']} [{unit}]" if unit else row["parameter"], row["median"], row["lo68"],
                         row["hi68"], row["lo95"], row["hi95"], row["upper95"]))
        tables.append(PageTable(f"model {m.name}: posterior median, 68% and 95% intervals "
                                f"(maximum likelihood chi2 = {m.best_chi2:.2f} for {m.dof} dof)",
                                ("parameter", "median", "68% low", "68% high", "95% low", "95% high",
                                 "95% upper"), tuple(rows)))
        if getattr(m, "thermal", None):
            d = m.thermal
            tables.append(PageTable(
                f"model {m.name}: thermal side at the best fit (exact path)", ("quantity", "value"),
                (("L_dust / L_star", d["fractional_luminosity"]),
                 *((("belt [au]", f"{d['belt_au'][0]:g}-{d['belt_au'][1]:g} (surface density ∝ "
                                  f"r^{d['surface_density_index']:g})"),
                    ("mean radius [au]", d["radius_au"])) if "belt_au" in d else
                   (("ring radius [au]", d["radius_au"]),)),
                 ("blackbody radius [au]", d["blackbody_radius_au"]),
                 ("r / r_blackbody", d["radius_over_blackbody_radius"]), ("dust temperature [K]", d["dust_temperature_K"]),
                 ("sublimation flags", "; ".join(d.get("flags", ())) or "none"))))
            if m.thermal_fluxes is not None:
                tables.append(_astropy_table(m.thermal_fluxes, f"model {m.name}: thermal data and model fluxes [Jy]",
                                             ("band", "pivot_wavelength", "value", "error", "is_limit", "model_best",
                                              "model_median", "model_lo68", "model_hi68")))
    figures = _figures(result.files)
    files = [*result.files, *([] if path in result.files else [path])]
    html_text = render_page(
        title=f"motes fit: {result.source}", inputs=facts, results_html="".join(parts), tables=tables,
        figures=figures, caveats=result.caveats, notes=result.notes, printed=printed, files=files,
        references=references,
        input_files=_input_file(result.source) or _input_file(Path(result.run_dir) / "description.toml"))
    return _write(path, html_text)


# ------------------------------------------------------------------ grid
def write_grid_page(summary, folder, *, files=(), references=None, top: int = 10) -> Path:
    """Write ``grid_report.html`` of ``motes grid summarize`` into ``folder``.

    Parameters
    ----------
    summary : GridSummary
    folder : path-like
    files : sequence of path-like
        The files written (their PNG/SVG figures are embedded; the page adds itself).
    references : sequence of Reference, optional
        What to cite; default :func:`motes.report.run_citations.grid_citations`.
    top : int
        Best mixtures listed in the printed text (as ``--top``).

    Returns
    -------
    pathlib.Path
    """
    from ..dust.grid.summary import ABSENCE_DELTA_CHI2
    from .grid_text import format_grid_summary, format_grid_verdicts
    from .run_citations import format_citations, grid_citations

    folder = Path(folder)
    path = folder / "grid_report.html"
    if references is None:
        references = grid_citations(summary)
    printed = "\n".join(format_grid_summary(summary, top=top) + [format_citations(references)])
    facts = [("store", summary.store), ("points", f"{summary.n_rows:,} of {summary.n_points:,} in the store"),
             ("materials", ", ".join(summary.materials)), ("bands", ", ".join(summary.band_labels)),
             ("chi2_min", f"{summary.chi2_min:.3f} for {summary.dof} degrees of freedom")]
    parts = []
    for line in format_grid_verdicts(summary):
        tone = "good" if "disfavoured" in line else "open"    # leaving it out disfavoured: the data want it
        name, _, rest = line.partition(": ")
        parts.append(_verdict_html(name, rest, tone))
    parts.append(f'<p class="rule">Rule: Δχ² ≤ 1 along one axis marks the 68% profile interval (Wilks 1938); '
                 f"a material whose absence costs Δχ² &gt; {ABSENCE_DELTA_CHI2:g} is disfavoured to leave out "
                 "(about 2 sigma for one parameter); both assume Gaussian errors and an adequate model.</p>")
    obs = summary.observations or {}
    tables = []
    from ..dust.grid.summary import band_label

    if obs.get("band"):
        rows = tuple((band_label(b), w, ">" if lim else "", v, None if lim else e) for b, w, v, e, lim in
                     zip(obs["band"], obs["pivot_wavelength_um"], obs["value"], obs["error"], obs["is_limit"]))
        tables.append(PageTable(f"data ({obs.get('normalisation', '')}; limits marked '>', value = the limit)",
                                ("band", "pivot [µm]", "limit", "value", "error"), rows))
    best = summary.best.copy(copy_data=False)        # model_<band>_polarised columns read as "... (polarised)"
    for name in best.colnames:
        if name.startswith("model_") and band_label(name) != name:
            best.rename_column(name, band_label(name))
    tables += [_astropy_table(best, "best mixtures (lowest chi2 first)"),
               _astropy_table(summary.fraction_profiles, "chi2 profile of each material's fraction"),
               _astropy_table(summary.axis_profiles, "chi2 profile along porosity, a_min, q and a_max")]
    html_text = render_page(
        title=f"motes grid summary: {summary.store}", inputs=facts, results_html="".join(parts), tables=tables,
        figures=_figures(files), caveats=(), notes=summary.notes, printed=printed, files=[*files, path],
        references=references, input_files=_grid_description(summary))
    return _write(path, html_text)


def _grid_description(summary) -> list[tuple[str, str]]:
    """The grid description's text as the store's manifest keeps it."""
    from ..dust.grid.store import GridStore
    from ..errors import MotesError

    try:
        manifest = GridStore.open(summary.store).manifest
    except (MotesError, OSError, ValueError):
        return []
    text = manifest.get("description")
    return [(f"{manifest.get('source', 'grid description')} (as kept in the store)", text)] if text else []
