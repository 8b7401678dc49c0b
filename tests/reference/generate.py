#!/usr/bin/env python3
"""Reference-fixture generator for the xsflow test suite.

This script is the project's single source of the CSV reference fixtures
that the Rust tests compare against.  It computes every value with
general-purpose numerical libraries only (numpy, scipy, mpmath,
uncertainties) and writes them with ``repr()`` so that the Rust side parses
exactly the same IEEE-754 doubles.

Usage (from the repository root)::

    python3 tests/reference/generate.py [--out DIR]

DIR defaults to ``tests/reference/fixtures`` next to this script.  The
output is deterministic: no random numbers are used, so two runs with the
same library versions produce byte-identical files.

Files written:

* ``dead_time_paralyzable.csv``           -- paralyzable dead-time inversion
* ``solid_angle.csv``                     -- aperture solid angles by 2-D quadrature
* ``lab_cross_section_uncertainties.csv`` -- lab-frame dsigma/dOmega with
  statistical / systematic / normalisation uncertainty groups
* ``window_acceptance.csv``               -- acceptance of a peak window with side
  bands for a Gaussian peak
"""

import math
import sys

import mpmath
import numpy
import scipy
import scipy.integrate
import scipy.special
import uncertainties
from uncertainties import ufloat, umath

from fixture_csv import FIXTURES_DIR, generator_path, output_dir, write_csv

# Path of this script as recorded in the fixture headers.
GENERATOR = generator_path(__file__)

# Physical constants, CODATA 2018 recommended values (exact in the 2019 SI).
ELEMENTARY_CHARGE_C = 1.602176634e-19  # e [C]
AVOGADRO_PER_MOL = 6.02214076e23  # N_A [1/mol]
CM2_PER_MB = 1e-27  # 1 mb = 1e-27 cm^2 (definition of the barn: 1 b = 1e-24 cm^2)


# --------------------------------------------------------------------------
# (a) Paralyzable dead time
# --------------------------------------------------------------------------

DEAD_TIME_RESOLVING_US = [0.5, 2.0, 5.0, 10.0, 50.0]
# Products m*tau; all below the maximum recorded rate of the paralyzable
# model, m_max * tau = 1/e ~ 0.36788 (G. F. Knoll, Radiation Detection and
# Measurement, ch. 4).
DEAD_TIME_M_TAU = [1e-6, 1e-4, 1e-3, 0.01, 0.05, 0.1, 0.2, 0.3, 0.35, 0.36, 0.3675]


def paralyzable_true_rate(m, tau):
    """True rate n from recorded rate m for the paralyzable model.

    Model: m = n * exp(-n * tau)   (G. F. Knoll, Radiation Detection and
    Measurement, ch. 4).  Writing u = -n*tau gives u*exp(u) = -m*tau, so
    u = W(-m*tau) and n = -W0(-m*tau)/tau on the low-rate branch, with W0 the
    principal branch of the Lambert W function (R. M. Corless et al., "On the
    Lambert W function", Adv. Comput. Math. 5 (1996) 329).
    """
    x = -(m * tau)
    w = scipy.special.lambertw(x, k=0).real
    # Independent high-precision cross-check of W0 with mpmath (40 digits).
    with mpmath.workdps(40):
        w_mp = float(mpmath.lambertw(mpmath.mpf(x), 0).real)
    assert abs(w - w_mp) <= 1e-13 * abs(w_mp), (x, w, w_mp)
    return float(-w / tau)


def dead_time_rows():
    rows = []
    for tau_us in DEAD_TIME_RESOLVING_US:
        tau = tau_us * 1e-6  # [s]
        for m_tau in DEAD_TIME_M_TAU:
            m = m_tau / tau  # recorded rate [1/s]
            n = paralyzable_true_rate(m, tau)
            # Forward model must reproduce the recorded rate (Knoll ch. 4).
            m_back = n * math.exp(-n * tau)
            assert abs(m_back - m) <= 1e-12 * m, (tau_us, m_tau, m, m_back)
            # Low-rate branch: n*tau <= 1 (maximum of m(n) at n = 1/tau).
            assert n * tau <= 1.0, (tau_us, m_tau, n)
            live_fraction = m / n  # = exp(-n*tau), fraction of time live
            rows.append([tau_us, m, n, live_fraction])
    return rows


