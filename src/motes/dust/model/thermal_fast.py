"""Fast path of the thermal side: a cached Q_abs table and a batched ring model.

The exact path (:func:`motes.dust.model.thermal.compute_thermal`) calls Mie
~10^5 times per mixture (~2-4 s). A fit needs 10^4-10^6 evaluations, so this
module replaces every Mie call by an interpolation in a table of
``ln Q_abs(n, k, x)`` that does not depend on the materials, the mixture or
the star, and solves the temperatures on a coarser wavelength grid.

The Q_abs table
---------------
* Axes: ``ln n`` from n = 0.3 to 3000 (step :data:`LN_N_STEP`), ``ln k`` from
  k = 1e-6 to 1e4 (step :data:`LN_K_STEP`; iron's Hagen-Rubens continuation reaches k ~ 2000 at 2 cm), ``ln x`` from x = 1e-4 to 1.3e5
  (step :data:`LN_X_STEP`). Values: ``ln Q_abs`` (cached), interpolated
  linearly in Q along every axis with weights linear in n and k below k =
  :data:`K_LINEAR` (:func:`_q_at`: the logarithmic mean of neighbouring nodes
  lies below their mean across the resonances of weak absorbers, which shift
  with n as well as x: issue 13's 5.5% at 1.3 mm on 24 random rings was -3%
  from the ln-Q interpolation along n and -2.3% from the size quadrature), and
  bilinearly in (ln n, ln k, ln Q) for conductors (k >= K_LINEAR, Q_abs a power
  law of n and k there); below k = 1e-6 Q_abs is scaled ∝ k (k = 0 gives 0),
  below x = 1e-4 ∝ x (Rayleigh).
* Where a grain is not opaque (k x < :data:`X_AVERAGE_KX`, x > 0.1) a node
  holds the mean of Q_abs over its x bin (:data:`X_AVERAGE` sub-bins), not its
  value at the node: the resonances there are narrower than the x step, and
  node values sampled them by luck (issue 13: with the long-wavelength
  constants, porous iron-rich mixtures have m ≈ 2.75 + 0.002i at 1.3 mm; the
  fast path was off by up to 19.5% at 1.3 mm on 24 random rings with node
  values and log interpolation, 7.8% with linear interpolation, 5.5% with bin
  means, measured). A weak-absorber tile costs ~6x a node-value tile
  (1.9 s against 0.3 s of CPU).
* Values: exact Mie (:mod:`motes.optics.mie`) for x <= :data:`MIE_X_MAX` and
  |m| x <= :data:`MIE_MX_MAX` (beyond, the grain is opaque and Mie needs ~|m| x terms), ray
  optics (:func:`motes.optics.thermal.ray_optics_absorption`) above; the exact
  path switches at x = 2e4 instead (the two differ by the edge terms,
  ~x^(-2/3); the effect on band fluxes is part of the accuracy measured by
  ``benchmarks/bench_thermal.py`` and ``tests/test_dust_thermal_fast.py``).
* Tiles of :data:`TILE` x :data:`TILE` (n, k) nodes over the whole x axis,
  built only where a model's mixtures reach (and at evaluation time when a
  point needs a tile not yet built), cached under
  :func:`motes.files.cache_directory` ``/thermal_tables`` (one ``.npy`` per
  tile, written atomically, keyed by the format version, the axes, the bin
  averaging and the miepython version).

The ring model
--------------
:class:`ThermalRingModel` evaluates band fluxes per unit grain cross-section
of a ring at radius r for many parameter points at once: effective indices
(the same mixing rule as the scattered-light side) on a balance grid of
:data:`BALANCE_PER_DECADE` points per decade plus the materials' own points
beyond 2 um (thinned to :data:`FEATURE_PER_DECADE` per decade), Q_abs from the
table at :data:`N_SIZES_T` Gauss-Legendre nodes in ln a for the balance and
:data:`N_SIZES` for the fluxes (:data:`N_SIZES_FAR` for bands beyond
:data:`FAR_IR_UM`), temperatures by
interpolation on a coarse table of the emitted power and one Newton step
(compiled), and band averages on :data:`BAND_NODES` Gauss nodes per band
(:data:`BAND_NODES_FAR` beyond FAR_IR_UM), the
table lookup, ``B_nu`` (interpolated linearly on a fine ln T table,
:data:`_LN_T_FLUX`) and the size sum in one compiled pass, with no
exponential per term. The Bruggeman
solver takes the materials' permittivities, their logarithms and arguments
computed once per model.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import numba

from ...errors import InputError, ModelError
from ...files import atomic_write, cache_directory
from ...parameters import accepts_quantities
from ...optics import mie
from ...optics import thermal as th
from ...optics.mixing import BRUGGEMAN_TOLERANCE, mix_refractive_index
from ...conventions import flam_to_fnu
from .sampling import weighted_gauss_nodes

__all__ = ["QAbsTable", "ThermalRingModel", "q_abs_table", "MIE_X_MAX", "FAST_NOTE"]

FORMAT_VERSION = 1
LN_N = (np.log(0.3), 0.02)
LN_K = (np.log(1e-6), 0.2)
LN_X = (np.log(1e-4), 0.04)
N_MAX, K_MAX = 3000.0, 1.0e4
N_N = int(np.ceil((np.log(N_MAX) - LN_N[0]) / LN_N[1])) + 1
N_K = int(np.ceil((np.log(K_MAX) - LN_K[0]) / LN_K[1])) + 1
N_X = int(np.ceil((np.log(1.3e5) - LN_X[0]) / LN_X[1])) + 1
LN_N_STEP, LN_K_STEP, LN_X_STEP = LN_N[1], LN_K[1], LN_X[1]
TILE = 8
#: Size parameter above which the table holds ray optics instead of Mie.
MIE_X_MAX = 1000.0
#: ... and above which |m| x the table holds ray optics (Mie needs ~|m| x terms; such grains are opaque).
MIE_MX_MAX = 2.0e4
#: Sub-samples per x bin of the Mie part of the table: > 1 stores the bin mean of Q_abs instead of its
#: node value (resolves, on average, resonances of weak absorbers narrower than the x step)
#: (only where k x < X_AVERAGE_KX and x > 0.1: an opaque grain's internal resonances are damped, and a
#: Rayleigh grain has none; elsewhere the node value)
X_AVERAGE = 8
X_AVERAGE_KX = 3.0
BALANCE_PER_DECADE = 20
FEATURE_PER_DECADE = 60
#: Gauss-Legendre nodes in ln a: for the temperatures, and for the flux integrals (Q_abs ripples with x in
#: the far infrared; 40 nodes left 3% at 1.3 mm for a_min ~ 1 um, measured), T interpolated in (ln a, ln T)
N_SIZES_T = 24
N_SIZES = 80
BAND_NODES = 24
#: Far-infrared and mm bands (pivot >= FAR_IR_UM): their grains are weak absorbers in the resonance regime
#: (x ~ 0.3-10), Q_abs ripples in x, and the flux is a 2-d integral over (ln a, ln lambda) of a function
#: of ln x = ln a - ln lambda + const. On a narrow band (1.2-1.4 mm: 0.15 in ln lambda) the size
#: nodes' spacing (0.09-0.15 in ln a with 80 nodes) is comparable to the band's width and the sum over
#: the product grid weights the ripples unevenly: -2.8% at 1.3 mm on an iron-rich ring (a_min 9.5 um,
#: 80 sizes x 24 band nodes), 0.75% with 160 sizes, 0.6% with 160 x 12 (measured, issue 13). These
#: bands take N_SIZES_FAR sizes and BAND_NODES_FAR band nodes (the same number of terms as 80 x 24);
#: the mid-infrared bands keep 24 band nodes (silica's and ice's features: 12 left 2.8% in W3, measured).
FAR_IR_UM = 50.0
#: k from which the table is interpolated in (ln n, ln k, ln Q) instead of linearly in Q (:func:`_q_at`)
K_LINEAR = 1.0
N_SIZES_FAR = 160
BAND_NODES_FAR = 12
_LN_T_STEP = 0.1
#: ln T step of the B_nu table of the flux loop, interpolated linearly in B (no exponential per term):
#: errs by <= dlt^2 x^2 / 8 relative (x = hc / lambda k T), 2e-4 at x = 20, 8e-4 at x = 40 (emission
#: 20x beyond the Wien peak, e^-40 of it)
_LN_T_FLUX = 0.002
FAST_NOTE = ("thermal fluxes from the fast path (tabulated Q_abs, coarser grids); accuracy against the exact "
             "path measured by benchmarks/bench_thermal.py")


def _node_values(axis, count):
    return np.exp(axis[0] + axis[1] * np.arange(count))


@numba.njit(cache=True)
def _interp_lnq(store, lnstore, slots, axes, n, k, x, out):  # pragma: no cover - compiled
    """out[i] = Q_abs at (n[i], k[i], x[i]), interpolated as in :func:`_q_at`.

    ``store[slot, i, j, x]`` holds Q_abs (linear) of tile ``slots[ti, tj]`` (-1: not built). Returns 0, or
    ``1 + flat tile index`` of a tile to build first, or ``-(i + 1)`` for a point outside the axes.
    """
    lx0, dx, nx = axes[4], axes[5], int(axes[8])
    sl = np.empty(4, dtype=np.int64)
    ia = np.empty(4, dtype=np.int64)
    ib = np.empty(4, dtype=np.int64)
    wab = np.empty(4)
    need = np.zeros(slots.shape, dtype=np.bool_)
    for i in range(n.size):
        status, scale = _stencil(store, slots, axes, n[i], k[i], sl, ia, ib, wab, need)
        if status == 2:
            out[i] = 0.0
            continue
        if status < 0:
            return -(i + 1)
        if status == 1:
            for ta in range(slots.shape[0]):
                for tb in range(slots.shape[1]):
                    if need[ta, tb]:
                        return 1 + ta * slots.shape[1] + tb
        out[i] = abs(scale) * _q_at(store, lnstore, sl, ia, ib, wab, np.log(x[i]), lx0, dx, nx, scale < 0)
    return 0


@numba.njit(cache=True, inline="always")
def _stencil(store, slots, axes, nv, kv, sl, ia, ib, wab, need):  # pragma: no cover - compiled
    """(n, k) stencil of one index: tile slots ``sl``, in-tile rows ``ia``, ``ib``, weights ``wab``.

    Returns ``(status, scale)``: status 0 ready, 1 a tile not built (flagged in ``need``), 2 k = 0
    (Q_abs = 0), -1 outside the axes; ``scale`` = k / 1e-6 below k = 1e-6 (Q_abs ∝ k), else 1, and
    -1 for k >= :data:`K_LINEAR` (the logarithmic mode of :func:`_q_at`). Below K_LINEAR the weights
    are bilinear in (n, k), along k ``(k - k0) / (k1 - k0)``; above it bilinear in (ln n, ln k).
    """
    ln0, dn, lk0, dk = axes[0], axes[1], axes[2], axes[3]
    nn, nk = int(axes[6]), int(axes[7])
    tile = store.shape[1]
    kk = kv
    if kk <= 0.0:
        return 2, 0.0
    scale = 1.0
    if kk < 1e-6:
        scale = kk / 1e-6
        kk = 1e-6
    pn = (np.log(nv) - ln0) / dn
    pk = (np.log(kk) - lk0) / dk
    if pn < 0.0 or pn > nn - 1 or pk > nk - 1 or pk < 0.0:
        return -1, scale
    a = min(int(pn), nn - 2)
    b = min(int(pk), nk - 2)
    if kk < K_LINEAR:
        # linear weights in n and k between the (log-spaced) nodes: (v - v0) / (v1 - v0)
        fa = np.expm1((pn - a) * dn) / np.expm1(dn)
        fb = np.expm1((pk - b) * dk) / np.expm1(dk)
    else:
        # conductors: weights in ln n, ln k (ln Q interpolated; Q ∝ power laws of n and k there)
        fa = pn - a
        fb = pk - b
        scale = -scale             # flags the logarithmic mode to _q_at (scale is 1 here: k >= 1e-6)
    status = 0
    c4 = 0
    for da in range(2):
        for db in range(2):
            ta, tb = (a + da) // tile, (b + db) // tile
            sl[c4] = slots[ta, tb]
            if sl[c4] < 0:
                need[ta, tb] = True
                status = 1
            ia[c4] = a + da - ta * tile
            ib[c4] = b + db - tb * tile
            wab[c4] = (fa if da else 1.0 - fa) * (fb if db else 1.0 - fb)
            c4 += 1
    return status, scale


@numba.njit(cache=True, inline="always")
def _q_at(store, lnstore, sl, ia, ib, wab, ln_x, lx0, dx, nx, log_mode):  # pragma: no cover - compiled
    """Q_abs of a ready stencil at ``ln x``: trilinear in (n, k, Q) along ln x, on linear Q.

    Linear in Q along every axis, not in ln Q: the logarithmic mean of neighbouring nodes lies
    below their mean where Q changes fast between them. Along x, the resonances of weakly absorbing
    grains are narrower than the x step: in ln Q the log-x average of Q_abs was 6-9% low for
    m = 2.75 + 0.0017i at x = 1.5-6. Along n, the resonances sit at x ∝ 1/n roughly, so two rows
    2% apart in n hold them shifted by ~0.02 in ln x, comparable to their widths: bilinear in
    ln Q gave -1.8 to -2.6% in the x-average of Q_abs at m = 6.17 + 0.027i (an iron-rich mixture at
    1.3 mm) and -3% on its 1.3 mm band flux; linear in Q 0.04-0.08% (measured, issue 13). Along k,
    linear in k is exact where Q ∝ k (weak absorbers) or Q is flat in k (opaque grains); for
    Q ∝ k^p between them it errs by <= p (1 - p) (0.2)^2 / 8 (0.12% at p = 1/2). No exponential
    per evaluation. Conductors (k >= :data:`K_LINEAR`, ``log_mode``) are the exception: their Q_abs
    follows power laws of n and k (Q ∝ 1/k roughly at |m| >> 1), which linear weights missed by
    +2% at m = 14 + 41i (an iron-rich mixture at 100-200 um, measured): there ln Q from ``lnstore``
    is interpolated bilinearly in (ln n, ln k) and linearly in Q along x (one exponential).
    Below the axis: Rayleigh, ``Q ∝ x`` from the first node.
    """
    px = (ln_x - lx0) / dx
    xs = 1.0
    if px < 0.0:
        xs = np.exp(px * dx)          # below the axis: Rayleigh, Q ∝ x
        px = 0.0
    if px > nx - 1:
        px = nx - 1.0
    c = min(int(px), nx - 2)
    fc = px - c
    v0 = 0.0
    v1 = 0.0
    if log_mode:
        for j in range(4):
            v0 += wab[j] * lnstore[sl[j], ia[j], ib[j], c]
            v1 += wab[j] * lnstore[sl[j], ia[j], ib[j], c + 1]
        return np.exp(v0) * (1.0 + fc * np.expm1(v1 - v0)) * xs
    for j in range(4):
        v0 += wab[j] * store[sl[j], ia[j], ib[j], c]
        v1 += wab[j] * store[sl[j], ia[j], ib[j], c + 1]
    return (v0 + fc * (v1 - v0)) * xs


@numba.njit(cache=True)
def _q_batch(store, lnstore, slots, axes, n, k, ln_x0, ln_lam, out, need):  # pragma: no cover - compiled
    """out[i, s, l] = Q_abs at (n[i, l], k[i, l], x = exp(ln_x0[i, s] - ln_lam[l])).

    The (n, k) stencil is found once per (i, l) and used for every size. Tiles not built are
    flagged in ``need`` (their points left unset); returns the number of such points, or
    ``-(1 + i * L + l)`` for an index outside the axes.
    """
    lx0, dx, nx = axes[4], axes[5], int(axes[8])
    n_pts, n_sizes, n_lam = out.shape
    missing = 0
    sl = np.empty(4, dtype=np.int64)
    ia = np.empty(4, dtype=np.int64)
    ib = np.empty(4, dtype=np.int64)
    wab = np.empty(4)
    for i in range(n_pts):
        for l in range(n_lam):
            status, scale = _stencil(store, slots, axes, n[i, l], k[i, l], sl, ia, ib, wab, need)
            if status == 2:
                for s in range(n_sizes):
                    out[i, s, l] = 0.0
                continue
            if status < 0:
                return -(1 + i * n_lam + l)
            if status == 1:
                missing += 1
                continue
            log_mode = scale < 0
            scale = abs(scale)
            for s in range(n_sizes):
                out[i, s, l] = scale * _q_at(store, lnstore, sl, ia, ib, wab, ln_x0[i, s] - ln_lam[l], lx0, dx, nx,
                                             log_mode)
    return missing


@numba.njit(cache=True)
def _flux_batch(store, lnstore, slots, axes, n, k, ln_x0, ln_lam, weight, ln_t, b_tab, lt0, dlt, b_coef, x_coef,
                out, need):  # pragma: no cover - compiled
    """out[i, l] = sum_s weight[i, s] Q_abs(n[i, l], k[i, l], exp(ln_x0[i, s] - ln_lam[l])) B_l(T[i, s]).

    ``B_l`` is interpolated linearly in ln T in ``b_tab[t, l]`` (nodes ``lt0 + t dlt``; linear in B:
    errs by <= dlt^2 x^2 / 8 relative, x = hc / lambda k T: 2e-4 at x = 20, 8e-4 at x = 40, where
    the emission is e^-20 - e^-40 of its peak); temperatures outside the table use the formula
    ``B_l(T) = b_coef[l] / expm1(x_coef[l] / T)``. The table lookup of :func:`_q_batch` and the size
    sum in one pass, without the [N, S, L] arrays and without an exponential per term. Returns as
    :func:`_q_batch` (points with a tile not built are left unset).
    """
    lx0, dx, nx = axes[4], axes[5], int(axes[8])
    n_pts, n_lam = out.shape
    n_sizes = ln_x0.shape[1]
    n_t = b_tab.shape[0]
    missing = 0
    sl = np.empty(4, dtype=np.int64)
    ia = np.empty(4, dtype=np.int64)
    ib = np.empty(4, dtype=np.int64)
    wab = np.empty(4)
    jt = np.empty(n_sizes, dtype=np.int64)
    ft = np.empty(n_sizes)
    for i in range(n_pts):
        for s in range(n_sizes):
            pt = (ln_t[i, s] - lt0) / dlt
            if pt >= 0.0 and pt < n_t - 1:
                jt[s] = int(pt)
                ft[s] = pt - jt[s]
            else:
                jt[s] = -1
                ft[s] = np.exp(ln_t[i, s])
        for l in range(n_lam):
            status, scale = _stencil(store, slots, axes, n[i, l], k[i, l], sl, ia, ib, wab, need)
            if status == 2:
                out[i, l] = 0.0
                continue
            if status < 0:
                return -(1 + i * n_lam + l)
            if status == 1:
                missing += 1
                continue
            acc = 0.0
            log_mode = scale < 0
            scale = abs(scale)
            for s in range(n_sizes):
                q = weight[i, s] * _q_at(store, lnstore, sl, ia, ib, wab, ln_x0[i, s] - ln_lam[l], lx0, dx, nx,
                                         log_mode)
                j = jt[s]
                if j >= 0:
                    acc += q * (b_tab[j, l] + ft[s] * (b_tab[j + 1, l] - b_tab[j, l]))
                else:                   # outside the table: ft[s] holds T itself
                    acc += q * (b_coef[l] / np.expm1(x_coef[l] / ft[s]))
            out[i, l] = scale * acc
    return missing


@numba.njit(cache=True)
def _newton_ln_t(qg, w, x_coef, b_coef, ln_t, ln_abs):  # pragma: no cover - compiled
    """One Newton step on ln E(ln T) = ln absorbed, in place on ln_t [N, S].

    ``E = sum_l qg[i, s, l] w[l] B_l(T)``, ``B_l(T) = b_coef[l] / expm1(x_coef[l] / T)``; the step
    is clipped to +-0.5 in ln T.
    """
    n_pts, n_sizes, n_lam = qg.shape
    for i in range(n_pts):
        for s in range(n_sizes):
            inv_t = np.exp(-ln_t[i, s])
            e = 0.0
            de = 0.0
            for l in range(n_lam):
                x = x_coef[l] * inv_t
                ex = np.exp(-x)                      # B = b e^-x / (1 - e^-x), T dB/dT = B x / (1 - e^-x)
                if ex == 0.0:
                    continue
                g = 1.0 / (1.0 - ex)
                qb = qg[i, s, l] * w[l] * (b_coef[l] * ex * g)
                e += qb
                de += qb * x * g
            step = (np.log(e) - ln_abs[i, s]) * e / de
            ln_t[i, s] -= min(max(step, -0.5), 0.5)


@numba.njit(cache=True)
def _newton_one(eps, frac, j, e, tol, n_iter):  # pragma: no cover - compiled
    """Newton on F(e) = 3 e sum f_i / (eps_i + 2 e) - 1 for element j; returns (e, converged)."""
    n_comp = eps.shape[0]
    for _ in range(n_iter):
        s1 = 0j
        s2 = 0j
        for c in range(n_comp):
            den = eps[c, j] + 2.0 * e
            if den == 0:
                return e, False
            r = 1.0 / den
            s1 += frac[c] * r
            s2 += frac[c] * r * r
        df = 3.0 * s1 - 6.0 * e * s2
        if df == 0:
            return e, False
        step = (3.0 * e * s1 - 1.0) / df
        e = e - step
        if not (np.isfinite(e.real) and np.isfinite(e.imag)):
            return e, False
        if abs(step) <= tol * abs(e):
            return e, True
    return e, False


@numba.njit(cache=True)
def _bruggeman_newton(eps, ln_eps, arg_eps, ln_lam, phi, tol, out, ok):  # pragma: no cover - compiled
    """Physical Bruggeman root per (point, wavelength), as :func:`motes.optics.mixing._solve_bruggeman` starts it.

    eps, ln_eps, arg_eps: [n_comp, L] permittivities of the components (vacuum included) and their
    logarithms and arguments (per material, computed once), at wavelengths ``exp(ln_lam[L])``; phi:
    [n_comp, N] whole-grain fractions
    of each point. out, ok: [N * L], element ``j = i * L + l``. Newton from the root of the previous
    wavelength of the same point, continued linearly in ln lambda (the sector root is unique, so any
    converged start inside the sector gives the same root), else from the weighted geometric mean (the general solver's
    start); where that fails or leaves the sector spanned by the present components, the unique
    root of the Bruggeman polynomial in the sector (the same root whenever there is one), then the
    continuation from the majority component in 32 and 512 steps. ok[j] False where all fail (the
    caller then uses the general solver).
    """
    n_comp, run = eps.shape
    m = phi.shape[1] * run
    f = np.empty(n_comp)
    for j in range(m):
        i = j // run
        l = j - i * run
        le = 0j
        lo, hi = np.inf, -np.inf
        major = 0
        for c in range(n_comp):
            f[c] = phi[c, i]
            if phi[c, i] > phi[major, i]:
                major = c
            if phi[c, i] > 0:
                le += phi[c, i] * ln_eps[c, l]
                arg = arg_eps[c, l]
                lo = min(lo, arg)
                hi = max(hi, arg)
        good = False
        if l and ok[j - 1]:
            # the previous element (the neighbouring wavelength of the same mixture) as start, continued
            # linearly in ln lambda from the one before it where the wavelengths step on the same way
            start = out[j - 1]
            if l > 1 and ok[j - 2]:
                ratio = (ln_lam[l] - ln_lam[l - 1]) / (ln_lam[l - 1] - ln_lam[l - 2])
                if 0.0 < ratio <= 2.0:
                    start = out[j - 1] + ratio * (out[j - 1] - out[j - 2])
            e, conv = _newton_one(eps, f, l, start, tol, 50)
            ang = np.angle(e)
            good = conv and e != 0 and ang >= lo - 1e-9 and ang <= hi + 1e-9
        if not good:
            e, conv = _newton_one(eps, f, l, np.exp(le), tol, 50)
            good = conv and e != 0 and np.angle(e) >= lo - 1e-9 and np.angle(e) <= hi + 1e-9
        if not good:
            # all roots of sum_i f_i (eps_i - e) prod_{k != i} (eps_k + 2 e): the unique one in the sector
            coeffs = np.zeros(n_comp + 1, dtype=np.complex128)       # increasing powers
            for a in range(n_comp):
                term = np.zeros(n_comp + 1, dtype=np.complex128)
                term[0] = phi[a, i] * eps[a, l]
                term[1] = -phi[a, i]
                for c in range(n_comp):
                    if c != a:
                        shifted = np.zeros(n_comp + 1, dtype=np.complex128)
                        shifted[1:] = 2.0 * term[:-1]
                        term = eps[c, l] * term + shifted
                coeffs += term
            roots = np.roots(coeffs[::-1])
            count = 0
            pick = 0j
            for r in roots:
                if r != 0 and np.isfinite(r.real) and np.angle(r) >= lo - 1e-9 and np.angle(r) <= hi + 1e-9:
                    count += 1
                    pick = r
            if count == 1:
                for c in range(n_comp):
                    f[c] = phi[c, i]
                e, cv = _newton_one(eps, f, l, pick, tol, 50)
                good = cv and e != 0 and np.angle(e) >= lo - 1e-9 and np.angle(e) <= hi + 1e-9
        for n_steps in (32, 512):
            if good:
                break
            e = eps[major, l]
            conv = True
            for step in range(1, n_steps + 1):
                t = step / n_steps
                for c in range(n_comp):
                    f[c] = t * phi[c, i] + (1.0 - t) * (1.0 if c == major else 0.0)
                e, cv = _newton_one(eps, f, l, e, tol, 50)
                conv = conv and cv
            good = conv and e != 0 and np.angle(e) >= lo - 1e-9 and np.angle(e) <= hi + 1e-9
        out[j] = e
        ok[j] = good


def _tile_values(ti: int, tk: int) -> np.ndarray:
    """ln Q_abs on one tile [TILE, TILE, N_X] (float32)."""
    n = _node_values(LN_N, N_N)[ti * TILE:(ti + 1) * TILE]
    k = _node_values(LN_K, N_K)[tk * TILE:(tk + 1) * TILE]
    x = _node_values(LN_X, N_X)
    out = np.full((TILE, TILE, N_X), np.nan)
    m = (n[:, None] + 1j * k[None, :]).ravel()
    mm, xx = np.broadcast_arrays(m[:, None], x[None, :])
    small = (xx <= MIE_X_MAX) & (np.abs(mm) * xx <= MIE_MX_MAX)
    q = np.empty(mm.shape)
    q[small] = mie.efficiencies(mm[small], xx[small]).q_abs
    ripple = small & (mm.imag * xx < X_AVERAGE_KX) & (xx > 0.1)
    if X_AVERAGE > 1 and ripple.any():
        # where the grain is not opaque (k x small) its resonances are narrower than the x step: the mean
        # of Q_abs over the x bin (midpoints of X_AVERAGE sub-bins in ln x) instead of the node value
        ms, xs = mm[ripple], xx[ripple]
        total = np.zeros(ms.shape)
        for off in LN_X[1] * ((np.arange(X_AVERAGE) + 0.5) / X_AVERAGE - 0.5):
            total += mie.efficiencies(ms, xs * np.exp(off)).q_abs
        q[ripple] = total / X_AVERAGE
    q[~small] = th.ray_optics_absorption(mm[~small], xx[~small], n_angles=64)
    out[:n.size, :k.size] = np.log(np.clip(q, 1e-300, None)).reshape(n.size, k.size, N_X)
    return out.astype(np.float32)


class QAbsTable:
    """The Q_abs(n, k, x) table, tiles built on demand and cached on disk.

    Tiles are cached as ln Q_abs (float32); :attr:`store` holds Q_abs itself (float32), which the
    compiled lookups interpolate linearly below k = :data:`K_LINEAR`, :attr:`lnstore` ln Q_abs,
    interpolated in (ln n, ln k) above it (:func:`_q_at`).
    """

    def __init__(self, folder=None):
        self.slots = np.full(((N_N + TILE - 1) // TILE, (N_K + TILE - 1) // TILE), -1, dtype=np.int64)
        self.store = np.empty((0, TILE, TILE, N_X), dtype=np.float32)
        self.lnstore = np.empty((0, TILE, TILE, N_X), dtype=np.float32)
        self._count = 0
        self.axes = np.array([LN_N[0], LN_N[1], LN_K[0], LN_K[1], LN_X[0], LN_X[1], N_N, N_K, N_X])
        self.folder = Path(folder) if folder is not None else None
        self.tiles_built = 0

    @property
    def key(self) -> str:
        text = (f"{FORMAT_VERSION} {LN_N} {LN_K} {LN_X} {N_N} {N_K} {N_X} {TILE} {MIE_X_MAX} {MIE_MX_MAX} "
                f"{mie.solver_summary()}" + (f" x-average {X_AVERAGE} kx {X_AVERAGE_KX}" if X_AVERAGE > 1 else ""))
        return hashlib.sha256(text.encode()).hexdigest()[:16]

    def _dir(self):
        base = self.folder if self.folder is not None else cache_directory() / "thermal_tables"
        return base / self.key

    def ensure_tile(self, ti: int, tk: int) -> None:
        if self.slots[ti, tk] >= 0:
            return
        path = self._dir() / f"tile_{ti:03d}_{tk:03d}.npy"
        vals = None
        if path.exists():
            try:
                vals = np.load(path)
                if vals.shape != (TILE, TILE, N_X):
                    vals = None
            except (OSError, ValueError):
                vals = None
        if vals is None:
            vals = _tile_values(ti, tk)
            path.parent.mkdir(parents=True, exist_ok=True)
            with atomic_write(path, suffix=".npy") as tmp:
                with open(tmp, "wb") as fh:
                    np.save(fh, vals)
            self.tiles_built += 1
        if self._count == self.store.shape[0]:
            for name in ("store", "lnstore"):
                grown = np.empty((max(16, 2 * self._count), TILE, TILE, N_X), dtype=np.float32)
                grown[:self._count] = getattr(self, name)[:self._count]
                setattr(self, name, grown)
        self.lnstore[self._count] = vals
        self.store[self._count] = np.exp(vals.astype(np.float64)).astype(np.float32)
        self.slots[ti, tk] = self._count
        self._count += 1

    @property
    def tiles_ready(self) -> int:
        return self._count

    def ensure(self, m) -> None:
        """Make ready every tile the indices ``m`` (any shape) need."""
        m = np.asarray(m).ravel()
        m = m[m.imag > 0]
        if not m.size:
            return
        self._check_range(m)
        pn = (np.log(m.real) - LN_N[0]) / LN_N[1]
        pk = (np.log(np.maximum(m.imag, 1e-6)) - LN_K[0]) / LN_K[1]
        a = np.minimum(pn.astype(int), N_N - 2)
        b = np.minimum(pk.astype(int), N_K - 2)
        tiles = set()
        for da in (0, 1):
            for db in (0, 1):
                tiles.update(zip(((a + da) // TILE).tolist(), ((b + db) // TILE).tolist()))
        for ti, tk in sorted(tiles):
            self.ensure_tile(ti, tk)

    @staticmethod
    def _check_range(m):
        bad = (m.real < 0.3) | (m.real > N_MAX) | (m.imag > K_MAX)
        if bad.any():
            v = m[bad][0]
            raise ModelError(f"effective index {v:.4g} outside the thermal fast path's table "
                             "(n 0.3-{N_MAX:g}, k <= {K_MAX:g}): use the exact path")

    def q_abs(self, m, x) -> np.ndarray:
        """Q_abs at indices ``m`` and size parameters ``x`` (same shape); builds missing tiles."""
        m = np.asarray(m, dtype=complex)
        x = np.asarray(x, dtype=float)
        n_, k_, x_ = (np.ascontiguousarray(v.ravel()) for v in (m.real, m.imag, x))
        out = np.empty(n_.size)
        for _ in range(10000):
            code = _interp_lnq(self.store, self.lnstore, self.slots, self.axes, n_, k_, x_, out)
            if code == 0:
                return out.reshape(x.shape)
            if code < 0:
                self._check_range(np.array([n_[-code - 1] + 1j * k_[-code - 1]]))
                raise ModelError("index outside the thermal table")  # pragma: no cover
            ti, tk = divmod(code - 1, self.slots.shape[1])
            self.ensure_tile(ti, tk)
        raise ModelError("thermal table: too many tiles to build")  # pragma: no cover


    def q_abs_sizes(self, m, ln_x0, ln_lam) -> np.ndarray:
        """Q_abs [N, S, L] at indices ``m`` [N, L] and size parameters ``exp(ln_x0[N, S] - ln_lam[L])``."""
        m = np.asarray(m, dtype=complex)
        n_, k_ = np.ascontiguousarray(m.real), np.ascontiguousarray(m.imag)
        ln_x0 = np.ascontiguousarray(ln_x0, dtype=float)
        ln_lam = np.ascontiguousarray(ln_lam, dtype=float)
        out = np.empty((m.shape[0], ln_x0.shape[1], ln_lam.size))
        for _ in range(3):
            need = np.zeros(self.slots.shape, dtype=np.bool_)
            code = _q_batch(self.store, self.lnstore, self.slots, self.axes, n_, k_, ln_x0, ln_lam, out, need)
            if code == 0:
                return out
            if code < 0:
                i, l = divmod(-code - 1, ln_lam.size)
                self._check_range(np.array([n_[i, l] + 1j * k_[i, l]]))
                raise ModelError("index outside the thermal table")  # pragma: no cover
            for ti, tk in zip(*np.nonzero(need)):
                self.ensure_tile(int(ti), int(tk))
        raise ModelError("thermal table: tiles still missing after building")  # pragma: no cover

    def flux_sums(self, m, ln_x0, ln_lam, weight, ln_t, b_tab, lt0, dlt, b_coef, x_coef) -> np.ndarray:
        """``sum_s weight[N, S] Q_abs B_l(T[N, S])`` [N, L] at indices ``m`` [N, L].

        Q_abs at size parameters ``exp(ln_x0[N, S] - ln_lam[L])`` as :meth:`q_abs_sizes`; ``B_l``
        from the table ``b_tab[t, l]`` on ln T nodes ``lt0 + t dlt`` (linear in ln T), or
        ``b_coef[l] / expm1(x_coef[l] / T)`` outside it (:func:`_flux_batch`). Builds missing tiles.
        """
        m = np.asarray(m, dtype=complex)
        n_, k_ = np.ascontiguousarray(m.real), np.ascontiguousarray(m.imag)
        ln_x0, ln_lam, weight, ln_t, b_tab, b_coef, x_coef = (
            np.ascontiguousarray(v, dtype=float) for v in (ln_x0, ln_lam, weight, ln_t, b_tab, b_coef, x_coef))
        out = np.empty(m.shape)
        for _ in range(3):
            need = np.zeros(self.slots.shape, dtype=np.bool_)
            code = _flux_batch(self.store, self.lnstore, self.slots, self.axes, n_, k_, ln_x0, ln_lam, weight, ln_t,
                               b_tab, float(lt0), float(dlt), b_coef, x_coef, out, need)
            if code == 0:
                return out
            if code < 0:
                i, l = divmod(-code - 1, m.shape[1])
                self._check_range(np.array([n_[i, l] + 1j * k_[i, l]]))
                raise ModelError("index outside the thermal table")  # pragma: no cover
            for ti, tk in zip(*np.nonzero(need)):
                self.ensure_tile(int(ti), int(tk))
        raise ModelError("thermal table: tiles still missing after building")  # pragma: no cover


_TABLE: QAbsTable | None = None


def q_abs_table() -> QAbsTable:
    """The process's Q_abs table (tiles shared by every model)."""
    global _TABLE
    if _TABLE is None or _TABLE.folder is not None or _TABLE._dir() != (cache_directory() / "thermal_tables" / _TABLE.key):
        _TABLE = QAbsTable()
    return _TABLE


