//! Kinematics, masses, Rutherford and the CM frame against outside references: an
//! independent four-vector calculation in mpmath (`tests/reference/generate_kinematics.py`,
//! versions in the fixture headers), periodictable's AME2020 masses, and closed forms.

use approx::assert_relative_eq;
use stages::physics::kinematics::{Channel, Detect, Masses, Mode};
use stages::physics::luminosity::{from_monitors, MonitorPoint};
use stages::physics::{nuclide, rutherford};

use crate::common::{demo_copy, edit, fixture_rows, num, text, xsflow};

fn masses(row: &std::collections::HashMap<String, String>) -> Masses {
    Masses {
        beam_mev: num(row, "m_beam_mev"),
        target_mev: num(row, "m_target_mev"),
        ejectile_mev: num(row, "m_ejectile_mev"),
        recoil_mev: num(row, "m_recoil_mev"),
    }
}

/// Compare a solution with a fixture row at a relative tolerance of 1e-9, the issue's bound
/// (why it is not tighter: `kinematics_match_an_independent_four_vector_calculation`).
fn assert_solution(
    what: &str,
    row: &std::collections::HashMap<String, String>,
    s: &stages::physics::kinematics::Solution,
) {
    let checks = [
        ("theta_lab_deg", s.theta_lab_rad.to_degrees()),
        ("theta_cm_deg", s.theta_cm_rad.to_degrees()),
        ("energy_lab_mev", s.energy_lab_mev),
        ("domega_lab_per_domega_cm", s.domega_lab_per_domega_cm),
        ("recoil_theta_lab_deg", s.partner_theta_lab_rad.to_degrees()),
        ("recoil_energy_lab_mev", s.partner_energy_lab_mev),
    ];
    for (column, got) in checks {
        let want = num(row, column);
        assert!((got - want).abs() <= 1e-9 * want.abs(), "{what}: {column} {got} vs {want}");
    }
    assert_eq!(s.branch, num(row, "branch") as u8, "{what}: branch");
}

#[test]
fn kinematics_match_an_independent_four_vector_calculation() {
    // Fixture: CM four-vectors boosted to the lab in mpmath at 40 digits, Jacobian by
    // numerical differentiation (mpmath.diff). Tolerance 1e-9 relative (the issue's bound)
    // in both directions: from the CM angle (at_cm_angle) and from the lab angle
    // (at_lab_angle). Next to the maximum lab angle of a double-valued case the inverse is
    // ill-conditioned: dθ_cm/dθ_lab diverges, and it amplifies the ~1e-12 relative rounding
    // that f64 makes in quantities set by mass differences (Q = 1.454 MeV from masses of
    // 5e4 MeV) past 1e-9. Points with dθ_cm/dθ_lab > 50 are checked from the CM side only;
    // they are counted and must stay few.
    let rows = fixture_rows("kinematics.csv");
    assert!(rows.len() >= 200, "{} fixture rows", rows.len());
    let mut ill_conditioned = Vec::new();
    for row in &rows {
        let what = format!("case {} at theta_cm {} ({})", row["case"], row["theta_cm_deg"], row["detect"]);
        let ch = Channel::new(masses(row), num(row, "energy_mev"), num(row, "excitation_mev")).expect(&what);
        let detect = if row["detect"] == "recoil" { Detect::Recoil } else { Detect::Ejectile };
        let forward = ch.at_cm_angle(num(row, "theta_cm_deg").to_radians(), detect, Mode::Relativistic);
        assert_solution(&format!("{what}, from the CM angle"), row, &forward);
        if forward.dtheta_cm_per_dtheta_lab > 50.0 {
            ill_conditioned
                .push(format!("{what}: theta_lab {} of max {}", row["theta_lab_deg"], row["theta_max_lab_deg"]));
            continue;
        }
        let sols = ch.at_lab_angle(num(row, "theta_lab_deg").to_radians(), detect, Mode::Relativistic);
        let branch = num(row, "branch") as u8;
        let s = sols
            .iter()
            .find(|s| s.branch == branch)
            .unwrap_or_else(|| panic!("{what}: no branch {branch} in {sols:?}"));
        assert_solution(&format!("{what}, from the lab angle"), row, s);
        let max = ch.max_lab_angle_rad(detect, Mode::Relativistic).to_degrees();
        // 1e-9: the issue's bound, as above (measured 3e-12).
        assert_relative_eq!(max, num(row, "theta_max_lab_deg"), max_relative = 1e-9);
    }
    assert!(ill_conditioned.len() <= 5, "points next to the maximum lab angle: {ill_conditioned:#?}");
    assert!(!ill_conditioned.is_empty(), "the fixture has points next to the maximum; the CM-side check covered them");
}

