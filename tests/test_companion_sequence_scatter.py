"""The mean sequence's own colour uncertainty, measured from its rows (colours-only mode, issue 11).

``sequence_colour_scatter`` adds to the template scatter, in quadrature, the
leave-one-out residuals of the rows in the bands used, less their common part
(which the free offset absorbs). Checked on invented sequences (numbers made up
for these tests) and on the bundled one.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.companion import load_dwarf_sequence
from motes.companion.classify import SEQUENCE_SCATTER_WINDOW, sequence_colour_scatter
from motes.companion.sequence import read_dwarf_sequence
from motes.photometry import get_band

BANDS = [get_band(b) for b in ("2mass_j", "2mass_h", "2mass_ks")]
HEAD = "spt teff log_l mass m_v v_rc v_ic m_g bp_rp g_rp m_j j_h h_ks m_ks ks_w1 w1_w2"


def _sequence(m_j, j_h, m_ks):
    labels = [f"{'ML'[i // 10]}{i % 10}" for i in range(len(m_j))]          # M0 ... M9, L0 ... L9
    rows = [f"{lab} 3000 - - - - - - - - {mj} {jh} - {mk} - -" for lab, mj, jh, mk in zip(labels, m_j, j_h, m_ks)]
    return read_dwarf_sequence("\n".join([HEAD, *rows]), "invented.txt")


def _extra(seq):
    grid = seq.grid(BANDS, step=0.5)
    total = sequence_colour_scatter(grid, np.arange(grid.n_templates), np.arange(3), 0.1)
    return grid, np.sqrt(np.clip(total**2 - 0.01, 0.0, None))


def test_smooth_rows_and_a_common_shift_add_nothing():
    i = np.arange(20.0)
    smooth = _sequence(6.0 + 0.5 * i, 0.6 + 0.0 * i, 5.2 + 0.5 * i)          # linear: interpolated exactly
    assert np.max(_extra(smooth)[1]) < 1e-6
    shifted = _sequence(6.0 + 0.5 * i + 0.3 * (i == 5), 0.6 + 0.0 * i, 5.2 + 0.5 * i + 0.3 * (i == 5))
    assert np.max(_extra(shifted)[1]) < 1e-6                                 # all bands alike: colours unchanged


def test_a_jittered_colour_widens_the_templates_near_it_only():
    i = np.arange(20.0)
    jitter = _sequence(6.0 + 0.5 * i, 0.6 + 0.3 * (i == 5), 5.2 + 0.5 * i)   # H of M5 off by 0.3 mag
    grid, extra = _extra(jitter)
    near = np.abs(grid.type_code - 65.0) <= SEQUENCE_SCATTER_WINDOW
    # PCHIP slopes reach two rows: the residuals of M3-M7 feel the jitter, and the window reaches 2 further
    far = np.abs(grid.type_code - 65.0) > SEQUENCE_SCATTER_WINDOW + 2.0
    assert np.all(extra[near].max(axis=1) > 0.05) and np.all(extra[far] < 1e-6)
    assert np.argmax(extra[near].max(axis=0)) == 1                           # most in H, the band that jitters


def test_the_bundled_sequence_is_smooth_for_m_dwarfs_and_rough_for_late_t():
    grid, extra = _extra(load_dwarf_sequence())
    m = (grid.type_code >= 60) & (grid.type_code <= 68)
    late_t = grid.type_code >= 87
    assert extra[m].max() < 0.03
    assert extra[late_t].max() > 0.15      # the source's late-T M_J, J - H and M_Ks jump from row to row


def test_one_band_or_no_rows_add_nothing():
    grid = load_dwarf_sequence().grid(BANDS, step=0.5)
    one = sequence_colour_scatter(grid, np.arange(grid.n_templates), np.arange(1), 0.1)
    assert np.all(one == pytest.approx(0.1))
