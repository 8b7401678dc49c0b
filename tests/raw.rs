//! Raw data to yields: the list-mode demo against its expected output, tallies that add up
//! to the file's rows, a hand-counted synthetic event file, quoted CSV, the peak-fit
//! background, and bad input (missing or mistyped columns, corrupt files, broken CSV
//! records, empty files, bad gates and polygons).

use std::path::Path;

use crate::common::{demo_dir, edit, text, xsflow};

/// A scratch copy of the list-mode demo: config and listmode/ runs.
fn listmode_copy() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("scratch");
    let src = demo_dir();
    std::fs::copy(src.join("experiment-listmode.yaml"), tmp.path().join("experiment.yaml")).expect("config");
    std::fs::create_dir(tmp.path().join("listmode")).expect("folder");
    for e in std::fs::read_dir(src.join("listmode")).expect("runs").flatten() {
        std::fs::copy(e.path(), tmp.path().join("listmode").join(e.file_name())).expect("copy");
    }
    tmp
}

fn reduce(dir: &Path) -> std::process::Output {
    xsflow(dir, &["reduce", "experiment.yaml", "--out", "out"])
}

fn raw_json(dir: &Path, run: &str) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("out").join(run).join("raw.json")).expect("raw.json"))
        .expect("json")
}

#[test]
fn listmode_demo_reduces_to_its_expected_output_and_every_event_is_tallied() {
    let tmp = listmode_copy();
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    for run in ["0201", "0202", "0203"] {
        let got = std::fs::read_to_string(tmp.path().join("out").join(run).join("cross_sections.csv")).expect("out");
        let want = std::fs::read_to_string(demo_dir().join("expected-listmode").join(run).join("cross_sections.csv"))
            .expect("expected output committed");
        assert_eq!(got, want, "run {run}");
        for f in ["yields.csv", "raw.json", "spectra.parquet"] {
            assert!(tmp.path().join("out").join(run).join(f).is_file(), "{run}/{f}");
        }
    }
    // Tallies against the files themselves: Parquet rows, CSV lines, spectrum counts.
    let rows_parquet =
        xsflow::tables::read_table(&tmp.path().join("listmode/run0201.events.parquet")).expect("parquet").height();
    let csv_lines = std::fs::read_to_string(tmp.path().join("listmode/run0202.events.csv"))
        .expect("csv")
        .lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .count();
    for (run, rows) in [("0201", rows_parquet), ("0202", csv_lines)] {
        let t = &raw_json(tmp.path(), run)["tally"];
        let parts = ["unknown_detector", "invalid_value", "pile_up", "in_window", "in_side_band", "outside_gates"];
        let sum: u64 = parts.iter().map(|p| t[p].as_u64().expect("count")).sum();
        assert_eq!(t["events"].as_u64(), Some(rows as u64), "run {run}: {t}");
        assert_eq!(sum, rows as u64, "run {run}: {t}");
        assert!(t["unknown_detector"].as_u64() == Some(3) && t["invalid_value"].as_u64() == Some(5), "{t}");
        assert!(t["pile_up"].as_u64().expect("pile-up") > 0, "{t}");
    }
    // The PID polygon of D01 rejects the invented protons: a 2-D histogram is written.
    assert!(tmp.path().join("out/0201/pid.parquet").is_file());
}

/// A tiny config with one detector, for hand-counted events.
fn tiny(dir: &Path, raw_extra: &str, events_csv: &str) {
    one_detector(
        dir,
        "{ name: elastic, excitation_mev: 0.0 }",
        &format!(
            "  gates:
    resolution_mev: 0.1
    windows: [{{ detector: A, state: elastic, window_mev: [20.0, 21.0], left_mev: [19.0, 19.5], right_mev: [21.5, 22.0] }}]
{raw_extra}"
        ),
        events_csv,
    );
}

