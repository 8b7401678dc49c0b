#!/usr/bin/env python3
"""Reference fixtures for stopping powers, ranges, energy loss and straggling.

Computes, with pycatima (a general-purpose library for the energy loss of ions in
matter; its default configuration: Pierce-Blann effective charge, SRIM-85 proton
fits scaled by the effective charge at low energy, Bethe with shell, Barkas and
Lindhard-Sorensen corrections at high energy, plus nuclear stopping), the total
stopping power and range of several ions in several materials over 0.1-100 MeV/u,
and the exit energy and energy straggling of layers of given thickness.  Element
and ion masses come from periodictable (CIAAW standard atomic weights; AME2020
nuclide masses), so both sides use the same materials.

Usage (from the repository root)::

    python3 tests/reference/generate_stopping.py [--out DIR]

Deterministic: no random numbers.

Files written:

* ``stopping_pycatima.csv``     -- total stopping power [MeV cm2/g] and range [g/cm2]
* ``energy_loss_pycatima.csv``  -- exit energy and energy straggling for a layer
"""

import importlib.metadata
import sys

import periodictable
import pycatima

from fixture_csv import FIXTURES_DIR, generator_path, output_dir, write_csv

GENERATOR = generator_path(__file__)
LIBRARIES = [pycatima, periodictable]
if not hasattr(pycatima, "__version__"):  # pycatima has none; write the installed version
    pycatima.__version__ = importlib.metadata.version("pycatima")

# CODATA 2018 electron mass in u (m_e / u = 0.51099895000 / 931.49410242).
ELECTRON_MASS_U = 0.51099895000 / 931.49410242

# Ions: (name, Z, A); the mass is the AME2020 atomic mass less Z electron masses (the
# electron binding, below 1e-6 of the mass, is left out).
IONS = [("1H", 1, 1), ("4He", 2, 4), ("12C", 6, 12), ("16O", 8, 16), ("58Ni", 28, 58)]

# Materials: (name as xsflow reads it, [(Z, atoms per formula unit)]).
MATERIALS = [
    ("C", [(6, 1)]),
    ("Al", [(13, 1)]),
    ("Ni", [(28, 1)]),
    ("Au", [(79, 1)]),
    ("C10H8O4", [(6, 10), (1, 8), (8, 4)]),
]

ENERGIES_MEV_PER_U = [0.1, 0.3, 1.0, 2.0, 5.0, 10.0, 30.0, 100.0]

# Layers: (ion, material, energy MeV/u, thickness g/cm2).
LAYERS = [
    ("1H", "C", 5.0, 0.01),
    ("1H", "Au", 10.0, 0.05),
    ("4He", "Ni", 6.0, 0.001),
    ("4He", "Ni", 6.0, 0.02),
    ("4He", "Au", 6.0, 0.005),
    ("4He", "C10H8O4", 6.0, 0.002),
    ("12C", "Al", 10.0, 0.01),
    ("16O", "Ni", 8.0, 0.002),
    ("58Ni", "C", 20.0, 0.002),
    ("58Ni", "Au", 50.0, 0.01),
]


def ion_mass_u(z, a):
    return periodictable.elements[z][a].mass - z * ELECTRON_MASS_U


def material(components):
    return pycatima.Material([[periodictable.elements[z].mass, z, n] for z, n in components])


def projectile(z, a, energy_mev_per_u):
    p = pycatima.Projectile(ion_mass_u(z, a), z)
    p.T(energy_mev_per_u)
    return p


def stopping_rows():
    rows = []
    for ion, z, a in IONS:
        for name, components in MATERIALS:
            for t in ENERGIES_MEV_PER_U:
                r = pycatima.calculate(projectile(z, a, t), material(components)).get_dict()
                rows.append([ion, z, ion_mass_u(z, a), name, t, r["dEdxi"], r["range"]])
    return rows


def layer_rows():
    ions = {name: (z, a) for name, z, a in IONS}
    materials = dict(MATERIALS)
    rows = []
    for ion, name, t, thickness in LAYERS:
        z, a = ions[ion]
        m = material(materials[name])
        m.thickness(thickness)
        r = pycatima.calculate(projectile(z, a, t), m).get_dict()
        mass_u = ion_mass_u(z, a)
        rows.append([ion, z, mass_u, name, t, thickness, r["Eout"], r["sigma_E"] * mass_u])
    return rows


def main(argv=None):
    out = output_dir(__doc__.splitlines()[0], FIXTURES_DIR, argv)
    common = [
        "Ion mass [u]: AME2020 atomic mass (periodictable) less Z electron masses (CODATA 2018).",
        "Materials: pycatima.Material from (standard atomic weight [g/mol] of periodictable, Z,"
        " atoms per formula unit); its mean excitation energies and compound rules are pycatima's.",
        "pycatima default Config (Pierce-Blann effective charge; SRIM-85 proton fits at low"
        " energy, Bethe with shell, Barkas and Lindhard-Sorensen corrections at high energy).",
    ]
    n = write_csv(
        out / "stopping_pycatima.csv",
        ["Total stopping power (pycatima dEdxi, electronic + nuclear) [MeV cm2/g] and range"
         " (pycatima range) [g/cm2] at kinetic energy energy_mev_per_u [MeV per u of ion mass]."]
        + common,
        ["ion", "z", "mass_u", "material", "energy_mev_per_u", "stopping_mev_cm2_g", "range_g_cm2"],
        stopping_rows(),
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    print(f"wrote {out / 'stopping_pycatima.csv'} ({n} rows)")
    n = write_csv(
        out / "energy_loss_pycatima.csv",
        ["An ion entering a layer of thickness_g_cm2 at energy_mev_per_u: pycatima Eout"
         " [MeV/u] and energy straggling sigma_E [MeV/u] times the ion mass [u], i.e. in MeV."]
        + common,
        ["ion", "z", "mass_u", "material", "energy_mev_per_u", "thickness_g_cm2",
         "energy_out_mev_per_u", "straggling_mev"],
        layer_rows(),
        generator=GENERATOR,
        modules=LIBRARIES,
    )
    print(f"wrote {out / 'energy_loss_pycatima.csv'} ({n} rows)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