def write_dead_time(out_dir):
    return write_csv(
        out_dir / "dead_time_paralyzable.csv",
        [
            "Paralyzable dead-time model: recorded rate m = n*exp(-n*tau)"
            " (G. F. Knoll, Radiation Detection and Measurement, ch. 4).",
            "True rate on the low-rate branch n = -W0(-m*tau)/tau, W0 = principal"
            " Lambert W (scipy.special.lambertw(x, k=0).real), cross-checked with mpmath.",
            "tau [s] = resolving_time_us * 1e-6; rates in 1/s; live_fraction = m/n.",
        ],
        ["resolving_time_us", "recorded_rate_per_s", "true_rate_per_s", "live_fraction"],
        dead_time_rows(),
        generator=GENERATOR,
        modules=[numpy, scipy, mpmath],
    )


# --------------------------------------------------------------------------
# (b) Solid angle of an aperture by numerical integration
# --------------------------------------------------------------------------

SOLID_ANGLE_CIRCLES = [  # (distance d [mm], radius r [mm])
    (100.0, 1.0), (100.0, 5.0), (150.0, 2.5), (50.0, 10.0),
    (20.0, 20.0), (10.0, 30.0), (250.0, 0.5),
]
SOLID_ANGLE_RECTANGLES = [  # (distance d, half-width a, half-height b) [mm]
    (100.0, 1.0, 1.0), (100.0, 2.0, 5.0), (150.0, 5.0, 10.0), (50.0, 10.0, 3.0),
    (20.0, 20.0, 20.0), (10.0, 30.0, 15.0), (250.0, 0.5, 2.0),
]
QUAD_EPSREL = 1e-13


def _integrand(d):
    """dOmega/dA for a point source at distance d from a plane normal to the axis.

    dOmega = cos(theta) dA / R^2 = d / (x^2 + y^2 + d^2)^(3/2) dx dy
    (definition of the solid angle; common practice).
    scipy.integrate.dblquad calls func(y, x).
    """
    return lambda y, x: d / (x * x + y * y + d * d) ** 1.5


def solid_angle_circle_quad(d, r):
    """Circle of radius r: x in [-r, r], y in [-sqrt(r^2-x^2), +sqrt(r^2-x^2)]."""
    value, _err = scipy.integrate.dblquad(
        _integrand(d), -r, r,
        lambda x: -math.sqrt(max(r * r - x * x, 0.0)),
        lambda x: math.sqrt(max(r * r - x * x, 0.0)),
        epsabs=0.0, epsrel=QUAD_EPSREL,
    )
    return value


def solid_angle_rectangle_quad(d, a, b):
    """Rectangle of half-sides a (x) and b (y): x in [-a, a], y in [-b, b]."""
    value, _err = scipy.integrate.dblquad(
        _integrand(d), -a, a, -b, b, epsabs=0.0, epsrel=QUAD_EPSREL,
    )
    return value


def solid_angle_circle_closed(d, r):
    """On-axis disk: Omega = 2*pi*(1 - d/sqrt(d^2 + r^2))
    (G. F. Knoll, Radiation Detection and Measurement, ch. 4).

    Evaluated in the algebraically identical form
    2*pi*r^2 / (s*(s + d)), s = sqrt(d^2 + r^2), which avoids the
    cancellation in 1 - d/s when r << d (common practice).
    Works for floats and for `uncertainties` numbers.
    """
    s = (d * d + r * r) ** 0.5
    return 2.0 * math.pi * r * r / (s * (s + d))


def solid_angle_rectangle_closed(d, a, b, asin=math.asin):
    """Centred rectangle: Omega = 4*asin(a*b / sqrt((a^2+d^2)(b^2+d^2)))
    (H. Gotoh, H. Yagi, Nucl. Instrum. Methods 96 (1971) 485)."""
    return 4.0 * asin(a * b / ((a * a + d * d) * (b * b + d * d)) ** 0.5)


def _check_close(name, quad, closed, rel=1e-10):
    assert abs(quad - closed) <= rel * abs(closed), (name, quad, closed)


def solid_angle_rows():
    rows = []
    for d, r in SOLID_ANGLE_CIRCLES:
        omega = solid_angle_circle_quad(d, r)
        _check_close(("circle", d, r), omega, solid_angle_circle_closed(d, r))
        rows.append(["circle", d, r, 0.0, 0.0, omega])
    for d, a, b in SOLID_ANGLE_RECTANGLES:
        omega = solid_angle_rectangle_quad(d, a, b)
        _check_close(("rectangle", d, a, b), omega, solid_angle_rectangle_closed(d, a, b))
        rows.append(["rectangle", d, 0.0, a, b, omega])
    return rows