/// A config with one detector A at 30° (0.01 MeV per channel), the given `states` (YAML
/// list items) and the rest of its `raw:` section, run `t1` with its events.
fn one_detector(dir: &Path, states: &str, raw_rest: &str, events_csv: &str) {
    std::fs::write(
        dir.join("experiment.yaml"),
        format!(
            "experiment: {{ name: tiny }}
reaction: {{ beam: 4He, target: 58Ni, energy_mev: 24.0, beam_charge_state: 2, states: [{states}] }}
target: {{ areal_density_ug_cm2: 210.0, molar_mass_g_mol: 57.9353 }}
detectors:
  - {{ id: A, theta_lab_deg: 30.0, distance_mm: 200.0, aperture: {{ shape: circle, radius_mm: 2.5 }} }}
runs: [run.run.yaml]
stages:
  - type: subtract_background
raw:
  columns: {{ detector: det, energy: adc, pile_up: pu }}
  overflow_channel: 4096
  calibration:
    A: {{ offset_mev: 0.0, gain_mev_per_channel: 0.01 }}
{raw_rest}"
        ),
    )
    .expect("config");
    std::fs::write(dir.join("run.run.yaml"), "run: t1\nevents_file: events.csv\ncharge_c: 1.0e-6\n").expect("record");
    std::fs::write(dir.join("events.csv"), events_csv).expect("events");
}

#[test]
fn hand_counted_events_give_the_expected_yields_and_tallies() {
    // Window [20, 21) MeV = channels 2000..2099; side bands [19, 19.5) and [21.5, 22) MeV,
    // 1 MeV of side band for a 1 MeV window: background = side counts (worked by hand).
    // 4 events in the window, 3 in the side bands, 1 outside, 1 pile-up, 1 empty energy,
    // 1 overflow, 1 unknown detector: 12 rows.
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(
        tmp.path(),
        "",
        "det,adc,pu\nA,2000,0\nA,2050,0\nA,2099,0\nA,2050.5,0\nA,1900,0\nA,1949,0\nA,2150,0\nA,100,0\nA,2050,1\nA,,0\nA,5000,0\nB,2050,0\n",
    );
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let t = &raw_json(tmp.path(), "t1")["tally"];
    let want = [
        ("events", 12),
        ("in_window", 4),
        ("in_side_band", 3),
        ("outside_gates", 1),
        ("pile_up", 1),
        ("invalid_value", 2),
        ("unknown_detector", 1),
    ];
    for (k, v) in want {
        assert_eq!(t[k].as_u64(), Some(v), "{k}: {t}");
    }
    let yields = std::fs::read_to_string(tmp.path().join("out/t1/yields.csv")).expect("yields");
    let row: Vec<f64> =
        yields.lines().nth(1).expect("row").split(',').skip(3).map(|x| x.parse().expect("number")).collect();
    // 1e-12: whole counts and a background of 3 ± √3 from the side bands' counts times a
    // width ratio of 1, written with round-trip digits (a few roundings at most).
    assert!((row[0] - 4.0).abs() < 1e-12, "gross {yields}");
    assert!((row[1] - 3.0).abs() < 1e-12 && (row[2] - 3f64.sqrt()).abs() < 1e-12, "background {yields}");
    // The window is channels 2000…2099, [19.995, 20.995) MeV, −5.05σ to +4.95σ about its
    // written middle 20.5 MeV: acceptance Φ(4.95) − Φ(−5.05) = 0.9999994080 (scipy.stats.norm,
    // the side bands' share below 1e-20); 1e-9: statrs's erfc to ~5e-11.
    assert!((row[3] - 0.999_999_408_0).abs() < 1e-9, "acceptance {yields}");
}

#[test]
fn issue_11_csv_events_with_quoted_fields_read_as_the_same_events() {
    // The hand-counted events with a text column, then the same events quoted as RFC 4180
    // allows: a quoted header, quoted numbers and detector ids, a quoted empty energy, and
    // notes holding commas and doubled quotes. The old reader split lines on every comma.
    let plain = "det,adc,pu,note\nA,2000,0,x\nA,2050,0,x\nA,2099,0,x\nA,2050.5,0,x\nA,1900,0,x\nA,1949,0,x\n\
                 A,2150,0,x\nA,100,0,x\nA,2050,1,x\nA,,0,x\nA,5000,0,x\nB,2050,0,x\n";
    let quoted = "\"det\", adc ,\"pu\",\"note\"\n\"A\",\"2000\",0,\"beam on, tuned\"\nA,2050,\"0\",x\n\
                  \"A\",2099,0,\"the \"\"best\"\" run\"\nA,\"2050.5\",0,\",\"\nA,1900,0,\nA,1949,0,\"a,b,c\"\n\
                  A,2150,0,x\r\nA,100,0,x\n\n\"A\",\"2050\",\"1\",x\nA,\"\",0,\"\"\nA,5000,0,x\n\"B\",2050,0,\"B, unknown\"\n";
    let reduced = |events: &str| {
        let tmp = tempfile::tempdir().expect("scratch");
        tiny(tmp.path(), "", events);
        let check = xsflow(tmp.path(), &["check", "experiment.yaml"]);
        assert_eq!(check.status.code(), Some(0), "{}", text(&check));
        let out = reduce(tmp.path());
        assert_eq!(out.status.code(), Some(0), "{}", text(&out));
        let read = |f: &str| std::fs::read_to_string(tmp.path().join("out/t1").join(f)).expect("output");
        (raw_json(tmp.path(), "t1")["tally"].clone(), read("yields.csv"), read("cross_sections.csv"))
    };
    let (plain, quoted) = (reduced(plain), reduced(quoted));
    assert_eq!(plain, quoted);
    let t = &quoted.0;
    let want = [("events", 12), ("in_window", 4), ("pile_up", 1), ("invalid_value", 2), ("unknown_detector", 1)];
    for (k, v) in want {
        assert_eq!(t[k].as_u64(), Some(v), "{k}: {t}");
    }
}