#[test]
fn nuclear_masses_match_periodictable_ame2020() {
    // Fixture masses: periodictable's AME2020 atomic masses minus Z m_e plus the electron
    // binding of Lunney, Pearson, Thibault, Rev. Mod. Phys. 75 (2003) 1021, Eq. (A4).
    // Tolerance 1e-13: the same values through the same formula in another language.
    let rows = fixture_rows("kinematics.csv");
    for row in rows.iter().step_by(18) {
        for (name, mass) in [
            ("beam", "m_beam_mev"),
            ("target", "m_target_mev"),
            ("ejectile", "m_ejectile_mev"),
            ("recoil", "m_recoil_mev"),
        ] {
            let n = nuclide::parse(&row[name]).unwrap_or_else(|e| panic!("{e}"));
            assert_relative_eq!(n.nuclear_mass_mev(), num(row, mass), max_relative = 1e-13);
        }
    }
    assert_eq!(nuclide::all().len(), 2940, "AME2020 via periodictable 2.1.0: 2939 nuclides and the neutron");
}

#[test]
fn rutherford_matches_mpmath_in_both_conventions_and_in_the_lab() {
    // Fixture: mpmath at 40 digits; non-relativistic (Z1 Z2 e^2 / 4 E_cm)^2 / sin^4(theta/2),
    // relativistic eta^2 / (4 k^2 sin^4(theta/2)); lab = CM / (dOmega_lab/dOmega_cm).
    // Tolerance 1e-12 for the closed forms (a few roundings; measured 1.1e-15), and for the
    // lab values (tightened from the kinematics bound 1e-9): elastic, so no Q from mass
    // differences, and from the CM side the map is well conditioned (measured 6e-14).
    let rows = fixture_rows("rutherford.csv");
    assert_eq!(rows.len(), 68);
    for row in &rows {
        let m = Masses {
            beam_mev: num(row, "m_beam_mev"),
            target_mev: num(row, "m_target_mev"),
            ejectile_mev: num(row, "m_beam_mev"),
            recoil_mev: num(row, "m_target_mev"),
        };
        let ch = Channel::new(m, num(row, "energy_mev"), 0.0).expect("elastic");
        let (z1, z2) = (num(row, "beam_z") as u32, num(row, "target_z") as u32);
        let theta = num(row, "theta_cm_deg").to_radians();
        let nonrel = rutherford::Convention::NonRelativistic.cm_mb_sr(z1, z2, &ch, theta);
        assert_relative_eq!(nonrel, num(row, "dsdo_nonrel_cm_mb_sr"), max_relative = 1e-12);
        assert_relative_eq!(
            rutherford::Convention::Relativistic.cm_mb_sr(z1, z2, &ch, theta),
            num(row, "dsdo_rel_cm_mb_sr"),
            max_relative = 1e-12
        );
        let s = ch.at_cm_angle(theta, Detect::Ejectile, Mode::Relativistic);
        assert_relative_eq!(s.theta_lab_rad.to_degrees(), num(row, "theta_lab_deg"), max_relative = 1e-12);
        assert_relative_eq!(
            nonrel / s.domega_lab_per_domega_cm,
            num(row, "dsdo_nonrel_lab_mb_sr"),
            max_relative = 1e-12
        );
    }
}

