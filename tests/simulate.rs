//! `xsflow simulate` (issue 14, item 1): runs simulated from a true cross section reduce
//! back to it within statistics; the same seed writes the same bytes; bad requests say
//! which flag or file is wrong and what is accepted.

use std::path::Path;

use polars::prelude::*;

use crate::common::{numbers, parquet, strings, text, xsflow};

/// An invented experiment: 24 MeV 4He on 58Ni, three detectors, elastic and 2+ states,
/// list-mode events with a pile-up column.
pub const CONFIG: &str = "experiment: { name: simulated }
reaction: { beam: 4He, target: 58Ni, energy_mev: 24.0, beam_charge_state: 2, states: [{ name: elastic }, { name: \"2+_1.454\", excitation_mev: 1.454 }] }
target: { areal_density_ug_cm2: 200.0, molar_mass_g_mol: 57.9353, isotopic_fraction: 0.99, tilt_deg: 20.0 }
detectors:
  - { id: D1, theta_lab_deg: 30.0, distance_mm: 200.0, aperture: { shape: circle, radius_mm: 2.5 } }
  - { id: D2, theta_lab_deg: 60.0, distance_mm: 150.0, aperture: { shape: circle, radius_mm: 2.5 }, efficiency: 0.98 }
  - { id: D3, theta_lab_deg: 110.0, distance_mm: 120.0, aperture: { shape: rectangle, half_width_mm: 2.0, half_height_mm: 2.0 } }
runs: [runs/*.run.yaml]
stages:
  - { type: subtract_background }
  - { type: correct_dead_time, method: clock_ratio }
  - { type: compute_kinematics }
  - { type: apply_efficiency }
  - { type: compute_solid_angle }
  - { type: normalise }
  - { type: compute_lab_cross_section }
  - { type: transform_to_cm }
raw:
  columns: { detector: det, energy: adc, pile_up: pu }
  detector_ids: { \"0\": D1, \"1\": D2, \"2\": D3 }
  overflow_channel: 4096
  calibration: { all: { offset_mev: 0.0, gain_mev_per_channel: 0.01 } }
  gates: { resolution_mev: 0.08 }
";

fn scratch() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("scratch");
    std::fs::write(tmp.path().join("experiment.yaml"), CONFIG).expect("config");
    for (name, energy) in [("rutherford.yaml", 24.0), ("other-energy.yaml", 30.0)] {
        std::fs::write(
            tmp.path().join(name),
            format!("model: rutherford\nreaction: {{ beam: 4He, target: 58Ni, energy_mev: {energy} }}\n"),
        )
        .expect("model");
    }
    tmp
}

fn simulate(dir: &Path, out: &str, extra: &[&str]) -> std::process::Output {
    let args = ["simulate", "experiment.yaml", "--truth", "rutherford.yaml", "--state-truth", "2+_1.454=2.5"];
    xsflow(dir, &[&args[..], &["--out", out], extra].concat())
}

#[test]
fn simulated_runs_reduce_to_their_truth_within_statistics() {
    let tmp = scratch();
    let dir = tmp.path();
    // Strong enough dead time to matter: 2e6 events in an hour at 20 µs, f = 1/(1 + 0.011).
    let out = simulate(dir, "sim", &["--runs", "4", "--events", "2e6", "--seed", "7", "--resolving-time-us", "20"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let out = xsflow(dir, &["reduce", "sim/experiment.yaml", "--out", "reduced", "-q"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let truth = parquet(&dir.join("sim/truth.parquet"));
    let key =
        |df: &DataFrame, i: usize| ["run", "detector", "state", "branch"].map(|c| strings(df, c)[i].clone()).join("/");
    let truth_rows: std::collections::HashMap<String, usize> =
        (0..truth.height()).map(|i| (key(&truth, i), i)).collect();
    assert_eq!(truth.height(), 4 * 3 * 2, "runs × detectors × states");
    let mut pulls = Vec::new();
    for run in ["sim0001", "sim0002", "sim0003", "sim0004"] {
        let reduced = parquet(&dir.join(format!("reduced/{run}/cross_sections.parquet")));
        assert_eq!(reduced.height(), 6, "{run}: every detector × state");
        for i in 0..reduced.height() {
            let t = truth_rows[&key(&reduced, i)];
            let at = |df: &DataFrame, c: &str, row: usize| numbers(df, c)[row];
            // The live fraction is the clocks' ratio, which the simulation wrote as the
            // true one (1e-12: a product and a division of decimal text).
            approx::assert_relative_eq!(
                at(&reduced, "live_fraction", i),
                at(&truth, "live_fraction", t),
                max_relative = 1e-12
            );
            for (value, truth_value, err) in [
                ("dsdo_lab_mb_sr", "dsdo_lab_mb_sr", "stat_err_lab_mb_sr"),
                ("dsdo_cm_mb_sr", "dsdo_cm_mb_sr", "stat_err_mb_sr"),
            ] {
                pulls.push((at(&reduced, value, i) - at(&truth, truth_value, t)) / at(&reduced, err, i));
            }
        }
    }
    // Each pull within 4.5 standard deviations (a chance of 7e-6 per row for a true
    // normal pull) and their mean within 3 standard errors of 0 (common practice); the lab
    // and CM pulls of a row are the same number, so the standard error counts rows.
    let n_rows = pulls.len() as f64 / 2.0;
    let mean = pulls.iter().sum::<f64>() / pulls.len() as f64;
    assert!(pulls.iter().all(|p| p.abs() < 4.5), "{pulls:?}");
    assert!(mean.abs() < 3.0 / n_rows.sqrt(), "mean pull {mean}: {pulls:?}");
}

#[test]
fn the_same_seed_writes_the_same_bytes_and_another_seed_other_events() {
    let tmp = scratch();
    let dir = tmp.path();
    for (out, seed, data) in
        [("a", "3", "events"), ("b", "3", "events"), ("c", "4", "events"), ("d", "3", "spectra-csv")]
    {
        let o = simulate(dir, out, &["--runs", "2", "--events", "20000", "--seed", seed, "--data", data]);
        assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    }
    let bytes = |p: &str| std::fs::read(dir.join(p)).expect(p);
    for file in ["runs/sim0001.events.parquet", "runs/sim0002.events.parquet", "runs/sim0002.run.yaml", "truth.parquet"]
    {
        assert_eq!(bytes(&format!("a/{file}")), bytes(&format!("b/{file}")), "{file}");
    }
    assert_ne!(bytes("a/runs/sim0001.events.parquet"), bytes("c/runs/sim0001.events.parquet"));
    assert_ne!(bytes("a/runs/sim0001.events.parquet"), bytes("a/runs/sim0002.events.parquet"));
    // The spectra reduce as well.
    let o = xsflow(dir, &["reduce", "d/experiment.yaml", "--out", "d-reduced", "-q"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
}

#[test]
fn bad_requests_name_the_flag_or_file_and_what_is_accepted() {
    let tmp = scratch();
    let dir = tmp.path();
    // (extra arguments, truth model, what stderr must contain)
    let cases: [(&[&str], &str, &[&str]); 5] = [
        (&["--runs", "0"], "rutherford.yaml", &["--runs: found 0, expected a whole number of runs from 1 to 9999"]),
        (&["--events", "2e12"], "rutherford.yaml", &["--events: found 2000000000000", "2^40 = 1099511627776"]),
        (
            &[],
            "other-energy.yaml",
            &[
                "other-energy.yaml:2",
                "reaction.energy_mev: found 30, expected 24 MeV, the beam energy of the experiment it simulates",
                "experiment.yaml has 4He on 58Ni at 24 MeV",
            ],
        ),
        (
            &["--state-truth", "3-_4.5=1.0"],
            "rutherford.yaml",
            &["--state-truth: found 3-_4.5=1.0", "elastic, 2+_1.454"],
        ),
        (&["--data", "yields", "--runs", "1"], "missing.yaml", &["missing.yaml", "cannot read the file"]),
    ];
    for (extra, model, wanted) in cases {
        let args = ["simulate", "experiment.yaml", "--truth", model, "--state-truth", "2+_1.454=2.5", "--out", "x"];
        let o = xsflow(dir, &[&args[..], extra].concat());
        let said = text(&o);
        assert_eq!(o.status.code(), Some(2), "{extra:?}: {said}");
        for w in wanted {
            assert!(said.contains(w), "{extra:?}: {w:?} not in {said}");
        }
        assert!(!dir.join("x").exists(), "{extra:?}: nothing is written");
    }
    // A state left without a truth names the flag that gives it.
    let o = xsflow(dir, &["simulate", "experiment.yaml", "--truth", "rutherford.yaml", "--out", "x"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(text(&o).contains("--state-truth 2+_1.454=MB_SR"), "{}", text(&o));
}
