//! Bad input: each case plants one mistake in a scratch copy of the demo, and checks the
//! message (file, place, value, what is accepted) and that nothing was written for it.

use std::path::Path;

use crate::common::{demo_copy, edit, files_below, text, xsflow};

/// Reduce the scratch demo; returns exit code and everything printed.
fn reduce(dir: &Path) -> (Option<i32>, String) {
    let out = xsflow(dir, &["reduce", "experiment.yaml", "--out", "out"]);
    (out.status.code(), text(&out))
}

/// A config mistake: exit 2, the message, and no output folder at all.
fn assert_config_error(edit_from: &str, edit_to: &str, expected: &[&str]) {
    let tmp = demo_copy();
    edit(&tmp.path().join("experiment.yaml"), edit_from, edit_to);
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(2), "{msg}");
    for e in expected {
        assert!(msg.contains(e), "expected {e:?} in:\n{msg}");
    }
    assert!(files_below(&tmp.path().join("out")).is_empty(), "a config error wrote outputs");
}

/// A mistake in run 0101's files: exit 1, the message, nothing written for 0101, and the
/// other three runs reduced.
fn assert_run_error(file: &str, edit_from: &str, edit_to: &str, expected: &[&str]) {
    let tmp = demo_copy();
    edit(&tmp.path().join("runs").join(file), edit_from, edit_to);
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(1), "{msg}");
    for e in expected {
        assert!(msg.contains(e), "expected {e:?} in:\n{msg}");
    }
    assert!(!tmp.path().join("out/0101").exists(), "the bad run wrote outputs");
    for good in ["0102", "0103", "0104"] {
        assert_eq!(files_below(&tmp.path().join("out").join(good)).len(), 3, "run {good} was not reduced: {msg}");
    }
    assert!(msg.contains("3 run(s) reduced, 1 failed"), "{msg}");
}

#[test]
fn unknown_key_gets_the_closest_valid_one() {
    assert_run_error(
        "run0101.run.yaml",
        "live_time_s:",
        "live_tme_s:",
        &["run0101.run.yaml:5:1 live_tme_s: unknown field `live_tme_s`", "did you mean `live_time_s`?"],
    );
}

#[test]
fn wrong_type_names_the_key_and_the_value() {
    assert_config_error(
        "energy_mev: 24.0",
        "energy_mev: fast",
        &["experiment.yaml:13:3 reaction.energy_mev: invalid type: string \"fast\", expected f64"],
    );
}

#[test]
fn negative_thickness_is_refused() {
    assert_config_error(
        "areal_density_ug_cm2: 210.0",
        "areal_density_ug_cm2: -210.0",
        &["experiment.yaml:21:3 target.areal_density_ug_cm2: found -210, expected a finite number > 0"],
    );
}

#[test]
fn live_time_longer_than_real_time_is_refused() {
    assert_run_error(
        "run0101.run.yaml",
        "live_time_s: 3421.0",
        "live_time_s: 3700.0",
        &["run0101.run.yaml:5:1 live_time_s: found 3700, expected at most real_time_s = 3600"],
    );
}

#[test]
fn zero_charge_is_refused() {
    assert_run_error(
        "run0101.run.yaml",
        "charge_c: 2.0000e-05",
        "charge_c: 0",
        &["run0101.run.yaml:4:1 charge_c: found 0, expected a finite number > 0"],
    );
}

#[test]
fn missing_run_files_are_named() {
    assert_run_error(
        "run0101.run.yaml",
        "yields_file: run0101.yields.csv",
        "yields_file: run0101.yields.cvs",
        &["yields_file: found run0101.yields.cvs, expected an existing yields table (not found:"],
    );
    assert_config_error(
        "  - runs/*.run.yaml",
        "  - runs/run0999.run.yaml",
        &["runs[0]: found runs/run0999.run.yaml, expected an existing run record file (not found:"],
    );
    assert_config_error(
        "  - runs/*.run.yaml",
        "  - runs/*.rec.yaml",
        &["runs[0]: found runs/*.rec.yaml, expected a pattern that matches at least one run record"],
    );
}

#[test]
fn yields_table_missing_a_column_lists_the_columns_found() {
    assert_run_error(
        "run0101.yields.csv",
        "detector,state,counts_gross,",
        "detector,state,counts,",
        &["run0101.yields.csv", "column `counts_gross` is missing; columns found: detector, state, counts, counts_background, counts_background_err, peak_energy_lab_mev"],
    );
}

#[test]
fn nan_counts_are_refused_with_their_line() {
    assert_run_error(
        "run0101.yields.csv",
        "D01,2+_1.454,16079,",
        "D01,2+_1.454,NaN,",
        &["run0101.yields.csv:3:1 data row 2, column `counts_gross`: found NaN, expected a finite number"],
    );
}

#[test]
fn negative_counts_are_refused_with_their_line() {
    assert_run_error(
        "run0101.yields.csv",
        "D02,elastic,34108,",
        "D02,elastic,-34108,",
        &["run0101.yields.csv:4:1 data row 3, column `counts_gross`: found -34108, expected a count >= 0"],
    );
}

