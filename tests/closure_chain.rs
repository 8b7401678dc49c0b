//! Closure of the whole chain (issue 14, item 2): `xsflow simulate` makes runs from a true
//! cross section, `xsflow reduce` reduces them, combines the runs into one angular
//! distribution and fits it; over many seeds the reduced rows must give back the truth of
//! `truth.parquet`, and the fit the truth's scale.
//!
//! For every case and seed: `simulate --runs R --seed S`, then `reduce` of the written
//! config, whose `fits:` entry fits the normalisation of the true shape (`model: curve`,
//! the truth model's curve from `xsflow theory`, 0.25° apart, interpolated in log σ; a cheap
//! model, so that many seeds fit in a debug test). Then
//! - per row (run × detector × state × branch, monitors left out: their value is the
//!   monitor's definition, not a measurement) the pull
//!   (dσ/dΩ_cm − truth) / √(u_stat² + (norm_rel_err · dσ/dΩ_cm)²): the statistical error and
//!   the run's normalisation error (dead time from counted triggers, the monitor's counts),
//!   which is statistical in a simulation with exact geometry;
//! - per seed the fitted normalisation's pull (n − 1)/√(u_n² + u_norm²), u_norm = √(Σ_r ν_r²)/R
//!   the error of the mean of the R runs' normalisations ν_r (`norm_rel_err`), which a free
//!   normalisation takes up.
//!
//! Criteria (issue 14): the rows' pull mean within 3 standard errors of 0 and their width
//! within 10 % of 1; each fit within 4 u_n of the truth (a chance of 6e-5 per fit for a
//! normal pull), the fits' pull mean within 3 standard errors of 0 and width within 3
//! standard errors of 1 (the standard error of a width from K values is 1/√(2(K − 1)),
//! common practice). The seeds are fixed and the simulation writes the same bytes on
//! every machine, so each figure below is what the test measures, every time.
//!
//! Measured with these seeds (rows: count, pull mean ± standard error, width; fits over
//! 30 seeds: pull mean ± standard error, width):
//! - plain elastic:            480 rows, +0.026 ± 0.044, 1.010; fits +0.031 ± 0.148, 0.808
//! - strong dead time:         480 rows, −0.168 ± 0.060, 0.991; fits −0.501 ± 0.166, 0.908
//!   (4000 rows of 1000 runs: −0.009 ± 0.021, width 0.993: the seeds here fall low by
//!   chance)
//! - monitor normalisation:    480 rows, −0.057 ± 0.051, 1.038; fits −0.158 ± 0.176, 0.965
//! - recoil detection:         480 rows, −0.025 ± 0.041, 1.041; fits −0.092 ± 0.177, 0.968
//! - double-valued lab angle:  720 rows, −0.015 ± 0.037, 0.991; fits −0.101 ± 0.179, 0.981
//! - contaminant peaks next to the elastic one (peak-fit background): 480 rows,
//!   +0.071 ± 0.047, 1.049; fits +0.280 ± 0.193, 1.056
//!
//! Defects these cases found, fixed in the reduction: the counting error of the triggers
//! that give a dead-time model its rate was left out, and is correlated with the peaks'
//! own counts (pull width 1.11 before); a monitor's counts were not corrected for their
//! window acceptance (row pull mean +0.35); the two branches of a double-valued lab angle
//! were averaged into one combined point (fit pull +122); the peak fit's Neyman weights
//! pulled areas low by about a count per bin (row pull mean −0.41 with little background);
//! an impurity's peak inside the peak fit's region was fitted as background (rows −2.4 at
//! the detector where the 16O peak lies 6.5 σ below the elastic one).
//! The whole set takes about a minute of a debug `cargo test --workspace` on two cores.

use std::collections::HashMap;
use std::path::Path;

use crate::common::{numbers, parquet, strings, text, xsflow};

/// One closure case.
struct Case {
    name: &'static str,
    /// The experiment config (its `runs:` are replaced by `simulate`).
    config: String,
    /// The true elastic cross section: a model file of `xsflow theory`.
    truth: String,
    /// Extra `xsflow simulate` arguments.
    simulate: &'static [&'static str],
    /// Seeds 1..=seeds, each a separate simulation, reduction and fit.
    seeds: u64,
    /// Runs per seed, combined by the reduction.
    runs: u32,
    /// Detectors left out of the row pulls (monitors).
    monitors: &'static [&'static str],
    /// Extra lines of the shape fit's file (its `fit:` settings).
    fit: &'static str,
}

