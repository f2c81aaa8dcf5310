"""Mie scattering by homogeneous spheres: efficiencies, amplitudes, phase functions.

This module is the one place where motes talks to ``miepython``, the exact
Mie solver it uses. It enables miepython's compiled (numba) path by setting
``MIEPYTHON_USE_JIT=1`` *before* miepython is imported (``os.environ.setdefault``,
so a user who sets it to ``0`` keeps the pure-Python path);
:func:`solver_summary` reports which path is active for run summaries.

Conventions (``motes.conventions``)
-----------------------------------
* ``m = n + i k`` with ``k >= 0``. miepython uses ``n - i k`` and silently
  conjugates an index of the "wrong" sign; motes refuses ``k < 0`` instead
  (:class:`~motes.errors.InputError`) and converts explicitly.
* ``x = 2 pi a / lambda`` with ``a`` the grain **radius**; miepython's
  dimensional ``efficiencies(m, d, lambda0)`` takes a *diameter*, so the
  dimensional wrapper here (:func:`efficiencies_at`) never calls it.
* Amplitudes ``S1``, ``S2`` are those of Bohren & Huffman (1983), i.e.
  miepython's ``norm='wiscombe'`` (its default ``'albedo'`` rescales them), with
  ``integral (|S1|^2 + |S2|^2) dOmega = 2 pi x^2 Q_sca``.
* Phase function ``p(theta) = (|S1|^2 + |S2|^2) / (2 pi x^2 Q_sca)`` [sr^-1],
  so that ``integral p dOmega = 1`` and ``integral p cos(theta) dOmega = g``.

Sources: Bohren & Huffman (1983), *Absorption and Scattering of Light by Small
Particles*, ch. 4 (eqs. 4.61, 4.62, 4.74) and ch. 3.4; Wiscombe (1980), Appl.
Opt. 19, 1505 (series truncation used by miepython).
"""

from __future__ import annotations

import os

os.environ.setdefault("MIEPYTHON_USE_JIT", "1")  # the one place motes sets it

from dataclasses import dataclass  # noqa: E402

import miepython  # noqa: E402
import numpy as np  # noqa: E402

from ..errors import InputError  # noqa: E402
from ..parameters import SCATTERING_ANGLE_RAD, accepts_quantities  # noqa: E402

__all__ = [
    "MieEfficiencies",
    "efficiencies",
    "efficiencies_at",
    "scattering_amplitudes",
    "phase_function",
    "polarised_phase_function",
    "scattered_intensity",
    "polarised_scattered_intensity",
    "scattered_intensities",
    "intensities_for_index",
    "solver_summary",
    "check_index",
]

_USE_JIT = bool(getattr(miepython, "USE_JIT", False))


def solver_summary() -> str:
    """One line naming the Mie solver and whether its compiled path is on.

    Examples
    --------
    >>> solver_summary().startswith("miepython")
    True
    """
    path = "compiled (numba)" if _USE_JIT else "pure Python (about 80x slower)"
    return (f"miepython {miepython.__version__}, {path} path; "
            f"MIEPYTHON_USE_JIT={os.environ.get('MIEPYTHON_USE_JIT', '')!r}")


@dataclass(frozen=True)
class MieEfficiencies:
    """Mie efficiencies of spheres; every attribute has the broadcast shape of (m, x).

    Attributes
    ----------
    q_ext, q_sca, q_abs : ndarray
        Extinction, scattering and absorption efficiencies (cross-section / pi a^2).
    g : ndarray
        Asymmetry parameter <cos theta>.
    q_back : ndarray
        Back-scattering efficiency, ``4 |S1(180 deg)|^2 / x^2`` (Bohren & Huffman 1983, eq. 4.82).
    """

    q_ext: np.ndarray
    q_sca: np.ndarray
    q_abs: np.ndarray
    g: np.ndarray
    q_back: np.ndarray

    @property
    def albedo(self) -> np.ndarray:
        """Single-scattering albedo Q_sca / Q_ext."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(self.q_ext > 0, self.q_sca / self.q_ext, 0.0)

    @property
    def q_pr(self) -> np.ndarray:
        """Radiation-pressure efficiency Q_ext - g Q_sca (Burns, Lamy & Soter 1979, eq. 5)."""
        return self.q_ext - self.g * self.q_sca


def check_index(m, name: str = "m") -> np.ndarray:
    """Validate refractive indices ``n + i k`` and return them as a complex array.

    Raises
    ------
    motes.errors.InputError
        For non-finite values, ``n <= 0`` or ``k < 0`` (motes uses ``m = n + ik``
        with ``k >= 0``; a negative ``k`` is an amplifying medium or the other
        sign convention, and motes refuses to guess which).
    """
    m = np.asarray(m, dtype=complex)
    if not np.isfinite(m).all():
        raise InputError(f"{name} must be finite", where=name)
    if (m.imag < 0).any():
        bad = m[m.imag < 0].ravel()[0]
        raise InputError(
            f"{name} has a negative imaginary part ({bad:.4g}); motes uses m = n + ik with k >= 0 "
            "(if your data use n - ik, give k as a positive number)", where=name)
    if (m.real <= 0).any():
        raise InputError(f"{name} must have a positive real part n", where=name)
    return m


def _check_x(x, name: str = "x") -> np.ndarray:
    x = np.asarray(x, dtype=float)
    if not np.isfinite(x).all() or (x <= 0).any():
        raise InputError(f"size parameter {name} must be finite and > 0", where=name)
    return x


def _miepython_index(m: np.ndarray) -> np.ndarray:
    """Our n + ik to miepython's n - ik (explicit, never left to miepython)."""
    return np.conj(m).astype(np.complex128)


