#!/usr/bin/env python3
"""Reference fixtures for two-body reaction kinematics and the Rutherford cross section.

Computes, independently of the Rust code and at high precision (mpmath,
40 significant digits), the relativistic two-body kinematics of a + A -> b + B
with A at rest, and the point-Coulomb (Rutherford) cross section, and writes
them with ``repr()`` so that the Rust side parses exactly the same IEEE-754
doubles.  Only general-purpose libraries are used (mpmath, numpy,
periodictable for the AME2020 atomic masses).

Usage (from the repository root)::

    python3 tests/reference/generate_kinematics.py [--out DIR]

DIR defaults to ``tests/reference/fixtures`` next to this script.  The output
is deterministic: no random numbers are used, so two runs with the same
library versions produce byte-identical files.

Files written:

* ``kinematics.csv``  -- lab angle, lab energy, Jacobian dOmega_lab/dOmega_cm,
  branch and maximum lab angle of the detected particle (ejectile or recoil)
  on a grid of ejectile CM angles, plus the other particle's lab angle/energy
* ``rutherford.csv``  -- point-Coulomb dsigma/dOmega in the CM (non-relativistic
  and relativistic conventions) and the non-relativistic one in the lab
"""

import sys

import mpmath
import numpy
import periodictable
from mpmath import mp, mpf

from fixture_csv import FIXTURES_DIR, generator_path, output_dir, write_csv

# Path of this script as recorded in the fixture headers, and the libraries
# whose versions they list.
GENERATOR = generator_path(__file__)
LIBRARIES = [mpmath, numpy, periodictable]

# Working precision: 40 significant decimal digits for every mpmath number.
mp.dps = 40

# Physical constants, CODATA 2018 recommended values, as decimal strings so
# that mpmath holds the published digits exactly.
U_MEV = mpf("931.49410242")  # atomic mass constant energy equivalent m_u c^2 [MeV]
ELECTRON_MASS_MEV = mpf("0.51099895000")  # m_e c^2 [MeV]
HBARC_MEV_FM = mpf("197.3269804")  # hbar c [MeV fm]
ALPHA = 1 / mpf("137.035999084")  # fine-structure constant
MB_PER_FM2 = 10  # 1 fm^2 = 1e-26 cm^2 = 10 mb (definition of the barn: 1 b = 1e-24 cm^2)

# Two quantities that are equal in exact arithmetic (e.g. beta_cm and the CM
# velocity of an elastic recoil) may differ in the last of the 40 digits;
# such a pair is treated as equal.
EQUAL_REL_TOL = mpf("1e-30")
# Energy and momentum conservation in the lab, relative.
CONSERVATION_REL_TOL = mpf("1e-25")

THETA_CM_GRID_DEG = list(range(5, 180, 10))  # 5, 15, ..., 175 (ejectile CM angle)
RUTHERFORD_THETA_CM_DEG = list(range(10, 180, 10))  # 10, 20, ..., 170
EDGE_SKIP_DEG = 0.01  # skip a point whose lab angle is within this of 0 or 180 deg

# (beam, target, ejectile, beam kinetic energy T [MeV], residual excitation E_x [MeV]);
# each is written once with detect=ejectile and once with detect=recoil.
# Nuclides are (Z, A); the residual B follows from conservation of Z and A.
KINEMATICS_CASES = [
    ((2, 4), (28, 58), (2, 4), 24.0, 0.0),
    ((2, 4), (28, 58), (2, 4), 24.0, 1.454),
    ((1, 1), (6, 12), (1, 1), 10.0, 0.0),
    ((6, 12), (1, 1), (6, 12), 60.0, 0.0),  # heavy on light: ejectile double valued
    ((8, 16), (2, 4), (8, 16), 40.0, 0.0),
    ((8, 16), (82, 208), (8, 16), 130.0, 0.0),
    ((2, 4), (79, 197), (2, 4), 30.0, 0.0),
    ((1, 2), (28, 58), (1, 1), 12.0, 0.0),  # (d,p) transfer: recoil 59Ni
    ((1, 1), (6, 12), (1, 1), 1000.0, 4.439),  # relativistic
    ((2, 3), (8, 16), (2, 3), 25.0, 6.049),
    ((2, 4), (2, 4), (2, 4), 20.0, 0.0),  # equal masses
]

