"""Speed of the binary-black-hole remnant fits (run by hand; numbers go to docs/performance.md,
section "Remnant fits").

In one run, on N rows of invented precessing binaries (seeded generator):
- t_default: :func:`gwdeficit.remnant.remnant_arrays` with the default set (the NR-calibrated
  fits: final mass / radiated energy, final spin, recoil, with mean, spread, range flags and
  the kick-phase draw) on the default threads (every usable CPU, or GWDEFICIT_THREADS);
- t_one: the same on one thread;
- t_all: the same with every registered fit (adds the parameter-free estimates);
- t_pass: one numpy elementwise pass over the same arrays, ``m1 + m2`` (new result array);
- t_loop: a per-row Python loop over L rows calling the same default fits' public functions on
  Python floats, scaled to N rows;
- t_math: a per-row loop over L rows of the same default formulas written with the math module
  (a hand-written scalar version; its results are checked against the vectorised ones), the
  fastest plain-Python baseline, scaled to N rows.
It prints the ratios t_default / t_pass (target <= 40) and t_loop / t_default, t_math /
t_default (target >= 300), in wall-clock and in process-CPU time.

    .venv/bin/python benchmarks/bench_fits.py [N] [L]      # defaults: 1e7 rows, 1e4 loop rows
"""

from __future__ import annotations

import math
import sys
import time
import warnings

import numpy as np

from gwdeficit.fits import kick, mass, spin
from gwdeficit.fits.registry import REGISTRY
from gwdeficit.remnant import default_threads, remnant_arrays

S3 = math.sqrt(3.0)
L_W0 = 2 / (3 * S3)


def _e_isco(a: float) -> float:
    z1 = 1 + (1 - a * a) ** (1 / 3) * ((1 + a) ** (1 / 3) + (1 - a) ** (1 / 3))
    z2 = math.sqrt(3 * a * a + z1 * z1)
    r = 3 + z2 - math.copysign(math.sqrt(max((3 - z1) * (3 + z1 + 2 * z2), 0.0)), a)
    return math.sqrt(1 - 2 / (3 * r))


def _bkl_w(nu, s):
    w = min(max(1 + math.copysign(abs(13.5 * (1 - s)) ** (1 / 3), 1 - s), 1.0), 5.0)
    for _ in range(5):
        u = math.sqrt((w * w + 2) / 3)
        f = u * (4 - w) / 3 - L_W0 * nu * (1 + 2 * w) - s
        df = -2 * (w - 1) ** 2 / (9 * u) - 2 * L_W0 * nu
        w = min(max(w - f / min(df, -1e-300), 1.0), 5.0)
    return w


def _hlz_poly(c, s, d, dm):
    return (c["0"] + c["1"] * s + c["2a"] * d * dm + c["2b"] * s * s + c["2c"] * d * d
            + c["2d"] * dm * dm + c["3a"] * d * s * dm + c["3b"] * s * d * d + c["3c"] * s**3
            + c["3d"] * s * dm * dm + c["4a"] * d * s * s * dm + c["4b"] * d**3 * dm
            + c["4c"] * d**4 + c["4d"] * s**4 + c["4e"] * d * d * s * s + c["4f"] * dm**4
            + c["4g"] * d * dm**3 + c["4h"] * d * d * dm * dm
            + c["4i"] * s * s * dm * dm)  # fmt: skip


def _kick(nu, q, sz_par, a1z, a2z, dperp, cph, c, hang):
    f = nu * nu / (1 + q)
    v_m = c["A_kms"] * (1 + c["B"] * nu) * f * (1 - q)
    v_perp = c["H_kms"] * f * (a1z - q * a2z)
    xi = math.radians(c["xi_deg"])
    v_par = hang * f * dperp * cph
    return math.sqrt((v_m + v_perp * math.cos(xi)) ** 2 + (v_perp * math.sin(xi)) ** 2 + v_par**2)


