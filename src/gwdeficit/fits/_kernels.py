"""Compiled (numba) scalar kernels of the binary-black-hole remnant fits.

This is the one implementation of every BBH formula of the registry: the public functions of
fits.spin, fits.mass and fits.kick (which carry the equations, sources and calibrated ranges
in their docstrings) and the remnant stage (gwdeficit.remnant) both run the compiled loops
below through :func:`raw_block`. Each loop is one formula over a block of rows, written with
arithmetic, sqrt, min and max only, so that the compiler vectorises it (SIMD across rows);
the cube roots (ISCO closed form, starts of the Newton iterations) come from
:func:`cube_root`, a bit-level first guess refined in a compiled loop of the same kind
(numpy's own ``cbrt`` is a scalar libm call on machines without AVX-512). This replaces the
~200 numpy array passes the same formulas need as array expressions (docs/performance.md,
"Remnant fits").

Conventions: body 1 is the heavier (q = m2/m1 <= 1; :func:`components` exchanges the bodies
with their spins otherwise), spin components along L (``chi1z``) and in the orbital plane
(``chi1p``) are chi_i cos(tilt_i) and chi_i sin(tilt_i), ``cp12`` = cos(phi12), ``cph`` = cos of the
in-plane spin phase at merger. Compiled with numba's numpy error model (x/0 gives inf/NaN,
never an exception) and cached on disk after the first call (a few seconds, once).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits import kick, mass, spin

_JIT = {"cache": True, "error_model": "numpy", "nogil": True}

# Slots of the fits in the compiled kernels (registry order; fits.registry.Fit.slot).
BR09, R08, HLZ14_SPIN, BKL08, BMR12, HLZ14_MASS, BPT72, LOUSTO12, CAMPANELLI07 = range(9)
N_SLOTS = 9
# Quantity of each slot: 0 final spin, 1 final mass (E_rad / M), 2 recoil (km/s).
SLOT_QUANTITY = (0, 0, 0, 0, 1, 1, 1, 2, 2)

_SQRT3 = math.sqrt(3.0)
_TWO_SQRT3 = 2.0 * _SQRT3
_L_W0 = 2.0 / (3.0 * _SQRT3)  # L_isco(w) = _L_W0 (1 + 2 w), see fits.isco

_B = spin.BR09_COEFFICIENTS
B_S4, B_S5, B_T0, B_T2, B_T3 = _B["s4"], _B["s5"], _B["t0"], _B["t2"], _B["t3"]
_R = spin.R08_COEFFICIENTS
R_S4, R_S5, R_T0, R_T2, R_T3 = _R["s4"], _R["s5"], _R["t0"], _R["t2"], _R["t3"]
P0, P1 = mass.BMR12_COEFFICIENTS["p0"], mass.BMR12_COEFFICIENTS["p1"]
_HLZ_KEYS = ("0", "1", "2a", "2b", "2c", "2d", "3a", "3b", "3c", "3d")
_HLZ_KEYS += ("4a", "4b", "4c", "4d", "4e", "4f", "4g", "4h", "4i")
HLZ_L = tuple(spin.HLZ14_SPIN_COEFFICIENTS[k] for k in _HLZ_KEYS)
HLZ_K = tuple(spin.HLZ14_MASS_COEFFICIENTS[k] for k in _HLZ_KEYS)
_G = kick.GONZALEZ07_COEFFICIENTS
KICK_A, KICK_B = _G["A_kms"], _G["B"]
_LC = kick.LOUSTO12_COEFFICIENTS
L_HC = _LC["H_kms"] * math.cos(math.radians(_LC["xi_deg"]))
L_HS = _LC["H_kms"] * math.sin(math.radians(_LC["xi_deg"]))
L_V11, L_VA, L_VB, L_VC = _LC["V11_kms"], _LC["VA_kms"], _LC["VB_kms"], _LC["VC_kms"]
_CC = kick.CAMPANELLI07_COEFFICIENTS
C_HC = _CC["H_kms"] * math.cos(math.radians(_CC["xi_deg"]))
C_HS = _CC["H_kms"] * math.sin(math.radians(_CC["xi_deg"]))
C_K = _CC["K_kms"]

BKL_NEWTON_STEPS = 5

# Rows of the work array filled by :func:`components` (one block of rows per column).
(
    W_Q,
    W_MTOT,
    W_X1,
    W_X2,
    W_CHI1Z,
    W_CHI2Z,
    W_NU,
    W_SZ,
    W_SPAR,
    W_INPLANE,
    W_PERP,
    W_DPERP,
    W_CPH,
    W_A,
    W_B,
    W_CP,
    W_CM,
    W_HR,
) = range(18)
N_WORK = 18
_CBRT_13_5 = 13.5 ** (1.0 / 3.0)
# First guess of a cube root from the bits of a float32: bits / 3 + this constant (exponent and
# mantissa divided by three; the constant makes the guess's relative error < 3.3%, checked in
# tests/test_kernels_cube_root.py). The trick is Kahan's, "Computing a real cube root" (1991
# notes; from memory); the float32 constant is recalled, and the test is what vouches for it.
_CBRT_GUESS_BIAS = 0x2A5137A0
# |x| outside this range does not survive the float32 guess (underflow/overflow): scaled first.
_CBRT_F32_LO, _CBRT_F32_HI = 1e-37, 1e37


@njit(**_JIT)
def _heavier_first(m1, m2, c1, c2, ct1, ct2, q, mtot, x1, x2, chi1z, chi2z):
    """q = m_light/m_heavy, total mass, spin magnitudes and components along L, heavier first."""
    for i in range(m1.shape[0]):
        swap = m2[i] > m1[i]
        heavy, light = max(m1[i], m2[i]), min(m1[i], m2[i])
        a = c2[i] if swap else c1[i]
        b = c1[i] if swap else c2[i]
        q[i] = light / heavy
        mtot[i] = heavy + light
        x1[i] = a
        x2[i] = b
        chi1z[i] = a * (ct2[i] if swap else ct1[i])
        chi2z[i] = b * (ct1[i] if swap else ct2[i])


@njit(**_JIT)
def _in_plane(m1, m2, x1, x2, st1, st2, chi1p, chi2p):
    """In-plane spin components chi_i sin(tilt_i), heavier body first."""
    for i in range(m1.shape[0]):
        swap = m2[i] > m1[i]
        chi1p[i] = x1[i] * (st2[i] if swap else st1[i])
        chi2p[i] = x2[i] * (st1[i] if swap else st2[i])


@njit(**_JIT)
def _along_l(q, chi1z, chi2z, nu, sz, s_par, one_plus, one_minus):
    """nu = q/(1+q)^2, sz = chi1z + q^2 chi2z, s_par = sz/(1+q)^2, 1 + s_par, 1 - s_par."""
    for i in range(q.shape[0]):
        opq2 = (1.0 + q[i]) * (1.0 + q[i])
        z = chi1z[i] + q[i] * q[i] * chi2z[i]
        nu[i] = q[i] / opq2
        sz[i] = z
        s = z / opq2
        s_par[i] = s
        one_plus[i] = max(1.0 + s, 0.0)
        one_minus[i] = max(1.0 - s, 0.0)


@njit(**_JIT)
def _in_plane_sums(q, chi1p, chi2p, cp12, inplane, perp):
    """|chi1p + q^2 chi2p|^2 and the same over (1+q)^4."""
    for i in range(q.shape[0]):
        qa2 = q[i] * q[i] * chi2p[i]
        x = max(chi1p[i] * chi1p[i] + qa2 * (qa2 + 2.0 * chi1p[i] * cp12[i]), 0.0)
        opq2 = (1.0 + q[i]) * (1.0 + q[i])
        inplane[i] = x
        perp[i] = x / (opq2 * opq2)


@njit(**_JIT)
def _in_plane_difference(q, chi1p, chi2p, cp12, dperp):
    """|chi1p - q chi2p| (the superkick's in-plane spin difference)."""
    for i in range(q.shape[0]):
        qb = q[i] * chi2p[i]
        dperp[i] = math.sqrt(max(chi1p[i] * chi1p[i] + qb * (qb - 2.0 * chi1p[i] * cp12[i]), 0.0))


def components(m1, m2, c1, c2, ct1, st1, ct2, st2, cp12, cph, work) -> None:
    """Shared inputs of every fit for one block, heavier body first (with its spin).

    Fills ``work[W_*]``: q = m_light/m_heavy, total mass, the spin magnitudes of the heavier
    (x1) and lighter (x2) body, components along L (and, in W_A/W_B as scratch, in the
    plane), nu = q/(1+q)^2, sz = chi1z + q^2 chi2z, s_par = sz/(1+q)^2, |chi1p + q^2 chi2p|^2
    (in-plane total spin, squared), the same over (1+q)^4, |chi1p - q chi2p|, cos of the
    phase at merger, and (W_CP, W_CM) 1 + s_par and 1 - s_par, whose cube roots
    :func:`isco_cube_roots` takes when a fit needs them. Several short loops: each one
    vectorises, one long loop did not.
    """
    w = work
    _heavier_first(
        m1, m2, c1, c2, ct1, ct2, w[W_Q], w[W_MTOT], w[W_X1], w[W_X2], w[W_CHI1Z], w[W_CHI2Z]
    )
    _in_plane(m1, m2, w[W_X1], w[W_X2], st1, st2, w[W_A], w[W_B])
    _along_l(w[W_Q], w[W_CHI1Z], w[W_CHI2Z], w[W_NU], w[W_SZ], w[W_SPAR], w[W_CP], w[W_CM])
    _in_plane_sums(w[W_Q], w[W_A], w[W_B], cp12, w[W_INPLANE], w[W_PERP])
    _in_plane_difference(w[W_Q], w[W_A], w[W_B], cp12, w[W_DPERP])
    w[W_CPH] = cph


@njit(**_JIT)
def br09(work, out):
    """Barausse & Rezzolla 2009 final-spin magnitude (fits.spin.barausse_rezzolla_2009)."""
    for i in range(out.shape[0]):
        q, nu, sz = work[W_Q, i], work[W_NU, i], work[W_SZ, i]
        q2 = q * q
        opq2_ = 1.0 + q2
        spin_sq = sz * sz + work[W_INPLANE, i]
        ell = (
            B_S4 * spin_sq / (opq2_ * opq2_)
            + (B_S5 * nu + B_T0 + 2.0) * sz / opq2_
            + _TWO_SQRT3
            + nu * (B_T2 + B_T3 * nu)
        )
        lq = abs(ell) * q
        rad = max(spin_sq + lq * (2.0 * sz + lq), 0.0)
        out[i] = min(math.sqrt(rad) / ((1.0 + q) * (1.0 + q)), 1.0)


@njit(**_JIT)
def r08(work, out):
    """Rezzolla et al. 2008 final spin, in-plane spin in quadrature (fits.spin.rezzolla_2008)."""
    for i in range(out.shape[0]):
        q, nu = work[W_Q, i], work[W_NU, i]
        at = work[W_SZ, i] / (1.0 + q * q)
        par = at + nu * (at * (R_S4 * at + R_S5 * nu + R_T0) + _TWO_SQRT3 + nu * (R_T2 + R_T3 * nu))
        out[i] = min(math.sqrt(par * par + work[W_PERP, i]), 1.0)


@njit(**_JIT)
def hlz14_poly(c, s, d, dm):
    """The fourth-order polynomial in (S, Delta, dm) of both HLZ14 formulas (fits.spin)."""
    s2, d2, dm2 = s * s, d * d, dm * dm
    ddm = d * dm
    return (
        c[0]
        + c[1] * s
        + c[2] * ddm
        + c[3] * s2
        + c[4] * d2
        + c[5] * dm2
        + c[6] * ddm * s
        + c[7] * s * d2
        + c[8] * s2 * s
        + c[9] * s * dm2
        + c[10] * ddm * s2
        + c[11] * d2 * ddm
        + c[12] * d2 * d2
        + c[13] * s2 * s2
        + c[14] * d2 * s2
        + c[15] * dm2 * dm2
        + c[16] * ddm * dm2
        + c[17] * d2 * dm2
        + c[18] * s2 * dm2
    )


@njit(**_JIT)
def _hlz14_vars(q, chi1z, chi2z):
    """dm = (q - 1)/(1 + q) and Delta = (chi1z - q chi2z)/(1 + q) (heavier body first)."""
    return (q - 1.0) / (1.0 + q), (chi1z - q * chi2z) / (1.0 + q)


@njit(**_JIT)
def hlz14_explicit(work):
    """The explicit part A and the ISCO weight B = nu dm^6 of the HLZ14 spin equation.

    alpha = A + B L_isco(alpha) (Healy, Lousto & Zlochower 2014; fits.spin) into work[W_A],
    work[W_B], and max(1 - A, 0) into work[W_HR] (its cube root starts the solve); body 1 the
    heavier here, so the paper's dm = (q - 1)/(1 + q) and Delta = (chi1z - q chi2z)/(1 + q).
    """
    for i in range(work.shape[1]):
        q, nu, s = work[W_Q, i], work[W_NU, i], work[W_SPAR, i]
        dm, d = _hlz14_vars(q, work[W_CHI1Z, i], work[W_CHI2Z, i])
        dm4 = dm * dm * dm * dm
        a = 16.0 * nu * nu * hlz14_poly(HLZ_L, s, d, dm) + s * (1.0 + 8.0 * nu) * dm4
        work[W_A, i] = a
        work[W_B, i] = nu * dm4 * dm * dm
        work[W_HR, i] = max(1.0 - a, 0.0)


@njit(**_JIT)
def solve_spin_isco(weight, explicit, root, w_out):
    """Solve chi = weight L_isco(chi) + explicit for the ISCO variable w, row by row.

    F(w) = u (4 - w)/3 - weight L0 (1 + 2 w) - explicit with u = sqrt((w^2 + 2)/3) and
    L0 = 2/(3 sqrt 3) is decreasing (and concave) in w, so the root in [1, 5] is unique (the
    spin equation of Buonanno, Kidder & Lehner 2008, with L_isco and a(w) from Bardeen, Press
    & Teukolsky 1972, fits.isco). Start w0 = 1 + 13.5^(1/3) root (root = (1 - explicit)^(1/3),
    the inverse of a(w) ~ 1 - 2 (w - 1)^3 / 27 near the extremal spin), five Newton steps
    clipped to [1, 5], each written with one square root and one division: rounding level
    against scipy's brentq (tested).
    """
    for i in range(w_out.shape[0]):
        cl, s = _L_W0 * weight[i], explicit[i]
        w = min(max(1.0 + _CBRT_13_5 * root[i], 1.0), 5.0)
        for _ in range(BKL_NEWTON_STEPS):
            u = math.sqrt((w * w + 2.0) * (1.0 / 3.0))
            f3 = u * (4.0 - w) - 3.0 * (cl * (1.0 + 2.0 * w) + s)  # 3 F(w)
            den = -2.0 * (w - 1.0) * (w - 1.0) - 18.0 * cl * u  # 9 u F'(w)
            w = min(max(w - 3.0 * u * f3 / min(den, -1e-300), 1.0), 5.0)
        w_out[i] = w


@njit(**_JIT)
def hlz14_finish(work, w, spin_out, frac_out):
    """HLZ14 final-spin magnitude and E_rad / M from the solved ISCO variable w."""
    for i in range(w.shape[0]):
        q, nu, s = work[W_Q, i], work[W_NU, i], work[W_SPAR, i]
        dm, d = _hlz14_vars(q, work[W_CHI1Z, i], work[W_CHI2Z, i])
        b = work[W_B, i]
        alpha = _L_W0 * b * (1.0 + 2.0 * w[i]) + work[W_A, i]
        spin_out[i] = min(math.sqrt(alpha * alpha + work[W_PERP, i]), 1.0)
        e_isco = w[i] / math.sqrt(w[i] * w[i] + 2.0)
        dm2 = dm * dm
        mf = 16.0 * nu * nu * hlz14_poly(HLZ_K, s, d, dm) + (1.0 + nu * (e_isco + 11.0)) * (
            dm2 * dm2 * dm2
        )
        frac_out[i] = 1.0 - mf


@njit(**_JIT)
def bkl_finish(work, w, spin_out, frac_out):
    """BKL 2008 final-spin magnitude and the ISCO binding energy nu (1 - E_isco) at it."""
    for i in range(w.shape[0]):
        nu = work[W_NU, i]
        par = _L_W0 * nu * (1.0 + 2.0 * w[i]) + work[W_SPAR, i]
        spin_out[i] = min(math.sqrt(par * par + work[W_PERP, i]), 1.0)
        frac_out[i] = nu * (1.0 - w[i] / math.sqrt(w[i] * w[i] + 2.0))


@njit(**_JIT)
def bmr12(work, out):
    """Barausse, Morozova & Rezzolla 2012 E_rad / M (fits.mass).

    E_isco(s_par) = sqrt(1 - 2/(3 r_isco)) with r_isco from the closed form of Bardeen, Press
    & Teukolsky 1972 (eq. 2.21; fits.isco), the cube roots (1 + s_par)^(1/3) and
    (1 - s_par)^(1/3) taken beforehand (work[W_CP], work[W_CM], :func:`isco_cube_roots`).
    Rearranged as (1 - E) nu (1 - 4 nu) + 16 nu^2 (p0 + 4 p1 a (a + 1)).
    """
    for i in range(out.shape[0]):
        nu, a = work[W_NU, i], work[W_SPAR, i]
        cp, cm = work[W_CP, i], work[W_CM, i]
        z1 = 1.0 + cp * cm * (cp + cm)
        z2 = math.sqrt(3.0 * a * a + z1 * z1)
        r = 3.0 + z2 - math.copysign(math.sqrt(max((3.0 - z1) * (3.0 + z1 + 2.0 * z2), 0.0)), a)
        e = math.sqrt(1.0 - 2.0 / (3.0 * r))
        out[i] = (1.0 - e) * nu * (1.0 - 4.0 * nu) + 16.0 * nu * nu * (
            P0 + 4.0 * P1 * a * (a + 1.0)
        )


@njit(**_JIT)
def _kick_row(work, i, hc, hs, k_par, hang_up):
    """Recoil speed in km/s of row ``i`` (fits.kick): Lousto et al. 2012 with ``hang_up``,
    else Campanelli et al. 2007 with v_par = K nu^2/(1+q) |chi1p - q chi2p| cos(phase).

    v = |(v_m + v_perp cos xi) e1 + v_perp sin xi e2 + v_par ez|, hc = H cos xi, hs = H sin xi.
    """
    q, nu = work[W_Q, i], work[W_NU, i]
    f = nu * nu / (1.0 + q)
    perp_unit = f * (work[W_CHI1Z, i] - q * work[W_CHI2Z, i])
    par_unit = f * work[W_DPERP, i] * work[W_CPH, i]
    if hang_up:
        st = 2.0 * work[W_SPAR, i]
        v_par = 16.0 * (L_V11 + st * (L_VA + st * (L_VB + st * L_VC))) * par_unit
    else:
        v_par = k_par * par_unit
    x = KICK_A * (1.0 + KICK_B * nu) * f * (1.0 - q) + hc * perp_unit
    y = hs * perp_unit
    return math.sqrt(x * x + y * y + v_par * v_par)


@njit(**_JIT)
def kick(work, hc, hs, k_par, hang_up, out):
    """One recoil formula over a block (:func:`_kick_row`)."""
    for i in range(out.shape[0]):
        out[i] = _kick_row(work, i, hc, hs, k_par, hang_up)


@njit(**_JIT)
def kick_pair(work, out_l, out_c, mean, rng, std):
    """Both recoil fits (Lousto et al. 2012, Campanelli et al. 2007) and their mean, max - min
    and std in one loop (the same values as :func:`kick` twice and :func:`mean_spread`)."""
    for i in range(out_l.shape[0]):
        a = _kick_row(work, i, L_HC, L_HS, 0.0, True)
        b = _kick_row(work, i, C_HC, C_HS, C_K, False)
        out_l[i] = a
        out_c[i] = b
        mean[i] = 0.5 * (a + b)
        d = abs(a - b)
        rng[i] = d
        std[i] = 0.5 * d


@njit(**_JIT)
def _cube_root_guess(x, guess):
    """float32(|x|) into ``guess``; returns how many nonzero |x| lie outside the float32-safe
    range [_CBRT_F32_LO, _CBRT_F32_HI] (inf included; NaN is not counted)."""
    n_out = 0
    for i in range(x.shape[0]):
        ax = abs(x[i])
        guess[i] = np.float32(ax)
        n_out += (ax != 0.0) & ((ax < _CBRT_F32_LO) | (ax > _CBRT_F32_HI))
    return n_out


@njit(**_JIT)
def _cube_root_refine(guess, x):
    """Cube root of ``x`` in place from the guess: two Halley steps y <- y (y^3 + 2x)/(2 y^3 + x)
    (cubic convergence: 3.3% -> ~4e-6 -> rounding level), then one Newton step in correction
    form, y <- y - (y - x/y^2)/3, which leaves the rounding error below one unit in the last
    place. The sign is x's; x = +-0 and NaN pass through. (In place, not x -> out: with two
    arrays that may be one, the compiler's overlap check would fall back to a scalar loop.)"""
    for i in range(x.shape[0]):
        xi = x[i]
        ax = abs(xi)
        y = np.float64(guess[i])
        y3 = y * y * y
        y = y * (y3 + 2.0 * ax) / (2.0 * y3 + ax)
        y3 = y * y * y
        y = y * (y3 + 2.0 * ax) / (2.0 * y3 + ax)
        y = y - (y - ax / (y * y)) * (1.0 / 3.0)
        x[i] = math.copysign(y, xi) if ax != 0.0 else xi


def cube_root(
    x: NDArray[np.float64], out: NDArray[np.float64] | None = None
) -> NDArray[np.float64]:
    """Real cube root of a 1-d float64 array, elementwise (``out`` may be ``x``).

    A float32 bit-level guess (exponent and mantissa divided by three, :data:`_CBRT_GUESS_BIAS`)
    refined by :func:`_cube_root_refine`: every step is arithmetic, so the loops vectorise.
    Within one unit in the last place of the exact cube root (tested against numpy's
    extended-precision cbrt; numpy's float64 cbrt, glibc's, is off by up to ~3 units), and
    ~3 ns per value here against ~20 ns for np.cbrt, which is a scalar libm call on machines
    without AVX-512 (docs/performance.md). Nonzero |x| below 1e-37 or above 1e37, which the
    float32 guess cannot hold, are first scaled exactly by a power of two, 2^(3k); +-inf and
    NaN pass through.
    """
    guess = np.empty(x.shape[0], dtype=np.float32)
    n_far = _cube_root_guess(x, guess)
    bits = guess.view(np.int32)  # non-negative: the guess holds |x|
    np.floor_divide(bits, 3, out=bits)
    np.add(bits, _CBRT_GUESS_BIAS, out=bits)
    if n_far:
        ax = np.abs(x)
        far = np.flatnonzero((ax != 0.0) & ((ax < _CBRT_F32_LO) | (ax > _CBRT_F32_HI)))
        far_x = x[far]
        infinite = np.isinf(far_x)
        mant, expo = np.frexp(np.where(infinite, 1.0, far_x))  # mant 2^expo, 0.5 <= |mant| < 1
        rem = np.mod(expo, 3)
        far_values = np.ldexp(cube_root(np.ldexp(mant, rem)), (expo - rem) // 3)
        far_values[infinite] = far_x[infinite]
    if out is None:
        out = x.copy()
    elif out is not x:
        np.copyto(out, x)
    _cube_root_refine(guess, out)
    if n_far:
        out[far] = far_values
    return out


def isco_cube_roots(work: NDArray[np.float64], plus: bool) -> None:
    """Cube roots of work[W_CM] (1 - s_par) and, if ``plus``, work[W_CP] (1 + s_par), in place
    (:func:`cube_root`). Used by the BPT closed form of BMR12 and the starts of the BKL solve.
    """
    cube_root(work[W_CM], out=work[W_CM])
    if plus:
        cube_root(work[W_CP], out=work[W_CP])


def raw_block(
    enabled: NDArray[np.bool_],
    m1: NDArray[np.float64],
    m2: NDArray[np.float64],
    c1: NDArray[np.float64],
    c2: NDArray[np.float64],
    ct1: NDArray[np.floating],
    st1: NDArray[np.floating],
    ct2: NDArray[np.floating],
    st2: NDArray[np.floating],
    cp12: NDArray[np.floating],
    cph: NDArray[np.floating],
    raw: NDArray[np.float64],
    work: NDArray[np.float64],
) -> None:
    """Every enabled slot's raw output on one block of rows into ``raw[slot]``.

    ``raw`` is (N_SLOTS, n) and ``work`` (N_WORK, n); both are scratch the caller reuses. The
    cosines and sines may be float32 (the remnant stage) or float64 (the public functions).
    """
    components(m1, m2, c1, c2, ct1, st1, ct2, st2, cp12, cph, work)
    if enabled[BR09]:
        br09(work, raw[BR09])
    if enabled[R08]:
        r08(work, raw[R08])
    if enabled[HLZ14_SPIN] or enabled[HLZ14_MASS]:
        hlz14_explicit(work)
        root = cube_root(work[W_HR], out=work[W_HR])
        w = np.empty(work.shape[1])
        solve_spin_isco(work[W_B], work[W_A], root, w)
        hlz14_finish(work, w, raw[HLZ14_SPIN], raw[HLZ14_MASS])
    bkl = bool(enabled[BKL08] or enabled[BPT72])
    if bkl or enabled[BMR12]:
        isco_cube_roots(work, plus=bool(enabled[BMR12]))
    if bkl:
        w = np.empty(work.shape[1])
        solve_spin_isco(work[W_NU], work[W_SPAR], work[W_CM], w)
        bkl_finish(work, w, raw[BKL08], raw[BPT72])
    if enabled[BMR12]:
        bmr12(work, raw[BMR12])
    if enabled[LOUSTO12]:
        kick(work, L_HC, L_HS, 0.0, True, raw[LOUSTO12])
    if enabled[CAMPANELLI07]:
        kick(work, C_HC, C_HS, C_K, False, raw[CAMPANELLI07])


def evaluate_slot(
    slot: int,
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
    phase: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """One fit on arrays broadcast together and flattened (float64 trigonometry); 1-d result.

    ``q`` may exceed 1: the bodies are exchanged with their spins (m1 = 1, m2 = q).
    """
    arrays = np.broadcast_arrays(
        *(np.asarray(x, dtype=np.float64) for x in (q, chi1, chi2, tilt1, tilt2, phi12, phase))
    )
    q, chi1, chi2, t1, t2, p12, ph = (np.ascontiguousarray(a).reshape(-1) for a in arrays)
    n = q.shape[0]
    enabled = np.zeros(N_SLOTS, dtype=bool)
    enabled[slot] = True
    raw = np.empty((N_SLOTS, n))
    work = np.empty((N_WORK, n))
    raw_block(
        enabled,
        np.ones(n),
        q,
        chi1,
        chi2,
        np.cos(t1),
        np.sin(t1),
        np.cos(t2),
        np.sin(t2),
        np.cos(p12),
        np.cos(ph),
        raw,
        work,
    )
    return raw[slot].copy()


@njit(**_JIT)
def in_range(q, x1, x2, q_min, chi_max, inside):
    """Rows with q >= q_min and both spin magnitudes <= chi_max (a fit's calibrated range)."""
    for i in range(q.shape[0]):
        inside[i] = (q[i] >= q_min) & (x1[i] <= chi_max) & (x2[i] <= chi_max)


@njit(**_JIT)
def all_valid(m1, m2, c1, c2, t1, t2, p12, tilt_lo, tilt_hi):
    """True when every row has finite positive masses, spins in [0, 1], tilts in
    [tilt_lo, tilt_hi] and a non-infinite phi12 (NaN allowed: unknown). NaN fails the rest."""
    ok = True
    for i in range(m1.shape[0]):
        ok &= (m1[i] > 0.0) & (m1[i] < np.inf) & (m2[i] > 0.0) & (m2[i] < np.inf)
        ok &= (c1[i] >= 0.0) & (c1[i] <= 1.0) & (c2[i] >= 0.0) & (c2[i] <= 1.0)
        ok &= (t1[i] >= tilt_lo) & (t1[i] <= tilt_hi) & (t2[i] >= tilt_lo) & (t2[i] <= tilt_hi)
        ok &= abs(p12[i]) != np.inf
    return ok


@njit(**_JIT)
def mass_columns(mtot, frac, mf_out, erad_out):
    """erad = M (E_rad/M) and mf = M - erad, in Msun."""
    for i in range(frac.shape[0]):
        erad = mtot[i] * frac[i]
        erad_out[i] = erad
        mf_out[i] = mtot[i] - erad


@njit(**_JIT)
def mass_pair(mtot, frac_a, frac_b, mf_a, erad_a, mf_b, erad_b, mean, rng, std, mf, erad_frac):
    """:func:`mass_columns` for two fits, their mean, max - min and std (:func:`mean_spread`),
    and the mean's final mass M - erad and E_rad / M, in one loop (the same values)."""
    for i in range(mtot.shape[0]):
        m = mtot[i]
        ea = m * frac_a[i]
        eb = m * frac_b[i]
        erad_a[i] = ea
        mf_a[i] = m - ea
        erad_b[i] = eb
        mf_b[i] = m - eb
        e = 0.5 * (ea + eb)
        d = abs(ea - eb)
        mean[i] = e
        rng[i] = d
        std[i] = 0.5 * d
        mf[i] = m - e
        erad_frac[i] = e / m


@njit(**_JIT)
def _mean_spread2(a, b, mean, rng, std):
    for i in range(a.shape[0]):
        mean[i] = 0.5 * (a[i] + b[i])
        d = abs(a[i] - b[i])
        rng[i] = d
        std[i] = 0.5 * d


@njit(**_JIT)
def _mean_spread3(a, b, c, mean, rng, std):
    for i in range(a.shape[0]):
        m = (a[i] + b[i] + c[i]) / 3.0
        mean[i] = m
        rng[i] = max(a[i], max(b[i], c[i])) - min(a[i], min(b[i], c[i]))
        da, db, dc = a[i] - m, b[i] - m, c[i] - m
        std[i] = math.sqrt((da * da + db * db + dc * dc) / 3.0)


@njit(**_JIT)
def _mean_spread_k(vals, mean, rng, std):
    k = vals.shape[0]
    for i in range(vals.shape[1]):
        total = 0.0
        lo = np.inf
        hi = -np.inf
        for j in range(k):
            x = vals[j, i]
            total += x
            lo = min(lo, x)
            hi = max(hi, x)
        m = total / k
        var = 0.0
        for j in range(k):
            d = vals[j, i] - m
            var += d * d
        mean[i] = m
        rng[i] = hi - lo
        std[i] = math.sqrt(var / k)


def mean_spread(vals, mean, rng, std) -> None:
    """Mean, max - min and population std (ddof 0) over the rows of ``vals`` (k, n)."""
    k = vals.shape[0]
    if k == 1:
        mean[:] = vals[0]
        rng[:] = 0.0
        std[:] = 0.0
    elif k == 2:
        _mean_spread2(vals[0], vals[1], mean, rng, std)
    elif k == 3:
        _mean_spread3(vals[0], vals[1], vals[2], mean, rng, std)
    else:
        _mean_spread_k(vals, mean, rng, std)
