//! `xsflow beamtime` (issue 14, item 3): its rates are the ones `xsflow simulate` draws
//! from, every arm setting of the run records is planned, a high rate is warned of, and
//! bad requests name the flag or file.

use std::path::Path;

use crate::common::{demo_copy, numbers, parquet, text, xsflow};
// 24 MeV 4He on 58Ni, three detectors, elastic and 2+ states, a `raw:` section.
use crate::simulate::CONFIG;

const RUTHERFORD: &str = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";

fn scratch() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("scratch");
    std::fs::write(tmp.path().join("experiment.yaml"), CONFIG).expect("config");
    std::fs::write(tmp.path().join("rutherford.yaml"), RUTHERFORD).expect("model");
    tmp
}

/// The 2+ state's truth, the same for `simulate` and `beamtime`.
const STATE_TRUTH: [&str; 2] = ["--state-truth", "2+_1.454=2.5"];

fn plan_json(dir: &Path, args: &[&str]) -> serde_json::Value {
    let out = xsflow(dir, &[&["beamtime"], args, &["--format", "json"]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    serde_json::from_slice(&out.stdout).expect("json")
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("a number: {v}"))
}

#[test]
fn the_planned_rates_are_those_simulate_draws_from() {
    let tmp = scratch();
    let dir = tmp.path();
    let args = ["simulate", "experiment.yaml", "--truth", "rutherford.yaml", "--out", "sim", "--data", "spectra"];
    let out = xsflow(dir, &[&args[..], &STATE_TRUTH, &["--events", "1e6", "--real-time-s", "1000"]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let truth = parquet(&dir.join("sim/truth.parquet"));
    // The current of the simulated run: its charge over its 1000 s.
    let current_na = numbers(&truth, "charge_c")[0] / 1000.0 * 1e9;
    let current = current_na.to_string();
    let args = ["experiment.yaml", "--truth", "rutherford.yaml", "--current-na", &current, "--precision", "0.01"];
    let plan = plan_json(dir, &[&args[..], &STATE_TRUTH].concat());
    let setting = &plan["settings"][0];
    // The same events arrive (1e6 in 1000 s, background included), so the same live
    // fraction; each peak's recorded counts in 1000 s are its expected counts in the truth.
    // 1e-9: the current goes through its decimal text (17 digits) and a few products.
    approx::assert_relative_eq!(f(&setting["total_rate_per_s"]), 1000.0, max_relative = 1e-9);
    let live = f(&setting["live_fraction"]);
    approx::assert_relative_eq!(live, numbers(&truth, "live_fraction")[0], max_relative = 1e-9);
    let expected = numbers(&truth, "counts_expected");
    let peaks = setting["peaks"].as_array().expect("peaks");
    assert_eq!(peaks.len(), expected.len());
    for (peak, counts) in peaks.iter().zip(expected) {
        approx::assert_relative_eq!(f(&peak["rate_per_s"]) * 1000.0 * live, counts, max_relative = 1e-9);
    }
}

#[test]
fn every_arm_setting_is_planned_and_the_longest_limits() {
    // The demo's runs: three with the arm at 50° (the config's angles), one at 55°.
    let tmp = demo_copy();
    let dir = tmp.path();
    std::fs::write(dir.join("rutherford.yaml"), RUTHERFORD).expect("model");
    let plan = plan_json(
        dir,
        &[
            "experiment.yaml",
            "--truth",
            "rutherford.yaml",
            "--state-truth",
            "2+_1.454=5.0",
            "--current-na",
            "20",
            "--precision",
            "0.02",
        ],
    );
    let settings = plan["settings"].as_array().expect("settings");
    let names: Vec<&str> = settings.iter().map(|s| s["setting"].as_str().expect("name")).collect();
    assert_eq!(names, ["nominal", "left=55°"]);
    let hours: Vec<f64> = settings.iter().map(|s| f(&s["hours"])).collect();
    // 1e-12: a sum of two numbers.
    approx::assert_relative_eq!(f(&plan["total_hours"]), hours[0] + hours[1], max_relative = 1e-12);
    let longest = if hours[0] >= hours[1] { names[0] } else { names[1] };
    assert_eq!(plan["limiting_setting"], longest);
    for s in settings {
        let live = f(&s["live_fraction"]);
        let peaks = s["peaks"].as_array().expect("peaks");
        assert_eq!(peaks.len(), 12 * 2, "twelve detectors, two states");
        for p in peaks {
            // No raw section, no background: N = 1/P² = 2500 recorded counts, t = N/(f s).
            // 1e-12: a product and a division.
            approx::assert_relative_eq!(f(&p["counts_needed"]), 2500.0, max_relative = 1e-12);
            let t_h = 2500.0 / (live * f(&p["rate_per_s"])) / 3600.0;
            approx::assert_relative_eq!(f(&p["hours"]), t_h, max_relative = 1e-12);
        }
        assert!(peaks.iter().all(|p| f(&p["hours"]) <= f(&s["hours"]) * (1.0 + 1e-12)));
    }
}

#[test]
fn a_dead_time_above_the_limit_is_warned_of() {
    let tmp = scratch();
    // (current nA, warned?) At the default 2 µs (non-paralyzable) the acquisition is 10 %
    // dead near 5.6e4 events/s; 10 nA makes about 100 events/s.
    for (current, warned) in [("10", false), ("1e5", true)] {
        let args = ["beamtime", "experiment.yaml", "--truth", "rutherford.yaml", "--precision", "0.01"];
        let out = xsflow(tmp.path(), &[&args[..], &STATE_TRUTH, &["--current-na", current]].concat());
        assert_eq!(out.status.code(), Some(0), "{}", text(&out));
        let said = text(&out);
        assert_eq!(said.contains("warning: setting nominal: dead time"), warned, "{current} nA: {said}");
        assert!(said.contains("total: "), "{said}");
    }
}

#[test]
fn bad_requests_name_the_flag_or_file_and_what_is_accepted() {
    let tmp = scratch();
    std::fs::write(
        tmp.path().join("other-energy.yaml"),
        "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 30.0 }\n",
    )
    .expect("model");
    // (truth, current, precision, what stderr must contain)
    let cases = [
        ("rutherford.yaml", "0", "0.01", "--current-na: found 0, expected a finite number > 0"),
        ("rutherford.yaml", "10", "1.5", "--precision: found 1.5, expected a relative precision in (0, 1)"),
        ("other-energy.yaml", "10", "0.01", "found 30, expected 24 MeV"),
    ];
    for (truth, current, precision, wanted) in cases {
        let args = ["beamtime", "experiment.yaml", "--truth", truth, "--current-na", current, "--precision", precision];
        let out = xsflow(tmp.path(), &[&args[..], &STATE_TRUTH].concat());
        assert_eq!(out.status.code(), Some(2), "{}", text(&out));
        assert!(text(&out).contains(wanted), "{wanted:?} not in {}", text(&out));
    }
    // A state the config lacks is blamed on this command's flag, not on `simulate`'s.
    let args =
        ["beamtime", "experiment.yaml", "--truth", "rutherford.yaml", "--current-na", "10", "--precision", "0.01"];
    let out = xsflow(tmp.path(), &[&args[..], &["--state-truth", "3-_9.9=1.0"]].concat());
    assert_eq!(out.status.code(), Some(2), "{}", text(&out));
    assert!(text(&out).contains("xsflow beamtime --state-truth: found 3-_9.9=1.0"), "{}", text(&out));
}
