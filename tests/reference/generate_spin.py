#!/usr/bin/env python3
"""Reference fixtures for the spin-1/2 optical model: protons and neutrons with a spin-orbit term.

An independent solution of the optical model with a spin-orbit term of Thomas
form, for each j = l +- 1/2 by scipy.integrate.solve_ivp (DOP853) matched to
mpmath Coulomb functions (the radial solver, Coulomb functions and matching of
``generate_theory.py``, imported from it), and the observables from the 2x2
amplitude matrix in spin space built here from the operator l.sigma acting on
P_l, not from the closed forms of A and B that the Rust code uses:

    f = (1/2ik) sum_l e^{2i sigma_l} [((l+1)(S_l+ - 1) + l(S_l- - 1)) P_l(cos theta)
                                      + (S_l+ - S_l-) (sigma . L) P_l]  + f_C,

from the projectors (l+1 + l.sigma)/(2l+1) and (l - l.sigma)/(2l+1) onto
j = l +- 1/2 (common practice; e.g. G. R. Satchler, Direct Nuclear Reactions,
Oxford 1983, ch. 3, from memory), with L = -i r x grad applied to P_l(r.z/|r|)
by the chain rule, grad P_l(z/r) = P_l'(x) (z_hat - x r_hat)/r, and P_l' from
numpy's Legendre series.  Then, for scattering in the x-z plane towards +x,

    dsigma/dOmega = Tr(f f^+)/2,   A_y = P_y = Tr(f f^+ sigma_y)/Tr(f f^+)

(A_y = P for spin 1/2 on spin 0 by time reversal; G. G. Ohlsen, Rep. Prog.
Phys. 35 (1972) 717, from memory), y = k_in x k_out/|k_in x k_out|: the Madison
convention (positive: more scattering to the left, +x = y x z, for spin up).

Usage (from the repository root)::

    python3 tests/reference/generate_spin.py [--out DIR]

Deterministic like ``generate_theory.py`` (CI compares cell by cell with
``compare_fixtures.py``).  Files written:

* ``spin_orbit_sets.csv`` -- channel, potential, matching radius, L_max, sigma_R and for
  neutrons sigma_total and sigma_elastic of four parameter sets (protons on 12C, 58Ni and
  208Pb, neutrons on 58Ni; invented, typical parameters)
* ``spin_orbit.csv``      -- dsigma/dOmega (CM) and A_y of those sets at 5, 10, ..., 175 deg
"""

import math
import sys
import time

import mpmath
import numpy
import numpy.polynomial.legendre as npleg
import scipy
import scipy.special
from mpmath import mpf

import generate_theory as gt
from fixture_csv import FIXTURES_DIR, generator_path, output_dir, write_csv

GENERATOR = generator_path(__file__)
LIBRARIES = [mpmath, numpy, scipy]

# Charged-pion mass m_pi c^2 [MeV], Particle Data Group 2020 (139.57039 MeV; from memory).
PION_MASS_MEV = 139.57039
LAMBDA_PI_SQ = (gt.HBARC / PION_MASS_MEV) ** 2  # (hbar/m_pi c)^2 [fm^2]

# Atomic masses [u], AME2020 (from memory): 1H and the neutron; the targets are those of
# generate_theory.py.
ATOMIC_MASS_U = dict(gt.ATOMIC_MASS_U)
ATOMIC_MASS_U.update({(1, 1): "1.00782503223", (0, 1): "1.00866491595"})