#[test]
fn issue_11_a_broken_csv_record_is_an_error_naming_its_line() {
    // Lines are counted in the file: the header is line 1, and blank lines and quoted
    // values count as the lines they are.
    let cases: [(&[u8], &str); 5] = [
        (
            b"det,adc,pu\n\"A\",2000,0\n\nA,2001,0,7\n",
            "line 4: found 4 values, expected 3 as in the header (det, adc, pu)",
        ),
        (b"det,adc,pu\nA,2000,0\nA,2001\n", "line 3: found 2 values, expected 3 as in the header (det, adc, pu)"),
        (
            b"det,adc,pu\nA,2000,0\nA,\"2001,0\nA,2002,0\n",
            "line 3, column `adc`: found the quote of `\"2001,0` not closed on its line",
        ),
        (b"det,adc,pu\nA,2000,\"0\nA,2002,0\n", "line 2, column `pu`: found the quote of `\"0` not closed on its line"),
        (
            b"det,adc,pu\nA,2000,0\n\xfe\xff,2001,0\n",
            "line 3, column `det`: found `\u{fffd}\u{fffd}`, expected UTF-8 text",
        ),
    ];
    for (events, want) in cases {
        let tmp = tempfile::tempdir().expect("scratch");
        tiny(tmp.path(), "", "");
        std::fs::write(tmp.path().join("events.csv"), events).expect("events");
        let out = reduce(tmp.path());
        let msg = text(&out);
        assert_eq!(out.status.code(), Some(1), "{msg}");
        assert!(msg.contains("events.csv") && msg.contains(want), "{want}: {msg}");
        assert!(!tmp.path().join("out/t1").exists(), "nothing for a failed run");
    }
}

#[test]
fn missing_or_mistyped_columns_and_corrupt_files_fail_the_run_with_a_reason() {
    let tmp = listmode_copy();
    let dir = tmp.path().join("listmode");
    // 0202 (CSV) loses its ADC column; 0201 (Parquet) is truncated; 0203 still reduces.
    let csv =
        std::fs::read_to_string(dir.join("run0202.events.csv")).expect("csv").replacen("det,adc,", "det,channel,", 1);
    std::fs::write(dir.join("run0202.events.csv"), csv).expect("write");
    let bytes = std::fs::read(dir.join("run0201.events.parquet")).expect("parquet");
    std::fs::write(dir.join("run0201.events.parquet"), &bytes[..bytes.len() / 2]).expect("truncate");
    // `xsflow check` finds both from the header and the file's footer alone.
    let check = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
    assert!(check.contains("run0202.events.csv") && check.contains("column `adc` not found"), "{check}");
    assert!(check.contains("run0201.events.parquet") && check.contains("cannot read it as Parquet"), "{check}");
    let out = reduce(tmp.path());
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(1), "{msg}");
    assert!(
        msg.contains("run0202.events.csv")
            && msg.contains("column `adc` not found (mapped in raw.columns); columns found: det, channel, de, pileup"),
        "{msg}"
    );
    assert!(msg.contains("run0201.events.parquet") && msg.contains("cannot read it as Parquet"), "{msg}");
    assert!(msg.contains("1 run(s) reduced, 2 failed"), "{msg}");
    assert!(tmp.path().join("out/0203/cross_sections.csv").is_file(), "the good run is written");
    assert!(!tmp.path().join("out/0201").exists() && !tmp.path().join("out/0202").exists(), "nothing for failed runs");
}