def row_math(q, c1, c2, t1, t2, p12, ph):
    """The default set for one binary with the math module (scalar version for the baseline)."""
    a1z, a2z = c1 * math.cos(t1), c2 * math.cos(t2)
    a1p, a2p = c1 * math.sin(t1), c2 * math.sin(t2)
    cp, q2 = math.cos(p12), q * q
    nu = q / (1 + q) ** 2
    sz = a1z + q2 * a2z
    inpl = a1p * a1p + q2 * q2 * a2p * a2p + 2 * q2 * a1p * a2p * cp
    s_sq = sz * sz + inpl
    b = spin.BR09_COEFFICIENTS
    ell = (b["s4"] * s_sq / (1 + q2) ** 2 + (b["s5"] * nu + b["t0"] + 2) * sz / (1 + q2)
           + 2 * S3 + b["t2"] * nu + b["t3"] * nu * nu)  # fmt: skip
    lq = abs(ell) * q
    br09 = min(math.sqrt(max(s_sq + lq * (2 * sz + lq), 0.0)) / (1 + q) ** 2, 1.0)
    r = spin.R08_COEFFICIENTS
    at = sz / (1 + q2)
    par = at + nu * (at * (r["s4"] * at + r["s5"] * nu + r["t0"]) + 2 * S3
                     + nu * (r["t2"] + r["t3"] * nu))  # fmt: skip
    r08 = min(math.sqrt(par * par + inpl / (1 + q) ** 4), 1.0)
    s_par = sz / (1 + q) ** 2
    dm, dd = (q - 1) / (1 + q), (a1z - q * a2z) / (1 + q)
    aa = 16 * nu * nu * _hlz_poly(spin.HLZ14_SPIN_COEFFICIENTS, s_par, dd, dm)
    aa += s_par * (1 + 8 * nu) * dm**4
    bb = nu * dm**6
    w = _bkl_w(bb, aa)
    alpha = aa + bb * L_W0 * (1 + 2 * w)
    hlz_spin = min(math.sqrt(alpha * alpha + inpl / (1 + q) ** 4), 1.0)
    mf = 16 * nu * nu * _hlz_poly(spin.HLZ14_MASS_COEFFICIENTS, s_par, dd, dm)
    hlz_erad = 1 - mf - (1 + nu * (w / math.sqrt(w * w + 2) + 11)) * dm**6
    e = _e_isco(s_par)
    p0, p1 = mass.BMR12_COEFFICIENTS["p0"], mass.BMR12_COEFFICIENTS["p1"]
    erad = (1 - e) * nu + 4 * nu * nu * (4 * p0 + 16 * p1 * s_par * (s_par + 1) + e - 1)
    dperp = math.sqrt(max(a1p * a1p + q * a2p * (q * a2p - 2 * a1p * cp), 0.0))
    cph = math.cos(ph)
    lc = kick.LOUSTO12_COEFFICIENTS
    st = 2 * s_par
    hang = 16 * (lc["V11_kms"] + st * (lc["VA_kms"] + st * (lc["VB_kms"] + st * lc["VC_kms"])))
    v1 = _kick(nu, q, sz, a1z, a2z, dperp, cph, lc, hang)
    cc = kick.CAMPANELLI07_COEFFICIENTS
    v2 = _kick(nu, q, sz, a1z, a2z, dperp, cph, cc, cc["K_kms"])
    return (br09 + r08 + hlz_spin) / 3, 0.5 * (erad + hlz_erad), 0.5 * (v1 + v2)


def best_of(k: int, fn) -> tuple[float, float]:
    """Best wall-clock and best process-CPU time of ``k`` runs (CPU time is the fairer measure
    on a machine shared with other work)."""
    wall = cpu = np.inf
    for _ in range(k):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall = min(wall, time.perf_counter() - t0)
        cpu = min(cpu, time.process_time() - c0)
    return wall, cpu