# Invented parameter sets of the usual size for nucleons: (depth [MeV], r0 [fm], a [fm]) of
# the real volume, imaginary volume, imaginary surface, real and imaginary spin-orbit terms
# (l.sigma normalisation); R = r0 A_target^(1/3).
SPIN_SETS = [
    dict(name="p_c12", beam=(1, 1), target=(6, 12), t_lab=30.0,
         real=(45.0, 1.15, 0.68), imag=(3.0, 1.30, 0.55), surf=(5.0, 1.30, 0.55),
         so=(5.5, 0.95, 0.60), so_imag=(-0.3, 0.95, 0.60), rc0=1.30),
    dict(name="p_ni58", beam=(1, 1), target=(28, 58), t_lab=30.0,
         real=(47.0, 1.17, 0.75), imag=(2.0, 1.32, 0.60), surf=(6.5, 1.32, 0.60),
         so=(6.2, 1.01, 0.75), so_imag=(-0.5, 1.01, 0.75), rc0=1.25),
    dict(name="p_pb208", beam=(1, 1), target=(82, 208), t_lab=30.0,
         real=(52.0, 1.17, 0.75), imag=(2.5, 1.32, 0.65), surf=(8.0, 1.32, 0.65),
         so=(6.0, 1.05, 0.60), so_imag=(-0.4, 1.05, 0.60), rc0=1.25),
    dict(name="n_ni58", beam=(0, 1), target=(28, 58), t_lab=14.0,
         real=(49.0, 1.17, 0.75), imag=(1.0, 1.26, 0.58), surf=(7.5, 1.26, 0.58),
         so=(6.2, 1.01, 0.75), so_imag=(0.0, 1.01, 0.75), rc0=1.25),
]
THETA_DEG = [float(t) for t in range(5, 176, 5)]
SELF_CHECK_REL = 1e-7


def nuclear_mass_mev(z, a):
    """Nuclear rest energy [MeV]: M_atomic[u] u - Z m_e, electron binding ignored (common practice)."""
    return mpf(ATOMIC_MASS_U[(z, a)]) * gt.U_MEV - z * gt.ELECTRON_MASS_MEV


class Channel:
    """The non-relativistic channel of generate_theory.Channel for any beam."""

    def __init__(self, beam, target, t_lab):
        m_a, m_t = nuclear_mass_mev(*beam), nuclear_mass_mev(*target)
        self.z_product = beam[0] * target[0]
        self.mu = float(m_a * m_t / (m_a + m_t))
        self.e_cm = float(mpf(t_lab) * m_t / (m_a + m_t))
        self.k = float(mpmath.sqrt(2 * mpf(self.mu) * mpf(self.e_cm)) / gt.HBARC_MEV_FM)
        self.eta = float(self.z_product * gt.ALPHA * mpmath.sqrt(mpf(self.mu) / (2 * mpf(self.e_cm))))


def thomas(depth, radius, a, r):
    """depth (1/r) df/dr of f = 1/(1 + exp((r - R)/a)): df/dr = -(1/a) e^{-|x|}/(1 + e^{-|x|})^2,
    x = (r - R)/a (the derivative of the Woods-Saxon form, written symmetric in x)."""
    exp = numpy.exp if isinstance(r, numpy.ndarray) else math.exp
    e = exp(-abs((r - radius) / a))
    return -depth * e / (a * (1 + e) ** 2) / r


class SpinOrbitPotential:
    """The potential of generate_theory.Potential plus, for one l.sigma,
    U_so(r) = (hbar/m_pi c)^2 [V_so (1/r) df_R/dr + i W_so (1/r) df_I/dr] l.sigma,
    l.sigma = l for j = l + 1/2 and -(l+1) for j = l - 1/2 (Thomas form, l.sigma normalisation;
    Satchler 1983 section 12.2, from memory).  Duck-types the attributes log_derivative uses."""

    def __init__(self, pot, so, so_imag, l_sigma):
        self.pot, self.so, self.so_imag, self.l_sigma = pot, so, so_imag, l_sigma
        self.rc = pot.rc

    def u_so(self, r):
        return LAMBDA_PI_SQ * (thomas(*self.so, r) + 1j * thomas(*self.so_imag, r))

    def q_function(self, l, ch):
        base = self.pot.q_function(l, ch)
        c = 2 * ch.mu / (gt.HBARC * gt.HBARC) * self.l_sigma
        return lambda r: base(r) + c * complex(self.u_so(r))

    def real_q_array(self, l, ch, r):
        c = 2 * ch.mu / (gt.HBARC * gt.HBARC) * self.l_sigma
        return self.pot.real_q_array(l, ch, r) + c * LAMBDA_PI_SQ * thomas(*self.so, r)