#[test]
fn empty_count_cell_is_refused() {
    assert_run_error(
        "run0101.yields.csv",
        "D02,elastic,34108,",
        "D02,elastic,,",
        &["run0101.yields.csv:4:1 data row 3, column `counts_gross`: found an empty cell, expected a finite number"],
    );
}

/// Issue 11, defect 2: a branch other than 1 or 2 was read as 1 or 2 without a word.
#[test]
fn issue_11_a_branch_other_than_1_or_2_is_refused_with_its_line() {
    assert_run_error(
        "run0101.yields.csv",
        "peak_energy_lab_mev",
        "branch",
        &["run0101.yields.csv:2:1 data row 1, column `branch`: found 23.9566, expected branch 1 (the higher-energy solution) or 2"],
    );
}

#[test]
fn detector_unknown_to_the_config_is_refused() {
    assert_run_error(
        "run0101.yields.csv",
        "D02,elastic,",
        "D99,elastic,",
        &["run0101.yields.csv:4:1 data row 3: detector `D99` is not among the config's detectors (D01, D02,"],
    );
}

#[test]
fn paralyzable_rate_above_the_maximum_is_a_clear_error() {
    let tmp = demo_copy();
    edit(
        &tmp.path().join("experiment.yaml"),
        "method: clock_ratio",
        "method: paralyzable\n    resolving_time_us: 2000.0",
    );
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(1), "{msg}");
    assert!(msg.contains("exceeds the paralyzable model's maximum observable rate 1/(e·τ) = 183.939"), "{msg}");
    assert!(msg.contains("4 failed"), "{msg}");
    assert!(files_below(&tmp.path().join("out")).is_empty());
}

#[test]
fn a_run_that_turns_an_arm_the_config_does_not_have_or_too_far_is_refused_with_its_line() {
    assert_run_error(
        "run0101.run.yaml",
        "charge_c:",
        "arm_theta_lab_deg: { right: 60.0 }\ncharge_c:",
        &["run0101.run.yaml:4:22 arm_theta_lab_deg.right: found right, expected an arm of the config (left)"],
    );
    assert_run_error(
        "run0101.run.yaml",
        "charge_c:",
        "arm_theta_lab_deg: { left: 25.0 }\ncharge_c:",
        &["arm_theta_lab_deg.left: found 25, expected a setting that keeps the arm's detectors within (0, 180) \
           degrees (D01 would stand at -5)"],
    );
}

#[test]
fn a_live_clock_given_for_some_detectors_only_is_refused_naming_those_with_and_without() {
    assert_run_error(
        "run0101.run.yaml",
        "charge_c:",
        "detectors: { D01: { live_time_s: 3420.0 }, D02: { live_time_s: 2160.0 } }\ncharge_c:",
        &["run0101.run.yaml:4:1 detectors: found live_time_s given for D01, D02 and missing for D03, D04, D05, D06, \
           D07, D08, D09, D10, D11, D12, expected live_time_s for every detector of the config or for none (the \
           run's live_time_s then holds for all)"],
    );
}

#[test]
fn issue_18_bytes_that_are_not_utf8_are_refused_with_their_place() {
    // A Latin-1 "é" (0xe9) in a comment of the config, then in run 0101's record: both were
    // read as U+FFFD and accepted without a word.
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    let mut bytes = b"# caf\xe9\n".to_vec();
    bytes.extend(std::fs::read(&config).expect("config"));
    std::fs::write(&config, bytes).expect("config");
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("experiment.yaml:1:6 byte 0xe9 is not UTF-8 text") && msg.contains("save the file as UTF-8"),
        "{msg}"
    );
    assert!(files_below(&tmp.path().join("out")).is_empty(), "a config error wrote outputs");

    let tmp = demo_copy();
    let record = tmp.path().join("runs/run0101.run.yaml");
    let mut bytes = std::fs::read(&record).expect("record");
    bytes.extend(b"# \xff\n");
    std::fs::write(&record, bytes).expect("record");
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(1), "{msg}");
    assert!(msg.contains("run0101.run.yaml") && msg.contains("byte 0xff is not UTF-8 text"), "{msg}");
    assert!(msg.contains("3 run(s) reduced, 1 failed"), "{msg}");
}

#[test]
fn issue_18_background_beyond_the_gross_counts_is_reported() {
    // D01's 2+ row with a background of 20000 for 16079 gross counts: net −3921 ± 142, far
    // below −3 standard errors. The run is reduced (the row is kept) and the warning names
    // the row and the counts.
    let tmp = demo_copy();
    edit(
        &tmp.path().join("runs/run0101.yields.csv"),
        "D01,2+_1.454,16079,36.0,6.0000",
        "D01,2+_1.454,16079,20000.0,141.4",
    );
    let (code, msg) = reduce(tmp.path());
    assert_eq!(code, Some(0), "{msg}");
    assert!(
        msg.contains("background 20000 is more than the gross counts 16079")
            && msg.contains("detector=D01")
            && msg.contains("state=2+_1.454"),
        "{msg}"
    );
}