impl Case {
    /// A case of 30 seeds of 4 runs of 1e5 events as spectra, no monitor, all angles fitted.
    fn new(name: &'static str, config: String, truth: String) -> Case {
        Case {
            name,
            config,
            truth,
            simulate: &["--data", "spectra", "--events", "1e5"],
            seeds: 30,
            runs: 4,
            monitors: &[],
            fit: "",
        }
    }
}

/// Pulls of one case: per row, grouped by run (the rows of a run share its live fraction
/// and luminosity), and per seed the fitted normalisation's.
#[derive(Default)]
struct Pulls {
    runs: Vec<Vec<f64>>,
    fits: Vec<f64>,
}

/// Mean, its standard error, and the standard deviation.
fn moments(x: &[f64]) -> (f64, f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (mean, sd / n.sqrt(), sd)
}

/// The experiment config: `head` (reaction, target, detectors) and `stages`, with the
/// shape fit of the elastic state.
fn config(head: &str, stages: &str, raw: &str) -> String {
    format!(
        "experiment: {{ name: closure }}\n{head}runs: [runs/*.run.yaml]\nstages:\n{stages}fits:\n  - {{ model_file: shape-fit.yaml, state: elastic, name: shape }}\n{raw}"
    )
}

/// The usual stages, with `dead_time` and `normalise` as given.
fn stages(dead_time: &str, normalise: &str) -> String {
    format!(
        "  - {{ type: subtract_background }}
  - {dead_time}
  - {{ type: compute_kinematics }}
  - {{ type: apply_efficiency }}
  - {{ type: compute_solid_angle }}
  - {normalise}
  - {{ type: compute_lab_cross_section }}
  - {{ type: transform_to_cm, rutherford: non_relativistic }}
"
    )
}

/// A `raw:` section for spectra: `gain` MeV per channel over 4096 channels, resolution σ.
fn raw(gain_mev_per_channel: f64, resolution_mev: f64, background: &str) -> String {
    format!(
        "raw:
  columns: {{ detector: det, energy: adc }}
  spectrum_columns: {{ detector: det, channel: ch, counts: n }}
  overflow_channel: 4096
  calibration: {{ all: {{ offset_mev: 0.0, gain_mev_per_channel: {gain_mev_per_channel} }} }}
  gates: {{ resolution_mev: {resolution_mev} }}
  background: {background}
"
    )
}

fn run(dir: &Path, args: &[&str]) {
    let out = xsflow(dir, args);
    assert_eq!(out.status.code(), Some(0), "{args:?}: {}", text(&out));
}

