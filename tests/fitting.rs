//! `xsflow fit` and `xsflow theory` on bad input, and a fit that does not converge: clear
//! errors that name the file, the key and what is accepted; a non-converged fit says so.

use std::path::Path;

use crate::common::{demo_dir, repo_root, text, xsflow};

/// Write `body` as a fit (or model) file in a scratch folder; returns the folder.
fn scratch(name: &str, body: &str) -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("scratch");
    std::fs::write(tmp.path().join(name), body).expect("write");
    tmp
}

fn fit(dir: &Path, file: &str, state: &str) -> std::process::Output {
    let data = demo_dir().join("expected");
    let data = data.to_string_lossy();
    xsflow(dir, &["fit", &data, file, "--state", state, "--out", "out"])
}

const OPTICAL: &str = "model: optical
reaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }
potential:
  real:         { depth_mev: 150.0, r0_fm: 1.20, a_fm: 0.60 }
  imag_volume:  { depth_mev: 20.0,  r0_fm: 1.40, a_fm: 0.50 }
  coulomb:      { r0_fm: 1.30 }
free:
  real.depth_mev: { min: 20.0, max: 400.0 }
";

#[test]
fn theory_with_a_negative_diffuseness_names_the_key() {
    let body = OPTICAL.replace("a_fm: 0.60", "a_fm: -0.60");
    let tmp = scratch("m.yaml", body.split("free:").next().expect("head"));
    let out = xsflow(tmp.path(), &["theory", "m.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("m.yaml:4:") && msg.contains("potential.real.a_fm: found -0.6, expected"), "{msg}");
}

#[test]
fn theory_of_a_nucleon_beam_prints_the_analyzing_power() {
    // The proton demo model (invented parameters): `analyzing_power` beside dσ/dΩ in JSON,
    // CSV and the table, within [−1, 1]; an alpha beam has none; spin_orbit with an alpha
    // beam is refused naming the key and the beam.
    let model = repo_root().join("sample-runs/proton-ni58/theory-optical.yaml");
    let model = model.to_string_lossy();
    let tmp = tempfile::tempdir().expect("scratch");
    let out = xsflow(tmp.path(), &["theory", &model, "--angles", "10:170:20", "--format", "json"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json");
    let rows = json["rows"].as_array().expect("rows");
    assert_eq!(rows.len(), 9);
    for r in rows {
        let ay = r["analyzing_power"].as_f64().expect("analyzing_power");
        assert!(ay.abs() <= 1.0 && r["dsdo_cm_mb_sr"].as_f64().is_some(), "{r}");
    }
    let csv = xsflow(tmp.path(), &["theory", &model, "--angles", "30", "--format", "csv"]);
    let csv = String::from_utf8_lossy(&csv.stdout).to_string();
    assert!(csv.starts_with("theta_cm_deg,dsdo_cm_mb_sr,ratio_rutherford,analyzing_power\n"), "{csv}");
    let table = text(&xsflow(tmp.path(), &["theory", &model, "--angles", "30"]));
    assert!(table.contains("analyzing_power"), "{table}");
    let alpha =
        xsflow(tmp.path(), &["theory", &demo_dir().join("theory-optical.yaml").to_string_lossy(), "--format", "csv"]);
    assert!(!String::from_utf8_lossy(&alpha.stdout).contains("analyzing_power"));
    let body = std::fs::read_to_string(repo_root().join("sample-runs/proton-ni58/theory-optical.yaml"))
        .expect("model")
        .replace("beam: p,", "beam: 4He,");
    let tmp = scratch("m.yaml", &body);
    let out = xsflow(tmp.path(), &["theory", "m.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("potential.spin_orbit: found a spin-orbit term for the beam 4He"), "{msg}");
}

#[test]
fn fit_with_a_zero_radius_or_bounds_that_exclude_the_start_is_refused() {
    let tmp = scratch("f.yaml", &OPTICAL.replace("r0_fm: 1.40", "r0_fm: 0.0").replace("min: 20.0", "min: 200.0"));
    let out = fit(tmp.path(), "f.yaml", "elastic");
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("potential.imag_volume.r0_fm: found 0, expected"), "{msg}");
    assert!(msg.contains("free.real.depth_mev: found start 150 (from potential) outside [200, 400]"), "{msg}");
    assert!(!tmp.path().join("out").exists(), "nothing is written for a bad fit file");
}

#[test]
fn unknown_free_parameter_lists_the_accepted_keys() {
    let tmp = scratch("f.yaml", &OPTICAL.replace("real.depth_mev: {", "real.depht_mev: {"));
    let msg = text(&fit(tmp.path(), "f.yaml", "elastic"));
    assert!(msg.contains("free.real.depht_mev") && msg.contains("one of real.depth_mev, real.r0_fm"), "{msg}");
}

#[test]
fn theory_curve_with_unsorted_or_duplicate_angles_is_refused_with_its_line() {
    for (rows, word) in [("10,5.0\n30,2.0\n20,3.0\n", "unsorted"), ("10,5.0\n20,3.0\n20,2.0\n", "duplicate")] {
        let tmp = scratch("f.yaml", "model: curve\nfile: curve.csv\n");
        std::fs::write(tmp.path().join("curve.csv"), format!("theta_cm_deg,dsdo_cm_mb_sr\n{rows}")).expect("curve");
        let out = fit(tmp.path(), "f.yaml", "elastic");
        let msg = text(&out);
        assert_eq!(out.status.code(), Some(2), "{msg}");
        assert!(msg.contains("curve.csv:4:1 row 2.theta_cm_deg") && msg.contains(word), "{msg}");
        assert!(msg.contains("expected strictly increasing angles"), "{msg}");
    }
}

#[test]
fn more_free_parameters_than_points_is_refused() {
    // 48 elastic points in the demo (four runs, twelve detectors); a Legendre series of
    // order 50 has 51 coefficients.
    let tmp = scratch("f.yaml", "model: legendre\norder: 50\n");
    let out = fit(tmp.path(), "f.yaml", "elastic");
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("51 free parameters but only 48 data points"), "{msg}");
}

#[test]
fn a_fit_that_does_not_converge_says_so_and_exits_1() {
    let body = format!("{OPTICAL}  real.a_fm: {{}}\nfit: {{ max_iterations: 1 }}\n")
        .replace("depth_mev: 150.0", "depth_mev: 60.0");
    let tmp = scratch("f.yaml", &body);
    let out = fit(tmp.path(), "f.yaml", "elastic");
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(1), "{msg}");
    assert!(msg.contains("did NOT converge (IterationLimit)"), "{msg}");
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(tmp.path().join("out/fit.json")).expect("written"))
            .expect("json");
    assert_eq!(report["converged"], false);
    assert_eq!(report["termination"], "IterationLimit");
    let warnings = report["warnings"].as_array().expect("warnings");
    assert!(warnings.iter().any(|w| w.as_str().is_some_and(|w| w.contains("not a result"))), "{report}");
}

#[test]
fn fit_of_the_demo_writes_its_report_and_curve() {
    // The Rutherford fit of all elastic points of the demo converges (with a large χ²); the
    // curve table spans the data and its ratio to Rutherford is the fitted normalisation.
    let tmp = tempfile::tempdir().expect("scratch");
    let model = repo_root().join("sample-runs/alpha-ni58/fits/elastic-rutherford.yaml");
    let data = demo_dir().join("expected");
    let out = xsflow(
        tmp.path(),
        &[
            "fit",
            &data.to_string_lossy(),
            &model.to_string_lossy(),
            "--state",
            "elastic",
            "--out",
            "out",
            "--format",
            "json",
        ],
    );
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json on stdout");
    let nu = report["parameters"][0]["value"].as_f64().expect("normalisation");
    assert_eq!(report["parameters"][0]["name"], "normalisation");
    let curve = std::fs::read_to_string(tmp.path().join("out/curve.csv")).expect("curve");
    let first = curve.lines().nth(1).expect("row");
    let ratio: f64 = first.split(',').nth(2).expect("ratio").parse().expect("number");
    // 1e-12: the curve is ν times Rutherford divided by the same Rutherford, two roundings,
    // written with round-trip digits.
    assert!((ratio / nu - 1.0).abs() < 1e-12, "{ratio} vs {nu}");
    for f in ["fit.yaml", "fit.json", "curve.parquet"] {
        assert!(tmp.path().join("out").join(f).is_file(), "{f}");
    }
}