#[test]
fn a_string_energy_column_is_a_type_error() {
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(tmp.path(), "", "det,adc,pu\nA,2000,0\n");
    // Parquet with a string energy column, written by this program's own table writer.
    let mut df = polars::prelude::DataFrame::new_infer_height(vec![
        polars::prelude::Column::new("det".into(), ["A", "A"]),
        polars::prelude::Column::new("adc".into(), ["2000", "x"]),
        polars::prelude::Column::new("pu".into(), [0u8, 0]),
    ])
    .expect("frame");
    std::fs::write(tmp.path().join("events.parquet"), xsflow::tables::parquet_bytes(&mut df, vec![]).expect("bytes"))
        .expect("w");
    edit(&tmp.path().join("run.run.yaml"), "events.csv", "events.parquet");
    let msg = text(&reduce(tmp.path()));
    assert!(msg.contains("column `adc` has type str; expected numbers (ADC channels)"), "{msg}");
}

#[test]
fn an_empty_event_file_gives_zero_counts_and_a_warning() {
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(tmp.path(), "", "det,adc,pu\n");
    let out = reduce(tmp.path());
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(0), "{msg}");
    assert!(msg.contains("the file holds no events"), "{msg}");
    assert_eq!(raw_json(tmp.path(), "t1")["tally"]["events"].as_u64(), Some(0));
}

#[test]
fn bad_gates_and_polygons_are_config_errors() {
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(tmp.path(), "  pid:\n    A: [[0.0, 0.0], [1.0, 1.0]]\n", "det,adc,pu\n");
    // Side band overlapping the peak, a polygon of two vertices (and no ΔE column for it).
    edit(&tmp.path().join("experiment.yaml"), "right_mev: [21.5, 22.0]", "right_mev: [20.8, 22.0]");
    let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(
        msg.contains(
            "raw.gates: found A: the right side band of elastic [20.7950, 21.9950) MeV (whole channels) overlaps the window of elastic"
        ),
        "{msg}"
    );
    assert!(msg.contains("raw.pid.A: found 2 vertices, expected a simple polygon of at least 3 vertices"), "{msg}");
    assert!(msg.contains("raw.columns.delta_e"), "{msg}");
    // A self-intersecting polygon.
    edit(
        &tmp.path().join("experiment.yaml"),
        "[[0.0, 0.0], [1.0, 1.0]]",
        "[[0.0, 0.0], [1.0, 1.0], [1.0, 0.0], [0.0, 1.0]]",
    );
    let msg = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
    assert!(msg.contains("cross (self-intersecting)"), "{msg}");
}

#[test]
fn overlapping_windows_of_two_states_are_an_error_unless_allowed() {
    let tmp = listmode_copy();
    let config = tmp.path().join("experiment.yaml");
    // With σ = 0.8 MeV the ±3σ windows of the elastic and 1.454 MeV states overlap.
    edit(&config, "resolution_mev: 0.08", "resolution_mev: 0.8");
    let msg = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
    assert!(
        msg.contains("raw.gates: found D01: windows of elastic") && msg.contains("or gates.allow_overlap: true"),
        "{msg}"
    );
}