# ------------------------------------------------------------------ kernels
if _USE_JIT:
    import numba

    _single_sphere = miepython.single_sphere
    _s1_s2 = miepython._S1_S2

    @numba.njit(cache=True)
    def _efficiency_loop(m, x):  # pragma: no cover - compiled
        n = x.size
        out = np.empty((4, n))
        for i in range(n):
            qe, qs, qb, g = _single_sphere(m[i], x[i], 0, True)
            out[0, i] = qe
            out[1, i] = qs
            out[2, i] = qb
            out[3, i] = g
        return out

    @numba.njit(cache=True)
    def _amplitude_loop(m, x, mu):  # pragma: no cover - compiled
        n = x.size
        s1 = np.empty((n, mu.size), dtype=np.complex128)
        s2 = np.empty((n, mu.size), dtype=np.complex128)
        for i in range(n):
            a, b = _s1_s2(m[i], x[i], mu, 0)
            s1[i, :] = a
            s2[i, :] = b
        return s1, s2

    @numba.njit(cache=True)
    def _intensity_loop(m, x, mu):  # pragma: no cover - compiled
        # mean over the angles of |S1|^2 + |S2|^2 (Bohren & Huffman amplitudes)
        n = x.size
        out = np.empty(n)
        for i in range(n):
            a, b = _s1_s2(m[i], x[i], mu, 0)
            acc = 0.0
            for j in range(mu.size):
                acc += a[j].real ** 2 + a[j].imag ** 2 + b[j].real ** 2 + b[j].imag ** 2
            out[i] = acc / mu.size
        return out

    @numba.njit(cache=True)
    def _polarised_loop(m, x, mu):  # pragma: no cover - compiled
        # mean over the angles of |S1|^2 - |S2|^2 (= -2 S12; Bohren & Huffman amplitudes)
        n = x.size
        out = np.empty(n)
        for i in range(n):
            a, b = _s1_s2(m[i], x[i], mu, 0)
            acc = 0.0
            for j in range(mu.size):
                acc += a[j].real ** 2 + a[j].imag ** 2 - b[j].real ** 2 - b[j].imag ** 2
            out[i] = acc / mu.size
        return out

    @numba.njit(cache=True)
    def _intensities_loop(m, x, mu):  # pragma: no cover - compiled
        # both angle means of _intensity_loop and _polarised_loop from one S1, S2 per x: the same
        # amplitudes and the same sums in the same order, so each is bit-identical to its own loop
        n = x.size
        tot = np.empty(n)
        pol = np.empty(n)
        for i in range(n):
            a, b = _s1_s2(m[i], x[i], mu, 0)
            acc_t = 0.0
            acc_p = 0.0
            for j in range(mu.size):
                acc_t += a[j].real ** 2 + a[j].imag ** 2 + b[j].real ** 2 + b[j].imag ** 2
                acc_p += a[j].real ** 2 + a[j].imag ** 2 - b[j].real ** 2 - b[j].imag ** 2
            tot[i] = acc_t / mu.size
            pol[i] = acc_p / mu.size
        return tot, pol

    _lentz_dn = miepython.mie_jit._Lentz_Dn

    @numba.njit(cache=True)
    def _one_index_loop(m, x, mu):  # pragma: no cover - compiled
        """Angle means of |S1|^2 + |S2|^2 and |S1|^2 - |S2|^2 for one index m (n - ik) and many x.

        miepython's algorithm term for term (Wiscombe's truncation, Miller's downward
        recurrence for psi_n(x), Lentz's continued fraction then the downward recurrence
        for D_n(mx), Bohren & Huffman 1983 eqs. 4.88 for a_n, b_n and 4.74 for S1, S2), with
        three changes that only move the rounding: psi_n(x) in real arithmetic, workspaces
        allocated once per call instead of once per x, and each complex division done as
        one reciprocal of |d|^2 instead of Smith's three divisions (|d| stays far from
        overflow: d = T xi_n - xi_{n-1}, |T xi_n| ~ 3 n^2 / x^(n+1) for small x, so |d|^2 overflows
        only for x below ~1e-40).
        """
        nx = x.size
        nang = mu.size
        tot = np.empty(nx)
        pol = np.empty(nx)
        if nx == 0:
            return tot, pol
        inv_m = 1.0 / m
        xmax = x.max()
        nt_max = int(xmax + 4.05 * xmax ** 0.33333 + 2.0)
        psi = np.zeros(int(max(float(nt_max), xmax)) + 27 + int(1.5 * np.sqrt(xmax)))
        dd = np.zeros(nt_max + 3, dtype=np.complex128)
        pi_nm2 = np.zeros(nang)
        pi_n = np.zeros(nang)
        s1 = np.zeros(nang, dtype=np.complex128)
        s2 = np.zeros(nang, dtype=np.complex128)
        for i in range(nx):
            xi = x[i]
            nt = int(xi + 4.05 * xi ** 0.33333 + 2.0)
            # psi_n(x), n = 0..nt: Miller's downward recurrence, scaled to psi_0 or psi_1
            n_start = int(max(float(nt), xi)) + 25 + int(1.5 * np.sqrt(xi))
            psi[n_start + 1] = 0.0
            psi[n_start] = 1e-50
            for n in range(n_start, 0, -1):
                v = (2 * n + 1) / xi * psi[n] - psi[n + 1]
                psi[n - 1] = v
                if abs(v) > 1e200:
                    for k in range(n - 1, n_start + 2):
                        psi[k] /= 1e200
            sin_x = np.sin(xi)
            cos_x = np.cos(xi)
            psi_1 = sin_x / xi - cos_x
            scale = psi_1 / psi[1] if abs(psi_1) > abs(sin_x) else sin_x / psi[0]
            for k in range(nt + 1):
                psi[k] *= scale
            # D_n(mx), n = 0..nt + 2: Lentz at the top, then downwards
            z = m * xi
            inv_z = 1.0 / z
            last = _lentz_dn(z, nt + 2)
            for n in range(nt + 2, 0, -1):
                nz = n * inv_z
                w = last + nz
                r = 1.0 / (w.real * w.real + w.imag * w.imag)
                last = nz - complex(w.real * r, -w.imag * r)
                dd[n - 1] = last
            inv_x = 1.0 / xi
            chi_nm1 = cos_x
            chi_n = cos_x * inv_x + sin_x
            for k in range(nang):
                pi_nm2[k] = 0.0
                pi_n[k] = 1.0
                s1[k] = 0.0
                s2[k] = 0.0
            for n in range(1, nt + 1):
                n_over_x = n * inv_x
                xi_nm1 = psi[n - 1] + 1j * chi_nm1
                xi_n = psi[n] + 1j * chi_n
                dn = dd[n]
                temp = dn * inv_m + n_over_x
                den = temp * xi_n - xi_nm1
                r = 1.0 / (den.real * den.real + den.imag * den.imag)
                a = (temp * psi[n] - psi[n - 1]) * complex(den.real * r, -den.imag * r)
                temp = dn * m + n_over_x
                den = temp * xi_n - xi_nm1
                r = 1.0 / (den.real * den.real + den.imag * den.imag)
                b = (temp * psi[n] - psi[n - 1]) * complex(den.real * r, -den.imag * r)
                chi = (2 * n + 1) * inv_x * chi_n - chi_nm1
                chi_nm1 = chi_n
                chi_n = chi
                fn = float(n)
                sc = (2.0 * fn + 1.0) / ((fn + 1.0) * fn)
                for k in range(nang):
                    p = pi_n[k]
                    t = n * mu[k] * p - (n + 1) * pi_nm2[k]
                    s1[k] += sc * (p * a + t * b)
                    s2[k] += sc * (t * a + p * b)
                    pi_n[k] = ((2 * n + 1) * mu[k] * p - (n + 1) * pi_nm2[k]) / n
                    pi_nm2[k] = p
            acc = 0.0
            accp = 0.0
            for k in range(nang):
                u = s1[k].real ** 2 + s1[k].imag ** 2
                v = s2[k].real ** 2 + s2[k].imag ** 2
                acc += u + v
                accp += u - v
            tot[i] = acc / nang
            pol[i] = accp / nang
        return tot, pol