def write_solid_angle(out_dir):
    return write_csv(
        out_dir / "solid_angle.csv",
        [
            "Solid angle [sr] of an aperture centred on and normal to the axis from a point source,"
            " by scipy.integrate.dblquad (epsabs=0, epsrel=1e-13) of"
            " d/(x^2+y^2+d^2)^(3/2) dx dy over the aperture (Cartesian).",
            "Checked against closed forms to 1e-10 relative: circle 2*pi*(1-d/sqrt(d^2+r^2))"
            " (Knoll, Radiation Detection and Measurement, ch. 4); rectangle"
            " 4*asin(a*b/sqrt((a^2+d^2)(b^2+d^2))) (Gotoh and Yagi, NIM 96 (1971) 485).",
            "Lengths in mm; unused aperture columns are 0.0.",
        ],
        ["shape", "distance_mm", "radius_mm", "half_width_mm", "half_height_mm", "solid_angle_sr"],
        solid_angle_rows(),
        generator=GENERATOR,
        modules=[numpy, scipy],
    )


# --------------------------------------------------------------------------
# (c) Lab-frame differential cross section with uncertainty groups
# --------------------------------------------------------------------------

# All numbers below are INVENTED test inputs with realistic magnitudes; they
# do not describe any real measurement.  Keys map 1:1 to CSV input columns.
CROSS_SECTION_CASES = [
    dict(case=1, shape="circle", counts_gross=12500, counts_background=850.0,
         counts_background_err=40.0, efficiency=0.985, efficiency_err=0.005,
         distance_mm=120.0, distance_err_mm=0.2, radius_mm=2.5, radius_err_mm=0.01,
         charge_c=2.0e-6, charge_rel_err=0.01, charge_state=1,
         areal_density_ug_cm2=250.0, areal_density_rel_err=0.03,
         molar_mass_g_mol=58.69, isotopic_fraction=0.99, tilt_deg=0.0,
         live_fraction=0.95, live_fraction_err=0.002),
    dict(case=2, shape="rectangle", counts_gross=2000000, counts_background=120000.0,
         counts_background_err=1500.0, efficiency=0.998, efficiency_err=0.001,
         distance_mm=200.0, distance_err_mm=0.5, half_width_mm=2.0, half_width_err_mm=0.01,
         half_height_mm=5.0, half_height_err_mm=0.01,
         charge_c=1.0e-5, charge_rel_err=0.005, charge_state=2,
         areal_density_ug_cm2=1000.0, areal_density_rel_err=0.01,
         molar_mass_g_mol=207.2, isotopic_fraction=0.95, tilt_deg=30.0,
         live_fraction=0.72, live_fraction_err=0.01),
    dict(case=3, shape="circle", counts_gross=50, counts_background=0.0,
         counts_background_err=0.0, efficiency=0.92, efficiency_err=0.02,
         distance_mm=80.0, distance_err_mm=1.0, radius_mm=5.0, radius_err_mm=0.05,
         charge_c=1.0e-7, charge_rel_err=0.02, charge_state=6,
         areal_density_ug_cm2=50.0, areal_density_rel_err=0.05,
         molar_mass_g_mol=12.0, isotopic_fraction=0.989, tilt_deg=45.0,
         live_fraction=0.999, live_fraction_err=0.0005),
    dict(case=4, shape="rectangle", counts_gross=348000, counts_background=52000.0,
         counts_background_err=900.0, efficiency=0.97, efficiency_err=0.01,
         distance_mm=150.0, distance_err_mm=0.3, half_width_mm=1.0, half_width_err_mm=0.01,
         half_height_mm=1.0, half_height_err_mm=0.01,
         charge_c=5.0e-6, charge_rel_err=0.01, charge_state=1,
         areal_density_ug_cm2=480.0, areal_density_rel_err=0.02,
         molar_mass_g_mol=118.71, isotopic_fraction=0.92, tilt_deg=10.0,
         live_fraction=0.88, live_fraction_err=0.004),
    dict(case=5, shape="circle", counts_gross=7800, counts_background=2300.0,
         counts_background_err=150.0, efficiency=0.95, efficiency_err=0.015,
         distance_mm=250.0, distance_err_mm=0.5, radius_mm=1.0, radius_err_mm=0.005,
         charge_c=8.0e-6, charge_rel_err=0.015, charge_state=2,
         areal_density_ug_cm2=120.0, areal_density_rel_err=0.04,
         molar_mass_g_mol=27.0, isotopic_fraction=1.0, tilt_deg=20.0,
         live_fraction=0.81, live_fraction_err=0.006),
    dict(case=6, shape="rectangle", counts_gross=95000, counts_background=4100.0,
         counts_background_err=210.0, efficiency=0.99, efficiency_err=0.002,
         distance_mm=100.0, distance_err_mm=0.1, half_width_mm=3.0, half_width_err_mm=0.01,
         half_height_mm=1.5, half_height_err_mm=0.01,
         charge_c=3.0e-7, charge_rel_err=0.008, charge_state=6,
         areal_density_ug_cm2=750.0, areal_density_rel_err=0.015,
         molar_mass_g_mol=196.97, isotopic_fraction=1.0, tilt_deg=0.0,
         live_fraction=0.97, live_fraction_err=0.001),
    dict(case=7, shape="circle", counts_gross=620, counts_background=95.0,
         counts_background_err=18.0, efficiency=0.935, efficiency_err=0.012,
         distance_mm=180.0, distance_err_mm=0.8, radius_mm=3.0, radius_err_mm=0.02,
         charge_c=4.5e-6, charge_rel_err=0.012, charge_state=1,
         areal_density_ug_cm2=65.0, areal_density_rel_err=0.05,
         molar_mass_g_mol=40.08, isotopic_fraction=0.97, tilt_deg=35.0,
         live_fraction=0.76, live_fraction_err=0.008),
    dict(case=8, shape="rectangle", counts_gross=1250000, counts_background=180000.0,
         counts_background_err=2500.0, efficiency=0.96, efficiency_err=0.008,
         distance_mm=90.0, distance_err_mm=0.25, half_width_mm=4.5, half_width_err_mm=0.01,
         half_height_mm=2.5, half_height_err_mm=0.01,
         charge_c=1.2e-6, charge_rel_err=0.006, charge_state=2,
         areal_density_ug_cm2=310.0, areal_density_rel_err=0.025,
         molar_mass_g_mol=90.0, isotopic_fraction=0.9, tilt_deg=15.0,
         live_fraction=0.9, live_fraction_err=0.003),
]