#[test]
fn peak_fit_background_agrees_with_side_bands_on_the_demo() {
    // The demo's flat invented background: Gaussian peaks on a linear background, fitted,
    // give net counts consistent with the side-band subtraction (within 3 combined
    // standard errors) for the well-filled D01 elastic peak.
    let tmp = listmode_copy();
    assert_eq!(reduce(tmp.path()).status.code(), Some(0));
    let side = std::fs::read_to_string(tmp.path().join("out/0201/cross_sections.csv")).expect("csv");
    edit(&tmp.path().join("experiment.yaml"), "background: side_bands", "background: peak_fit_linear");
    std::fs::remove_dir_all(tmp.path().join("out")).expect("clean");
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let fit = std::fs::read_to_string(tmp.path().join("out/0201/cross_sections.csv")).expect("csv");
    let net = |csv: &str| -> (f64, f64) {
        let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
        let row: Vec<&str> = csv.lines().find(|l| l.contains("D01,elastic")).expect("row").split(',').collect();
        let at = |n: &str| row[header.iter().position(|h| *h == n).expect("column")].parse::<f64>().expect("number");
        (at("counts_net"), at("counts_net_err"))
    };
    let ((a, ea), (b, eb)) = (net(&side), net(&fit));
    assert!((a - b).abs() < 3.0 * ea.hypot(eb), "side bands {a} ± {ea}, peak fit {b} ± {eb}");
    let fits = &raw_json(tmp.path(), "0201")["peak_fits"];
    assert!(fits.as_array().is_some_and(|f| !f.is_empty()), "{fits}");
    // The fitted background is recorded and the spectrum plot shades it.
    let d01 = fits.as_array().and_then(|f| f.iter().find(|x| x["detector"] == "D01")).expect("D01 fitted");
    assert_eq!(d01["background"]["shape"], "linear", "{d01}");
    let spectra = tmp.path().join("out/0201/spectra.parquet").to_string_lossy().to_string();
    let o = xsflow(tmp.path(), &["plot", "spectrum", &spectra, "--detector", "D01", "--out", "sp.svg"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let svg = std::fs::read_to_string(tmp.path().join("sp.svg")).expect("plot");
    assert!(svg.contains("fitted background") && svg.contains("<polygon"), "{svg}");
}

/// Issue 11, defect 1: a detector with five states and a peak-fit background is a fit of
/// 17 parameters, more than the dual numbers held; `reduce` panicked before any run was
/// written. Five Gaussian peaks (σ = 0.08 MeV) on a flat background at the kinematic
/// energies of five invented states, counts filled channel by channel.
#[test]
fn issue_11_five_states_in_one_peak_fit_reduce() {
    let tmp = tempfile::tempdir().expect("scratch");
    let excitations_mev = [0.0, 1.2, 2.4, 3.6, 4.8];
    let mut states = String::new();
    let mut events = String::from("det,adc,pu\n");
    let (gain_mev, sigma_mev) = (0.01, 0.08); // one_detector's calibration; the resolution
    let mut centres = Vec::new();
    for (k, ex) in excitations_mev.iter().enumerate() {
        states.push_str(&format!("{{ name: s{k}, excitation_mev: {ex} }}, "));
        let kin = xsflow(
            tmp.path(),
            &["kinematics", "--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--angles", "30:30:1"]
                .into_iter()
                .chain(["--excitation-mev", &ex.to_string(), "--format", "json"])
                .collect::<Vec<_>>(),
        );
        let rows: serde_json::Value = serde_json::from_slice(&kin.stdout).expect("kinematics json");
        centres.push(rows[0]["energy_lab_mev"].as_f64().expect("energy"));
    }
    for ch in 1500..2500 {
        let e = f64::from(ch) * gain_mev;
        let peaks: f64 = centres.iter().map(|c| 150.0 * (-((e - c) / sigma_mev).powi(2) / 2.0).exp()).sum();
        for _ in 0..(2.0 + peaks).round() as u32 {
            events.push_str(&format!("A,{ch},0\n"));
        }
    }
    let gates = format!("  gates:\n    resolution_mev: {sigma_mev}\n  background: peak_fit_linear\n");
    one_detector(tmp.path(), &states, &gates, &events);
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let fits = &raw_json(tmp.path(), "t1")["peak_fits"];
    assert_eq!(fits[0]["peaks"].as_array().map(Vec::len), Some(5), "{fits}");
    assert_eq!(fits[0]["converged"], true, "{fits}");
    // Each area is 150 · σ/Δx · √(2π) ≈ 3008 counts filled by rounding, within three of the
    // fit's standard errors (the rounding of each channel's count acts as noise).
    let want = 150.0 * sigma_mev / gain_mev * (2.0 * std::f64::consts::PI).sqrt();
    for peak in fits[0]["peaks"].as_array().expect("peaks") {
        let (area, err) = (peak["area"].as_f64().expect("area"), peak["area_err"].as_f64().expect("error"));
        assert!((area - want).abs() < 3.0 * err, "{area} ± {err} vs {want}: {fits}");
    }
}

#[test]
fn windows_written_in_channels_are_the_same_as_in_mev() {
    // E = 0.01 MeV × channel here, so channels [2000, 2100) are [20, 21) MeV.
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(tmp.path(), "", "det,adc,pu\nA,2000,0\nA,2099,0\nA,2100,0\nA,1949,0\n");
    edit(&tmp.path().join("experiment.yaml"), "window_mev: [20.0, 21.0]", "window_channels: [2000, 2100]");
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let t = &raw_json(tmp.path(), "t1")["tally"];
    assert_eq!(
        (t["in_window"].as_u64(), t["in_side_band"].as_u64(), t["outside_gates"].as_u64()),
        (Some(2), Some(1), Some(1)),
        "{t}"
    );
}

#[test]
fn the_same_events_in_arrow_ipc_give_the_same_cross_sections() {
    // Run 0201 rewritten from Parquet into Arrow IPC (record batches of 1000 rows) reduces
    // to the same table.
    use polars::prelude::{IpcWriter, SerWriter};
    let tmp = listmode_copy();
    let dir = tmp.path().join("listmode");
    let df = xsflow::tables::read_table(&dir.join("run0201.events.parquet")).expect("parquet");
    let mut chunked = df.slice(0, 1000);
    let mut offset = 1000;
    while offset < df.height() {
        chunked.vstack_mut(&df.slice(offset as i64, 1000)).expect("stack");
        offset += 1000;
    }
    let mut file = std::fs::File::create(dir.join("run0201.events.arrow")).expect("create");
    IpcWriter::new(&mut file).finish(&mut chunked).expect("ipc");
    assert_eq!(reduce(tmp.path()).status.code(), Some(0));
    let parquet = std::fs::read_to_string(tmp.path().join("out/0201/cross_sections.csv")).expect("csv");
    edit(&dir.join("run0201.run.yaml"), "run0201.events.parquet", "run0201.events.arrow");
    std::fs::remove_dir_all(tmp.path().join("out")).expect("clean");
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let ipc = std::fs::read_to_string(tmp.path().join("out/0201/cross_sections.csv")).expect("csv");
    assert_eq!(parquet, ipc);
}

#[test]
fn an_overflow_channel_out_of_range_is_a_config_error() {
    // 0 channels, or more than the histograms may hold: a clear error, not a crash or an
    // allocation of gigabytes.
    for bad in ["0", "4000000000"] {
        let tmp = tempfile::tempdir().expect("scratch");
        tiny(tmp.path(), "", "det,adc,pu\n");
        edit(&tmp.path().join("experiment.yaml"), "overflow_channel: 4096", &format!("overflow_channel: {bad}"));
        let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
        let msg = text(&out);
        assert_eq!(out.status.code(), Some(2), "{msg}");
        assert!(
            msg.contains(&format!("raw.overflow_channel: found {bad}, expected a channel count from 2 to 1048576")),
            "{msg}"
        );
    }
}

/// A heavy beam on a lighter target (28Si on 12C at 60 MeV, invented): below the maximum
/// lab angle of 25.4° every detector sees the elastic peak twice. Issue 17, finding 2.
fn heavy_on_light(dir: &Path, windows: &str, events_csv: &str) {
    std::fs::write(
        dir.join("experiment.yaml"),
        format!(
            "experiment: {{ name: heavy on light }}
reaction: {{ beam: 28Si, target: 12C, energy_mev: 60.0, beam_charge_state: 8, states: [{{ name: elastic, excitation_mev: 0.0 }}] }}
target: {{ areal_density_ug_cm2: 50.0, molar_mass_g_mol: 12.0 }}
detectors:
  - {{ id: F10, theta_lab_deg: 10.0, distance_mm: 300.0, aperture: {{ shape: circle, radius_mm: 2.0 }} }}
  - {{ id: F15, theta_lab_deg: 15.0, distance_mm: 300.0, aperture: {{ shape: circle, radius_mm: 2.0 }} }}
runs: [run.run.yaml]
stages:
  - type: subtract_background
  - type: compute_kinematics
raw:
  columns: {{ detector: det, energy: adc }}
  overflow_channel: 4096
  calibration:
    all: {{ offset_mev: 0.0, gain_mev_per_channel: 0.02 }}
  gates:
    resolution_mev: 0.1
{windows}"
        ),
    )
    .expect("config");
    std::fs::write(dir.join("run.run.yaml"), "run: h1\nevents_file: events.csv\ncharge_c: 1.0e-6\n").expect("record");
    std::fs::write(dir.join("events.csv"), events_csv).expect("events");
}

/// The kinematic energies (branch 1, branch 2) of 28Si on 12C at `theta_lab_deg`, from
/// `xsflow kinematics`.
fn heavy_on_light_energies_mev(dir: &Path, theta_lab_deg: f64) -> Vec<f64> {
    let angles = format!("{theta_lab_deg}:{theta_lab_deg}:1");
    let args = ["kinematics", "--beam", "28Si", "--target", "12C", "--energy-mev", "60", "--angles", &angles];
    let out = xsflow(dir, &[&args[..], &["--format", "json"]].concat());
    let rows: serde_json::Value = serde_json::from_slice(&out.stdout).expect("kinematics json");
    rows.as_array().expect("rows").iter().map(|r| r["energy_lab_mev"].as_f64().expect("energy")).collect()
}

#[test]
fn issue_17_both_branches_of_a_double_valued_angle_reduce_from_list_mode() {
    // Events at the kinematic energy of each branch (channel = E / 0.02 MeV, rounded):
    // F10 40 and 25, F15 30 and 20; automatic windows ±0.3 MeV catch them all.
    let tmp = tempfile::tempdir().expect("scratch");
    let mut events = String::from("det,adc\n");
    let counts = [("F10", 10.0, [40, 25]), ("F15", 15.0, [30, 20])];
    for (det, theta, n) in counts {
        let energies = heavy_on_light_energies_mev(tmp.path(), theta);
        assert_eq!(energies.len(), 2, "two solutions at {theta}°: {energies:?}");
        for (e, n) in energies.iter().zip(n) {
            events.push_str(&format!("{det},{}\n", (e / 0.02).round()).repeat(n));
        }
    }
    heavy_on_light(tmp.path(), "", &events);
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let csv = std::fs::read_to_string(tmp.path().join("out/h1/cross_sections.csv")).expect("csv");
    let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).expect("column");
    let rows: Vec<(String, i64, f64, f64)> = csv
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            let num = |name: &str| f[col(name)].parse::<f64>().expect("number");
            (f[col("detector")].to_string(), num("branch") as i64, num("counts_gross"), num("theta_cm_deg"))
        })
        .collect();
    // Both solutions of each detector, with their own counts and CM angles (33.9° and
    // 166.1° at 10°; 52.1° and 157.9° at 15°, from `xsflow kinematics` above).
    let want = [("F10", 1, 40.0, 33.9), ("F10", 2, 25.0, 166.1), ("F15", 1, 30.0, 52.1), ("F15", 2, 20.0, 157.9)];
    assert_eq!(rows.len(), want.len(), "{csv}");
    for ((det, branch, gross, cm), (w_det, w_branch, w_gross, w_cm)) in rows.iter().zip(want) {
        // 0.05°: the CM angles above are quoted to 0.1°.
        assert!(
            det == w_det && *branch == w_branch && (gross - w_gross).abs() < 0.5 && (cm - w_cm).abs() < 0.05,
            "{csv}"
        );
    }
}