else:  # pure-Python fallback (MIEPYTHON_USE_JIT=0 set by the user)

    def _one_index_loop(m, x, mu):
        mm = np.full(x.size, m)
        return _intensity_loop(mm, x, mu), _polarised_loop(mm, x, mu)

    def _efficiency_loop(m, x):
        out = np.empty((4, x.size))
        for i in range(x.size):
            out[:, i] = miepython.single_sphere(m[i], x[i], 0, True)
        return out

    def _amplitude_loop(m, x, mu):
        s1 = np.empty((x.size, mu.size), dtype=complex)
        s2 = np.empty((x.size, mu.size), dtype=complex)
        for i in range(x.size):
            s1[i], s2[i] = miepython._S1_S2(m[i], x[i], mu, 0)
        return s1, s2

    def _intensity_loop(m, x, mu):
        s1, s2 = _amplitude_loop(m, x, mu)
        return (np.abs(s1) ** 2 + np.abs(s2) ** 2).mean(axis=1)

    def _polarised_loop(m, x, mu):
        s1, s2 = _amplitude_loop(m, x, mu)
        return (np.abs(s1) ** 2 - np.abs(s2) ** 2).mean(axis=1)

    def _intensities_loop(m, x, mu):
        s1, s2 = _amplitude_loop(m, x, mu)
        return (np.abs(s1) ** 2 + np.abs(s2) ** 2).mean(axis=1), (np.abs(s1) ** 2 - np.abs(s2) ** 2).mean(axis=1)


