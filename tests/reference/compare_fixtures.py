"""Compare freshly generated reference fixtures with the committed ones.

    python3 tests/reference/compare_fixtures.py FRESH_DIR [COMMITTED_DIR] [--rtol R]

The generators are deterministic, but not to the last bit on every machine:
numpy and scipy pick SIMD code paths by CPU (numpy's runtime dispatch), so the
ODE integrations of ``generate_theory.py`` differ in the 13th to 16th digit
between, say, an AMD and an Intel processor.  A byte-exact ``diff`` would fail
CI for that, and would say nothing about whether a fixture really changed.

So this compares what matters, cell by cell:

* the same files in both folders, with the same number of lines;
* header lines (the first non-comment line) identical;
* comment lines identical once decimal numbers (``2.43e-10``, ``0.5``) are
  masked -- they report self-check figures, which move with the data;
  integers and version strings (``numpy 2.4.6``) are not masked;
* data cells: text and integers identical; reals within
  ``|a - b| <= rtol * max(|a|, |b|) + 1e-15 * (largest |value| of the column)``,
  the last term allowing round-off in cells that are differences of larger
  numbers (a phase near zero).  The default rtol 1e-11 is 20 times the
  largest difference seen between two machines (4.5e-13, optical_model.csv,
  AMD and Intel) and 20 times below the optical-model fixtures' own
  self-checked accuracy (a few 1e-10), which the Rust tests use at 1e-5.
  The mpmath-based fixtures reproduce exactly and are held to the same rtol.

Exit status 0 if everything agrees, 1 with one line per difference (file,
line of the committed file, column, both values) otherwise.  Standard library only.
"""

import argparse
import math
import re
import sys
from pathlib import Path

from fixture_csv import FIXTURES_DIR

# A decimal number with a point or an exponent, not part of a dotted version.
DECIMAL = re.compile(r"(?<![\w.])[-+]?(?:\d+\.\d+(?:[eE][-+]?\d+)?|\d+[eE][-+]?\d+)(?![\w.])")
MAX_REPORTED = 20


def as_real(cell):
    """The cell as a float if it is a real number written with a point or exponent."""
    if not DECIMAL.fullmatch(cell.strip()) and cell.strip().lower() not in ("nan", "inf", "-inf"):
        return None
    return float(cell)


def column_scales(rows):
    """Largest finite |value| of each column over the data rows (0 for text columns)."""
    scales = {}
    for _, cells in rows:
        for j, cell in enumerate(cells):
            value = as_real(cell)
            if value is not None and math.isfinite(value):
                scales[j] = max(scales.get(j, 0.0), abs(value))
    return scales


def split_file(path):
    """(comment lines, header line, data rows as (line number, cells)) of a fixture CSV."""
    lines = path.read_text().split("\n")
    comments = [line for line in lines if line.startswith("#")]
    rest = [(n, line) for n, line in enumerate(lines, start=1) if not line.startswith("#") and line != ""]
    header = rest[0][1] if rest else ""
    return comments, header, [(n, line.split(",")) for n, line in rest[1:]]


def compare_file(fresh, committed, rtol):
    """Differences between two versions of one fixture, as report lines."""
    name = committed.name
    f_comments, f_header, f_rows = split_file(fresh)
    c_comments, c_header, c_rows = split_file(committed)
    problems = []
    if len(f_comments) != len(c_comments) or len(f_rows) != len(c_rows):
        return [f"{name}: {len(f_comments)} comment and {len(f_rows)} data lines generated, "
                f"{len(c_comments)} and {len(c_rows)} committed"]
    for k, (a, b) in enumerate(zip(f_comments, c_comments), start=1):
        if DECIMAL.sub("<number>", a) != DECIMAL.sub("<number>", b):
            problems.append(f"{name}: comment line {k} differs beyond its numbers:\n  generated: {a}\n  committed: {b}")
    if f_header != c_header:
        problems.append(f"{name}: header differs:\n  generated: {f_header}\n  committed: {c_header}")
        return problems
    columns = c_header.split(",")
    scales = column_scales(c_rows)
    for (_, fa), (i, ca) in zip(f_rows, c_rows):
        if len(fa) != len(ca):
            problems.append(f"{name}: line {i} has {len(fa)} cells generated, {len(ca)} committed")
            continue
        for j, (a, b) in enumerate(zip(fa, ca)):
            column = columns[j] if j < len(columns) else f"#{j + 1}"
            x, y = as_real(a), as_real(b)
            if x is None or y is None:
                if a != b:
                    problems.append(f"{name}: line {i}, column {column}: {a!r} generated, {b!r} committed")
                continue
            if math.isnan(x) and math.isnan(y):
                continue
            allowed = rtol * max(abs(x), abs(y)) + 1e-15 * scales.get(j, 0.0)
            if not abs(x - y) <= allowed:
                problems.append(f"{name}: line {i}, column {column}: {a} generated, {b} committed "
                                f"(difference {abs(x - y):.3g}, allowed {allowed:.3g})")
    return problems


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("fresh", type=Path, help="folder of freshly generated fixtures")
    parser.add_argument("committed", type=Path, nargs="?", default=FIXTURES_DIR,
                        help=f"folder of the committed fixtures (default: {FIXTURES_DIR})")
    parser.add_argument("--rtol", type=float, default=1e-11, help="relative tolerance for reals (default 1e-11)")
    args = parser.parse_args(argv)

    fresh = {p.name for p in args.fresh.iterdir() if p.is_file()}
    committed = {p.name for p in args.committed.iterdir() if p.is_file()}
    problems = [f"{n}: generated but not committed" for n in sorted(fresh - committed)]
    problems += [f"{n}: committed but not generated" for n in sorted(committed - fresh)]
    for name in sorted(fresh & committed):
        problems += compare_file(args.fresh / name, args.committed / name, args.rtol)
    for line in problems[:MAX_REPORTED]:
        print(line)
    if len(problems) > MAX_REPORTED:
        print(f"... and {len(problems) - MAX_REPORTED} more differences")
    if problems:
        print(f"{len(problems)} differences between {args.fresh} and {args.committed} (rtol {args.rtol:g})")
        return 1
    print(f"{len(fresh)} fixtures agree with {args.committed} (rtol {args.rtol:g})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
