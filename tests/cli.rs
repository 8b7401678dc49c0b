//! The command line itself: help, exit codes, machine-readable output.

use crate::common::{demo_dir, repo_root, text, xsflow};

/// Every verb, from the clap definition itself, so the list cannot drift: the top-level
/// help names it, and its own `--help` exits 0, shows its usage and describes every
/// argument (issue 11: three of the verbs were checked before).
#[test]
fn help_lists_every_verb_and_each_verb_describes_its_arguments() {
    use clap::CommandFactory;
    let cli = xsflow::cli::Cli::command();
    let verbs: Vec<&clap::Command> = cli.get_subcommands().filter(|c| c.get_name() != "help").collect();
    assert!(verbs.len() >= 9, "{} verbs", verbs.len());
    let top = xsflow(&repo_root(), &["--help"]);
    assert_eq!(top.status.code(), Some(0));
    for verb in &verbs {
        let name = verb.get_name();
        assert!(text(&top).contains(name), "help lacks {name}: {}", text(&top));
        assert!(verb.get_about().is_some(), "{name} has no description");
        for arg in verb.get_arguments().filter(|a| !["help", "version"].contains(&a.get_id().as_str())) {
            assert!(arg.get_help().is_some(), "{name} {} has no help text", arg.get_id());
        }
        let out = xsflow(&repo_root(), &[name, "--help"]);
        assert_eq!(out.status.code(), Some(0), "{name} --help");
        assert!(text(&out).contains(&format!("Usage: xsflow {name}")), "{name} --help:\n{}", text(&out));
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