CROSS_SECTION_INPUT_COLUMNS = [
    "case", "shape", "counts_gross", "counts_background", "counts_background_err",
    "efficiency", "efficiency_err", "distance_mm", "distance_err_mm",
    "radius_mm", "radius_err_mm", "half_width_mm", "half_width_err_mm",
    "half_height_mm", "half_height_err_mm", "charge_c", "charge_rel_err",
    "charge_state", "areal_density_ug_cm2", "areal_density_rel_err",
    "molar_mass_g_mol", "isotopic_fraction", "tilt_deg", "live_fraction",
    "live_fraction_err",
]
CROSS_SECTION_OUTPUT_COLUMNS = [
    "counts_net", "counts_net_err", "solid_angle_msr", "solid_angle_err_msr",
    "beam_particles", "target_atoms_per_cm2", "dsdo_lab_mb_sr",
    "stat_err_lab_mb_sr", "sys_err_lab_mb_sr", "norm_rel_err",
]
APERTURE_COLUMNS = ["radius_mm", "radius_err_mm", "half_width_mm",
                    "half_width_err_mm", "half_height_mm", "half_height_err_mm"]


def uncertain(value, err, tag, inputs):
    """Create an independent uncertain input and register it with its tag.

    An input with zero uncertainty is kept as a plain float: it contributes
    exactly nothing to any uncertainty, and this avoids the `uncertainties`
    warning about std_dev == 0.
    """
    if err == 0.0:
        return float(value)
    var = ufloat(value, err, tag)
    inputs.append(var)
    return var


def group_error(result, inputs, tag):
    """sqrt(sum of squared error components of the inputs carrying `tag`).

    Linear propagation of uncorrelated inputs, JCGM 100:2008 (GUM) §5.1.2;
    the quadrature sum over one subset of inputs gives that group's share.
    Inputs are summed in their (fixed) creation order for reproducibility.
    """
    components = result.error_components()
    return math.sqrt(sum(components.get(v, 0.0) ** 2 for v in inputs if v.tag == tag))


