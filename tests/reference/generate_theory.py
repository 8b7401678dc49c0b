#!/usr/bin/env python3
"""Reference fixtures for the scattering-theory code: Coulomb functions, Legendre polynomials, hard sphere, optical model.

Computes, independently of the Rust code, Coulomb wave functions and phase
shifts (mpmath at 30-40 significant digits), Legendre polynomials and the
hard-sphere S-matrix (scipy), and an optical-model elastic cross section by
direct integration of the radial equation with scipy.integrate.solve_ivp
(DOP853) matched to mpmath Coulomb functions.  Values are written with
``repr()`` so that the Rust side parses exactly the same IEEE-754 doubles.
Only general-purpose libraries are used (mpmath, numpy, scipy); every formula
is written here from the mathematics.

Usage (from the repository root)::

    python3 tests/reference/generate_theory.py [--out DIR]
    python3 tests/reference/generate_theory.py --time

DIR defaults to ``tests/reference/fixtures`` next to this script.  The output
is deterministic: no random numbers are used, so two runs with the same
library versions on one machine produce byte-identical files; on another CPU
numpy's SIMD code paths can move the 13th digit, so CI compares the files
cell by cell within round-off (``compare_fixtures.py``).  ``--time`` times the
reference optical-model solution of the ``ni58`` set (all S_L and dsigma/dOmega
at 170 angles), prints the median of 5 runs and writes nothing.

Files written:

* ``coulomb_functions.csv``  -- F_L, G_L and their rho-derivatives on an (eta, rho, L) grid
* ``coulomb_phases.csv``     -- Coulomb phase shifts sigma_L (continuous branch)
* ``legendre.csv``           -- Legendre polynomials P_l(x) (mpmath; scipy as a check)
* ``hard_sphere.csv``        -- S_L of an impenetrable sphere for a neutral projectile
* ``optical_model_sets.csv`` -- channel, potential, matching radius, L_max and reaction
  cross section of three optical-model parameter sets
* ``optical_model.csv``      -- elastic dsigma/dOmega (CM) and ratio to Rutherford of those sets
* ``legendre_fit_data.csv``, ``legendre_fit.csv`` -- invented data and their weighted
  Legendre fit by numpy.polynomial.legendre.legfit, with coefficient errors
"""

import argparse
import cmath
import math
import statistics
import sys
import time

import mpmath
import numpy
import scipy
import scipy.integrate
import scipy.special
from mpmath import mp, mpf

from fixture_csv import FIXTURES_DIR, generator_path, output_dir, write_csv

# Path of this script as recorded in the fixture headers, and the libraries
# whose versions they list.
GENERATOR = generator_path(__file__)
LIBRARIES = [mpmath, numpy, scipy]

# Working precision of mpmath: 30 significant decimal digits unless a
# function raises it locally (mpmath.workdps).
mp.dps = 30

# Physical constants, CODATA 2018 recommended values, as decimal strings so
# that mpmath holds the published digits exactly.
U_MEV = mpf("931.49410242")  # atomic mass constant energy equivalent m_u c^2 [MeV]
ELECTRON_MASS_MEV = mpf("0.51099895000")  # m_e c^2 [MeV]
HBARC_MEV_FM = mpf("197.3269804")  # hbar c [MeV fm]
ALPHA = 1 / mpf("137.035999084")  # fine-structure constant
MB_PER_FM2 = 10  # 1 fm^2 = 1e-26 cm^2 = 10 mb (definition of the barn: 1 b = 1e-24 cm^2)

HBARC = float(HBARC_MEV_FM)
ALPHA_F = float(ALPHA)


# --------------------------------------------------------------------------
# Coulomb wave functions (DLMF chapter 33)
# --------------------------------------------------------------------------
#
# F_L(eta, rho), G_L(eta, rho): regular and irregular solutions of
#   u'' + (1 - 2 eta/rho - L(L+1)/rho^2) u = 0          (DLMF 33.2.1)
# as computed by mpmath.coulombf / mpmath.coulombg (DLMF 33.2.3-33.2.5).
#
# Derivatives by the recurrence (DLMF 33.4.4; equation number from memory)
#   u_L' = S_{L+1} u_L - R_{L+1} u_{L+1},
#   S_L = L/rho + eta/L,  R_L = sqrt(1 + eta^2/L^2),
# for u = F or G, in mpmath arithmetic; cross-checked against mpmath.diff.
#
# Recurrence in L (Abramowitz & Stegun 14.2.3 = DLMF 33.4.1; from memory),
#   L sqrt((L+1)^2 + eta^2) u_{L+1}
#       = (2L+1) (eta + L(L+1)/rho) u_L - (L+1) sqrt(L^2 + eta^2) u_{L-1},   L >= 1,
# used upward for G (the dominant solution) and downward for F (the minimal
# one) when many L at one rho are needed; every value it gives is checked by
# the Wronskian F_L' G_L - F_L G_L' = 1 (DLMF 33.2.12).

WRONSKIAN_TOL = mpf("1e-20")


def coulomb_s(l, eta, rho):
    """S_L = L/rho + eta/L (DLMF 33.4.4 notation; from memory), L >= 1."""
    return mpf(l) / rho + eta / l


def coulomb_r(l, eta):
    """R_L = sqrt(1 + eta^2/L^2) (DLMF 33.4.4 notation; from memory), L >= 1."""
    return mpmath.sqrt(1 + eta ** 2 / mpf(l) ** 2)


def coulomb_derivative(l, eta, rho, u_l, u_next):
    """u_L' = S_{L+1} u_L - R_{L+1} u_{L+1} (DLMF 33.4.4; from memory)."""
    return coulomb_s(l + 1, eta, rho) * u_l - coulomb_r(l + 1, eta) * u_next


def coulomb_point(l, eta, rho):
    """(F, G, F', G') at one point, mpmath at the working precision."""
    f = mpmath.coulombf(l, eta, rho)
    g = mpmath.coulombg(l, eta, rho)
    f1 = mpmath.coulombf(l + 1, eta, rho)
    g1 = mpmath.coulombg(l + 1, eta, rho)
    fp = coulomb_derivative(l, eta, rho, f, f1)
    gp = coulomb_derivative(l, eta, rho, g, g1)
    return f, g, fp, gp