#[test]
fn issue_17_written_windows_of_a_double_valued_angle_name_their_branch() {
    let tmp = tempfile::tempdir().expect("scratch");
    // (written windows, what `check` says)
    let cases = [
        (
            "{ detector: F10, state: elastic, window_mev: [55.0, 56.5] }",
            "raw.gates.windows[0].branch: found missing, expected branch 1 or 2: detector F10 sees state elastic at 55.7149 MeV (branch 1) and 10.3098 MeV (branch 2)",
        ),
        (
            "{ detector: F10, state: elastic, branch: 3, window_mev: [55.0, 56.5] }",
            "raw.gates.windows[0].branch: found 3, expected 1 or 2",
        ),
        (
            "{ detector: F10, state: elastic, branch: 2, window_mev: [10.0, 10.6] }, { detector: F10, state: elastic, branch: 2, window_mev: [10.0, 10.7] }",
            "raw.gates.windows[1]: found detector F10, state elastic, branch 2 again (first at gates.windows[0])",
        ),
    ];
    for (windows, message) in cases {
        heavy_on_light(tmp.path(), &format!("    windows: [{windows}]\n"), "det,adc\n");
        let msg = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
        assert!(msg.contains(message), "{windows}:\n{msg}");
    }
    // A written window for branch 2 alone: branch 1 keeps its automatic window.
    heavy_on_light(
        tmp.path(),
        "    windows: [{ detector: F10, state: elastic, branch: 2, window_mev: [10.0, 10.6] }]\n",
        "det,adc\nF10,515\nF10,2786\n",
    );
    let out = reduce(tmp.path());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let yields = std::fs::read_to_string(tmp.path().join("out/h1/yields.csv")).expect("yields");
    assert!(yields.contains("F10,elastic,1,1.0,") && yields.contains("F10,elastic,2,1.0,"), "{yields}");
}