#[test]
fn monitor_normalisation_worked_by_hand() {
    // Invented two-monitor case, every number written out:
    // S_1 = 1.0 * 0.5 * 1e-3 sr * 1000e-27 cm2/sr = 5.0e-28 cm2, Y_1 = 10000 +- 100
    // S_2 = 0.5 * 0.5 * 2e-3 sr * 500e-27 cm2/sr = 2.5e-28 cm2, Y_2 = 5000 +- sqrt(5000)
    // L = 15000 / 7.5e-28 = 2.0e31 /cm2
    // stat = sqrt(100^2 + 5000) / 15000 = sqrt(15000)/15000; sys = 5e-28 * 0.01 / 7.5e-28
    let points = [
        MonitorPoint {
            counts_net: (10000.0, 100.0),
            window_acceptance: (1.0, 0.0),
            efficiency: (1.0, 0.0),
            solid_angle_msr: (1.0, 0.01),
            live_fraction: (0.5, 0.0),
            rutherford_lab_mb_sr: 1000.0,
        },
        MonitorPoint {
            counts_net: (5000.0, 5000f64.sqrt()),
            window_acceptance: (1.0, 0.0),
            efficiency: (0.5, 0.0),
            solid_angle_msr: (2.0, 0.0),
            live_fraction: (0.5, 0.0),
            rutherford_lab_mb_sr: 500.0,
        },
    ];
    let (l, rel) = from_monitors(&points);
    // 1e-14: sums and one division of numbers exact to an ulp or two.
    assert_relative_eq!(l, 2.0e31, max_relative = 1e-14);
    let stat = 15000f64.sqrt() / 15000.0;
    let sys = 5e-28 * 0.01 / 7.5e-28;
    // 1e-13: the same quadrature through the monitor sums, some tens of roundings.
    assert_relative_eq!(rel, (stat * stat + sys * sys).sqrt(), max_relative = 1e-13);
    // 5e-9 (tightened from 1e-7): the value to 9 digits, half a unit in the last is 4.7e-9.
    // (The old 0.010540925 was truncated, 5.1e-8 off.)
    assert_relative_eq!(rel, 0.010_540_925_5, max_relative = 5e-9);
}