def _flat_pairs(m, x):
    m = check_index(m)
    x = _check_x(x)
    m, x = np.broadcast_arrays(m, x)
    shape = m.shape
    return (np.ascontiguousarray(_miepython_index(m.ravel())),
            np.ascontiguousarray(x.ravel(), dtype=np.float64), shape)


def _cos_angles(theta) -> tuple[np.ndarray, bool]:
    theta = np.asarray(theta, dtype=float)
    if not np.isfinite(theta).all() or (theta < 0).any() or (theta > np.pi + 1e-12).any():
        raise InputError("scattering angles theta must be in [0, pi] radians", where="theta")
    return np.ascontiguousarray(np.cos(np.atleast_1d(theta)).ravel()), theta.ndim == 0


# ----------------------------------------------------------------- public API
def efficiencies(m, x) -> MieEfficiencies:
    """Mie efficiencies of homogeneous spheres.

    Parameters
    ----------
    m : complex or complex ndarray
        Refractive index ``n + i k`` (``k >= 0``) relative to the surrounding medium.
    x : float or ndarray
        Size parameter ``2 pi a / lambda`` (``a`` the radius). Broadcasts with ``m``.

    Returns
    -------
    MieEfficiencies
        Arrays of the broadcast shape of ``m`` and ``x``.

    Raises
    ------
    motes.errors.InputError
        For ``k < 0``, ``n <= 0``, ``x <= 0`` or non-finite values.

    Notes
    -----
    Q_ext = (2/x^2) sum (2n+1) Re(a_n + b_n), Q_sca = (2/x^2) sum (2n+1)(|a_n|^2 + |b_n|^2),
    Q_abs = Q_ext - Q_sca (Bohren & Huffman 1983, eqs. 4.61-4.62), computed by miepython.

    Examples
    --------
    Bohren & Huffman (1983), Appendix A: m = 1.55, a = 0.525 um, lambda = 0.6328 um.

    >>> e = efficiencies(1.55, 2 * 3.141592653589793 * 0.525 / 0.6328)
    >>> print(f"{float(e.q_sca):.4f}")
    3.1054
    """
    mm, xx, shape = _flat_pairs(m, x)
    out = _efficiency_loop(mm, xx) if xx.size else np.empty((4, 0))
    q_ext, q_sca, q_back, g = (out[i].reshape(shape) for i in range(4))
    return MieEfficiencies(q_ext=q_ext, q_sca=q_sca, q_abs=np.asarray(q_ext - q_sca), g=g, q_back=q_back)


