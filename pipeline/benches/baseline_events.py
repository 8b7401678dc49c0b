"""Plain numpy/pyarrow baseline of the list-mode benchmark (benches/events.rs).

The same reduction as xsflow's, written the way a careful analysis script would: read the
two columns with pyarrow (multi-threaded), one vectorised histogram of (detector, channel)
with numpy.bincount, then for each detector and state the counts in the peak window and
in the side bands (channel centres E = 0.05 + 0.01 c MeV against the windows xsflow used,
passed in gates.json), background = side counts x window width / side width.

Usage: python3 baseline_events.py EVENTS.parquet GATES.json
Prints: seconds, peak RSS in MB, and a checksum of the yields.
"""

import json
import resource
import sys
import time

import numpy as np
import pyarrow.parquet as pq

CHANNELS = 4096
DETECTORS = 16


def main():
    path, gates_path = sys.argv[1], sys.argv[2]
    gates = json.load(open(gates_path))
    t0 = time.perf_counter()
    table = pq.read_table(path, columns=["det", "adc"])
    det = table.column("det").to_numpy()
    adc = table.column("adc").to_numpy()
    if adc.dtype.kind == "f":
        adc = np.floor(adc).astype(np.int64)  # fractional channels: bins of one channel
    ok = (adc < CHANNELS) & (adc >= 0) & (det < DETECTORS)
    hist = np.bincount(det[ok].astype(np.int64) * CHANNELS + adc[ok], minlength=DETECTORS * CHANNELS)
    hist = hist.reshape(DETECTORS, CHANNELS)
    energy = 0.05 + 0.01 * np.arange(CHANNELS)
    total = 0.0
    for g in gates:
        d = int(g["detector"][1:])
        inside = lambda iv: (energy >= iv["low_mev"]) & (energy < iv["high_mev"])
        gross = hist[d][inside(g["window"])].sum()
        side = hist[d][inside(g["left"]) | inside(g["right"])].sum()
        w = g["window"]["high_mev"] - g["window"]["low_mev"]
        ws = (g["left"]["high_mev"] - g["left"]["low_mev"]) + (g["right"]["high_mev"] - g["right"]["low_mev"])
        total += gross - side * w / ws
    elapsed = time.perf_counter() - t0
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(f"{elapsed} {rss_mb} checksum {total:.1f}")


if __name__ == "__main__":
    main()