#[test]
fn monitor_mode_makes_the_monitor_pure_rutherford_and_reports_the_cross_check() {
    let tmp = demo_copy();
    std::fs::copy(
        crate::common::demo_dir().join("experiment-monitor.yaml"),
        tmp.path().join("experiment-monitor.yaml"),
    )
    .expect("copy");
    let out = xsflow(tmp.path(), &["reduce", "experiment-monitor.yaml", "--out", "out"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let mut table = xsflow::tables::read_table(&tmp.path().join("out/0101/cross_sections.parquet")).expect("output");
    let csv = String::from_utf8(xsflow::tables::csv_bytes(&mut table).expect("csv")).expect("utf-8");
    let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no column {name}"));
    let d01 = csv.lines().find(|l| l.contains(",D01,elastic,")).expect("monitor row");
    let cells: Vec<&str> = d01.split(',').collect();
    let ratio: f64 = cells[col("ratio_rutherford")].parse().expect("number");
    // A single monitor defines the scale: its own ratio to Rutherford is 1 by construction.
    // 1e-12: the luminosity from the monitor and back through the cross section, a few tens
    // of roundings, and the CSV's shortest round-trip digits.
    assert_relative_eq!(ratio, 1.0, max_relative = 1e-12);
    let cross_check: f64 = cells[col("luminosity_monitor_over_absolute")].parse().expect("number");
    // 0.5 to 2: a sanity range; it checks that the column is there and sensible, not the
    // agreement of the demo's two normalisations (measured 0.90).
    assert!((0.5..2.0).contains(&cross_check), "{cross_check}");
}

#[test]
fn kinematics_command_prints_the_contract_keys() {
    let out = crate::common::demo_kinematics("10:170:10");
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let rows: Vec<serde_json::Value> = serde_json::from_slice(&out.stdout).expect("JSON array");
    assert_eq!(rows.len(), 17);
    for key in [
        "theta_lab_deg",
        "theta_cm_deg",
        "energy_lab_mev",
        "domega_lab_per_domega_cm",
        "branch",
        "recoil_theta_lab_deg",
        "recoil_energy_lab_mev",
    ] {
        assert!(rows.iter().all(|r| r.get(key).is_some_and(serde_json::Value::is_number)), "key {key}");
    }
    // Elastic alpha on 58Ni at 90 deg lab: 20.889 MeV (fixture-checked code; digits from the
    // table printed by this command, as a smoke check of the wiring). 5e-4 MeV (tightened from
    // 1e-3): half a unit in the third decimal printed (20.88944).
    assert!((rows[8]["energy_lab_mev"].as_f64().expect("number") - 20.889).abs() < 5e-4);
    let csv = xsflow(
        &crate::common::repo_root(),
        &[
            "kinematics",
            "--beam",
            "alpha",
            "--target",
            "58ni",
            "--energy-mev",
            "24",
            "--angles",
            "30,60",
            "--format",
            "csv",
        ],
    );
    assert_eq!(String::from_utf8_lossy(&csv.stdout).lines().count(), 3);
}

#[test]
fn angles_past_the_kinematic_limit_give_no_row_and_a_warning() {
    // 12C on 1H: the carbon cannot go beyond asin(m_p/m_C) ~ 4.8 deg (common practice).
    let out = xsflow(
        &crate::common::repo_root(),
        &[
            "kinematics",
            "--beam",
            "12C",
            "--target",
            "p",
            "--energy-mev",
            "60",
            "--angles",
            "2,4,5,10",
            "--format",
            "json",
        ],
    );
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let rows: Vec<serde_json::Value> = serde_json::from_slice(&out.stdout).expect("JSON array");
    assert_eq!(rows.len(), 4, "two branches at 2 and 4 deg, none at 5 and 10");
    assert_eq!(rows.iter().map(|r| r["branch"].as_u64().expect("branch")).collect::<Vec<_>>(), [1, 2, 1, 2]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("beyond the maximum lab angle 4.8164 deg"), "{err}");
}

#[test]
fn bad_kinematics_requests_are_clear_errors() {
    let root = crate::common::repo_root();
    let run = |args: &[&str]| {
        let mut all = vec!["kinematics", "--angles", "30"];
        all.extend_from_slice(args);
        let out = xsflow(&root, &all);
        (out.status.code(), text(&out))
    };
    let (code, msg) = run(&["--beam", "4He", "--target", "58Nx", "--energy-mev", "24"]);
    assert_eq!(code, Some(2));
    assert!(msg.contains("--target: found 58Nx") && msg.contains("did you mean"), "{msg}");
    // 58Ni(p,n)58Cu has Q = -9.35 MeV (AME2020): 5 MeV is below threshold.
    let (code, msg) = run(&["--beam", "p", "--target", "58Ni", "--ejectile", "n", "--energy-mev", "5"]);
    assert_eq!(code, Some(2));
    assert!(msg.contains("--energy-mev: found 5") && msg.contains("below the threshold 9.5"), "{msg}");
    let (code, msg) = run(&["--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--excitation-mev", "30"]);
    assert_eq!(code, Some(2));
    assert!(msg.contains("--excitation-mev: found 30") && msg.contains("above the 22.4"), "{msg}");
    let (code, msg) = run(&["--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--angles", "0:10:5"]);
    assert_eq!(code, Some(2), "{msg}");
}

#[test]
fn neutral_beam_with_rutherford_is_a_config_error() {
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    edit(&config, "  beam: 4He", "  beam: n");
    let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(
        msg.contains(
            "stages[7].rutherford: (transform_to_cm) found relativistic with the neutral n, expected rutherford: none"
        ),
        "{msg}"
    );
}

#[test]
fn unknown_nuclide_in_the_config_gets_suggestions() {
    let tmp = demo_copy();
    edit(&tmp.path().join("experiment.yaml"), "  target: 58Ni", "  target: 58Nii");
    let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("experiment.yaml:12:3 reaction.target: found 58Nii, expected a nuclide in the AME2020 table: unknown nuclide `58Nii`; did you mean"), "{msg}");
}

#[test]
fn inverse_kinematics_branches_come_from_the_yields_table() {
    // 12C on a hydrogen target: both solutions at 2 deg, told apart by the `branch` column
    // in one run and by the measured peak energy in another.
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    let text_yaml = std::fs::read_to_string(&config).expect("config");
    let head = text_yaml
        .split("detectors:")
        .next()
        .expect("head")
        .replace("  beam: 4He", "  beam: 12C")
        .replace("  target: 58Ni", "  target: 1H")
        .replace("  energy_mev: 24.0", "  energy_mev: 60.0")
        .replace("  beam_charge_state: 2", "  beam_charge_state: 6")
        .replace("    - { name: \"2+_1.454\", excitation_mev: 1.454 }\n", "");
    // The per-run stages only: the demo's fits are for its own states.
    let tail = text_yaml.split("runs:").nth(1).expect("tail");
    let stages = tail.split("\nfits:").next().expect("stages");
    let yaml = format!("{head}detectors:\n  - {{ id: F1, theta_lab_deg: 2.0, distance_mm: 500.0, aperture: {{ shape: circle, radius_mm: 2.0 }} }}\nruns:{stages}");
    std::fs::write(&config, yaml.replace("runs/*.run.yaml", "runs/run0101.run.yaml")).expect("write");
    std::fs::write(
        tmp.path().join("runs/run0101.yields.csv"),
        "detector,state,counts_gross,branch\nF1,elastic,1000,1\nF1,elastic,400,2\n",
    )
    .expect("yields");
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let csv = std::fs::read_to_string(tmp.path().join("out/0101/cross_sections.csv")).expect("output");
    let at = |csv: &str, row: usize, name: &str| -> f64 {
        let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
        let line = csv.lines().nth(row + 1).expect("row");
        line.split(',')
            .nth(header.iter().position(|h| *h == name).expect("column"))
            .expect("cell")
            .parse()
            .expect("number")
    };
    assert_eq!(csv.lines().count(), 3);
    // The same angles as `xsflow kinematics --beam 12C --target p --energy-mev 60 --angles 2`.
    // 5e-5 deg (tightened from 1e-3): half a unit in the fourth decimal written here
    // (26.570376, 157.447881).
    assert!((at(&csv, 0, "theta_cm_deg") - 26.5704).abs() < 5e-5, "{csv}");
    assert!((at(&csv, 1, "theta_cm_deg") - 157.4479).abs() < 5e-5, "{csv}");

    std::fs::write(
        tmp.path().join("runs/run0101.yields.csv"),
        "detector,state,counts_gross,peak_energy_lab_mev\nF1,elastic,400,44.0\n",
    )
    .expect("yields");
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out2"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let csv = std::fs::read_to_string(tmp.path().join("out2/0101/cross_sections.csv")).expect("output");
    assert_eq!(at(&csv, 0, "branch") as u8, 2, "44 MeV is the lower-energy solution (43.47 MeV)");

    std::fs::write(tmp.path().join("runs/run0101.yields.csv"), "detector,state,counts_gross\nF1,elastic,400\n")
        .expect("yields");
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out3"]);
    assert_eq!(out.status.code(), Some(1));
    assert!(
        text(&out).contains("a `branch` (1 or 2) or `peak_energy_lab_mev` column in the yields table"),
        "{}",
        text(&out)
    );
}

#[test]
fn issue_18_an_elastic_recoil_stops_at_90_degrees() {
    // 58Ni recoils from 4He elastic scattering never move backward: the table and its
    // warning said 180°, and a rounding root gave a spurious row of 1e-21 MeV just past 90°.
    let args = ["kinematics", "--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--detect", "recoil"];
    let out = xsflow(&crate::common::repo_root(), &[&args[..], &["--angles", "80,90.6,95"]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let msg = text(&out);
    assert!(
        msg.contains("max lab angle: 90.0000 deg") && msg.contains("beyond the maximum lab angle 90.0000 deg"),
        "{msg}"
    );
    assert_eq!(
        String::from_utf8_lossy(&out.stdout).lines().filter(|l| l.trim_start().starts_with("9")).count(),
        0,
        "{msg}"
    );
}

#[test]
fn issue_18_a_negative_angle_is_an_angle_not_a_flag() {
    // `--angles -10,0,180` was taken for an unknown flag; it is a value with a clear error.
    let args = ["kinematics", "--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--angles", "-10,0,180"];
    let out = xsflow(&crate::common::repo_root(), &args);
    assert_eq!(out.status.code(), Some(2), "{}", text(&out));
    assert!(text(&out).contains("--angles -10,0,180: -10 is outside (0, 180)"), "{}", text(&out));
}