def sigma_dot_l_legendre(l, theta):
    """The 2x2 matrix (sigma . L) P_l(r_hat . z_hat) at r_hat = (sin theta, 0, cos theta):
    L = -i r x grad, grad P_l(z/r) = P_l'(x)(z_hat - x r_hat) at r = 1, x = cos theta."""
    x = math.cos(theta)
    r_hat = numpy.array([math.sin(theta), 0.0, x])
    dp = npleg.Legendre.basis(l).deriv()(x) if l > 0 else 0.0
    grad = dp * (numpy.array([0.0, 0.0, 1.0]) - x * r_hat)
    ell = -1j * numpy.cross(r_hat, grad)
    return sum(ell[i] * PAULI[i] for i in range(3))


PAULI = [numpy.array([[0, 1], [1, 0]], dtype=complex), numpy.array([[0, -1j], [1j, 0]]),
         numpy.array([[1, 0], [0, -1]], dtype=complex)]


class SpinSolution:
    """S_l+ - 1 and S_l- - 1 of one (channel, potential, spin-orbit, matching radius)."""

    def __init__(self, ch, pot, so, so_imag, r_m, rtol=gt.RTOL):
        self.ch = ch
        rho = mpf(ch.k) * mpf(r_m)
        n_top = int(math.ceil(ch.k * r_m)) + 30
        coul = gt.coulomb_ladder(ch.eta, rho, n_top)
        plus, minus = [], []
        run, l = 0, 0
        while True:
            if l > n_top:
                n_top += 40
                coul = gt.coulomb_ladder(ch.eta, rho, n_top)
            s1 = []
            for l_sigma in ([l, -(l + 1)] if l > 0 else [0]):
                spot = SpinOrbitPotential(pot, so, so_imag, l_sigma)
                ld = gt.log_derivative(l, spot, ch, r_m, rtol)
                s1.append(gt.s_minus_one(l, ld, ch.k, coul))
            plus.append(s1[0])
            minus.append(s1[-1])
            big = max(abs(s) for s in s1)
            run = run + 1 if (big < gt.S_CONVERGED and l > ch.k * r_m) else 0
            if run >= gt.S_CONVERGED_RUN:
                break
            l += 1
        self.l_max = l
        self.plus, self.minus = numpy.array(plus), numpy.array(minus)
        with mpmath.workdps(40):
            self.sigma = [gt.coulomb_phase(ll, mpf(ch.eta)) for ll in range(l + 1)]
            self.e2isigma = numpy.array([complex(mpmath.expj(2 * s)) for s in self.sigma])
        ls = numpy.arange(l + 1)
        k2 = ch.k ** 2
        # sigma_R = (pi/k^2) sum [(l+1)(1 - |S_l+|^2) + l(1 - |S_l-|^2)], 1 - |S|^2 = -(2 Re s1 + |s1|^2);
        # sigma_tot = (2 pi/k^2) sum [(l+1)(1 - Re S_l+) + l(1 - Re S_l-)], sigma_el with |1 - S|^2
        # (common practice, the spin-0 sums with the weights of each j).
        def weighted(term):
            return math.fsum(float((ll + 1) * term(sp) + ll * term(sm))
                             for ll, sp, sm in zip(ls, self.plus, self.minus))
        self.sigma_reaction_mb = math.pi / k2 * weighted(lambda s: -(2 * s.real + abs(s) ** 2)) * gt.MB_PER_FM2
        self.sigma_total_mb = 2 * math.pi / k2 * weighted(lambda s: -s.real) * gt.MB_PER_FM2
        self.sigma_elastic_mb = math.pi / k2 * weighted(lambda s: abs(s) ** 2) * gt.MB_PER_FM2

    def observables(self, theta_deg):
        """(dsigma/dOmega [mb/sr], A_y) at each angle, from the amplitude matrix (module docs)."""
        eta, k = self.ch.eta, self.ch.k
        out = []
        for t in theta_deg:
            theta = math.radians(t)
            s2 = math.sin(theta / 2) ** 2
            f_c = 0j if eta == 0 else (-eta / (2 * k * s2)
                                       * numpy.exp(-1j * eta * math.log(s2) + 2j * float(self.sigma[0])))
            x = math.cos(theta)
            f = f_c * numpy.eye(2, dtype=complex)
            for ll in range(self.l_max + 1):
                pre = self.e2isigma[ll] / (2j * k)
                p = scipy.special.eval_legendre(ll, x)
                diag = (ll + 1) * self.plus[ll] + ll * self.minus[ll]
                f = f + pre * (diag * p * numpy.eye(2) + (self.plus[ll] - self.minus[ll]) * sigma_dot_l_legendre(ll, theta))
            ff = f @ f.conj().T
            tr = numpy.trace(ff).real
            out.append((tr / 2 * gt.MB_PER_FM2, numpy.trace(ff @ PAULI[1]).real / tr))
        return out