def cross_section_row(c):
    inputs = []  # every uncertain input, in creation order

    # Net counts; Poisson counting statistics sigma_G = sqrt(G)
    # (G. F. Knoll, Radiation Detection and Measurement, ch. 3).
    gross = uncertain(c["counts_gross"], math.sqrt(c["counts_gross"]), "stat", inputs)
    background = uncertain(c["counts_background"], c["counts_background_err"], "stat", inputs)
    counts_net = gross - background

    efficiency = uncertain(c["efficiency"], c["efficiency_err"], "sys", inputs)
    distance = uncertain(c["distance_mm"], c["distance_err_mm"], "sys", inputs)
    if c["shape"] == "circle":
        radius = uncertain(c["radius_mm"], c["radius_err_mm"], "sys", inputs)
        omega = solid_angle_circle_closed(distance, radius)
    elif c["shape"] == "rectangle":
        half_w = uncertain(c["half_width_mm"], c["half_width_err_mm"], "sys", inputs)
        half_h = uncertain(c["half_height_mm"], c["half_height_err_mm"], "sys", inputs)
        omega = solid_angle_rectangle_closed(distance, half_w, half_h, asin=umath.asin)
    else:
        raise ValueError(c["shape"])

    charge = uncertain(c["charge_c"], c["charge_c"] * c["charge_rel_err"], "norm", inputs)
    areal = uncertain(c["areal_density_ug_cm2"],
                      c["areal_density_ug_cm2"] * c["areal_density_rel_err"], "norm", inputs)
    live = uncertain(c["live_fraction"], c["live_fraction_err"], "norm", inputs)

    # Number of beam particles from integrated charge: N = Q / (q e)
    # (common practice).
    beam = charge / (c["charge_state"] * ELEMENTARY_CHARGE_C)

    # Target areal number density [atoms/cm^2]:
    # n = rho_A[g/cm^2] * N_A / M * isotopic fraction, and a target tilted by
    # angle t to the beam presents the thickness rho_A / cos(t) (common practice).
    tilt = math.radians(c["tilt_deg"])
    target = (areal * 1e-6) * AVOGADRO_PER_MOL / c["molar_mass_g_mol"] \
        * c["isotopic_fraction"] / math.cos(tilt)

    # Thin-target differential cross section in the lab frame [cm^2/sr]:
    # dsigma/dOmega = N_net / (eps * f_live * N_beam * n_target * Omega)
    # (common practice); converted to mb/sr with 1 mb = 1e-27 cm^2.
    dsdo_cm2 = counts_net / (efficiency * live * beam * target * omega)
    dsdo = dsdo_cm2 / CM2_PER_MB

    omega_msr = omega * 1e3
    norm_abs = group_error(dsdo, inputs, "norm")
    outputs = [
        counts_net.nominal_value, counts_net.std_dev,
        omega_msr.nominal_value, omega_msr.std_dev,
        beam.nominal_value, target.nominal_value,
        dsdo.nominal_value,
        group_error(dsdo, inputs, "stat"),
        group_error(dsdo, inputs, "sys"),
        norm_abs / abs(dsdo.nominal_value),
    ]

    # Consistency: the three groups partition all inputs, so their quadrature
    # sum is the total standard uncertainty (JCGM 100:2008 (GUM) §5.1.2).
    total = math.sqrt(outputs[7] ** 2 + outputs[8] ** 2 + norm_abs ** 2)
    assert abs(total - dsdo.std_dev) <= 1e-12 * dsdo.std_dev, (c["case"], total, dsdo.std_dev)

    row_inputs = []
    for col in CROSS_SECTION_INPUT_COLUMNS:
        if col in APERTURE_COLUMNS and col not in c:
            row_inputs.append(0.0)
        elif col in ("case", "shape", "counts_gross", "charge_state"):
            row_inputs.append(c[col])
        else:
            row_inputs.append(float(c[col]))
    return row_inputs + outputs


