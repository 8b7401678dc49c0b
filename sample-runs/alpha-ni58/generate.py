"""Generate the invented demo runs of sample-runs/alpha-ni58.

Everything here is invented for the demo: the laboratory ("Lakeside Tandem Hall" does not
exist), the runs, the detector set-up and the counts. The counts are drawn (fixed seed) from
invented angular distributions taken to the lab with non-relativistic kinematics: for the
elastic peak, the optical-model curve of xsflow itself for the invented potential of
theory-optical.yaml (truth-elastic.csv, written by
`xsflow theory theory-optical.yaml --angles 1:179:0.25 --format csv`), so that a fit of the
demo can recover that potential; for the inelastic peak, Rutherford times a made-up smooth
fall-off. Neither is a measurement; they must not be compared with measured data.

Run:  python3 sample-runs/alpha-ni58/generate.py      (needs numpy)
It rewrites runs/*.run.yaml and runs/*.yields.csv beside this script. Run 0104 was taken
with the detector arm turned by 5 degrees (its record says so in arm_theta_lab_deg).
"""

import math
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
E_CHARGE_C = 1.602176634e-19  # CODATA 2018, exact
AVOGADRO = 6.02214076e23  # CODATA 2018, exact

# Must match experiment.yaml (distance_mm, aperture, efficiency).
DETECTORS = [
    # id, theta_lab_deg, distance_mm, solid angle msr (for the simulation only), efficiency
    ("D01", 20.0, 250.0, None, 1.0),
    ("D02", 30.0, 250.0, None, 1.0),
    ("D03", 40.0, 200.0, None, 0.995),
    ("D04", 50.0, 200.0, None, 0.995),
    ("D05", 60.0, 150.0, None, 0.99),
    ("D06", 70.0, 150.0, None, 0.99),
    ("D07", 80.0, 150.0, None, 0.99),
    ("D08", 90.0, 120.0, None, 0.98),
    ("D09", 100.0, 120.0, None, 0.98),
    ("D10", 110.0, 120.0, None, 0.98),
    ("D11", 125.0, 100.0, None, 0.97),
    ("D12", 140.0, 100.0, None, 0.97),
]
RADIUS_MM = 2.5
STATES = [("elastic", 0.0, 1.0), ("2+_1.454", 1.454, 0.04)]

# D01-D07 sit on a rotating arm ("left" in experiment.yaml) whose scale reads
# ARM_CONFIG_DEG when they stand at the angles above; the others are fixed.
ON_ARM = {"D01", "D02", "D03", "D04", "D05", "D06", "D07"}
ARM_CONFIG_DEG = 50.0

RUNS = [
    # run, charge C, live s, real s, pulser sent, pulser recorded, triggers raw, accepted,
    # arm setting (degrees on the arm's scale)
    ("0101", 2.0e-5, 3421.0, 3600.0, 36000, 34210, 1_250_000, 1_187_900, ARM_CONFIG_DEG),
    ("0102", 3.5e-5, 5050.5, 5400.0, 54000, 50505, 2_100_000, 1_963_500, ARM_CONFIG_DEG),
    ("0103", 1.2e-5, 1765.0, 1800.0, 18000, 17650, 560_000, 549_100, ARM_CONFIG_DEG),
    # The arm turned by +5 degrees: D01-D07 fill in 25, 35, ..., 85 degrees.
    ("0104", 3.0e-5, 4380.0, 4500.0, 45000, 43800, 1_520_000, 1_479_500, 55.0),
]

AREAL_DENSITY_G_CM2 = 210e-6
MOLAR_MASS = 57.9353
ISOTOPIC_FRACTION = 0.9963
BEAM_CHARGE_STATE = 2
BEAM_ENERGY_MEV = 24.0


M_ALPHA_U, M_NI58_U = 4.0026, 57.9353  # rounded atomic masses, enough for invented data
E2_MEV_FM = 1.439964  # e^2/(4 pi eps0) = hbar c alpha (CODATA 2018)


