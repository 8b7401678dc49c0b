"""Generate the invented list-mode demo runs of sample-runs/alpha-ni58 (listmode/).

Everything is invented, like the yields demo (generate.py, whose invented cross sections
this script reuses): the same experiment with a hundredth of the beam charge, recorded
event by event. Each event has a detector number (0-11, mapped to D01-D12 in
experiment-listmode.yaml), an ADC channel (4096 channels; E = 0.05 MeV + 0.01 MeV/channel),
a Delta-E value (D01 is a Delta-E/E telescope: alpha particles near 300, invented protons
near 80), and a pile-up flag. Besides the peaks of the two states (Gaussian, sigma 0.08 MeV,
centred on the non-relativistic kinematic energy) the runs hold a flat invented background,
1 % pile-up, a few overflow channels and a few events of an unknown detector number (99),
so that every tally of the reduction is exercised.

Three runs: 0201 as Parquet events, 0202 as CSV events, 0203 as spectra (detector,
channel, counts) in Arrow IPC.

Run:  python3 sample-runs/alpha-ni58/generate_listmode.py   (needs numpy and pyarrow)
"""

import math
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq

import generate as demo  # the yields demo beside this script: detectors, cross sections

HERE = Path(__file__).resolve().parent
OUT = HERE / "listmode"
OFFSET_MEV, GAIN_MEV = 0.05, 0.01
CHANNELS = 4096
SIGMA_MEV = 0.08

RUNS = [
    # run, charge C, live s, real s, format
    ("0201", 2.0e-7, 3421.0, 3600.0, "parquet"),
    ("0202", 3.5e-7, 5050.5, 5400.0, "csv"),
    ("0203", 1.2e-7, 1765.0, 1800.0, "spectra"),
]


def kinematic_energy_mev(theta_lab_deg, ex_mev):
    """Non-relativistic two-body energy of the alpha particle (common practice)."""
    ma, mA = demo.M_ALPHA_U, demo.M_NI58_U
    t = demo.BEAM_ENERGY_MEV
    q = -ex_mev
    c = math.cos(math.radians(theta_lab_deg))
    # sqrt(E_b) = [sqrt(ma mb T) c + sqrt(ma mb T c^2 + (mB + mb)(mB Q + (mB - ma) T))]/(mB + mb)
    mb, mB = ma, mA
    a = math.sqrt(ma * mb * t) * c
    b = math.sqrt(ma * mb * t * c * c + (mB + mb) * (mB * q + (mB - ma) * t))
    return ((a + b) / (mB + mb)) ** 2


def events_of_run(rng, charge, live, real):
    n_beam = charge / (demo.BEAM_CHARGE_STATE * demo.E_CHARGE_C)
    n_target = demo.AREAL_DENSITY_G_CM2 * demo.AVOGADRO / demo.MOLAR_MASS * demo.ISOTOPIC_FRACTION
    det, adc, de, pile = [], [], [], []
    for i, (_, theta, dist, _, eff) in enumerate(demo.DETECTORS):
        omega = demo.solid_angle_sr(dist, demo.RADIUS_MM)
        for _, ex, scale in demo.STATES:
            mean = demo.invented_dsdo_mb_sr(theta, scale) * 1e-27 * n_beam * n_target * omega * eff * live / real
            n = rng.poisson(mean)
            e = rng.normal(kinematic_energy_mev(theta, ex), SIGMA_MEV, n)
            det += [i] * n
            adc += list(np.floor((e - OFFSET_MEV) / GAIN_MEV + rng.random(n)).astype(int))
            de += list(rng.normal(300.0, 12.0, n))
        # Flat background over channels 1500-2600, and invented protons (low Delta-E).
        nb = rng.poisson(40)
        det += [i] * nb
        adc += list(rng.integers(1500, 2600, nb))
        de += list(np.where(rng.random(nb) < 0.5, rng.normal(80.0, 10.0, nb), rng.normal(300.0, 12.0, nb)))
    n = len(det)
    pile = list((rng.random(n) < 0.01).astype(np.uint8))
    # A few overflow channels and unknown detector numbers.
    for k in rng.choice(n, 5, replace=False):
        adc[k] = CHANNELS + 3
    det += [99] * 3
    adc += [2000] * 3
    de += [300.0] * 3
    pile += [0] * 3
    order = rng.permutation(len(det))
    return (np.array(det, dtype=np.uint16)[order], np.array(adc, dtype=np.uint16)[order],
            np.round(np.array(de, dtype=np.float32)[order], 2), np.array(pile, dtype=np.uint8)[order])


def main():
    rng = np.random.default_rng(20261203)
    OUT.mkdir(exist_ok=True)
    for run, charge, live, real, fmt in RUNS:
        det, adc, de, pile = events_of_run(rng, charge, live, real)
        if fmt == "spectra":
            name = f"run{run}.spectra.arrow"
            keep = (pile == 0) & (adc < CHANNELS) & (det < 99)
            pairs, counts = np.unique(np.stack([det[keep], adc[keep]]), axis=1, return_counts=True)
            table = pa.table({"det": pa.array(pairs[0], pa.uint16()), "ch": pa.array(pairs[1], pa.uint16()),
                              "n": pa.array(counts, pa.uint32())})
            feather.write_feather(table, OUT / name, compression="uncompressed")
            key = "spectra_file"
        else:
            table = pa.table({"det": pa.array(det), "adc": pa.array(adc), "de": pa.array(de),
                              "pileup": pa.array(pile)})
            name = f"run{run}.events.{fmt}"
            if fmt == "parquet":
                pq.write_table(table, OUT / name, row_group_size=4096, compression="zstd")
            else:
                rows = "\n".join(f"{d},{a},{e:.2f},{p}" for d, a, e, p in zip(det, adc, de, pile))
                (OUT / name).write_text("det,adc,de,pileup\n" + rows + "\n")
            key = "events_file"
        (OUT / f"run{run}.run.yaml").write_text(f"""# Run record of run {run} (invented list-mode demo data, Lakeside Tandem Hall)
run: "{run}"
{key}: {name}
charge_c: {charge:.4e}
live_time_s: {live}
real_time_s: {real}
""")


if __name__ == "__main__":
    main()