def write_cross_section(out_dir):
    return write_csv(
        out_dir / "lab_cross_section_uncertainties.csv",
        [
            "Absolute lab-frame differential cross section dsigma/dOmega [mb/sr] with"
            " statistical, systematic and normalisation uncertainty groups.",
            "INVENTED input numbers (realistic magnitudes only; no real measurement).",
            "dsdo = (G-B)/(eff*live*N_beam*n_target*Omega); N_beam = Q/(q*e);"
            " n_target = rho_A[ug/cm2]*1e-6*N_A/M*iso/cos(tilt); 1 mb = 1e-27 cm^2.",
            "Omega: circle 2*pi*(1-d/sqrt(d^2+r^2)) evaluated as 2*pi*r^2/(s*(s+d)), s=sqrt(d^2+r^2);"
            " rectangle 4*asin(a*b/sqrt((a^2+d^2)(b^2+d^2))).",
            "Constants CODATA 2018: e = 1.602176634e-19 C, N_A = 6.02214076e23 /mol.",
            "Linear propagation (JCGM 100:2008 GUM 5.1.2) with the uncertainties package."
            " stat: G (sigma=sqrt(G)), B; sys: eff, d, r/a/b; norm: Q, rho_A, live.",
            "stat_err and sys_err are absolute [mb/sr]; norm_rel_err is relative;"
            " q, M, iso, tilt exact; unused aperture columns are 0.0.",
        ],
        CROSS_SECTION_INPUT_COLUMNS + CROSS_SECTION_OUTPUT_COLUMNS,
        [cross_section_row(c) for c in CROSS_SECTION_CASES],
        generator=GENERATOR,
        modules=[uncertainties],
    )


# --------------------------------------------------------------------------
# (d) Window acceptance of a Gaussian peak with side-band background
# --------------------------------------------------------------------------

# Layouts in units of the peak's sigma about its centroid (centroid offset,
# window half width k, gap, side-band width): k = 1..5 with the default gap
# and width, then other side-band layouts and off-centre peaks.
WINDOW_LAYOUTS = (
    [(0.0, k, 1.0, 3.0) for k in (1.0, 2.0, 3.0, 4.0, 5.0)]
    + [(0.0, 3.0, 0.0, 3.0), (0.0, 2.0, 0.5, 1.0), (0.0, 2.5, 2.0, 6.0),
       (0.5, 3.0, 1.0, 3.0), (-1.5, 3.0, 1.0, 2.0), (0.0, 1.0, 0.0, 10.0)]
)


def window_acceptance_rows():
    """A = F_w - (F_L + F_R) W_w / (W_L + W_R), F by scipy.stats.norm.cdf/sf."""
    from scipy.stats import norm

    def fraction(lo, hi, mu):
        # sf for intervals above the centroid keeps the far tails precise.
        if lo >= mu:
            return norm.sf(lo - mu) - norm.sf(hi - mu)
        return norm.cdf(hi - mu) - norm.cdf(lo - mu)

    rows = []
    for mu, k, gap, width in WINDOW_LAYOUTS:
        f_w = fraction(-k, k, mu)
        f_l = fraction(-k - gap - width, -k - gap, mu)
        f_r = fraction(k + gap, k + gap + width, mu)
        acceptance = f_w - (f_l + f_r) * (2 * k) / (2 * width)
        rows.append([mu, k, gap, width, f_w, acceptance])
    return rows


def write_window_acceptance(out_dir):
    return write_csv(
        out_dir / "window_acceptance.csv",
        [
            "Window acceptance of a unit Gaussian peak (sigma = 1) centred at centroid_sigma:"
            " window [-k, k), side bands [-k-gap-width, -k-gap) and [k+gap, k+gap+width).",
            "window_fraction = Phi(k - mu) - Phi(-k - mu); acceptance = window_fraction"
            " - (F_left + F_right) * 2k / (2 width), Phi = scipy.stats.norm.cdf (sf above mu).",
        ],
        ["centroid_sigma", "half_width_sigma", "gap_sigma", "side_band_width_sigma", "window_fraction",
         "acceptance"],
        window_acceptance_rows(),
        generator=GENERATOR,
        modules=[scipy],
    )


# --------------------------------------------------------------------------

def main(argv=None):
    out = output_dir(__doc__.splitlines()[0], FIXTURES_DIR, argv)
    for name, writer in [
        ("dead_time_paralyzable.csv", write_dead_time),
        ("solid_angle.csv", write_solid_angle),
        ("lab_cross_section_uncertainties.csv", write_cross_section),
        ("window_acceptance.csv", write_window_acceptance),
    ]:
        n = writer(out)
        print(f"wrote {out / name} ({n} rows)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