def coulomb_ladder(eta, rho, n):
    """F_L, G_L, F_L', G_L' for L = 0..n at one (eta, rho), as lists of mpf.

    Seeds from mpmath (G_0, G_1, F_n, F_{n+1}); G by upward and F by downward
    recurrence (A&S 14.2.3 / DLMF 33.4.1; from memory), derivatives by
    DLMF 33.4.4.  Checked: Wronskian at every L (DLMF 33.2.12), and the F_0
    of the downward recurrence against mpmath.coulombf directly.
    """
    with mpmath.workdps(40):
        eta = mpf(eta)
        rho = mpf(rho)
        g = [mpmath.coulombg(0, eta, rho), mpmath.coulombg(1, eta, rho)]
        for l in range(1, n + 1):
            g.append(((2 * l + 1) * (eta + l * (l + 1) / rho) * g[l]
                      - (l + 1) * mpmath.sqrt(l * l + eta ** 2) * g[l - 1])
                     / (l * mpmath.sqrt((l + 1) ** 2 + eta ** 2)))
        f = [mpf(0)] * (n + 2)
        f[n + 1] = mpmath.coulombf(n + 1, eta, rho)
        f[n] = mpmath.coulombf(n, eta, rho)
        for l in range(n, 0, -1):
            f[l - 1] = (((2 * l + 1) * (eta + l * (l + 1) / rho) * f[l]
                         - l * mpmath.sqrt((l + 1) ** 2 + eta ** 2) * f[l + 1])
                        / ((l + 1) * mpmath.sqrt(l * l + eta ** 2)))
        f0 = mpmath.coulombf(0, eta, rho)
        assert abs(f[0] - f0) <= mpf("1e-25") * mpmath.sqrt(f0 ** 2 + g[0] ** 2), (eta, rho, n)
        fp = [coulomb_derivative(l, eta, rho, f[l], f[l + 1]) for l in range(n + 1)]
        gp = [coulomb_derivative(l, eta, rho, g[l], g[l + 1]) for l in range(n + 1)]
        for l in range(n + 1):
            w = fp[l] * g[l] - f[l] * gp[l]
            assert abs(w - 1) < WRONSKIAN_TOL, (eta, rho, l, w)
        return f[:n + 1], g[:n + 1], fp, gp


COULOMB_ETA = [0.0, 0.5, 2.0, 10.0, 30.0, 60.0]
COULOMB_RHO = [1.0, 5.0, 20.0, 60.0, 130.0, 230.0, 300.0]
COULOMB_L = [0, 1, 5, 20, 50, 100, 250, 500]
COULOMB_TINY = mpf("1e-280")  # |F| must exceed this ...
COULOMB_HUGE = mpf("1e280")  # ... and |G| stay below this (double range, with room for F', G')
# A few points whose derivatives are also taken by mpmath.diff (numerical
# differentiation at raised precision), as a check of the recurrence.
COULOMB_DIFF_CHECK = [(0.0, 5.0, 1), (2.0, 20.0, 5), (10.0, 60.0, 20), (0.5, 130.0, 100)]
# A few points recomputed at 45 digits, as a check that 30 digits are exact
# to double precision.
COULOMB_PRECISION_CHECK = [(0.0, 1.0, 0), (2.0, 5.0, 0), (10.0, 130.0, 250), (60.0, 300.0, 5)]


def coulomb_function_rows():
    rows = []
    dropped = 0
    for eta in COULOMB_ETA:
        for rho in COULOMB_RHO:
            if rho < 2 * eta + 1:
                continue  # inside the L = 0 turning point; see the file header
            for l in COULOMB_L:
                f, g, fp, gp = coulomb_point(l, mpf(eta), mpf(rho))
                if abs(f) <= COULOMB_TINY or abs(g) >= COULOMB_HUGE:
                    dropped += 1
                    continue
                w = fp * g - f * gp
                assert abs(w - 1) < WRONSKIAN_TOL, (eta, rho, l, w)
                rows.append([eta, rho, l, f, g, fp, gp])
    # Derivatives by the recurrence against mpmath.diff.
    for eta, rho, l in COULOMB_DIFF_CHECK:
        _f, _g, fp, gp = coulomb_point(l, mpf(eta), mpf(rho))
        dfp = mpmath.diff(lambda r: mpmath.coulombf(l, mpf(eta), r), mpf(rho))
        dgp = mpmath.diff(lambda r: mpmath.coulombg(l, mpf(eta), r), mpf(rho))
        assert abs(dfp - fp) <= mpf("1e-20") * (abs(fp) + abs(gp)), (eta, rho, l, fp, dfp)
        assert abs(dgp - gp) <= mpf("1e-20") * (abs(fp) + abs(gp)), (eta, rho, l, gp, dgp)
    # 30 digits against 45 digits.
    for eta, rho, l in COULOMB_PRECISION_CHECK:
        low = coulomb_point(l, mpf(eta), mpf(rho))
        with mpmath.workdps(45):
            high = coulomb_point(l, mpf(eta), mpf(rho))
            for a, b in zip(low, high):
                assert abs(a - b) <= mpf("1e-22") * abs(b), (eta, rho, l, a, b)
    return rows, dropped