#[test]
fn issue_17_check_refuses_what_reduce_refuses_in_a_yields_table() {
    // A yields table typed by hand for a double-valued angle, without `branch`: `reduce`
    // cannot tell the two peaks apart, and `check` now runs the stages on the table too and
    // says the same. An unknown state name likewise.
    let tmp = tempfile::tempdir().expect("scratch");
    heavy_on_light(tmp.path(), "", "det,adc\n");
    std::fs::write(tmp.path().join("run.run.yaml"), "run: h1\nyields_file: yields.csv\ncharge_c: 1.0e-6\n")
        .expect("record");
    for (yields, message) in [
        (
            "detector,state,counts_gross\nF10,elastic,40\n",
            "sees state elastic at 55.7149 MeV (branch 1) and 10.3098 MeV (branch 2)",
        ),
        ("detector,state,counts_gross\nF10,ground,40\n", "found ground, expected a state of reaction.states (elastic)"),
    ] {
        std::fs::write(tmp.path().join("yields.csv"), yields).expect("yields");
        let check = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
        let reduced = reduce(tmp.path());
        assert_ne!(reduced.status.code(), Some(0));
        assert!(
            check.contains(message) && text(&reduced).contains(message),
            "check:\n{check}\nreduce:\n{}",
            text(&reduced)
        );
    }
}

