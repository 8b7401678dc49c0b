#!/usr/bin/env python3
"""Embedded nuclide mass table for xsflow.

Writes ``masses_ame2020.csv`` next to this script: one row per nuclide for
which the ``periodictable`` package carries an isotope mass, plus the free
neutron as z = 0, with the atomic mass [u] and the natural abundance [%].

The atomic masses are those of the AME2020 evaluation (M. Wang et al.,
Chinese Phys. C 45 (2021) 030003) as shipped by ``periodictable``; the
natural abundances are the CIAAW values shipped by ``periodictable``.
Nothing is computed here: values are copied and written with ``repr()`` so
that the Rust side parses exactly the same IEEE-754 doubles.

Usage (from the repository root)::

    python3 stages/data/generate_masses.py

The output is deterministic: two runs with the same library versions give
byte-identical files.
"""

import math
import platform
import sys
from pathlib import Path

import periodictable

SCRIPT_DIR = Path(__file__).resolve().parent
OUT_PATH = SCRIPT_DIR / "masses_ame2020.csv"

# Path of this script as recorded in the header, relative to the repository
# root (two levels above stages/data/), so it does not depend on the checkout.
try:
    SCRIPT_PATH = SCRIPT_DIR.joinpath(Path(__file__).name).relative_to(
        SCRIPT_DIR.parents[1]
    ).as_posix()
except (IndexError, ValueError):
    SCRIPT_PATH = Path(__file__).name

COLUMNS = ["z", "a", "symbol", "atomic_mass_u", "abundance_percent"]


# --------------------------------------------------------------------------
# Output helpers
# --------------------------------------------------------------------------

def format_value(value):
    """One CSV cell: int as is, float via repr() (shortest round-trip), str verbatim."""
    if isinstance(value, bool):
        raise TypeError("booleans are not used in this table")
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"non-finite value: {value!r}")
        return repr(value)
    if isinstance(value, str):
        if not value or any(c in value for c in ',"\n\r') or value != value.strip():
            raise ValueError(f"string needs quoting: {value!r}")
        return value
    raise TypeError(f"unsupported cell type {type(value).__name__}")


def write_csv(path, comments, columns, rows):
    """Write '# ' comment lines, one header line, then the rows ('\\n' line ends)."""
    lines = ["# " + c.rstrip() for c in comments]
    lines.append(",".join(columns))
    for row in rows:
        if len(row) != len(columns):
            raise ValueError(f"row has {len(row)} cells, expected {len(columns)}: {row!r}")
        lines.append(",".join(format_value(v) for v in row))
    with open(path, "w", encoding="ascii", newline="\n") as f:
        f.write("\n".join(lines) + "\n")
    return len(rows)


# --------------------------------------------------------------------------
# The mass table
# --------------------------------------------------------------------------

def mass_rows():
    """Rows (z, a, symbol, atomic mass [u], abundance [%]) sorted by (z, a).

    The symbol is the ELEMENT symbol (``el.symbol``), so that it is the same
    for every isotope of an element: periodictable names the isotopes 2H and
    3H ``D`` and ``T`` (``iso.symbol``), which is not used here.
    Returns (rows, number of isotopes skipped for lack of a mass).
    """
    rows = []
    skipped = 0
    for el in periodictable.elements:
        if el.number < 1:
            continue  # the neutron (element 0) is added explicitly below
        for iso in el:
            mass = iso.mass
            if mass is None or not math.isfinite(float(mass)):
                skipped += 1
                continue
            abundance = iso.abundance
            abundance = 0.0 if abundance is None else float(abundance)
            rows.append((el.number, iso.isotope, el.symbol, float(mass), abundance))

    # Free neutron: z = 0, a = 1; atomic_mass_u is the neutron mass.
    neutron = periodictable.n
    neutron_isotopes = [iso for iso in neutron]
    assert [iso.isotope for iso in neutron_isotopes] == [1], neutron_isotopes
    assert neutron_isotopes[0].mass == neutron.mass, (neutron_isotopes[0].mass, neutron.mass)
    rows.append((0, 1, neutron.symbol, float(neutron.mass), 0.0))

    rows.sort(key=lambda r: (r[0], r[1]))
    keys = [(r[0], r[1]) for r in rows]
    assert len(set(keys)) == len(keys), "duplicate (z, a)"
    assert rows[0][:3] == (0, 1, "n"), rows[0]
    return rows, skipped


def write_masses(path):
    rows, skipped = mass_rows()
    n_with_abundance = sum(1 for r in rows if r[4] > 0.0)
    comments = [
        "Nuclide atomic masses and natural abundances embedded in xsflow.",
        "Source of the atomic masses: AME2020, M. Wang et al., Chinese Phys. C 45 (2021) 030003,"
        f" via periodictable {periodictable.__version__} (which carries the rounded table"
        " massround.mas20; values marked '#' there, i.e. estimated rather than measured, are"
        " included without a mark).",
        "Free neutron (z=0, a=1, symbol n): atomic_mass_u is the neutron mass as carried by"
        f" periodictable {periodictable.__version__} (periodictable.constants.neutron_mass,"
        " which it labels CODATA 2022).",
        "Natural abundances: CIAAW (IUPAC Commission on Isotopic Abundances and Atomic Weights)"
        " via periodictable; 0.0 where the nuclide has no natural abundance.",
        "Units: atomic_mass_u in u (unified atomic mass unit; ATOMIC masses, electrons included);"
        " abundance_percent in percent (atom fraction x 100).",
        "symbol is the element symbol (2H and 3H are H, not D and T). Rows sorted by (z, a).",
        f"{len(rows)} rows ({len(rows) - 1} nuclides with z >= 1 plus the neutron;"
        f" {n_with_abundance} with a natural abundance; {skipped} isotopes skipped for lack of a mass).",
        f"generated by {SCRIPT_PATH}",
        f"libraries: python {platform.python_version()}; periodictable {periodictable.__version__}",
    ]
    return write_csv(path, comments, COLUMNS, rows), skipped


def main():
    n, skipped = write_masses(OUT_PATH)
    print(f"wrote {OUT_PATH} ({n} rows; {skipped} isotopes skipped for lack of a mass)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