def main(n: int, n_loop: int) -> None:
    rng = np.random.default_rng(20240602)
    m1 = rng.uniform(5.0, 80.0, n)
    m2 = m1 * rng.uniform(0.25, 1.0, n)
    chi1, chi2 = rng.uniform(0, 0.8, n), rng.uniform(0, 0.8, n)
    tilt1, tilt2 = np.arccos(rng.uniform(-1, 1, n)), np.arccos(rng.uniform(-1, 1, n))
    phi12 = rng.uniform(0, 2 * np.pi, n)
    args = (m1, m2, chi1, chi2, tilt1, tilt2, phi12)
    default = [f.name for f in REGISTRY if f.in_default]

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t_pass = best_of(5, lambda: m1 + m2)
        t_default = best_of(5, lambda: remnant_arrays(*args, fits=default, seed=1))
        t_one = best_of(5, lambda: remnant_arrays(*args, fits=default, seed=1, threads=1))
        t_all = best_of(5, lambda: remnant_arrays(*args, seed=1))

        fns = [f for f in REGISTRY if f.in_default]
        phase = rng.uniform(0, 2 * np.pi, n_loop)
        rows = [
            (float(m2[i] / m1[i]), float(chi1[i]), float(chi2[i]), float(tilt1[i]),
             float(tilt2[i]), float(phi12[i]), float(phase[i]))
            for i in range(n_loop)
        ]  # fmt: skip

        def loop():
            for q, c1, c2, t1, t2, p12, ph in rows:
                for f in fns:
                    if f.quantity == "final_spin":
                        f.function(q, c1, c2, t1, t2, p12)
                    elif f.quantity == "final_mass":
                        f.function(q, c1, c2, t1, t2)
                    else:
                        f.function(q, c1, c2, t1, t2, p12, ph)

        t_loop = tuple(t * n / n_loop for t in best_of(1, loop))

        math_out = []
        t_math = tuple(
            t * n / n_loop for t in best_of(1, lambda: math_out.extend(row_math(*r) for r in rows))
        )
        check = remnant_arrays(*(a[:n_loop] for a in args), fits=default, kick_phase=phase)
        got = np.array(math_out[:n_loop])
        m_tot = m1[:n_loop] + m2[:n_loop]
        for j, key, scale in ((0, "chif", 1.0), (1, "erad_msun", m_tot), (2, "vkick_kms", 1.0)):
            err = np.max(np.abs(got[:, j] * scale - check[key]) / np.maximum(np.abs(check[key]), 1))
            assert err < 1e-5, (key, err)  # same formulas (float32 angles in the array core)

    print(f"rows: {n:,}; threads: {default_threads()}; default fits: {', '.join(default)}")
    print("                                 wall [s]   cpu [s]   wall ratio  cpu ratio")
    for label, (w, c) in (
        ("one numpy pass (m1 + m2)", t_pass),
        ("default set (remnant_arrays)", t_default),
        ("default set, one thread", t_one),
        ("all registered fits", t_all),
        (f"per-row loop, {n_loop:,} rows scaled", t_loop),
        (f"math-module loop, {n_loop:,} scaled", t_math),
    ):
        print(f"{label:32s} {w:9.4f} {c:9.4f} {w / t_pass[0]:11.1f} {c / t_pass[1]:10.1f}")
    print(
        f"default / one pass: wall {t_default[0] / t_pass[0]:.1f}, "
        f"cpu {t_default[1] / t_pass[1]:.1f} (target <= 40); "
        f"one thread: wall {t_one[0] / t_pass[0]:.1f}"
    )
    print(
        f"loop / default:     wall {t_loop[0] / t_default[0]:.0f}, "
        f"cpu {t_loop[1] / t_default[1]:.0f} (target >= 300)"
    )
    print(
        f"math loop / default: wall {t_math[0] / t_default[0]:.0f}, "
        f"cpu {t_math[1] / t_default[1]:.0f} (target >= 300)"
    )


if __name__ == "__main__":
    main(
        int(float(sys.argv[1])) if len(sys.argv) > 1 else 10_000_000,
        int(float(sys.argv[2])) if len(sys.argv) > 2 else 10_000,
    )