def build_set(spec):
    """(name, Channel, Potential, spin-orbit terms, r_m) of one set; radii R = r0 A^(1/3) as doubles."""
    ch = Channel(spec["beam"], spec["target"], spec["t_lab"])
    a13 = mpf(spec["target"][1]) ** (mpf(1) / 3)
    rad = lambda r0: float(mpf(r0) * a13)  # noqa: E731
    (v, rv0, av), (w, rw0, aw), (wd, rd0, ad) = spec["real"], spec["imag"], spec["surf"]
    pot = gt.Potential(v, rad(rv0), av, w, rad(rw0), aw, wd, rad(rd0), ad, rad(spec["rc0"]), ch.z_product)
    so = (spec["so"][0], rad(spec["so"][1]), spec["so"][2])
    so_imag = (spec["so_imag"][0], rad(spec["so_imag"][1]), spec["so_imag"][2])
    # r_m as in generate_theory, and at least 30 diffusenesses past the spin-orbit radii,
    # where (hbar/m_pi c)^2 |V_so| e^{-30}/(a r) < 1e-12 MeV.
    r_m = max(gt.matching_radius(pot), float(math.ceil(max(so[1] + 30 * so[2], so_imag[1] + 30 * so_imag[2]))))
    return spec["name"], ch, pot, so, so_imag, r_m


def results():
    set_rows, curve_rows = [], []
    checks = dict(rtol=0.0, rm=0.0, flux=0.0)
    for spec in SPIN_SETS:
        name, ch, pot, so, so_imag, r_m = build_set(spec)
        sol = SpinSolution(ch, pot, so, so_imag, r_m)
        obs = sol.observables(THETA_DEG)
        dsdo = numpy.array([o[0] for o in obs])
        # Self-checks: rtol / 100 and r_m + 5 fm change dsigma/dOmega by < SELF_CHECK_REL, and
        # A_y by less in absolute terms; a real potential keeps |S_l+-| = 1.
        for key, other in [("rtol", SpinSolution(ch, pot, so, so_imag, r_m, rtol=gt.RTOL / 100)),
                           ("rm", SpinSolution(ch, pot, so, so_imag, r_m + gt.RM_SHIFT_FM))]:
            o2 = other.observables(THETA_DEG)
            change = max(max(abs(a[0] / b[0] - 1), abs(a[1] - b[1])) for a, b in zip(obs, o2))
            assert change < SELF_CHECK_REL, (name, key, change)
            checks[key] = max(checks[key], change)
        real = SpinSolution(ch, pot.replaced(w=0.0, wd=0.0), so, (0.0, so_imag[1], so_imag[2]), r_m)
        flux = float(max(numpy.max(numpy.abs(numpy.abs(1 + real.plus) - 1)),
                         numpy.max(numpy.abs(numpy.abs(1 + real.minus) - 1))))
        assert flux < 1e-10, (name, flux)
        checks["flux"] = max(checks["flux"], flux)
        assert all(abs(o[1]) <= 1 for o in obs), name
        neutral = ch.z_product == 0
        set_rows.append([name, ch.z_product, ch.mu, ch.e_cm, ch.k, ch.eta,
                         pot.v, pot.rv, pot.av, pot.w, pot.rw, pot.aw, pot.wd, pot.rd, pot.ad,
                         so[0], so[1], so[2], so_imag[0], so_imag[1], so_imag[2],
                         pot.rc, r_m, sol.l_max, sol.sigma_reaction_mb,
                         sol.sigma_total_mb if neutral else "-", sol.sigma_elastic_mb if neutral else "-"])
        for t, (d, ay) in zip(THETA_DEG, obs):
            curve_rows.append([name, t, float(d), float(ay)])
    return set_rows, curve_rows, checks