# (beam, target, T [MeV]) for the elastic point-Coulomb cross section.
RUTHERFORD_CASES = [
    ((2, 4), (28, 58), 24.0),
    ((2, 4), (79, 197), 30.0),
    ((8, 16), (82, 208), 130.0),
    ((1, 1), (6, 12), 10.0),
]


# --------------------------------------------------------------------------
# Nuclides and nuclear masses
# --------------------------------------------------------------------------

def nuclide_name(z, a):
    """'4He', '58Ni', '1H'; the free neutron (z=0, a=1) is 'n'."""
    if z == 0:
        assert a == 1, (z, a)
        return "n"
    return f"{a}{periodictable.elements[z].symbol}"


def electron_binding_mev(z):
    """Total binding energy of all Z electrons of the neutral atom [MeV].

    B_el(Z) = 14.4381 * Z^2.39 + 1.55468e-6 * Z^5.35 eV
    (D. Lunney, J. M. Pearson, C. Thibault, Rev. Mod. Phys. 75 (2003) 1021, Eq. A4);
    1 eV = 1e-6 MeV.
    """
    z = mpf(z)
    return (mpf("14.4381") * z ** mpf("2.39") + mpf("1.55468e-6") * z ** mpf("5.35")) * mpf("1e-6")


def nuclear_mass_mev(z, a):
    """Nuclear (bare-nucleus) rest energy [MeV], rounded to the nearest double.

    M_nuc = M_atomic * u - Z * m_e + B_el(Z)   (common practice: the atomic mass
    less the electrons' rest energy plus their total binding energy, Lunney et
    al., Rev. Mod. Phys. 75 (2003) 1021), with the AME2020 atomic mass from
    periodictable and u, m_e from CODATA 2018.  The free neutron's mass is used
    directly.

    The result is rounded to a double and returned as the exact mpf of that
    double: the fixture's kinematics are computed from exactly the masses it
    writes, so a reader that starts from the written masses reproduces them.
    """
    if z == 0:
        assert a == 1, (z, a)
        atomic_u = periodictable.n.mass
        m = mpf(repr(float(atomic_u))) * U_MEV
    else:
        atomic_u = periodictable.elements[z][a].mass
        if atomic_u is None:
            raise ValueError(f"no mass for Z={z} A={a}")
        m = mpf(repr(float(atomic_u))) * U_MEV - z * ELECTRON_MASS_MEV + electron_binding_mev(z)
    return mpf(float(m))


# --------------------------------------------------------------------------
# Relativistic two-body kinematics (four-vectors, A at rest)
# --------------------------------------------------------------------------

def kallen(x, y, z):
    """Kaellen triangle function lambda(x,y,z) = x^2+y^2+z^2-2xy-2yz-2zx
    (PDG Review of Particle Physics, Kinematics)."""
    return x * x + y * y + z * z - 2 * x * y - 2 * y * z - 2 * z * x


def relativistically_equal(x, y):
    return abs(x - y) <= EQUAL_REL_TOL * max(abs(x), abs(y))