# theta_cm_deg, dsdo_cm_mb_sr of the elastic truth (see the module docstring).
TRUTH = np.loadtxt(HERE / "truth-elastic.csv", delimiter=",", skiprows=1, usecols=(0, 1))


def invented_dsdo_mb_sr(theta_lab_deg, state_scale):
    """Invented lab cross section in mb/sr: Rutherford in the CM times a made-up fall-off."""
    x = M_ALPHA_U / M_NI58_U
    th = math.radians(theta_lab_deg)
    th_cm = th + math.asin(x * math.sin(th))  # non-relativistic elastic kinematics
    e_cm = BEAM_ENERGY_MEV / (1 + x)
    rutherford_cm = 10 * (2 * 28 * E2_MEV_FM / (4 * e_cm)) ** 2 / math.sin(th_cm / 2) ** 4
    jacobian = abs(1 + x * math.cos(th_cm)) / (1 + x * x + 2 * x * math.cos(th_cm)) ** 1.5  # dOmega_lab/dOmega_cm
    deg = math.degrees(th_cm)
    if state_scale >= 1.0:
        return float(np.exp(np.interp(deg, TRUTH[:, 0], np.log(TRUTH[:, 1])))) / jacobian
    falloff = state_scale * (0.3 + 1.0 / (1.0 + math.exp((deg - 60.0) / 10.0)))
    return rutherford_cm * falloff / jacobian


def solid_angle_sr(d, r):
    s = math.hypot(d, r)
    return 2 * math.pi * r * r / (s * (s + d))


def main():
    rng = np.random.default_rng(20261202)
    n_target = AREAL_DENSITY_G_CM2 * AVOGADRO / MOLAR_MASS * ISOTOPIC_FRACTION
    runs_dir = HERE / "runs"
    runs_dir.mkdir(exist_ok=True)
    for run, charge, live, real, p_sent, p_rec, t_raw, t_acc, arm_deg in RUNS:
        n_beam = charge / (BEAM_CHARGE_STATE * E_CHARGE_C)
        live_fraction = live / real
        lines = ["detector,state,counts_gross,counts_background,counts_background_err,peak_energy_lab_mev"]
        for det, theta_config, dist, _, eff in DETECTORS:
            theta = theta_config + (arm_deg - ARM_CONFIG_DEG if det in ON_ARM else 0.0)
            omega = solid_angle_sr(dist, RADIUS_MM)
            for state, ex_mev, scale in STATES:
                expected = invented_dsdo_mb_sr(theta, scale) * 1e-27 * n_beam * n_target * omega * eff * live_fraction
                background = 0.002 * expected + 3.0
                gross = int(rng.poisson(expected + background))
                bg = float(rng.poisson(background))
                # Measured peak energy, invented: falls with angle and excitation.
                energy = BEAM_ENERGY_MEV * (1 - 0.03 * (1 - math.cos(math.radians(theta)))) - ex_mev
                lines.append(f"{det},{state},{gross},{bg:.1f},{math.sqrt(bg):.4f},{energy:.4f}")
        (runs_dir / f"run{run}.yields.csv").write_text("\n".join(lines) + "\n")
        record = f"""# Run record of run {run} (invented demo data, Lakeside Tandem Hall)
run: "{run}"
yields_file: run{run}.yields.csv
charge_c: {charge:.4e}
live_time_s: {live}
real_time_s: {real}
pulser_sent: {p_sent}
pulser_recorded: {p_rec}
triggers_raw: {t_raw}
triggers_accepted: {t_acc}
"""
        if arm_deg != ARM_CONFIG_DEG:
            record += f"arm_theta_lab_deg: {{ left: {arm_deg} }}\n"
        (runs_dir / f"run{run}.run.yaml").write_text(record)


if __name__ == "__main__":
    main()