/// Simulate, reduce, combine and fit every seed of `case`; the pulls.
fn pulls(case: &Case) -> Pulls {
    let tmp = tempfile::tempdir().expect("scratch");
    let dir = tmp.path();
    std::fs::write(dir.join("experiment.yaml"), &case.config).expect("config");
    std::fs::write(dir.join("truth.yaml"), &case.truth).expect("truth");
    let curve = xsflow(dir, &["theory", "truth.yaml", "--angles", "0.25:179.75:0.25", "--format", "csv"]);
    assert_eq!(curve.status.code(), Some(0), "{}", text(&curve));
    std::fs::write(dir.join("shape.csv"), &curve.stdout).expect("curve");
    std::fs::write(dir.join("shape-fit.yaml"), format!("model: curve\nfile: shape.csv\n{}", case.fit))
        .expect("fit file");
    let mut pulls = Pulls::default();
    let runs = case.runs.to_string();
    for seed in 1..=case.seeds {
        let (sim, red) = (format!("sim{seed}"), format!("red{seed}"));
        let seed_text = seed.to_string();
        let args = ["simulate", "experiment.yaml", "--truth", "truth.yaml", "--out", &sim, "--seed", &seed_text];
        run(dir, &[&args[..], &["--runs", &runs], case.simulate].concat());
        run(dir, &["reduce", &format!("{sim}/experiment.yaml"), "--out", &red, "-q"]);
        let truth = parquet(&dir.join(&sim).join("truth.parquet"));
        let key = |df: &polars::prelude::DataFrame, i: usize| {
            ["run", "detector", "state", "branch"].map(|c| strings(df, c)[i].clone()).join("/")
        };
        let truth_rows: HashMap<String, usize> = (0..truth.height()).map(|i| (key(&truth, i), i)).collect();
        let truth_cm = numbers(&truth, "dsdo_cm_mb_sr");
        let mut rows = 0;
        let mut norm_rel_err2 = 0.0;
        for r in 1..=case.runs {
            let reduced = parquet(&dir.join(&red).join(format!("sim{r:04}/cross_sections.parquet")));
            let (value, stat, norm) = (
                numbers(&reduced, "dsdo_cm_mb_sr"),
                numbers(&reduced, "stat_err_mb_sr"),
                numbers(&reduced, "norm_rel_err"),
            );
            norm_rel_err2 += norm[0].powi(2);
            let detectors = strings(&reduced, "detector");
            let mut run_pulls = Vec::new();
            for i in 0..reduced.height() {
                let t =
                    truth_rows.get(&key(&reduced, i)).unwrap_or_else(|| panic!("{}: a truth row", key(&reduced, i)));
                rows += 1;
                if case.monitors.contains(&detectors[i].as_str()) {
                    continue;
                }
                let err = stat[i].hypot(norm[i] * value[i]);
                run_pulls.push((value[i] - truth_cm[*t]) / err);
            }
            pulls.runs.push(run_pulls);
        }
        assert_eq!(rows, truth.height(), "{}: seed {seed}: every simulated peak has its reduced row", case.name);
        let fit: serde_json::Value =
            serde_json::from_slice(&std::fs::read(dir.join(&red).join("fits/shape/fit.json")).expect("fit.json"))
                .expect("fit json");
        assert_eq!(fit["converged"], true, "{}: seed {seed}: {fit}", case.name);
        let p = &fit["parameters"][0];
        assert_eq!(p["name"], "normalisation");
        let (n, u) = (p["value"].as_f64().expect("value"), p["error"].as_f64().expect("error"));
        // A free normalisation takes up the runs' own normalisations (dead time, monitor),
        // independent between runs: their mean's error √(Σ ν_r²)/R adds to the fit's.
        let norm_err = norm_rel_err2.sqrt() / f64::from(case.runs);
        pulls.fits.push((n - 1.0) / u.hypot(norm_err));
    }
    pulls
}

fn assert_closes(case: &Case) {
    let p = pulls(case);
    let rows: Vec<f64> = p.runs.concat();
    let (mean, _, width) = moments(&rows);
    // The standard error of the mean from the runs' mean pulls: a run's rows share its
    // normalisation, so they are not independent (with equal rows per run the mean of the
    // run means is the mean of the rows).
    let run_means: Vec<f64> = p.runs.iter().map(|r| r.iter().sum::<f64>() / r.len() as f64).collect();
    let (_, se, _) = moments(&run_means);
    let (fit_mean, fit_se, fit_width) = moments(&p.fits);
    let k = p.fits.len() as f64;
    // Printed for the record (cargo test closure_chain -- --nocapture).
    println!(
        "{}: {} row pulls, mean {mean:.3} ± {se:.3}, width {width:.3}; {} fits, pull mean {fit_mean:.3} ± {fit_se:.3}, width {fit_width:.3}",
        case.name,
        rows.len(),
        p.fits.len()
    );
    // Issue 14: mean within 3 standard errors of 0, width within 10 % of 1.
    assert!(mean.abs() < 3.0 * se, "{}: row pull mean {mean} ± {se}", case.name);
    assert!((width - 1.0).abs() < 0.1, "{}: row pull width {width}", case.name);
    // Each fit within 4 of its errors (6e-5 per fit for a normal pull); mean and width
    // within 3 of their standard errors, 1/√K and 1/√(2(K − 1)).
    assert!(p.fits.iter().all(|f| f.abs() < 4.0), "{}: fit pulls {:?}", case.name, p.fits);
    assert!(fit_mean.abs() < 3.0 / k.sqrt(), "{}: fit pull mean {fit_mean}", case.name);
    assert!((fit_width - 1.0).abs() < 3.0 / (2.0 * (k - 1.0)).sqrt(), "{}: fit pull width {fit_width}", case.name);
}