class Reaction:
    """a + A -> b + B* with A at rest; all energies and masses in MeV, momenta in MeV/c.

    Holds the invariants and the CM -> lab boost:
      E_a = T + m_a, p_a = sqrt(E_a^2 - m_a^2)                       (common practice)
      s = m_a^2 + m_A^2 + 2 m_A E_a                                  (PDG Review, Kinematics)
      p* = sqrt(lambda(s, m_b^2, m_B*^2)) / (2 sqrt(s))               (PDG Review, Kinematics)
      E*_i = sqrt(p*^2 + m_i^2)                                      (common practice)
      beta_cm = p_a / (E_a + m_A), gamma_cm = (E_a + m_A) / sqrt(s)  (PDG Review, Kinematics)
    with m_B* = m_B + E_x.
    """

    def __init__(self, beam, target, ejectile, energy_mev, excitation_mev):
        self.beam, self.target, self.ejectile = beam, target, ejectile
        self.recoil = (beam[0] + target[0] - ejectile[0], beam[1] + target[1] - ejectile[1])
        assert self.recoil[0] >= 0 and self.recoil[1] >= 1, self.recoil
        self.energy = mpf(energy_mev)  # exact value of the double
        self.excitation = mpf(excitation_mev)
        self.m_a = nuclear_mass_mev(*beam)
        self.m_A = nuclear_mass_mev(*target)
        self.m_b = nuclear_mass_mev(*ejectile)
        self.m_B = nuclear_mass_mev(*self.recoil)  # ground state
        self.m_Bx = self.m_B + self.excitation  # excited residual

        self.e_a = self.energy + self.m_a
        self.p_a = mpmath.sqrt(self.e_a ** 2 - self.m_a ** 2)
        self.s = self.m_a ** 2 + self.m_A ** 2 + 2 * self.m_A * self.e_a
        self.sqrt_s = mpmath.sqrt(self.s)
        lam = kallen(self.s, self.m_b ** 2, self.m_Bx ** 2)
        if lam <= 0:
            raise ValueError("below threshold")
        self.p_star = mpmath.sqrt(lam) / (2 * self.sqrt_s)
        self.beta_cm = self.p_a / (self.e_a + self.m_A)
        self.gamma_cm = (self.e_a + self.m_A) / self.sqrt_s
        # Consistency of the boost: gamma^2 (1 - beta^2) = 1 (definition).
        assert abs(self.gamma_cm ** 2 * (1 - self.beta_cm ** 2) - 1) < mpf("1e-35")
        # Final CM energies add up to sqrt(s) (energy conservation in the CM).
        e_sum = mpmath.sqrt(self.p_star ** 2 + self.m_b ** 2) + mpmath.sqrt(self.p_star ** 2 + self.m_Bx ** 2)
        assert abs(e_sum - self.sqrt_s) <= CONSERVATION_REL_TOL * self.sqrt_s

    def mass_of(self, particle):
        """Rest energy of 'b' or 'B' (B in its excited state) [MeV]."""
        return self.m_b if particle == "b" else self.m_Bx

    def boost(self, mass, cos_star, sin_star):
        """Lab four-momentum (E, p_x, p_z) of a particle with CM momentum p* at
        CM polar angle theta* (given as cos, sin; sin may be negative for the
        opposite direction in the reaction plane).

        Lorentz boost along the beam (z) axis:
          p_z = gamma (p*_z + beta E*), E = gamma (E* + beta p*_z), p_x = p*_x
        (PDG Review of Particle Physics, Kinematics).
        """
        e_star = mpmath.sqrt(self.p_star ** 2 + mass ** 2)
        pz_star = self.p_star * cos_star
        px = self.p_star * sin_star
        pz = self.gamma_cm * (pz_star + self.beta_cm * e_star)
        e = self.gamma_cm * (e_star + self.beta_cm * pz_star)
        return e, px, pz

    def lab_angle_energy(self, particle, cos_star):
        """Lab polar angle [rad, in [0, pi]] and lab kinetic energy [MeV] of
        'b' or 'B' at its own CM polar angle theta* (given as cos theta*).

        theta_lab = atan2(|p_transverse|, p_longitudinal); T_lab = E - m (common practice).
        """
        mass = self.mass_of(particle)
        sin_star = mpmath.sqrt(1 - cos_star ** 2)
        e, px, pz = self.boost(mass, cos_star, sin_star)
        return mpmath.atan2(abs(px), pz), e - mass

    def cos_lab(self, particle, cos_star):
        """cos theta_lab as a function of cos theta* (the particle's own CM angle)."""
        mass = self.mass_of(particle)
        sin_star = mpmath.sqrt(1 - cos_star ** 2)
        _e, px, pz = self.boost(mass, cos_star, sin_star)
        return pz / mpmath.sqrt(px ** 2 + pz ** 2)

    def jacobian(self, particle, cos_star):
        """J = dOmega_lab / dOmega_cm = |d cos theta_lab / d cos theta*| of 'b' or 'B'
        (azimuth unchanged by a boost along z; common practice), by numerical
        differentiation with mpmath.diff at the working precision.

        Cross-checked against the closed form obtained by differentiating the
        boost above, J = gamma |1 + g cos theta*| / (sin^2 theta* + gamma^2 (cos theta* + g)^2)^(3/2),
        g = beta_cm / beta*  (derived from the boost; common practice).
        The closed form is only an assert; the written value is the numerical one.
        """
        j = abs(mpmath.diff(lambda c: self.cos_lab(particle, c), cos_star))
        g = self.beta_cm / self.beta_star(particle)
        sin2 = 1 - cos_star ** 2
        j_closed = self.gamma_cm * abs(1 + g * cos_star) / (sin2 + self.gamma_cm ** 2 * (cos_star + g) ** 2) ** mpf(1.5)
        assert abs(j - j_closed) <= mpf("1e-25") * j_closed, (particle, cos_star, j, j_closed)
        return j

    def beta_star(self, particle):
        """CM velocity of 'b' or 'B': beta* = p* / E* (common practice)."""
        return self.p_star / mpmath.sqrt(self.p_star ** 2 + self.mass_of(particle) ** 2)

    def double_valued(self, particle):
        """theta_lab(theta*) is double valued iff beta_cm > beta* (common practice).

        beta_cm == beta* (elastic recoil, equal masses) to the working precision
        counts as single valued: theta_lab then reaches 90 deg only as theta* -> 180 deg.
        """
        b_star = self.beta_star(particle)
        if relativistically_equal(self.beta_cm, b_star):
            return False
        return self.beta_cm > b_star

    def branch(self, particle, cos_star):
        """1 = higher-energy solution (cos theta* > -beta*/beta_cm) or single valued; 2 otherwise."""
        if not self.double_valued(particle):
            return 1
        return 1 if cos_star > -self.beta_star(particle) / self.beta_cm else 2

    def theta_max(self, particle):
        """Maximum lab angle [rad] of 'b' or 'B' when double valued, pi/2 on the boundary, else pi.

        Closed form tan theta_max = beta* / (gamma_cm sqrt(beta_cm^2 - beta*^2))
        (from d theta_lab / d theta* = 0, i.e. cos theta* = -beta*/beta_cm; common
        practice), checked against a golden-section maximisation of theta_lab(theta*).
        """
        if relativistically_equal(self.beta_cm, self.beta_star(particle)):
            return mpmath.pi / 2  # theta_lab = (pi - theta*)/2 for the recoil: never backward
        if not self.double_valued(particle):
            return mpmath.pi
        b_star = self.beta_star(particle)
        closed = mpmath.atan(b_star / (self.gamma_cm * mpmath.sqrt(self.beta_cm ** 2 - b_star ** 2)))
        numeric = self._maximise_lab_angle(particle)
        assert abs(numeric - closed) <= mpf("1e-25") * closed, (particle, numeric, closed)
        return closed

    def _maximise_lab_angle(self, particle, iterations=200):
        """max over theta* in [0, pi] of theta_lab, by golden-section search (common practice)."""
        f = lambda t: self.lab_angle_energy(particle, mpmath.cos(t))[0]  # noqa: E731
        inv_phi = (mpmath.sqrt(5) - 1) / 2
        lo, hi = mpf(0), mpmath.pi
        x1, x2 = hi - inv_phi * (hi - lo), lo + inv_phi * (hi - lo)
        f1, f2 = f(x1), f(x2)
        for _ in range(iterations):
            if f1 < f2:
                lo, x1, f1 = x1, x2, f2
                x2 = lo + inv_phi * (hi - lo)
                f2 = f(x2)
            else:
                hi, x2, f2 = x2, x1, f1
                x1 = hi - inv_phi * (hi - lo)
                f1 = f(x1)
        return max(f1, f2)

    def final_state(self, theta_cm):
        """Lab four-momenta (E, p_x, p_z) of b at CM angle theta_cm and of B
        opposite to it (CM angle pi - theta_cm, opposite transverse direction),
        with an assert that energy and momentum are conserved in the lab."""
        c, s = mpmath.cos(theta_cm), mpmath.sin(theta_cm)
        b = self.boost(self.m_b, c, s)
        big_b = self.boost(self.m_Bx, -c, -s)
        e_in, pz_in = self.e_a + self.m_A, self.p_a
        assert abs(b[0] + big_b[0] - e_in) <= CONSERVATION_REL_TOL * e_in, "lab energy"
        assert abs(b[2] + big_b[2] - pz_in) <= CONSERVATION_REL_TOL * pz_in, "lab p_z"
        assert abs(b[1] + big_b[1]) <= CONSERVATION_REL_TOL * pz_in, "lab p_x"
        return b, big_b