@accepts_quantities
def efficiencies_at(m, radius, wavelength) -> MieEfficiencies:
    """Mie efficiencies for a grain radius and a wavelength.

    Parameters
    ----------
    m : complex or complex ndarray
        Refractive index ``n + i k`` (``k >= 0``).
    radius : float, ndarray or Quantity ['length']
        Grain **radius** [um] (not the diameter miepython's own wrapper takes).
    wavelength : float, ndarray or Quantity ['length']
        Wavelength in the surrounding medium (vacuum) [um]. All three broadcast.

    Returns
    -------
    MieEfficiencies

    Examples
    --------
    >>> e = efficiencies_at(1.55, 0.525, 0.6328)
    >>> print(f"{float(e.q_ext):.4f}")
    3.1054
    """
    a = np.asarray(radius, dtype=float)
    lam = np.asarray(wavelength, dtype=float)
    if (a <= 0).any() or (lam <= 0).any():
        raise InputError("radius and wavelength must be > 0")
    return efficiencies(m, 2.0 * np.pi * a / lam)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def scattering_amplitudes(m, x, theta) -> tuple[np.ndarray, np.ndarray]:
    """Bohren & Huffman amplitude functions S1, S2 (miepython's ``norm='wiscombe'``).

    Parameters
    ----------
    m : complex or complex ndarray
        ``n + i k``, ``k >= 0``.
    x : float or ndarray
        Size parameter; broadcasts with ``m`` to shape ``S``.
    theta : float or ndarray[n_theta]
        Scattering angles [rad] in [0, pi].

    Returns
    -------
    S1, S2 : complex ndarray[*S, n_theta]
        (``[*S]`` when ``theta`` is a scalar.) Normalised so that
        ``integral (|S1|^2 + |S2|^2) dOmega = 2 pi x^2 Q_sca`` (Bohren & Huffman
        1983, eqs. 4.74 and 3.39 with ``k = 2 pi / lambda``).
    """
    mu, scalar = _cos_angles(theta)
    mm, xx, shape = _flat_pairs(m, x)
    s1, s2 = _amplitude_loop(mm, xx, mu)
    s1, s2 = np.conj(s1), np.conj(s2)  # back to the n + ik (exp(-i omega t)) convention
    out_shape = shape if scalar else shape + (mu.size,)
    return s1.reshape(out_shape), s2.reshape(out_shape)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def scattered_intensity(m, x, theta) -> np.ndarray:
    """Angle-averaged ``|S1|^2 + |S2|^2`` over the angles ``theta`` (equal weights).

    Parameters
    ----------
    m, x : broadcast to shape ``S``
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    ndarray[*S]
        ``mean_theta (|S1|^2 + |S2|^2)``; divide by ``2 pi x^2 Q_sca`` for the
        mean phase function. This is the quantity the disk-colour model integrates.
    """
    mu, _ = _cos_angles(theta)
    mm, xx, shape = _flat_pairs(m, x)
    if xx.size == 0:
        return np.empty(shape)
    return _intensity_loop(mm, xx, mu).reshape(shape)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def polarised_scattered_intensity(m, x, theta) -> np.ndarray:
    """Angle-averaged ``|S1|^2 - |S2|^2`` over the angles ``theta`` (equal weights), signed.

    The polarised twin of :func:`scattered_intensity`: ``-2 S12`` in Bohren &
    Huffman's (1983, eq. 4.77) notation, positive when the scattered light is
    polarised perpendicular to the scattering plane. A negative value is a
    result (parallel polarisation), not an error.

    Parameters
    ----------
    m, x : broadcast to shape ``S``
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    ndarray[*S]
    """
    mu, _ = _cos_angles(theta)
    mm, xx, shape = _flat_pairs(m, x)
    if xx.size == 0:
        return np.empty(shape)
    return _polarised_loop(mm, xx, mu).reshape(shape)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def scattered_intensities(m, x, theta) -> tuple[np.ndarray, np.ndarray]:
    """:func:`scattered_intensity` and :func:`polarised_scattered_intensity` from one Mie pass.

    Each of the two is bit-identical to its own function (the same amplitudes
    and sums); the Mie series, which is nearly all the cost, runs once.

    Parameters
    ----------
    m, x : broadcast to shape ``S``
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    total, polarised : ndarray[*S]
        ``mean_theta (|S1|^2 + |S2|^2)`` and ``mean_theta (|S1|^2 - |S2|^2)``.
    """
    mu, _ = _cos_angles(theta)
    mm, xx, shape = _flat_pairs(m, x)
    if xx.size == 0:
        return np.empty(shape), np.empty(shape)
    tot, pol = _intensities_loop(mm, xx, mu)
    return tot.reshape(shape), pol.reshape(shape)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def intensities_for_index(m, x, theta) -> tuple[np.ndarray, np.ndarray]:
    """Both angle means of :func:`scattered_intensity` and :func:`polarised_scattered_intensity`
    for ONE index and many size parameters, in one pass (the lookup tables' builder).

    Parameters
    ----------
    m : complex
        ``n + i k``, ``k >= 0`` (a single value).
    x : ndarray[n]
        Size parameters.
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    total, polarised : ndarray[n]
        ``mean_theta (|S1|^2 + |S2|^2)`` and ``mean_theta (|S1|^2 - |S2|^2)``.

    Notes
    -----
    The same series and recurrences as miepython (see ``_one_index_loop``) in a
    loop that does not allocate per x and divides complex numbers through one
    reciprocal; ~1.6x faster per x on the tables' samples. Against
    :func:`scattered_intensity` it differs by rounding only: measured at most
    6.5e-12 relative per sample (at deep minima of the Mie ripple), 3e-14 on
    size integrals (``benchmarks/bench_tilebuild.py``, ``tests/test_optics_mie_one_index.py``).
    """
    mm = check_index(np.asarray(m)).ravel()
    if mm.size != 1:
        raise InputError("intensities_for_index takes a single refractive index", where="m")
    xx = np.ascontiguousarray(_check_x(x).ravel(), dtype=np.float64)
    mu, _ = _cos_angles(theta)
    return _one_index_loop(complex(_miepython_index(mm)[0]), xx, mu)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def phase_function(m, x, theta) -> np.ndarray:
    """Mie phase function normalised to one over the sphere [sr^-1].

    Parameters
    ----------
    m : complex or complex ndarray
        ``n + i k``, ``k >= 0``.
    x : float or ndarray
        Size parameter; broadcasts with ``m`` to shape ``S``.
    theta : float or ndarray[n_theta]
        Scattering angles [rad].

    Returns
    -------
    ndarray[*S, n_theta] (``[*S]`` for scalar ``theta``)
        ``p = (|S1|^2 + |S2|^2) / (2 pi x^2 Q_sca)``, with
        ``integral p dOmega = 1`` and ``integral p cos(theta) dOmega = g``.

    Notes
    -----
    Bohren & Huffman (1983), eqs. 3.39 and 4.74. No renormalisation is applied:
    the tests integrate ``p`` numerically to check both identities.

    Examples
    --------
    >>> import numpy as np
    >>> p = phase_function(1.5 + 0.001j, 0.01, np.pi / 2)   # Rayleigh: 3/(16 pi) at 90 deg
    >>> print(f"{float(p) * 16 * np.pi / 3:.4f}")
    1.0000
    """
    s1, s2 = scattering_amplitudes(m, x, theta)
    q_sca = efficiencies(m, x).q_sca
    x = np.broadcast_to(np.asarray(x, dtype=float), q_sca.shape)
    denom = 2.0 * np.pi * x**2 * q_sca
    if s1.ndim > q_sca.ndim:
        denom = denom[..., None]
    return (np.abs(s1) ** 2 + np.abs(s2) ** 2) / denom


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def polarised_phase_function(m, x, theta) -> np.ndarray:
    """Polarised part of the phase function, ``(|S1|^2 - |S2|^2) / (2 pi x^2 Q_sca)`` [sr^-1].

    Positive when the scattered light is polarised perpendicular to the
    scattering plane (as for Rayleigh scattering at 90 deg, where it equals
    ``p``). It is ``-S12 / (pi x^2 Q_sca)`` in Bohren & Huffman's (1983, eq. 4.77)
    notation; multiply by the same size-distribution weights as ``p`` to model
    polarised-intensity images. :mod:`motes.optics.polarisation` gives S11, -S12
    and the degree of polarisation, for coated and hollow spheres too.
    """
    s1, s2 = scattering_amplitudes(m, x, theta)
    q_sca = efficiencies(m, x).q_sca
    x = np.broadcast_to(np.asarray(x, dtype=float), q_sca.shape)
    denom = 2.0 * np.pi * x**2 * q_sca
    if s1.ndim > q_sca.ndim:
        denom = denom[..., None]
    return (np.abs(s1) ** 2 - np.abs(s2) ** 2) / denom