def write_coulomb_functions(out_dir):
    rows, dropped = coulomb_function_rows()
    n = write_csv(
        out_dir / "coulomb_functions.csv",
        [
            "Coulomb wave functions F_L(eta, rho), G_L(eta, rho) (DLMF 33.2) and their rho-derivatives"
            " fp = dF/drho, gp = dG/drho, from mpmath.coulombf / mpmath.coulombg at 30 significant"
            " digits, rounded to the nearest double on output.",
            "Derivatives by u_L' = ((L+1)/rho + eta/(L+1)) u_L - sqrt(1 + eta^2/(L+1)^2) u_{L+1}"
            " (DLMF 33.4.4, from memory) in mpmath arithmetic; checked against mpmath.diff on"
            f" {len(COULOMB_DIFF_CHECK)} points (1e-20) and against 45-digit values on"
            f" {len(COULOMB_PRECISION_CHECK)} points.",
            "Every row satisfies the Wronskian fp*g - f*gp = 1 (DLMF 33.2.12) to 1e-20 in mpmath.",
            f"Grid eta in {COULOMB_ETA}, rho in {COULOMB_RHO}, L in {COULOMB_L}; only rho >= 2 eta + 1"
            " (outside the L = 0 turning point) and |F| > 1e-280, |G| < 1e280;"
            f" {dropped} grid points with rho >= 2 eta + 1 dropped for the double range.",
        ],
        ["eta", "rho", "l", "f", "g", "fp", "gp"],
        rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n, dropped


# --------------------------------------------------------------------------
# Coulomb phase shifts
# --------------------------------------------------------------------------

PHASE_ETA = [0.1, 1.0, 5.0, 20.0, 60.0]
PHASE_L = [0, 1, 2, 10, 50, 200, 500]


def coulomb_phase(l, eta):
    """sigma_L = arg Gamma(L + 1 + i eta) = Im log Gamma(L + 1 + i eta) (DLMF 33.2.10),

    with mpmath.loggamma, the principal branch of log Gamma, continuous in the
    right half-plane: the continuous branch of sigma_L, not reduced mod 2 pi.
    """
    return mpmath.loggamma(mpmath.mpc(l + 1, eta)).imag


def coulomb_phase_rows():
    rows = []
    with mpmath.workdps(40):
        for eta in PHASE_ETA:
            e = mpf(eta)
            # sigma_0 by an independent route: d sigma_0/d eta = Re psi(1 + i eta)
            # (derivative of Im log Gamma(1 + i eta), DLMF 5.2.2), sigma_0(0) = 0.
            s0 = coulomb_phase(0, e)
            s0_quad = mpmath.quad(lambda t: mpmath.digamma(mpmath.mpc(1, t)).real, [0, e / 2, e])
            assert abs(s0 - s0_quad) < mpf("1e-25"), (eta, s0, s0_quad)
            # sigma_{L+1} = sigma_L + atan(eta/(L+1)), from Gamma(z+1) = z Gamma(z) (DLMF 5.5.1).
            acc = s0
            for l in range(0, max(PHASE_L) + 1):
                if l > 0:
                    acc += mpmath.atan(e / l)
                if l in PHASE_L:
                    sig = coulomb_phase(l, e)
                    assert abs(sig - acc) < mpf("1e-25"), (eta, l, sig, acc)
                    rows.append([eta, l, sig])
    return rows


def write_coulomb_phases(out_dir):
    n = write_csv(
        out_dir / "coulomb_phases.csv",
        [
            "Coulomb phase shifts sigma_L = arg Gamma(L + 1 + i eta) = Im log Gamma(L + 1 + i eta)"
            " (DLMF 33.2.10) by mpmath.loggamma at 40 significant digits: the continuous branch"
            " (NOT reduced mod 2 pi), rounded to the nearest double on output.",
            "Checked: sigma_0 = integral_0^eta Re psi(1 + i t) dt (DLMF 5.2.2, mpmath.quad) and"
            " sigma_L = sigma_0 + sum_{j=1}^{L} atan(eta/j) (from DLMF 5.5.1), each to 1e-25.",
        ],
        ["eta", "l", "sigma"],
        coulomb_phase_rows(),
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n


# --------------------------------------------------------------------------
# Legendre polynomials
# --------------------------------------------------------------------------

LEGENDRE_X = [-1.0, -0.95, -0.5, 0.0, 0.3, 0.77, 0.999, 1.0]
LEGENDRE_L = [0, 1, 2, 3, 10, 50, 200, 500]


def legendre_rows():
    """Rows and the largest |scipy - mpmath| deviation.

    The written value is mpmath.legendre (hypergeometric form, DLMF 18.5.7 / 15.9.1;
    from memory) at 40 digits, rounded to the nearest double, and
    scipy.special.eval_legendre is checked against it: scipy 1.17.1 gives
    P_500(-1) = 1 + 1.23e-12 (exact value (-1)^l = 1, DLMF 18.6.1), so the
    correctly rounded value is the reference.  |P_l(x)| <= 1 on [-1, 1]
    (DLMF 18.14.1), so the tolerance is absolute.
    """
    rows = []
    worst = 0.0
    for x in LEGENDRE_X:
        for l in LEGENDRE_L:
            p_scipy = float(scipy.special.eval_legendre(l, x))
            with mpmath.workdps(40):
                p = mpmath.legendre(l, mpf(x))
                if x in (-1.0, 1.0):
                    assert p == mpf(x) ** l, (x, l, p)  # DLMF 18.6.1
            dev = abs(p_scipy - float(p))
            assert dev <= 2e-12, (x, l, p_scipy, p)
            worst = max(worst, dev)
            rows.append([x, l, p])
    return rows, worst


def write_legendre(out_dir):
    rows, worst = legendre_rows()
    n = write_csv(
        out_dir / "legendre.csv",
        [
            "Legendre polynomials P_l(x) (DLMF 18.3) from mpmath.legendre at 40 significant digits,"
            " rounded to the nearest double; P_l(+-1) = (+-1)^l exactly (DLMF 18.6.1).",
            "scipy.special.eval_legendre agrees to"
            f" {worst:.3g} absolute (largest at x = -1, l = 500).",
            f"Grid x in {LEGENDRE_X}, l in {LEGENDRE_L}.",
        ],
        ["x", "l", "p"],
        rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n, worst


# --------------------------------------------------------------------------
# Legendre fit
# --------------------------------------------------------------------------
#
# A weighted least-squares Legendre series in x = cos(theta_cm) through invented
# data (a smooth invented angular distribution with 4 % invented errors and
# fixed-seed Gaussian noise), by numpy.polynomial.legendre.legfit with weights
# 1/sigma (numpy's w multiplies the residuals), and the coefficient standard
# errors from (V^T W V)^(-1), V = legvander(x, order), W = diag(1/sigma^2)
# (common practice for linear least squares).

LEGENDRE_FIT_ORDER = 6


def legendre_fit_rows():
    rng = numpy.random.default_rng(20261202)
    theta = numpy.arange(12.0, 170.0, 6.0)
    x = numpy.cos(numpy.radians(theta))
    truth = 40.0 * numpy.exp(-theta / 45.0) + 3.0 * (1.0 + numpy.cos(numpy.radians(3.0 * theta))) + 1.0
    sigma = 0.04 * truth
    y = truth + sigma * rng.standard_normal(theta.size)
    coef = numpy.polynomial.legendre.legfit(x, y, LEGENDRE_FIT_ORDER, w=1.0 / sigma)
    v = numpy.polynomial.legendre.legvander(x, LEGENDRE_FIT_ORDER) / sigma[:, None]
    cov = numpy.linalg.inv(v.T @ v)
    data = [(float(t), float(a), float(b)) for t, a, b in zip(theta, y, sigma)]
    fit = [(l, float(coef[l]), float(math.sqrt(cov[l, l]))) for l in range(LEGENDRE_FIT_ORDER + 1)]
    return data, fit


def write_legendre_fit(out_dir):
    data, fit = legendre_fit_rows()
    write_csv(
        out_dir / "legendre_fit_data.csv",
        ["Invented angular distribution for a Legendre fit: 40 exp(-theta/45) + 3 (1 + cos 3 theta) + 1 mb/sr,",
         "4 % errors, Gaussian noise from numpy.random.default_rng(20261202). Not a measurement."],
        ["theta_cm_deg", "dsdo_cm_mb_sr", "err_mb_sr"],
        data,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return write_csv(
        out_dir / "legendre_fit.csv",
        [f"numpy.polynomial.legendre.legfit(cos theta, y, {LEGENDRE_FIT_ORDER}, w=1/sigma) of legendre_fit_data.csv;",
         "std_err = sqrt(diag((V^T W V)^-1)), V = legvander(cos theta, order), W = diag(1/sigma^2)."],
        ["l", "coefficient", "std_err"],
        fit,
        generator=GENERATOR,
        modules=LIBRARIES,
    )


# --------------------------------------------------------------------------
# Hard sphere
# --------------------------------------------------------------------------
#
# Impenetrable sphere of radius R, neutral projectile: outside, u_L/r is
# proportional to j_L(kr) cos(delta_L) - y_L(kr) sin(delta_L), whose large-r form is
# sin(kr - L pi/2 + delta_L)/(kr) (DLMF 10.52.3, from memory); it vanishes at
# r = R when tan(delta_L) = j_L(kR)/y_L(kR) (common practice).  For L = 0,
# j_0/y_0 = -tan(kR) (DLMF 10.49.3), so delta_0 = -kR (mod pi).
# S_L = exp(2 i delta_L), which does not depend on the branch of delta_L.

HARD_SPHERE_KR = [0.01, 0.5, 2.0, 10.0, 40.0]


def hard_sphere_rows():
    rows = []
    skipped = 0
    for kr in HARD_SPHERE_KR:
        for l in range(0, int(math.floor(kr + 10)) + 1):
            j = float(scipy.special.spherical_jn(l, kr))
            y = float(scipy.special.spherical_yn(l, kr))
            if not (math.isfinite(y) and math.isfinite(j)):
                skipped += 1
                continue
            # Cross-check against mpmath: j_l(x) = sqrt(pi/(2x)) J_{l+1/2}(x),
            # y_l(x) = sqrt(pi/(2x)) Y_{l+1/2}(x) (DLMF 10.47.3, 10.47.4).
            with mpmath.workdps(40):
                x = mpf(kr)
                c = mpmath.sqrt(mpmath.pi / (2 * x))
                j_mp = c * mpmath.besselj(l + mpf(1) / 2, x)
                y_mp = c * mpmath.bessely(l + mpf(1) / 2, x)
            assert abs(j - j_mp) <= 1e-12 * abs(j_mp), (kr, l, j, j_mp)
            assert abs(y - y_mp) <= 1e-12 * abs(y_mp), (kr, l, y, y_mp)
            delta = math.atan(j / y)
            s = cmath.exp(2j * delta)
            if l == 0:
                # delta_0 = -kR modulo pi, and S_0 = exp(-2 i kR).
                turns = (delta + kr) / math.pi
                assert abs(turns - round(turns)) < 1e-12, (kr, delta)
                assert abs(s - cmath.exp(-2j * kr)) < 1e-12, (kr, s)
            rows.append([kr, l, s.real, s.imag])
    return rows, skipped


def write_hard_sphere(out_dir):
    rows, skipped = hard_sphere_rows()
    n = write_csv(
        out_dir / "hard_sphere.csv",
        [
            "S-matrix S_L = exp(2 i delta_L) = s_re + i s_im of an impenetrable sphere of radius R"
            " for a neutral projectile, tan delta_L = j_L(kR)/y_L(kR) (common practice), so"
            " delta_0 = -kR.",
            "Spherical Bessel functions from scipy.special.spherical_jn / spherical_yn, checked"
            " against mpmath (sqrt(pi/(2x)) J_{l+1/2}, Y_{l+1/2}; DLMF 10.47.3-4) to 1e-12 relative.",
            f"Grid kr in {HARD_SPHERE_KR}, l = 0 .. floor(kr + 10); {skipped} rows skipped"
            " (y_l not finite).",
        ],
        ["kr", "l", "s_re", "s_im"],
        rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n, skipped


# --------------------------------------------------------------------------
# Optical model
# --------------------------------------------------------------------------

# Atomic masses [u], AME2020 (M. Wang et al., Chinese Phys. C 45 (2021) 030003;
# values from memory).
ATOMIC_MASS_U = {
    (2, 4): "4.00260325413",
    (6, 12): "12.0",
    (28, 58): "57.93534165",
    (82, 208): "207.9766525",
}
BEAM = (2, 4)

# Invented parameter sets: (depth [MeV], r0 [fm], a [fm]) for the real volume,
# imaginary volume and imaginary surface terms; R = r0 A_target^(1/3).
OPTICAL_SETS = [
    dict(name="c12", target=(6, 12), t_lab=30.0,
         real=(100.0, 1.25, 0.65), imag=(15.0, 1.40, 0.50), surf=(0.0, 1.3, 0.5), rc0=1.3),
    dict(name="ni58", target=(28, 58), t_lab=24.0,
         real=(150.0, 1.20, 0.60), imag=(20.0, 1.40, 0.50), surf=(5.0, 1.35, 0.50), rc0=1.3),
    dict(name="pb208", target=(82, 208), t_lab=40.0,
         real=(120.0, 1.25, 0.62), imag=(25.0, 1.30, 0.45), surf=(0.0, 1.3, 0.5), rc0=1.3),
]

RTOL = 2.5e-12  # solve_ivp relative tolerance (the check uses RTOL/100, above DOP853's floor 2.2e-14)
ATOL_FACTOR = 1e-6  # atol = ATOL_FACTOR * rtol; u(r_start) = 1 and |u| stays >~ 1 (see start_radius)
TAIL_MEV = 1e-12  # every nuclear term is below this at the matching radius
S_CONVERGED = 1e-12  # |S_L - 1| below this ...
S_CONVERGED_RUN = 5  # ... for this many L in a row, all past k r_m, ends the partial-wave sum
WKB_EXPONENT = 25.0  # integral of kappa from the start radius to the first turning point
R_FLOOR = 1e-5  # smallest start radius [fm]
THETA_DEG = [float(t) for t in range(10, 171, 5)]
RM_SHIFT_FM = 5.0
SELF_CHECK_REL = 1e-7
# Check (a), no nuclear potential: a charge sphere this small [fm] differs from a point charge
# by a relative ~ eta k^3 R_C^2 in dsigma/dOmega (first-order estimate), here < 1e-11; the
# integration then starts inside it, at FREE_R_FLOOR.
FREE_RC = 1e-6
FREE_R_FLOOR = 1e-7


def nuclear_mass_mev(z, a):
    """Nuclear rest energy [MeV]: M_atomic[u] * u - Z m_e, electron binding ignored (common practice)."""
    return mpf(ATOMIC_MASS_U[(z, a)]) * U_MEV - z * ELECTRON_MASS_MEV


class Channel:
    """Non-relativistic elastic channel a + A (common practice):
    mu = m_a m_A/(m_a + m_A); E_cm = T m_A/(m_a + m_A); k = sqrt(2 mu E_cm)/(hbar c);
    eta = Z_a Z_A alpha sqrt(mu/(2 E_cm)).
    mu and E_cm are rounded to doubles and k, eta computed from those doubles
    (then rounded): the fixture is computed from exactly the values it writes.
    """

    def __init__(self, target, t_lab):
        m_a = nuclear_mass_mev(*BEAM)
        m_t = nuclear_mass_mev(*target)
        self.z_product = BEAM[0] * target[0]
        self.mu = float(m_a * m_t / (m_a + m_t))
        self.e_cm = float(mpf(t_lab) * m_t / (m_a + m_t))
        self.k = float(mpmath.sqrt(2 * mpf(self.mu) * mpf(self.e_cm)) / HBARC_MEV_FM)
        self.eta = float(self.z_product * ALPHA * mpmath.sqrt(mpf(self.mu) / (2 * mpf(self.e_cm))))


class Potential:
    """U(r) = -V f(r; R_V, a_V) - i W f(r; R_W, a_W) - i W_D 4 e^x/(1+e^x)^2 + V_C(r),

    x = (r - R_D)/a_D (the surface term is -4 a_D df/dr, peak 1 at R_D);
    f(r; R, a) = 1/(1 + exp((r - R)/a)) (Woods-Saxon form; common practice);
    V_C = Z_a Z_A alpha hbar c/(2 R_C) (3 - r^2/R_C^2) for r < R_C, Z_a Z_A alpha hbar c/r
    outside (uniformly charged sphere; common practice).  Radii in fm, depths in MeV.
    """

    def __init__(self, v, rv, av, w, rw, aw, wd, rd, ad, rc, z_product):
        self.v, self.rv, self.av = v, rv, av
        self.w, self.rw, self.aw = w, rw, aw
        self.wd, self.rd, self.ad = wd, rd, ad
        self.rc = rc
        self.e2 = z_product * ALPHA_F * HBARC  # Z_a Z_A alpha hbar c [MeV fm]

    def replaced(self, **kw):
        p = Potential.__new__(Potential)
        p.__dict__.update(self.__dict__)
        p.__dict__.update(kw)
        return p

    def terms(self):
        """(size, R, a) of the nuclear terms, each ~ size exp(-(r - R)/a) for r >> R:
        |V|, |W| and 4 |W_D| (the surface form's tail is 4 exp(-x))."""
        return [(abs(self.v), self.rv, self.av), (abs(self.w), self.rw, self.aw),
                (4 * abs(self.wd), self.rd, self.ad)]

    def q_function(self, l, ch):
        """Return q(r) with u'' = q(r) u:
        q = L(L+1)/r^2 + (2 mu/(hbar c)^2) U(r) - k^2 (the radial equation; common practice)."""
        c = 2 * ch.mu / (HBARC * HBARC)
        k2 = ch.k * ch.k
        ll = float(l * (l + 1))
        v, rv, av = self.v, self.rv, self.av
        w, rw, aw = self.w, self.rw, self.aw
        wd, rd, ad = self.wd, self.rd, self.ad
        rc, e2 = self.rc, self.e2
        exp = math.exp

        def q(r):
            if r < rc:
                vc = e2 / (2 * rc) * (3 - r * r / (rc * rc))
            else:
                vc = e2 / r
            fv = 1.0 / (1.0 + exp((r - rv) / av))
            fw = 1.0 / (1.0 + exp((r - rw) / aw))
            e = exp(-abs((r - rd) / ad))
            fd = 4 * e / ((1 + e) * (1 + e))
            re = ll / (r * r) + c * (vc - v * fv) - k2
            im = -c * (w * fw + wd * fd)
            return complex(re, im)

        return q

    def real_q_array(self, l, ch, r):
        """Re q(r) on a numpy array (the same formula as q_function)."""
        c = 2 * ch.mu / (HBARC * HBARC)
        vc = numpy.where(r < self.rc, self.e2 / (2 * self.rc) * (3 - r * r / self.rc ** 2), self.e2 / r)
        fv = 1.0 / (1.0 + numpy.exp((r - self.rv) / self.av))
        return l * (l + 1) / (r * r) + c * (vc - self.v * fv) - ch.k ** 2


def matching_radius(pot):
    """r_m: every nuclear term below TAIL_MEV (f ~ exp(-(r-R)/a) for r >> R, from the
    definition of f; common practice), at least
    max(R) + 30 max(a) and R_C + 1 fm; rounded up to a whole fm."""
    r = max(p[1] for p in pot.terms()) + 30 * max(p[2] for p in pot.terms())
    for depth, rr, a in pot.terms():
        if depth > 0:
            r = max(r, rr + a * math.log(depth / TAIL_MEV))
    r = max(r, pot.rc + 1.0)
    return float(math.ceil(r))


def start_radius(l, pot, ch, r_m, wkb_exponent=WKB_EXPONENT, r_floor=R_FLOOR):
    """Start radius of the outward integration for partial wave L.

    Any admixture of the irregular solution picked up at r_s is suppressed, by
    the time the first classical turning point r_1 is reached, by
    exp(-2 int_{r_s}^{r_1} kappa dr), kappa = sqrt(Re q) (WKB; common practice).
    r_s is the largest grid radius with int kappa dr >= wkb_exponent (so the
    suppression is e^-50 by default), and at least r_floor.
    """
    if l == 0:
        return r_floor
    r = numpy.geomspace(r_floor, r_m, 4000)
    q = pot.real_q_array(l, ch, r)
    neg = numpy.nonzero(q <= 0)[0]
    i1 = int(neg[0]) if neg.size else r.size - 1
    if i1 == 0:
        return r_floor
    kappa = numpy.sqrt(numpy.maximum(q[:i1 + 1], 0.0))
    # integral from r[i] to r[i1], trapezoid rule, for i = i1, i1-1, ..., 0
    seg = 0.5 * (kappa[1:] + kappa[:-1]) * numpy.diff(r[:i1 + 1])
    tail = numpy.concatenate([numpy.cumsum(seg[::-1])[::-1], [0.0]])
    idx = numpy.nonzero(tail >= wkb_exponent)[0]
    if not idx.size:
        return r_floor
    return float(max(r[idx[-1]], r_floor))


def log_derivative(l, pot, ch, r_m, rtol=RTOL, wkb_exponent=WKB_EXPONENT, r_floor=R_FLOOR):
    """u_L'/u_L at r_m of the regular solution (u ~ r^(L+1) at the origin), by
    scipy.integrate.solve_ivp (DOP853) on the complex system (u, u').

    Start at r_s (start_radius) with u = 1 and u'/u = (L+1)/r + 2 c2 r/(1 + c2 r^2),
    c2 = q0/(4L+6), q0 = q(r) - L(L+1)/r^2: the Frobenius series u = r^(L+1)(1 + c2 r^2 + ...)
    for a potential smooth at the origin (common practice), used while |c2| r^2 < 1e-3;
    otherwise u'/u = (L+1)/r, whose error the WKB suppression removes.  The
    integration is split at R_C, where V_C'' jumps.
    """
    q = pot.q_function(l, ch)
    r_s = start_radius(l, pot, ch, r_m, wkb_exponent, r_floor)
    c2 = (q(r_s) - l * (l + 1) / r_s ** 2) / (4 * l + 6)
    if abs(c2) * r_s * r_s < 1e-3:
        ld0 = (l + 1) / r_s + 2 * c2 * r_s / (1 + c2 * r_s * r_s)
    else:
        ld0 = (l + 1) / r_s + 0j
    y = numpy.array([1.0 + 0j, ld0])

    def rhs(r, yy):
        return numpy.array([yy[1], q(r) * yy[0]])

    edges = [r_s] + [b for b in (pot.rc,) if r_s < b < r_m] + [r_m]
    for a, b in zip(edges[:-1], edges[1:]):
        sol = scipy.integrate.solve_ivp(rhs, (a, b), y, method="DOP853",
                                        rtol=rtol, atol=ATOL_FACTOR * rtol)
        assert sol.success, (l, sol.message)
        y = sol.y[:, -1]
        # rescale (only the log-derivative matters)
        y = y / abs(y[0])
    return complex(y[1] / y[0])


def s_minus_one(l, ld, k, coul):
    """S_L - 1 from the log-derivative ld = u'/u at r_m (mpmath arithmetic):

    u ~ H-(rho) - S H+(rho), H+- = G +- i F (common practice), rho = k r, gives
    S = (k H-' - ld H-)/(k H+' - ld H+) and S - 1 = -2i (k F' - ld F)/(k H+' - ld H+).
    """
    f, g, fp, gp = (x[l] for x in coul)
    ld = mpmath.mpc(ld.real, ld.imag)
    k = mpf(k)
    hp = mpmath.mpc(g, f)
    hpp = mpmath.mpc(gp, fp)
    return complex(-2j * (k * fp - ld * f) / (k * hpp - ld * hp))


class Solution:
    """S_L - 1, sigma_L, L_max, sigma_R of one (channel, potential, matching radius)."""

    def __init__(self, ch, pot, r_m, rtol=RTOL, wkb_exponent=WKB_EXPONENT, r_floor=R_FLOOR):
        self.ch, self.pot, self.r_m = ch, pot, r_m
        rho = mpf(ch.k) * mpf(r_m)
        n_top = int(math.ceil(ch.k * r_m)) + 30
        coul = coulomb_ladder(ch.eta, rho, n_top)
        s1 = []
        run = 0
        l = 0
        while True:
            if l > n_top:
                n_top += 40
                coul = coulomb_ladder(ch.eta, rho, n_top)
            ld = log_derivative(l, pot, ch, r_m, rtol, wkb_exponent, r_floor)
            s1.append(s_minus_one(l, ld, ch.k, coul))
            run = run + 1 if (abs(s1[-1]) < S_CONVERGED and l > ch.k * r_m) else 0
            if run >= S_CONVERGED_RUN:
                break
            l += 1
        self.l_max = l
        self.s1 = numpy.array(s1)
        with mpmath.workdps(40):
            self.sigma = [coulomb_phase(ll, mpf(ch.eta)) for ll in range(l + 1)]
            self.e2isigma = numpy.array([complex(mpmath.expj(2 * s)) for s in self.sigma])
        ls = numpy.arange(l + 1)
        # sigma_R = (pi/k^2) sum (2L+1)(1 - |S_L|^2) (common practice), 1 - |S|^2 = -(2 Re s1 + |s1|^2)
        absorb = [(2 * ll + 1) * -(2 * s.real + abs(s) ** 2) for ll, s in zip(ls, s1)]
        self.sigma_reaction_mb = math.pi / ch.k ** 2 * math.fsum(absorb) * MB_PER_FM2
        self.coef = (2 * ls + 1) * self.e2isigma * self.s1 / (2j * ch.k)

    def amplitudes(self, theta_deg):
        """(f_C, f_N) [fm] at CM angles theta_deg (numpy array), common practice:
        f_C = -eta/(2k sin^2(theta/2)) exp(-i eta ln sin^2(theta/2) + 2 i sigma_0),
        f_N = 1/(2ik) sum_L (2L+1) exp(2 i sigma_L) (S_L - 1) P_L(cos theta)."""
        theta = numpy.radians(numpy.asarray(theta_deg, dtype=float))
        s2 = numpy.sin(theta / 2) ** 2
        eta, k = self.ch.eta, self.ch.k
        f_c = -eta / (2 * k * s2) * numpy.exp(-1j * eta * numpy.log(s2) + 2j * float(self.sigma[0]))
        ls = numpy.arange(self.l_max + 1)
        p = scipy.special.eval_legendre(ls[:, None], numpy.cos(theta)[None, :])
        f_n = numpy.sum(self.coef[:, None] * p, axis=0)
        return f_c, f_n

    def cross_section(self, theta_deg):
        """(dsigma/dOmega [mb/sr], ratio to Rutherford): |f_C + f_N|^2 x 10 mb/fm^2 and |f|^2/|f_C|^2."""
        f_c, f_n = self.amplitudes(theta_deg)
        f2 = numpy.abs(f_c + f_n) ** 2
        return f2 * MB_PER_FM2, f2 / numpy.abs(f_c) ** 2


def build_set(spec):
    """(name, Channel, Potential, r_m) of one parameter set; radii R = r0 A^(1/3) rounded to doubles."""
    ch = Channel(spec["target"], spec["t_lab"])
    a13 = mpf(spec["target"][1]) ** (mpf(1) / 3)
    rad = lambda r0: float(mpf(r0) * a13)  # noqa: E731
    (v, rv0, av), (w, rw0, aw), (wd, rd0, ad) = spec["real"], spec["imag"], spec["surf"]
    pot = Potential(v, rad(rv0), av, w, rad(rw0), aw, wd, rad(rd0), ad, rad(spec["rc0"]), ch.z_product)
    return spec["name"], ch, pot, matching_radius(pot)


def max_rel_change(a, b):
    return float(numpy.max(numpy.abs(a - b) / numpy.abs(a)))


def optical_model_results():
    """Set rows, cross-section rows and the self-check figures."""
    set_rows, xs_rows = [], []
    checks = dict(rtol=0.0, rm=0.0, rstart=0.0, free=0.0, flux=0.0)
    theta = numpy.array(THETA_DEG)
    for spec in OPTICAL_SETS:
        name, ch, pot, r_m = build_set(spec)
        sol = Solution(ch, pot, r_m)
        dsdo, ratio = sol.cross_section(theta)
        # (c) rtol / 100, matching radius + 5 fm, and a deeper start (each alone).
        for key, other in [
            ("rtol", Solution(ch, pot, r_m, rtol=RTOL / 100)),
            ("rm", Solution(ch, pot, r_m + RM_SHIFT_FM)),
            ("rstart", Solution(ch, pot, r_m, wkb_exponent=WKB_EXPONENT + 10, r_floor=R_FLOOR / 10)),
        ]:
            change = max_rel_change(dsdo, other.cross_section(theta)[0])
            assert change < SELF_CHECK_REL, (name, key, change)
            checks[key] = max(checks[key], change)
        # (a) no nuclear potential, point-like charge: Rutherford.
        free = Solution(ch, pot.replaced(v=0.0, w=0.0, wd=0.0, rc=FREE_RC), r_m, r_floor=FREE_R_FLOOR)
        dev = float(numpy.max(numpy.abs(free.cross_section(theta)[1] - 1)))
        assert dev < 1e-8, (name, dev)
        checks["free"] = max(checks["free"], dev)
        # (b) real potential only: |S_L| = 1.
        real = Solution(ch, pot.replaced(w=0.0, wd=0.0), r_m)
        flux = float(numpy.max(numpy.abs(numpy.abs(1 + real.s1) - 1)))
        assert flux < 1e-10, (name, flux)
        checks["flux"] = max(checks["flux"], flux)
        assert sol.sigma_reaction_mb > 0, name

        set_rows.append([name, ch.z_product, ch.mu, ch.e_cm, ch.k, ch.eta,
                         pot.v, pot.rv, pot.av, pot.w, pot.rw, pot.aw, pot.wd, pot.rd, pot.ad,
                         pot.rc, r_m, sol.l_max, sol.sigma_reaction_mb])
        for t, d, rr in zip(THETA_DEG, dsdo, ratio):
            xs_rows.append([name, t, float(d), float(rr)])
    return set_rows, xs_rows, checks


OPTICAL_DESCRIPTION = [
    "Optical model, independent reference: radial equation u'' = [L(L+1)/r^2 + (2 mu/(hbar c)^2) U(r)"
    " - k^2] u integrated by scipy.integrate.solve_ivp (DOP853, complex, rtol 2.5e-12) from the"
    " regular solution u ~ r^(L+1), matched at r_m to mpmath Coulomb functions: S_L = (k H-' - Lg H-)"
    "/(k H+' - Lg H+), H+- = G +- iF at rho = k r_m, Lg = u'/u (common practice).",
    "U(r) = -V f(r;R_V,a_V) - i W f(r;R_W,a_W) - i W_D 4 e^x/(1+e^x)^2 + V_C(r), x = (r-R_D)/a_D,"
    " f = 1/(1+exp((r-R)/a)); V_C = Z_a Z_A alpha hbar c/(2 R_C) (3 - r^2/R_C^2) for r < R_C,"
    " Z_a Z_A alpha hbar c/r outside. Radii in the sets file are R in fm (R = r0 A_target^(1/3)).",
    "Channel (non-relativistic): m = M_atomic[u] u - Z m_e (electron binding ignored), atomic masses"
    " AME2020 (from memory): 4He 4.00260325413, 12C 12.0, 58Ni 57.93534165, 208Pb 207.9766525 u;"
    " mu = m_a m_A/(m_a+m_A), E_cm = T_lab m_A/(m_a+m_A), k = sqrt(2 mu E_cm)/hbar c,"
    " eta = Z_a Z_A alpha sqrt(mu/(2 E_cm)); k and eta computed from the written mu and E_cm.",
    "Constants CODATA 2018: u = 931.49410242 MeV, m_e = 0.51099895 MeV, hbar c = 197.3269804 MeV fm,"
    " alpha = 1/137.035999084; 1 fm^2 = 10 mb.",
    "r_m: every nuclear term < 1e-12 MeV there, at least max(R) + 30 max(a) and R_C + 1, rounded up"
    " to a whole fm. Partial waves L = 0 .. l_max, ended after |S_L - 1| < 1e-12 for 5 L in a row"
    " past k r_m.",
    "f_C = -eta/(2k sin^2(theta/2)) exp(-i eta ln sin^2(theta/2) + 2i sigma_0); f_N = 1/(2ik)"
    " sum (2L+1) exp(2i sigma_L) (S_L - 1) P_L(cos theta); dsdo = |f_C + f_N|^2 x 10 mb/sr;"
    " ratio_rutherford = |f|^2/|f_C|^2; sigma_reaction = (pi/k^2) sum (2L+1)(1 - |S_L|^2) x 10 mb"
    " (common practice); sigma_L = Im log Gamma(L+1+i eta) (DLMF 33.2.10).",
]


def write_optical_model(out_dir):
    set_rows, xs_rows, checks = optical_model_results()
    check_lines = [
        "Self-checks (largest over the sets): dsdo changes by at most"
        f" {checks['rtol']:.3g} (rtol / 100), {checks['rm']:.3g} (r_m + {RM_SHIFT_FM:g} fm),"
        f" {checks['rstart']:.3g} (deeper start of the integration) relative, all < {SELF_CHECK_REL:g};"
        f" without nuclear potential (R_C = {FREE_RC:g} fm) |ratio - 1| <= {checks['free']:.3g};"
        f" real potential only ||S_L| - 1| <= {checks['flux']:.3g}.",
    ]
    n_sets = write_csv(
        out_dir / "optical_model_sets.csv",
        OPTICAL_DESCRIPTION + check_lines + [
            "Units: MeV, fm, 1/fm; sigma_reaction_mb in mb; l_max is the largest L in the sums.",
        ],
        ["set", "z_product", "reduced_mass_mev", "e_cm_mev", "k_per_fm", "eta",
         "v_mev", "rv_fm", "av_fm", "w_mev", "rw_fm", "aw_fm", "wd_mev", "rd_fm", "ad_fm",
         "rc_fm", "matching_radius_fm", "l_max", "sigma_reaction_mb"],
        set_rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    n_xs = write_csv(
        out_dir / "optical_model.csv",
        OPTICAL_DESCRIPTION + check_lines + [
            "Parameter sets in optical_model_sets.csv. theta_cm_deg = 10, 15, ..., 170;"
            " dsdo_cm_mb_sr in mb/sr (CM).",
        ],
        ["set", "theta_cm_deg", "dsdo_cm_mb_sr", "ratio_rutherford"],
        xs_rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n_sets, n_xs, checks


# --------------------------------------------------------------------------
# --time
# --------------------------------------------------------------------------

def time_ni58(repeats=5):
    spec = next(s for s in OPTICAL_SETS if s["name"] == "ni58")
    theta = numpy.linspace(10, 170, 170)
    times = []
    l_max = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        _name, ch, pot, r_m = build_set(spec)
        sol = Solution(ch, pot, r_m)
        sol.cross_section(theta)
        times.append(time.perf_counter() - t0)
        l_max = sol.l_max
    print(f"python reference ni58: median {statistics.median(times) * 1e3:.1f} ms over {repeats} runs,"
          f" L_max {l_max}")


# --------------------------------------------------------------------------

def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    pre = argparse.ArgumentParser(add_help=False)
    pre.add_argument("--time", action="store_true")
    opts, rest = pre.parse_known_args(argv)
    if opts.time:
        time_ni58()
        return 0
    out = output_dir(__doc__.splitlines()[0] + " (--time: time the ni58 optical-model reference,"
                     " write nothing)", FIXTURES_DIR, rest)
    t0 = time.perf_counter()
    n, dropped = write_coulomb_functions(out)
    print(f"wrote {out / 'coulomb_functions.csv'} ({n} rows; {dropped} grid points dropped)"
          f" [{time.perf_counter() - t0:.1f} s]")
    n = write_coulomb_phases(out)
    print(f"wrote {out / 'coulomb_phases.csv'} ({n} rows)")
    n, worst = write_legendre(out)
    print(f"wrote {out / 'legendre.csv'} ({n} rows; scipy deviates by <= {worst:.3g})")
    n = write_legendre_fit(out)
    print(f"wrote {out / 'legendre_fit.csv'} ({n} coefficients) and its data")
    n, skipped = write_hard_sphere(out)
    print(f"wrote {out / 'hard_sphere.csv'} ({n} rows; {skipped} skipped)")
    t1 = time.perf_counter()
    n_sets, n_xs, checks = write_optical_model(out)
    print(f"wrote {out / 'optical_model_sets.csv'} ({n_sets} rows) and {out / 'optical_model.csv'}"
          f" ({n_xs} rows) [{time.perf_counter() - t1:.1f} s]; self-checks: "
          + ", ".join(f"{k} {v:.3g}" for k, v in checks.items()))
    print(f"total {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