def lab_angle_of(four_momentum):
    """Polar angle [rad, in [0, pi]] from (E, p_x, p_z): atan2(|p_x|, p_z) (common practice)."""
    _e, px, pz = four_momentum
    return mpmath.atan2(abs(px), pz)


# --------------------------------------------------------------------------
# kinematics.csv
# --------------------------------------------------------------------------

KINEMATICS_COLUMNS = [
    "case", "beam", "target", "ejectile", "recoil", "detect",
    "beam_z", "beam_a", "target_z", "target_a", "ejectile_z", "ejectile_a", "recoil_z", "recoil_a",
    "m_beam_mev", "m_target_mev", "m_ejectile_mev", "m_recoil_mev",
    "energy_mev", "excitation_mev",
    "theta_lab_deg", "branch", "theta_max_lab_deg", "theta_cm_deg", "energy_lab_mev",
    "domega_lab_per_domega_cm", "recoil_theta_lab_deg", "recoil_energy_lab_mev",
]


def kinematics_rows():
    """Rows of kinematics.csv and the number of grid points skipped."""
    rows = []
    skipped = 0
    case = 0
    for beam, target, ejectile, energy, excitation in KINEMATICS_CASES:
        r = Reaction(beam, target, ejectile, energy, excitation)
        for detect in ("ejectile", "recoil"):
            case += 1
            d, other = ("b", "B") if detect == "ejectile" else ("B", "b")
            theta_max_deg = mpmath.degrees(r.theta_max(d))
            for theta_cm_deg in THETA_CM_GRID_DEG:
                theta_cm = mpmath.radians(theta_cm_deg)
                b4, big_b4 = r.final_state(theta_cm)
                det4, oth4 = (b4, big_b4) if d == "b" else (big_b4, b4)
                # The detected particle's own CM angle.
                theta_star = theta_cm if d == "b" else mpmath.pi - theta_cm
                cos_star = mpmath.cos(theta_star)

                theta_lab_deg = mpmath.degrees(lab_angle_of(det4))
                energy_lab = det4[0] - r.mass_of(d)
                # The same point through the detected particle's own parametrisation.
                t_check, e_check = r.lab_angle_energy(d, cos_star)
                assert abs(mpmath.degrees(t_check) - theta_lab_deg) < mpf("1e-30"), (case, theta_cm_deg)
                assert abs(e_check - energy_lab) <= mpf("1e-30") * (1 + energy_lab), (case, theta_cm_deg)

                jac = r.jacobian(d, cos_star)
                if (theta_lab_deg < EDGE_SKIP_DEG or theta_lab_deg > 180 - EDGE_SKIP_DEG
                        or not mpmath.isfinite(jac)):
                    skipped += 1
                    continue
                if r.double_valued(d):
                    assert theta_lab_deg <= theta_max_deg, (case, theta_cm_deg)
                rows.append([
                    case, nuclide_name(*beam), nuclide_name(*target), nuclide_name(*ejectile),
                    nuclide_name(*r.recoil), detect,
                    beam[0], beam[1], target[0], target[1], ejectile[0], ejectile[1],
                    r.recoil[0], r.recoil[1],
                    r.m_a, r.m_A, r.m_b, r.m_B,
                    float(energy), float(excitation),
                    theta_lab_deg, r.branch(d, cos_star),
                    theta_max_deg if r.double_valued(d) else float(theta_max_deg),
                    float(theta_cm_deg), energy_lab, jac,
                    mpmath.degrees(lab_angle_of(oth4)), oth4[0] - r.mass_of(other),
                ])
    return rows, skipped


