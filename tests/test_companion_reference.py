"""The built-in sequence against its own source: export and interpolation checks.

Reference: ../shared/reference/mean_dwarf_colors_teff.txt, "A Modern Mean Dwarf
Stellar Color and Effective Temperature Sequence", E. Mamajek, version 2024.05.15
(much of it Table 5 of Pecaut & Mamajek 2013, ApJS 208, 9). Since issue 11 the
built-in sequence (src/motes/data/dwarf_sequence.txt) IS this table, exported by
tools/export_dwarf_sequence.py, so nothing here is an external check any more:

* the bundled file must equal a fresh export of the reference by the tool;
* the classifier, fed a row's own absolute magnitudes with 0.05 mag errors, must
  return that row's type (checks the interpolation and the classifier, not the
  sequence): distance-known mode with J, H, Ks (M_H = M_J - (J-H), M_Ks as
  tabulated, as the bundled file does) within 1 subtype for every type;
  colours-only mode with every band the reference gives from U to W2 within 1.5
  subtypes for at least 80% of the types; the misses are printed.

The external checks are tests/test_companion_nearby_dwarfs.py (real dwarfs).
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from motes.companion import ClassifySettings, classify, photometry_from_magnitudes, type_code, type_label

REFERENCE_FILE = "mean_dwarf_colors_teff.txt"
ERROR = 0.05  # mag, per issue 3
REPO = Path(__file__).resolve().parents[1]
TOOL = REPO / "tools" / "export_dwarf_sequence.py"
BUNDLED = REPO / "src" / "motes" / "data" / "dwarf_sequence.txt"
FIRST, LAST = type_code("G0"), type_code("Y4")  # the bundled range
#: The bundled rows from T9.5 on give MKO J and K (the source's Y dwarfs, and T9.5 as the export tool
#: reads it: see the bundled file's header); G0-T9 give 2MASS J, H, Ks.
MKO_FROM = type_code("T9.5")
LAST_2MASS = type_code("T9")
MKO_NAMES = {"2mass_j": "mko_j", "2mass_h": "mko_h", "2mass_ks": "mko_k"}


def test_bundled_file_is_a_fresh_export(shared_reference, tmp_path):
    out = tmp_path / "dwarf_sequence.txt"
    run = subprocess.run([sys.executable, str(TOOL), "--source", str(shared_reference / REFERENCE_FILE),
                          "--out", str(out)], capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert out.read_text(encoding="utf-8") == BUNDLED.read_text(encoding="utf-8"), (
        f"{BUNDLED.name} differs from a fresh export: re-run {TOOL.name} (never edit the file by hand)")


def test_bundled_rows_are_the_reference_rows(shared_reference):
    from motes.companion import load_dwarf_sequence

    seq = load_dwarf_sequence()
    rows = {c: r for c, r in read_reference(shared_reference).items() if FIRST <= c <= LAST}
    assert list(seq.codes) == sorted(rows), "the bundled sequence must have one row per reference type G0-Y4"
    for i, code in enumerate(seq.codes):
        mags = absolute_magnitudes(rows[code])
        if code >= MKO_FROM:   # the same cells, in the MKO bands; nothing in the 2MASS ones
            mags = {MKO_NAMES.get(b, b): m for b, m in mags.items()}
        for band in ("2mass_j", "2mass_h", "2mass_ks", "mko_j", "mko_h", "mko_k", "gaia_g", "johnson_v"):
            assert seq.columns[band][i] == pytest.approx(mags.get(band, math.nan), abs=1e-9, nan_ok=True), (
                type_label(code), band)
        assert seq.columns["teff"][i] == pytest.approx(rows[code]["Teff"], nan_ok=True)
    assert np.isfinite(seq.columns["mko_j"]).sum() == 7 and np.isfinite(seq.columns["mko_k"]).sum() == 6


def _value(text):
    """Float of a reference cell; '...'-style cells are missing; ':' marks uncertain (kept)."""
    text = text.strip()
    if not text or set(text) <= {"."}:
        return math.nan
    try:
        return float(text.rstrip(":"))
    except ValueError:
        return math.nan


def read_reference(folder):
    """{type code: {column: value}} for the dwarf rows of the reference table."""
    lines = (folder / REFERENCE_FILE).read_text().splitlines()
    header = next(line for line in lines if line.startswith("#SpT"))
    names = header.lstrip("#").split()
    rows = {}
    started = False
    for line in lines:
        if line.startswith("#SpT"):
            started = True
            continue
        if not started or line.startswith("#") or not line.strip():
            if started and rows and not line.strip():
                break
            continue
        parts = line.split()
        if not parts[0].endswith("V") and not parts[0].rstrip(":").endswith("V"):
            break  # the notes after the table
        if len(parts) < len(names) - 1:
            continue
        try:
            code = type_code(parts[0].rstrip(":").rstrip("V"))
        except ValueError:
            continue
        rows[code] = {n: _value(v) for n, v in zip(names[1:], parts[1:])}
    return rows


def absolute_magnitudes(row):
    """motes band name -> absolute magnitude derived from a reference row (nan if not derivable)."""
    mv, mg, mj, mks = row.get("Mv"), row.get("M_G"), row.get("M_J"), row.get("M_Ks")
    out = {
        "johnson_v": mv,
        "johnson_b": mv + row.get("B-V", math.nan),
        "cousins_r": mv - row.get("V-Rc", math.nan),
        "cousins_i": mv - row.get("V-Ic", math.nan),
        "gaia_g": mg,
        "gaia_rp": mg - row.get("G-Rp", math.nan),
        "gaia_bp": mg - row.get("G-Rp", math.nan) + row.get("Bp-Rp", math.nan),
        "2mass_j": mj,
        "2mass_h": mj - row.get("J-H", math.nan),  # as the reference's notes define M_H
        "2mass_ks": mks,
        "wise_w1": mks - row.get("Ks-W1", math.nan),
        "wise_w2": mks - row.get("Ks-W1", math.nan) - row.get("W1-W2", math.nan),
    }
    out["johnson_u"] = out["johnson_b"] + row.get("U-B", math.nan)
    return {k: v for k, v in out.items() if v is not None and math.isfinite(v)}


@pytest.fixture(scope="module")
def reference(shared_reference):
    rows = read_reference(shared_reference)
    chosen = {c: r for c, r in rows.items() if 60.0 <= c <= 88.0}
    if not chosen:
        pytest.skip("no M0-T8 rows could be read from the reference table")
    return chosen


def _classify(mags, mode):
    # distance-known: the magnitudes are absolute (the system is at 10 pc, exactly);
    # colours-only: no distance at all
    phot = photometry_from_magnitudes({b: (m, ERROR) for b, m in mags.items()}, absolute=mode == "distance")
    return classify(phot, ClassifySettings(mode=mode))


@pytest.fixture(scope="module")
def distance_known(shared_reference):
    """[(type code, classification)] of every M0-T9 row with J, H and Ks, distance-known mode.

    (G and K rows are left out: their J, H, Ks change by ~0.1 mag per subtype, well below the
    0.3 mag luminosity scatter, so J, H, Ks alone cannot type them to 1 subtype; measured on
    G0-K9: 6 of 22 off by 1.1-2.8 subtypes.)
    """
    out = []
    rows = {c: r for c, r in read_reference(shared_reference).items() if type_code("M0") <= c <= LAST_2MASS}
    for code, row in sorted(rows.items()):
        mags = {b: m for b, m in absolute_magnitudes(row).items() if b in ("2mass_j", "2mass_h", "2mass_ks")}
        if len(mags) == 3:
            out.append((code, _classify(mags, "distance")))
    assert len(out) >= 20, "too few M0-T9 rows with J, H and Ks in the reference"
    return out


def _types_within_one_subtype(distance_known, pick, title):
    """Misses (> 1 subtype) of the type ``pick(result) -> (code, text)``; prints the table."""
    misses, lines = [], []
    for code, result in distance_known:
        value, text = pick(result)
        diff = value - code
        lines.append(f"{type_label(code):>6} -> {text:<28} diff {diff:+.2f}")
        if abs(diff) > 1.0:
            misses.append(f"{type_label(code)} -> {type_label(value)}")
    print(f"\ndistance-known mode, J H Ks, {title}: {len(distance_known) - len(misses)}/{len(distance_known)} "
          "within 1 subtype")
    print("\n".join(lines))
    print("misses:", ", ".join(misses) or "none")
    return misses


@pytest.mark.xfail(strict=True, reason=(
    "measured with the published sequence itself (issue 11): 43 of 44 M0-T9 rows within 1 subtype; the "
    "M0 row comes back K9.0 (68%: K7.4-M0.3): the source's K7-M0 J, H, Ks differ by < 0.4 mag over three "
    "subtypes (its K8 and K9 rows are linear interpolations, per its notes), so the posterior is flat there "
    "and its median sits one subtype early. The distance-known mode takes a flat type prior by default "
    "(ClassifySettings.type_prior_modes; with the field prior in this mode too, 44 of 44). Not tuned. "
    "strict: remove this mark when the test passes"))
def test_distance_known_mode_recovers_every_type(distance_known, capsys):
    with capsys.disabled():
        misses = _types_within_one_subtype(
            distance_known, lambda r: (r.estimate.median, r.estimate.label), "continuous estimate")
    assert not misses, f"types off by more than 1 subtype: {misses}"


def test_distance_known_mode_top_ranked_type_within_one_subtype(distance_known, capsys):
    # The same check on the other type motes reports: the most probable row of the ranked table
    # (sequence rows are whole/half subtypes carrying the summed probability of the 0.1-step
    # templates around them). Measured: 42/42 within 1 subtype. The continuous estimate above
    # (the posterior median, printed first by motes classify) is the stricter quantity and still
    # misses three types; both are reported on issue 3.
    def top(result):
        best = result.ranking("sequence", "distance").best
        return best.type_code, f"{best.type} (p = {best.probability:.2f})"

    with capsys.disabled():
        misses = _types_within_one_subtype(distance_known, top, "top-ranked type")
    assert not misses, f"top-ranked types off by more than 1 subtype: {misses}"


def test_mko_rows_are_recovered_from_their_own_mko_magnitudes(shared_reference, capsys):
    """The T9.5-Y4 rows (MKO J and K; Y4 J only), fed back with 0.05 mag errors at 10 pc, distance known:
    each within 1 subtype (the interpolation between the MKO rows, and the band-set rule that keeps the
    2MASS rows out of an MKO comparison)."""
    rows = {c: r for c, r in read_reference(shared_reference).items() if MKO_FROM <= c <= LAST}
    lines, misses = [], []
    for code, row in sorted(rows.items()):
        mags = {MKO_NAMES[b]: m for b, m in absolute_magnitudes(row).items() if b in MKO_NAMES}
        result = _classify(mags, "distance")
        est = result.estimate
        assert est.mode == "distance" and set(result.ranking("sequence", "distance").bands) <= set(mags)
        assert any("rows G0-T9" in n and "2MASS" in n for n in result.notes)
        lines.append(f"{type_label(code):>6} ({', '.join(mags)}) -> {est.label:<26} diff {est.median - code:+.2f}")
        if abs(est.median - code) > 1.0:
            misses.append(type_label(code))
    with capsys.disabled():
        print(f"\nMKO rows, distance known: {len(rows) - len(misses)}/{len(rows)} within 1 subtype")
        print("\n".join(lines))
    assert len(rows) == 7 and not misses, misses


@pytest.mark.xfail(strict=True, reason=(
    "measured with the published sequence itself and the field type prior (issue 11), the template scatter "
    "marginalised over 0.02-0.30 mag (colour_scatter_range): 28 of 42 (67%) within 1.5 subtypes (flat prior: "
    "28 of 42); the 68% interval contains the row's type for 38 of 42 (flat: 41 of 42). With the fixed 0.10 "
    "mag scatter: 24 and 24 within 1.5 subtypes, intervals 35 and 41 (before the sequence's own uncertainty "
    "entered the colours-only likelihood: 37 and 42, with the same 24 and 24). The source "
    "has no Ks - W1 beyond T2 and no optical magnitudes beyond L5, so the band-set rule compares mid-M and "
    "T rows in J, H, Ks only, where M0-M7 colours agree to < 0.1 mag: the prior, which peaks at M3-M5 "
    "(the solar-neighbourhood census), pulls the M6.5-L3 rows back to M4.7-M9.5 (misses with the mixture: "
    "M6.5, M7, M7.5, M8, L0, L1, L3, T1-T4.5, T7.5, T8), and T1-T4.5, T7.5, T8 come back M, G or too early a T "
    "(JHK degeneracy, reported as separate peaks). These rows "
    "are uniform in type, not drawn from the field population the prior describes; the prior was not "
    "changed for them. strict: remove this mark when the test passes"))
def test_colours_only_mode_recovers_most_types(reference, capsys):
    tested, misses, lines = 0, [], []
    for code, row in sorted(reference.items()):
        mags = absolute_magnitudes(row)
        if not {"2mass_j", "2mass_h", "2mass_ks"} <= set(mags):
            continue
        tested += 1
        # shift to an arbitrary distance: the colours-only mode must not care
        est = _classify({b: m + 3.0 for b, m in mags.items()}, "colours").estimate
        diff = est.reported - code   # the type printed: the median of the most probable peak
        lines.append(f"{type_label(code):>6} ({len(mags):2d} bands) -> {est.label:<28} diff {diff:+.2f}")
        if abs(diff) > 1.5:
            misses.append(f"{type_label(code)} -> {type_label(est.reported)}")
    fraction = 1 - len(misses) / tested
    with capsys.disabled():
        print(f"\ncolours-only mode, all bands U-W2: {tested - len(misses)}/{tested} ({fraction:.0%}) within 1.5 subtypes")
        print("\n".join(lines))
        print("misses:", ", ".join(misses) or "none")
    assert tested >= 20
    assert fraction >= 0.80, f"only {fraction:.0%} within 1.5 subtypes; misses: {misses}"