#[test]
fn issue_17_a_tail_reaching_a_neighbouring_gate_is_reported() {
    // 4He on 58Ni at 30°: the elastic peak and the 2+ state 1.454 MeV below, σ = 0.08 MeV;
    // with 5 % of each peak in a tail of 0.2 MeV the elastic tail puts 0.012 % of its counts
    // into the 2+ net counts (scipy.stats.exponnorm over the 2+ gates), more than the
    // 0.01 % reported; without a tail nothing is said.
    let tmp = tempfile::tempdir().expect("scratch");
    let states = "{ name: elastic, excitation_mev: 0.0 }, { name: 2+, excitation_mev: 1.454 }";
    for (tail, reported) in [("    low_energy_tail: { fraction: 0.05, length_mev: 0.2 }\n", true), ("", false)] {
        one_detector(tmp.path(), states, &format!("  gates:\n    resolution_mev: 0.08\n{tail}"), "det,adc,pu\n");
        let msg = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
        assert_eq!(msg.contains("of the counts of the elastic peak fall in the net counts of 2+"), reported, "{msg}");
    }
}

#[test]
fn issue_18_events_none_of_which_is_usable_fail_the_run() {
    // Well-formed CSV with detector values no mapping knows and channels past the overflow:
    // zero yields with exit 0 before; now the run fails with the tallies.
    let tmp = tempfile::tempdir().expect("scratch");
    tiny(tmp.path(), "", "det,adc,pu\nZ,2000,0\nQ,2050,0\nA,99999,0\nA,-5,0\n");
    let out = reduce(tmp.path());
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(1), "{msg}");
    assert!(
        msg.contains("none of its 4 events is usable: 2 with an unknown detector, 2 with an invalid value")
            && msg.contains("check raw.columns, raw.detector_ids and raw.overflow_channel"),
        "{msg}"
    );
    assert!(!tmp.path().join("out/t1").exists());
}

#[test]
fn issue_18_one_bad_shared_calibration_is_reported_once() {
    // The list-mode demo's twelve detectors share `calibration.all`: a falling gain was
    // reported twelve times.
    let tmp = listmode_copy();
    edit(&tmp.path().join("experiment.yaml"), "gain_mev_per_channel: 0.01,", "gain_mev_per_channel: -0.01,");
    let msg = text(&xsflow(tmp.path(), &["check", "experiment.yaml"]));
    assert_eq!(msg.matches("raw.calibration.all: found gain -0.01 MeV/ch").count(), 1, "{msg}");
}

#[test]
fn issue_17_gates_without_channels_or_without_acceptance_are_refused() {
    // (written window, what `check` says): a window beyond the 4096 channels of 0.01 MeV; a
    // window beside the peak, whose narrow left side band sits on the peak.
    let cases = [
        (
            "window_mev: [50.0, 51.0], left_mev: [49.0, 49.5], right_mev: [51.5, 52.0]",
            "A, elastic: the window [50.0000, 51.0000) MeV holds no channel of the spectrum [-0.0050, 40.9550) MeV",
        ),
        (
            "window_mev: [21.0, 21.5], left_mev: [19.9, 20.1], right_mev: [21.5, 21.6], peak_centroid_mev: 20.0",
            "A, elastic: window acceptance",
        ),
    ];
    for (window, message) in cases {
        let tmp = tempfile::tempdir().expect("scratch");
        tiny(tmp.path(), "", "det,adc,pu\n");
        edit(
            &tmp.path().join("experiment.yaml"),
            "window_mev: [20.0, 21.0], left_mev: [19.0, 19.5], right_mev: [21.5, 22.0]",
            window,
        );
        let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
        assert_eq!(out.status.code(), Some(2), "{}", text(&out));
        assert!(text(&out).contains(message), "{window}:\n{}", text(&out));
    }
}