def write_kinematics(out_dir):
    rows, skipped = kinematics_rows()
    n = write_csv(
        out_dir / "kinematics.csv",
        [
            "Relativistic two-body kinematics a + A -> b + B (A at rest), by four-vectors in"
            " mpmath at 40 significant digits, rounded to the nearest double on output.",
            "Nuclear masses [MeV]: M = M_atomic[u]*u - Z*m_e + B_el(Z), B_el = (14.4381*Z^2.39 +"
            " 1.55468e-6*Z^5.35) eV (Lunney, Pearson, Thibault, Rev. Mod. Phys. 75 (2003) 1021,"
            " Eq. A4); atomic masses AME2020 (M. Wang et al., Chinese Phys. C 45 (2021) 030003)"
            " via periodictable; rounded to doubles, and the kinematics use exactly the written masses.",
            "Constants CODATA 2018: u = 931.49410242 MeV, m_e = 0.51099895000 MeV.",
            "s = m_a^2 + m_A^2 + 2 m_A (T + m_a); p* = sqrt(lambda(s, m_b^2, m_B*^2))/(2 sqrt(s)),"
            " lambda(x,y,z) = x^2+y^2+z^2-2xy-2yz-2zx; beta_cm = p_a/(E_a + m_A),"
            " gamma_cm = (E_a + m_A)/sqrt(s) (PDG Review of Particle Physics, Kinematics);"
            " m_B* = m_B + excitation_mev.",
            "b is built at CM angle theta_cm_deg and B opposite to it, both boosted along the beam;"
            " lab angle = atan2(|p_t|, p_z) in [0, 180] deg; lab energies are kinetic"
            " (E - m, with m_B* for B).",
            "detect: the particle whose theta_lab_deg, energy_lab_mev, branch, theta_max_lab_deg and"
            " domega_lab_per_domega_cm are given; recoil_theta_lab_deg and recoil_energy_lab_mev"
            " belong to the OTHER particle (the recoil when detect=ejectile, the ejectile when"
            " detect=recoil). theta_cm_deg is always the EJECTILE's CM angle.",
            "domega_lab_per_domega_cm = |d cos theta_lab / d cos theta*| of the detected particle"
            " (theta* = its own CM angle: theta_cm for b, 180 - theta_cm for B), by numerical"
            " differentiation (mpmath.diff).",
            "branch: when beta_cm > beta* = p*/E* of the detected particle the lab angle is double"
            " valued; branch 1 when cos theta* > -beta*/beta_cm (higher lab energy), else 2;"
            " single valued: 1. theta_max_lab_deg: tan = beta*/(gamma_cm sqrt(beta_cm^2 - beta*^2))"
            " when double valued, else 180.0.",
            "beta_cm = beta* (elastic recoil; equal masses) counts as single valued (branch 1)"
            " with theta_max_lab_deg 90.0: theta_lab = (180 - theta*)/2 never passes 90 deg.",
            "m_recoil_mev is the ground-state mass of B. case numbers each (reaction, detect) pair."
            f" Grid theta_cm = 5, 15, ..., 175 deg; {skipped} points skipped (lab angle within"
            f" {EDGE_SKIP_DEG} deg of 0 or 180, or Jacobian not finite).",
            "Units: MeV, degrees; Jacobian dimensionless.",
        ],
        KINEMATICS_COLUMNS,
        rows,
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n, skipped


# --------------------------------------------------------------------------
# rutherford.csv
# --------------------------------------------------------------------------

RUTHERFORD_COLUMNS = [
    "case", "beam", "target", "beam_z", "target_z", "m_beam_mev", "m_target_mev", "energy_mev",
    "theta_cm_deg", "dsdo_nonrel_cm_mb_sr", "dsdo_rel_cm_mb_sr", "theta_lab_deg",
    "dsdo_nonrel_lab_mb_sr",
]


def rutherford_nonrel_cm(z_a, z_A, m_a, m_A, energy, theta_cm):
    """Non-relativistic Rutherford cross section in the CM [mb/sr].

    E_cm = T m_A / (m_a + m_A);
    dsigma/dOmega_cm = (Z_a Z_A hbar c alpha / (4 E_cm))^2 / sin^4(theta_cm / 2)  [fm^2/sr]
    (E. Rutherford, Phil. Mag. 21 (1911) 669; common practice), x 10 mb/fm^2.
    """
    e_cm = energy * m_A / (m_a + m_A)
    a = z_a * z_A * HBARC_MEV_FM * ALPHA / (4 * e_cm)
    return a ** 2 / mpmath.sin(theta_cm / 2) ** 4 * MB_PER_FM2


def rutherford_rel_cm(z_a, z_A, m_a, m_A, energy, theta_cm):
    """Relativistic-kinematics point-Coulomb cross section in the CM [mb/sr].

    dsigma/dOmega_cm = eta^2 / (4 k^2 sin^4(theta/2)) with eta = Z_a Z_A alpha / beta_rel
    and k = p_in* / hbar c (common practice), i.e.
    (Z_a Z_A alpha hbar c / (2 beta_a p_in*))^2 / sin^4(theta_cm/2), where
    beta_a = p_a / E_a (relative velocity, target at rest) and
    p_in* = m_A p_a / sqrt(s) (entrance-channel CM momentum; PDG Review, Kinematics).
    """
    e_a = energy + m_a
    p_a = mpmath.sqrt(e_a ** 2 - m_a ** 2)
    s = m_a ** 2 + m_A ** 2 + 2 * m_A * e_a
    beta_a = p_a / e_a
    p_in = m_A * p_a / mpmath.sqrt(s)
    a = z_a * z_A * ALPHA * HBARC_MEV_FM / (2 * beta_a * p_in)
    return a ** 2 / mpmath.sin(theta_cm / 2) ** 4 * MB_PER_FM2


def check_rutherford_conventions():
    """The two conventions must agree to leading order for 4He + 58Ni at 24 MeV.

    Their exact ratio is rel/nonrel = (4 E_cm / (2 beta_a p_in*))^2; expanding in T
    gives 1 + T/m_a + 2 m_A T/(m_a + m_A)^2 + O(T^2/m^2) (derived from the two
    formulas above; common practice).  For 24 MeV alpha particles this is about
    +0.72 %, larger than 1e-3, so the check is (a) the ratio follows this first-order
    expression to within a few (T/m_a)^2, and (b) the two agree to 1e-8 in the
    non-relativistic limit (T = 1e-6 MeV).  Returns the ratio - 1 at 24 MeV.
    """
    m_a, m_A = nuclear_mass_mev(2, 4), nuclear_mass_mev(28, 58)
    theta = mpmath.radians(30)
    for energy in (mpf(24), mpf("1e-6")):
        ratio = rutherford_rel_cm(2, 28, m_a, m_A, energy, theta) / rutherford_nonrel_cm(2, 28, m_a, m_A, energy, theta)
        first_order = energy / m_a + 2 * m_A * energy / (m_a + m_A) ** 2
        assert abs((ratio - 1) - first_order) <= 5 * (energy / m_a) ** 2, (energy, ratio, first_order)
        if energy < 1:
            assert abs(ratio - 1) < mpf("1e-8"), (energy, ratio)
        else:
            deviation = ratio - 1
            # The relative difference does not depend on the angle.
            r2 = rutherford_rel_cm(2, 28, m_a, m_A, energy, 2 * theta) / rutherford_nonrel_cm(2, 28, m_a, m_A, energy, 2 * theta)
            assert abs(r2 - ratio) < mpf("1e-30"), (ratio, r2)
    return deviation


def rutherford_rows():
    rows = []
    for case, (beam, target, energy) in enumerate(RUTHERFORD_CASES, start=1):
        r = Reaction(beam, target, beam, energy, 0.0)  # elastic: b = a, B = A
        assert r.recoil == target
        for theta_cm_deg in RUTHERFORD_THETA_CM_DEG:
            theta_cm = mpmath.radians(theta_cm_deg)
            nonrel = rutherford_nonrel_cm(beam[0], target[0], r.m_a, r.m_A, r.energy, theta_cm)
            rel = rutherford_rel_cm(beam[0], target[0], r.m_a, r.m_A, r.energy, theta_cm)
            # Elastic ejectile in the lab: relativistic kinematics and numerical Jacobian as
            # for kinematics.csv; dsigma/dOmega_lab = dsigma/dOmega_cm / (dOmega_lab/dOmega_cm)
            # (conservation of the number of scattered particles; common practice).
            cos_star = mpmath.cos(theta_cm)
            theta_lab, _e = r.lab_angle_energy("b", cos_star)
            jac = r.jacobian("b", cos_star)
            assert not r.double_valued("b"), (case, "light on heavy expected")
            rows.append([
                case, nuclide_name(*beam), nuclide_name(*target), beam[0], target[0],
                r.m_a, r.m_A, float(energy), float(theta_cm_deg),
                nonrel, rel, mpmath.degrees(theta_lab), nonrel / jac,
            ])
    return rows


def write_rutherford(out_dir):
    deviation = check_rutherford_conventions()
    n = write_csv(
        out_dir / "rutherford.csv",
        [
            "Point-Coulomb (Rutherford) elastic cross section [mb/sr], mpmath at 40 significant"
            " digits, rounded to the nearest double on output.",
            "nonrel (CM): E_cm = T m_A/(m_a + m_A); dsdo = (Z_a Z_A hbar c alpha/(4 E_cm))^2"
            " / sin^4(theta_cm/2) (Rutherford, common practice).",
            "rel (CM): dsdo = (Z_a Z_A alpha hbar c/(2 beta_a p_in*))^2 / sin^4(theta_cm/2),"
            " beta_a = p_a/E_a, p_in* = m_A p_a/sqrt(s), s = m_a^2 + m_A^2 + 2 m_A (T + m_a)"
            " (eta^2/(4 k^2 sin^4(theta/2)), eta = Z_a Z_A alpha/beta, k = p*/hbar c; common practice).",
            "rel/nonrel = 1 + T/m_a + 2 m_A T/(m_a+m_A)^2 + O(T^2), the same at every angle;"
            f" rel/nonrel - 1 = {float(deviation):.6g} for 4He + 58Ni at 24 MeV.",
            "lab: theta_lab_deg of the elastic ejectile (relativistic kinematics as in"
            " kinematics.csv) and dsdo_nonrel_lab = dsdo_nonrel_cm / (dOmega_lab/dOmega_cm),"
            " the Jacobian by numerical differentiation (mpmath.diff).",
            "Nuclear masses [MeV] as in kinematics.csv (AME2020 via periodictable, electrons"
            " removed with their binding, Lunney et al., Rev. Mod. Phys. 75 (2003) 1021, Eq. A4).",
            "Constants CODATA 2018: u = 931.49410242 MeV, m_e = 0.51099895000 MeV,"
            " hbar c = 197.3269804 MeV fm, alpha = 1/137.035999084; 1 fm^2 = 10 mb.",
        ],
        RUTHERFORD_COLUMNS,
        rutherford_rows(),
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    return n, deviation


# --------------------------------------------------------------------------

def main(argv=None):
    out = output_dir(__doc__.splitlines()[0], FIXTURES_DIR, argv)
    n, skipped = write_kinematics(out)
    print(f"wrote {out / 'kinematics.csv'} ({n} rows; {skipped} grid points skipped)")
    n, deviation = write_rutherford(out)
    print(f"wrote {out / 'rutherford.csv'} ({n} rows; rel/nonrel - 1 = {float(deviation):.6g}"
          " for 4He + 58Ni at 24 MeV)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