/// 24 MeV 4He on 58Ni (invented numbers), four detectors, the elastic state.
fn alpha_nickel(normalise: &str, dead_time: &str, extra_detector: &str) -> String {
    config(
        &format!(
            "reaction: {{ beam: 4He, target: 58Ni, energy_mev: 24.0, beam_charge_state: 2, states: [{{ name: elastic }}] }}
target: {{ areal_density_ug_cm2: 200.0, molar_mass_g_mol: 57.9353, isotopic_fraction: 0.99, tilt_deg: 10.0 }}
detectors:
{extra_detector}  - {{ id: D30, theta_lab_deg: 30.0, distance_mm: 200.0, aperture: {{ shape: circle, radius_mm: 2.5 }} }}
  - {{ id: D45, theta_lab_deg: 45.0, distance_mm: 150.0, aperture: {{ shape: circle, radius_mm: 2.5 }}, efficiency: 0.98 }}
  - {{ id: D60, theta_lab_deg: 60.0, distance_mm: 120.0, aperture: {{ shape: rectangle, half_width_mm: 2.0, half_height_mm: 2.5 }} }}
  - {{ id: D75, theta_lab_deg: 75.0, distance_mm: 100.0, aperture: {{ shape: circle, radius_mm: 3.0 }} }}
"
        ),
        &stages(dead_time, normalise),
        &raw(0.01, 0.08, "side_bands"),
    )
}

const ALPHA_NICKEL_TRUTH: &str = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";
const CLOCKS: &str = "{ type: correct_dead_time, method: clock_ratio }";
const ABSOLUTE: &str = "{ type: normalise }";

/// Plain elastic scattering, side-band background, clock-ratio dead time.
#[test]
fn plain_elastic_closes_through_the_chain() {
    assert_closes(&Case::new("plain elastic", alpha_nickel(ABSOLUTE, CLOCKS, ""), ALPHA_NICKEL_TRUTH.into()));
}

/// 30 % dead time, paralyzable: 1e5 events in 10 s (n = 1e4/s) at τ = 35.667 µs,
/// f = e^(−nτ) = 0.700; the reduction finds n from the accepted triggers.
#[test]
fn strong_paralyzable_dead_time_closes_through_the_chain() {
    let dead_time = "{ type: correct_dead_time, method: paralyzable, resolving_time_us: 35.667 }";
    assert_closes(&Case {
        simulate: &["--data", "spectra", "--events", "1e5", "--real-time-s", "10"],
        ..Case::new("strong dead time", alpha_nickel(ABSOLUTE, dead_time, ""), ALPHA_NICKEL_TRUTH.into())
    });
}

/// Normalised to a Rutherford monitor at 15° (its counts about 30 times the others'),
/// in the truth's convention (the model file's Rutherford is non-relativistic).
#[test]
fn a_monitor_normalised_run_closes_through_the_chain() {
    let normalise = "{ type: normalise, mode: monitor, monitor_detectors: [M15], rutherford: non_relativistic }";
    let monitor =
        "  - { id: M15, theta_lab_deg: 15.0, distance_mm: 200.0, aperture: { shape: circle, radius_mm: 2.5 } }\n";
    assert_closes(&Case {
        simulate: &["--data", "spectra", "--events", "1e6"],
        monitors: &["M15"],
        // The monitor's own point (16° CM) is left out of the fit: its value is Rutherford
        // by definition, and its counting error would pin the normalisation.
        fit: "fit: { theta_cm_range_deg: [20.0, 180.0] }\n",
        ..Case::new("monitor normalisation", alpha_nickel(normalise, CLOCKS, monitor), ALPHA_NICKEL_TRUTH.into())
    });
}

