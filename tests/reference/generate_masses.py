#!/usr/bin/env python3
"""Embedded nuclide mass table for xsflow.

Writes ``stages/data/masses_ame2020.csv``: one row per nuclide for which
the ``periodictable`` package carries an isotope mass, plus the free neutron
as z = 0, with the atomic mass [u] and the natural abundance [%].

The atomic masses are those of the AME2020 evaluation (M. Wang et al.,
Chinese Phys. C 45 (2021) 030003) as shipped by ``periodictable``; the
natural abundances are the CIAAW values shipped by ``periodictable``.
Nothing is computed here: values are copied and written with ``repr()`` so
that the Rust side parses exactly the same IEEE-754 doubles.

Usage (from the repository root)::

    python3 tests/reference/generate_masses.py [--out DIR]

DIR defaults to ``stages/data`` in the repository.  The output is
deterministic: two runs with the same library versions give byte-identical
files.
"""

import math
import sys

import periodictable

from fixture_csv import REPO_ROOT, generator_path, output_dir, write_csv

DEFAULT_OUT = REPO_ROOT / "stages" / "data"
OUT_NAME = "masses_ame2020.csv"

# Path of this script as recorded in the header.
GENERATOR = generator_path(__file__)

COLUMNS = ["z", "a", "symbol", "atomic_mass_u", "abundance_percent"]


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
    ]
    n = write_csv(path, comments, COLUMNS, rows, generator=GENERATOR, modules=[periodictable])
    return n, skipped


def main(argv=None):
    path = output_dir(__doc__.splitlines()[0], DEFAULT_OUT, argv) / OUT_NAME
    n, skipped = write_masses(path)
    print(f"wrote {path} ({n} rows; {skipped} isotopes skipped for lack of a mass)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