def balance_grid(materials) -> np.ndarray:
    """The fast path's balance grid [um]: 20 per decade plus the materials' points beyond 2 um."""
    extra = np.concatenate([m.wavelength[m.wavelength > 2.0] for m in materials])
    return th.thermal_wavelength_grid(per_decade=BALANCE_PER_DECADE, extra=extra,
                                      extra_per_decade=FEATURE_PER_DECADE)


class ThermalRingModel:
    """Band fluxes of a ring of one material set's mixtures, batched over parameter points.

    Parameters
    ----------
    description : motes.dust.model.description.ModelDescription
        Materials, mixing rule, star (``luminosity`` and ``teff`` or a spectrum).
    bands : sequence of Band
        The thermal bands.
    distance_pc : float, default 1
        Observer distance of the returned fluxes.
    table : QAbsTable, optional

    Notes
    -----
    :meth:`band_flux` returns Jy per au^2 of total grain cross-section; the
    amount of dust is a free scale of the fit.
    """

    @accepts_quantities
    def __init__(self, description, bands, distance_pc: float = 1.0, table: QAbsTable | None = None):
        from .thermal import _check_coverage, _flux_jy, _star_at

        star = description.star
        if star.luminosity is None:
            raise InputError("the thermal side needs the star's luminosity: add luminosity = ... [L_sun]",
                             path=description.source, where="[star]")
        self.description = description
        self.luminosity = float(star.luminosity)
        self.table = table if table is not None else q_abs_table()
        grid = balance_grid(description.materials)
        _check_coverage(description, grid)
        self.grid = grid
        l_grid, self.star_notes = th.stellar_luminosity_density(grid, self.luminosity, teff=star.teff,
                                                                spectrum=star.spectrum)
        w = th.trapezoid_weights(grid)
        self._wl = w * l_grid * th._L_SUN                        # W per um-weight
        self._w = w
        nodes, coef, star_band, far = [], [], [], []
        for band in bands:
            lo, hi = band.wavelength_min, band.wavelength_max
            if lo < grid[0] or hi > grid[-1]:
                raise InputError(f"band '{band.name}' ({lo:.4g}-{hi:.4g} um) lies outside the thermal grid "
                                 f"({grid[0]:.3g}-{grid[-1]:.3g} um)", where="thermal bands")
            fine = np.union1d(np.linspace(lo, hi, 801),
                              band.wavelength[(band.wavelength >= lo) & (band.wavelength <= hi)])
            far.append(band.pivot_wavelength >= FAR_IR_UM)
            nd, wt = weighted_gauss_nodes(fine, band.weight(fine), BAND_NODES_FAR if far[-1] else BAND_NODES)
            c = band.flux_lambda_to_fnu(1.0) * wt / flam_to_fnu(1.0, nd)
            nodes.append(nd)
            coef.append(c)
            star_band.append(float(np.sum(c * _flux_jy(_star_at(description, self.luminosity, grid, l_grid, nd),
                                                       nd, distance_pc))))
        self.bands = tuple(bands)
        # band nodes of the mid-infrared bands first, then the far-infrared ones (two size quadratures)
        order = [i for i in range(len(bands)) if not far[i]] + [i for i in range(len(bands)) if far[i]]
        self.band_nodes = np.concatenate([nodes[i] for i in order]) if order else np.zeros(0)
        self._n_mid = int(sum(nodes[i].size for i in order if not far[i]))
        self._coef = np.zeros((len(bands), self.band_nodes.size))
        j = 0
        for i in order:
            self._coef[i, j:j + coef[i].size] = coef[i]
            j += coef[i].size
        self.star_flux = np.array(star_band)
        self.distance_pc = float(distance_pc)
        lam = np.concatenate([grid, self.band_nodes])
        self._lam = lam
        samples = [m.sample(lam) for m in description.materials]
        self.notes = tuple(dict.fromkeys([*self.star_notes, *(n for s in samples for n in s.notes), FAST_NOTE]))
        self._ind = np.array([s.m for s in samples])
        # per-material permittivities (vacuum last) with their logarithms and arguments, for the Bruggeman kernel
        self._eps = np.concatenate([self._ind**2, np.ones((1, lam.size), dtype=complex)])
        self._ln_eps = np.log(self._eps)
        self._arg_eps = np.angle(self._eps)
        self._ln_lam = np.log(lam)
        self._t_grid = np.exp(np.arange(np.log(th.TEMPERATURE_RANGE[0]), np.log(th.TEMPERATURE_RANGE[1]) + 1e-9,
                                        _LN_T_STEP))
        self._planck = w[:, None] * np.pi * th.planck_lambda(grid[:, None], self._t_grid[None, :])   # [L, T]
        # Planck functions as b / expm1(x / T) for the compiled loops: x = hc / lambda k, b from the function
        # itself at x / T = 1 (pi B_lambda on the balance grid, B_nu [Jy/sr] at the band nodes)
        self._x_grid = th._HC_OVER_K_UM_K / grid
        self._b_grid = np.pi * th.planck_lambda(grid, self._x_grid) * np.expm1(1.0)
        self._x_band = th._HC_OVER_K_UM_K / self.band_nodes
        self._b_band = th.planck_nu(self.band_nodes, self._x_band) * np.expm1(1.0)
        self._ln_grid, self._ln_band = np.log(grid), np.log(self.band_nodes)
        # ln B_nu at the band nodes on a fine ln T grid (the flux loop interpolates it: one exponential per term)
        lt_b = np.arange(np.log(th.TEMPERATURE_RANGE[0]) - 0.1, np.log(th.TEMPERATURE_RANGE[1]) + 0.1, _LN_T_FLUX)
        xt = self._x_band[None, :] * np.exp(-lt_b)[:, None]
        self._ln_b_band = np.ascontiguousarray(np.log(self._b_band)[None, :] - xt - np.log1p(-np.exp(-xt)))
        self._b_band_tab = np.exp(self._ln_b_band)         # B_nu itself: the flux loop interpolates it linearly
        self._lt_b0 = float(lt_b[0])
        # B_nu [Jy/sr] at band nodes is evaluated per temperature; constant factor au^2 / d^2
        self._flux_factor = th._AU**2 / (self.distance_pc * th._PC) ** 2
        self._gl = np.polynomial.legendre.leggauss(N_SIZES)
        self._gl_t = np.polynomial.legendre.leggauss(N_SIZES_T)
        # every node set spans the same interval in ln a: one set of interpolation weights for every point
        tt = self._gl_t[0]
        # (band-node slice, Gauss-Legendre set, T interpolation index) of the mid- and far-infrared bands
        self._flux_groups = []
        n_grid = grid.size
        for sl, n_s in ((slice(0, self._n_mid), N_SIZES), (slice(self._n_mid, self.band_nodes.size), N_SIZES_FAR)):
            if sl.stop <= sl.start:
                continue
            gl = self._gl if n_s == N_SIZES else np.polynomial.legendre.leggauss(n_s)
            j = np.clip(np.searchsorted(tt, gl[0]) - 1, 0, tt.size - 2)
            self._flux_groups.append((slice(n_grid + sl.start, n_grid + sl.stop), sl, gl, j))

    def effective_index(self, fractions, porosity):
        """[N, n_lambda] effective indices on the balance grid and band nodes.

        Bruggeman: a compiled Newton from the same start and to the same tolerance as
        :func:`motes.optics.mixing.mix_refractive_index`, which takes over wherever it does not
        converge inside the physical sector; other rules go there directly.
        """
        from .thermal import _matrix_index

        d = self.description
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        p = np.broadcast_to(np.asarray(porosity, dtype=float), (f.shape[0],))
        if d.mixing != "bruggeman" or not (np.isfinite(f).all() and (f >= 0).all() and (p >= 0).all()
                                           and (p < 1).all()):
            return mix_refractive_index(self._ind[:, None, :], f.T[:, :, None], p[:, None],
                                        rule=d.mixing, matrix=_matrix_index(d))
        n_pts, n_lam = f.shape[0], self._lam.size
        n_comp = self._ind.shape[0] + 1
        phi = np.empty((n_comp, n_pts))
        phi[:-1] = (1.0 - p)[None, :] * f.T
        phi[-1] = p
        e = np.empty(n_pts * n_lam, dtype=complex)
        ok = np.empty(n_pts * n_lam, dtype=np.bool_)
        _bruggeman_newton(self._eps, self._ln_eps, self._arg_eps, self._ln_lam, phi, BRUGGEMAN_TOLERANCE, e, ok)
        if not ok.all():
            bad = np.flatnonzero(~ok)
            ii, ll = np.unravel_index(bad, (n_pts, n_lam))
            m_bad = mix_refractive_index(self._ind[:, ll], f.T[:, ii], p[ii], rule="bruggeman")
            e[bad] = m_bad**2
        return np.sqrt(e).reshape(n_pts, n_lam)

    def prepare(self, fractions, porosity) -> None:
        """Build, in advance, the table tiles these mixtures need."""
        self.table.ensure(self.effective_index(fractions, porosity))

    @accepts_quantities
    def evaluate(self, fractions, porosity, a_min, a_max, q, radius_au, temperatures: bool = False):
        """Band fluxes [Jy per au^2 of grain cross-section at distance_pc], shape [N, n_bands].

        Parameters
        ----------
        fractions : ndarray[N, n_materials]
        porosity, a_min, a_max, q, radius_au : ndarray[N] (or scalars broadcasting)
        temperatures : bool
            Also return the grain temperatures [N, N_SIZES_T] and their sizes [um].
        """
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        n = f.shape[0]
        por, amin, amax, qq, r = (np.broadcast_to(np.asarray(v, dtype=float), (n,))
                                  for v in (porosity, a_min, a_max, q, radius_au))
        if not (np.isfinite(r).all() and (r > 0).all()):
            raise InputError(f"ring radius must be > 0 au, got {r[~(r > 0)][:1]}", where="radius_au")
        m = self.effective_index(f, por)                                         # [N, L']
        half = 0.5 * np.log(amax / amin)
        ln_at = np.log(amin)[:, None] + half[:, None] * (self._gl_t[0][None, :] + 1.0)   # [N, S_T]
        n_grid = self.grid.size
        ln_2pi = np.log(2 * np.pi)
        qg = self.table.q_abs_sizes(np.ascontiguousarray(m[:, :n_grid]), ln_at + ln_2pi, self._ln_grid)
        absorbed = (qg @ self._wl) / (16 * np.pi * (r[:, None] * th._AU) ** 2)    # [N, S] W m^-2
        if not (absorbed > 0).all():
            raise ModelError("a grain absorbs no starlight (Q_abs = 0 wherever the star shines)")
        e_tab = np.maximum(qg @ self._planck, 1e-300)                            # [N, S, T]
        ln_abs = np.log(absorbed)
        if (absorbed > e_tab[:, :, -1]).any():
            raise ModelError(f"grains would be hotter than {th.TEMPERATURE_RANGE[1]:g} K: the ring lies inside "
                             "the sublimation radius of every solid (move it out)")
        if (absorbed < e_tab[:, :, 0]).any():
            raise ModelError(f"grains would be colder than {th.TEMPERATURE_RANGE[0]:g} K")
        # the bracketing T nodes (E rises with T; comparing E itself, the logarithms only of the two nodes)
        j = np.clip((e_tab < absorbed[:, :, None]).sum(axis=-1) - 1, 0, self._t_grid.size - 2)
        e0 = np.log(np.take_along_axis(e_tab, j[..., None], -1)[..., 0])
        e1 = np.log(np.take_along_axis(e_tab, (j + 1)[..., None], -1)[..., 0])
        lt = np.log(self._t_grid)
        ln_t = lt[j] + (ln_abs - e0) / (e1 - e0) * _LN_T_STEP
        # one Newton step on ln E(ln T) (from a start good to ~1e-3), compiled: no [N, S, L] temporaries
        ln_t = np.ascontiguousarray(ln_t)
        _newton_ln_t(qg, self._w, self._x_grid, self._b_grid, ln_t, np.ascontiguousarray(ln_abs))
        t_nodes = np.exp(ln_t)
        fnu = np.empty((n, self.band_nodes.size))
        for m_sl, b_sl, (t_gl, w_gl), j in self._flux_groups:
            ln_a = np.log(amin)[:, None] + half[:, None] * (t_gl[None, :] + 1.0)    # [N, S] flux nodes
            slope = (ln_t[:, j + 1] - ln_t[:, j]) / (ln_at[:, j + 1] - ln_at[:, j])
            ln_tf = ln_t[:, j] + slope * (ln_a - ln_at[:, j])                   # ln T at the flux nodes
            c = (w_gl[None, :] * half[:, None]) * np.exp(ln_a * (3.0 - qq[:, None]))
            c = c / c.sum(axis=1, keepdims=True)                                 # cross-section share per node
            # sum_s c Q_abs B_nu(T) at the band nodes [N, B'] (Jy/sr), table lookup and sum in one compiled pass
            fnu[:, b_sl] = self.table.flux_sums(m[:, m_sl], ln_a + ln_2pi, self._ln_band[b_sl], c, ln_tf,
                                                self._b_band_tab[:, b_sl], self._lt_b0, _LN_T_FLUX,
                                                self._b_band[b_sl], self._x_band[b_sl])
        out = (fnu * self._flux_factor) @ self._coef.T
        if temperatures:
            return out, t_nodes, np.exp(ln_at)
        return out