/// An absolutely normalised case: `reaction` and `target` lines, detectors with circular
/// apertures (id, θ_lab in degrees, distance and radius in mm), the calibration's gain and
/// the resolution in MeV; the truth is Rutherford scattering of the reaction.
fn absolute_case(
    name: &'static str,
    (reaction, target): (&str, &str),
    detectors: &[(&str, f64, f64, f64)],
    (gain_mev_per_channel, resolution_mev): (f64, f64),
) -> Case {
    let lines: String = detectors
        .iter()
        .map(|(id, theta, d, r)| {
            format!("  - {{ id: {id}, theta_lab_deg: {theta}, distance_mm: {d}, aperture: {{ shape: circle, radius_mm: {r} }} }}\n")
        })
        .collect();
    let head = format!(
        "reaction: {{ {reaction}, states: [{{ name: elastic }}] }}\ntarget: {{ {target} }}\ndetectors:\n{lines}"
    );
    let (beam, rest) = reaction.split_once(", target: ").expect("beam, then target");
    let (target_nuclide, rest) = rest.split_once(", ").expect("target, then energy");
    let energy = rest.split(',').next().expect("the energy first");
    let truth = format!("model: rutherford\nreaction: {{ {beam}, target: {target_nuclide}, {energy} }}\n");
    Case::new(
        name,
        config(&head, &stages(CLOCKS, ABSOLUTE), &raw(gain_mev_per_channel, resolution_mev, "side_bands")),
        truth,
    )
}

/// The 12C recoil of 24 MeV 4He on 12C (invented numbers) at four lab angles.
#[test]
fn recoil_detection_closes_through_the_chain() {
    assert_closes(&absolute_case(
        "recoil detection",
        (
            "beam: 4He, target: 12C, energy_mev: 24.0, beam_charge_state: 2, detect: recoil",
            "areal_density_ug_cm2: 50.0, molar_mass_g_mol: 12.0",
        ),
        &[("R20", 20.0, 200.0, 2.5), ("R30", 30.0, 200.0, 2.5), ("R40", 40.0, 150.0, 2.5), ("R50", 50.0, 150.0, 2.5)],
        (0.01, 0.08),
    ));
}

/// 60 MeV 28Si on 12C (invented numbers): both kinematic solutions at 10°, 15° and 20°
/// (the largest lab angle is arcsin(12/28) = 25.4°).
#[test]
fn a_double_valued_lab_angle_closes_through_the_chain() {
    assert_closes(&absolute_case(
        "double-valued lab angle",
        (
            "beam: 28Si, target: 12C, energy_mev: 60.0, beam_charge_state: 8",
            "areal_density_ug_cm2: 40.0, molar_mass_g_mol: 12.0",
        ),
        &[("F10", 10.0, 400.0, 2.0), ("F15", 15.0, 400.0, 2.0), ("F20", 20.0, 400.0, 2.0)],
        (0.02, 0.15),
    ));
}

/// Impurities of the foil next to the elastic peak: 20 µg/cm² of 16O and 10 µg/cm² of 12C
/// on 200 µg/cm² of 58Ni, peak-fit background. `detectors` (id, θ_lab) at 150 mm with
/// 2.5 mm apertures.
fn contaminated(detectors: &[(&str, f64)]) -> Case {
    let lines: String = detectors
        .iter()
        .map(|(id, theta)| {
            format!("  - {{ id: {id}, theta_lab_deg: {theta}, distance_mm: 150.0, aperture: {{ shape: circle, radius_mm: 2.5 }} }}\n")
        })
        .collect();
    let head = format!(
        "reaction: {{ beam: 4He, target: 58Ni, energy_mev: 24.0, beam_charge_state: 2, states: [{{ name: elastic }}] }}
target: {{ areal_density_ug_cm2: 200.0, molar_mass_g_mol: 57.9353, contaminants: [{{ nuclide: 16O, areal_density_ug_cm2: 20.0 }}, {{ nuclide: 12C, areal_density_ug_cm2: 10.0 }}] }}
detectors:
{lines}"
    );
    Case::new(
        "contaminant peaks",
        config(&head, &stages(CLOCKS, ABSOLUTE), &raw(0.01, 0.08, "peak_fit_linear")),
        ALPHA_NICKEL_TRUTH.into(),
    )
}

/// The 16O peak 0.52, 0.80, 1.13 and 1.91 MeV (6.5, 10, 14 and 24 σ) below the elastic one
/// at 20°, 25°, 30° and 40°, the 12C peak further: at 20° inside the peak fit's region
/// (window and side bands, ±7 σ), where the fit takes it as a peak of no state, elsewhere
/// beside it.
#[test]
fn contaminant_peaks_next_to_the_elastic_one_close_through_the_chain() {
    assert_closes(&contaminated(&[("D20", 20.0), ("D25", 25.0), ("D30", 30.0), ("D40", 40.0)]));
}