DESCRIPTION = [
    "Spin-1/2 optical model, independent reference: for each j = l +- 1/2 the radial equation"
    " u'' = [L(L+1)/r^2 + (2 mu/(hbar c)^2)(U(r) + U_so(r) l.sigma) - k^2] u by scipy.integrate.solve_ivp"
    " (DOP853, complex, rtol 2.5e-12) matched at r_m to mpmath Coulomb functions (generate_theory.py).",
    "U(r) as in optical_model_sets.csv; U_so = (hbar/m_pi c)^2 [V_so (1/r) df(r;R_so,a_so)/dr"
    " + i W_so (1/r) df(r;R_so',a_so')/dr], l.sigma = l (j = l+1/2), -(l+1) (j = l-1/2); (hbar/m_pi c)^2"
    " = (197.3269804/139.57039)^2 fm^2 (charged-pion mass, PDG 2020). Radii in the sets file are R in fm.",
    "Channel (non-relativistic) as in generate_theory.py; atomic masses AME2020 (from memory):"
    " 1H 1.00782503223, n 1.00866491595, 12C 12.0, 58Ni 57.93534165, 208Pb 207.9766525 u.",
    "Observables from the 2x2 amplitude f = f_C + (1/2ik) sum e^{2i sigma_l}[((l+1)(S+ - 1) + l(S- - 1)) P_l"
    " + (S+ - S-)(sigma.L) P_l] with L = -i r x grad applied to P_l: dsdo = Tr(f f^+)/2 x 10 mb/sr,"
    " A_y = Tr(f f^+ sigma_y)/Tr(f f^+), y = k_in x k_out (Madison convention) for scattering towards +x.",
    "sigma_reaction = (pi/k^2) sum [(l+1)(1 - |S+|^2) + l(1 - |S-|^2)] x 10 mb; for neutrons"
    " sigma_total = (2 pi/k^2) sum [(l+1)(1 - Re S+) + l(1 - Re S-)] and sigma_elastic with |1 - S|^2"
    " ('-' for protons). Partial waves end after max |S+- - 1| < 1e-12 for 5 l in a row past k r_m.",
]


def write_all(out_dir):
    set_rows, curve_rows, checks = results()
    check_lines = [
        "Self-checks (largest over the sets): dsdo (relative) and A_y (absolute) change by at most"
        f" {checks['rtol']:.3g} (rtol / 100) and {checks['rm']:.3g} (r_m + {gt.RM_SHIFT_FM:g} fm), all"
        f" < {SELF_CHECK_REL:g}; real potential only ||S_l+-| - 1| <= {checks['flux']:.3g}.",
    ]
    n_sets = write_csv(
        out_dir / "spin_orbit_sets.csv",
        DESCRIPTION + check_lines + ["Units: MeV, fm, 1/fm, mb; l_max is the largest l in the sums."],
        ["set", "z_product", "reduced_mass_mev", "e_cm_mev", "k_per_fm", "eta",
         "v_mev", "rv_fm", "av_fm", "w_mev", "rw_fm", "aw_fm", "wd_mev", "rd_fm", "ad_fm",
         "vso_mev", "rso_fm", "aso_fm", "wso_mev", "rwso_fm", "awso_fm",
         "rc_fm", "matching_radius_fm", "l_max", "sigma_reaction_mb", "sigma_total_mb", "sigma_elastic_mb"],
        set_rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    n_curve = write_csv(
        out_dir / "spin_orbit.csv",
        DESCRIPTION + check_lines + ["Sets in spin_orbit_sets.csv. theta_cm_deg = 5, 10, ..., 175; dsdo in mb/sr (CM)."],
        ["set", "theta_cm_deg", "dsdo_cm_mb_sr", "analyzing_power"],
        curve_rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n_sets, n_curve, checks


def main(argv=None):
    out = output_dir(__doc__.splitlines()[0], FIXTURES_DIR, argv)
    t0 = time.perf_counter()
    n_sets, n_curve, checks = write_all(out)
    print(f"wrote {out / 'spin_orbit_sets.csv'} ({n_sets} rows) and {out / 'spin_orbit.csv'} ({n_curve} rows)"
          f" [{time.perf_counter() - t0:.1f} s]; self-checks: " + ", ".join(f"{k} {v:.3g}" for k, v in checks.items()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
