//! The command line itself: help, exit codes, machine-readable output.

use crate::common::{demo_dir, repo_root, text, xsflow};

#[test]
fn help_lists_every_verb_and_exits_zero() {
    let out = xsflow(&repo_root(), &["--help"]);
    assert_eq!(out.status.code(), Some(0));
    for verb in ["check", "reduce", "schema"] {
        assert!(text(&out).contains(verb), "help lacks {verb}: {}", text(&out));
    }
    for verb in ["check", "reduce", "schema"] {
        assert_eq!(xsflow(&repo_root(), &[verb, "--help"]).status.code(), Some(0), "{verb} --help");
    }
}

#[test]
fn bad_command_line_exits_two() {
    assert_eq!(xsflow(&repo_root(), &["reduce"]).status.code(), Some(2));
    assert_eq!(xsflow(&repo_root(), &["frobnicate"]).status.code(), Some(2));
    assert_eq!(xsflow(&repo_root(), &["schema", "nonsense"]).status.code(), Some(2));
}

#[test]
fn schema_and_check_print_json() {
    let out = xsflow(&repo_root(), &["schema", "run"]);
    assert_eq!(out.status.code(), Some(0));
    let schema: serde_json::Value = serde_json::from_slice(&out.stdout).expect("schema is JSON");
    assert!(schema["properties"]["charge_c"].is_object());

    let config = demo_dir().join("experiment.yaml");
    let out = xsflow(&repo_root(), &["check", config.to_str().expect("utf-8 path"), "--format", "json"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("check report is JSON");
    assert_eq!(report["config"].as_array().map(Vec::len), Some(0));
    assert_eq!(report["runs"].as_array().map(Vec::len), Some(0));
}

#[test]
fn unknown_run_id_is_a_command_line_error() {
    let tmp = crate::common::demo_copy();
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--run", "9999", "--out", "out"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out).contains("--run 9999: no such run; runs found: 0101, 0102, 0103"), "{}", text(&out));
    assert!(!tmp.path().join("out").exists());
}
