//! Benchmark of list-mode reduction (release build):
//!     cargo bench -p xsflow --bench events [-- EVENTS...]
//! For each size (default 1e8 and 3e8 events) it writes a synthetic Parquet file (detector
//! u16 of 16 detectors, ADC u16 of 4096 channels, or with `--f32` ADC f32 with fractional
//! channels, two invented states per detector on a flat
//! background; zstd, row groups of 2^20 rows) into a scratch folder, then in separate child
//! processes (so that each peak RSS is its own) measures: xsflow's reduction to yields
//! (`reduce_events`: both columns decoded row group by row group, histogrammed, gated, side
//! bands subtracted), the floor (the same reader decoding the two columns and nothing else),
//! and the plain numpy/pyarrow baseline `benches/baseline_events.py` when python3 with
//! pyarrow is there. Each timing is the median of 3 runs; figures are printed, not asserted.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use polars::prelude::*;
use stages::physics::synthetic::Rng;

const DETECTORS: usize = 16;
const CHANNELS: u16 = 4096;
const ROW_GROUP: usize = 1 << 20;

/// Why a step of the benchmark failed.
#[derive(Debug, thiserror::Error)]
enum BenchError {
    /// A scratch file or a child process.
    #[error(transparent)]
    Io(#[from] std::io::Error),
    /// Writing or reading the events.
    #[error(transparent)]
    Table(#[from] PolarsError),
    /// Writing the gates for the baseline.
    #[error(transparent)]
    Json(#[from] serde_json::Error),
    /// xsflow's reduction of the events.
    #[error(transparent)]
    Events(#[from] xsflow::events::RawFileError),
    /// The benchmark's own config does not plan.
    #[error("the benchmark config does not plan: {}", .0.iter().map(ToString::to_string).collect::<Vec<_>>().join("; "))]
    Plan(Vec<xsflow::error::Diagnostic>),
    /// The benchmark's config has no `raw:` section.
    #[error("the benchmark config has no raw section")]
    NoRaw,
    /// A child printed no timing line.
    #[error("unexpected output: `{line}` {stderr}")]
    Output {
        /// The last line it printed.
        line: String,
        /// What it printed on stderr.
        stderr: String,
    },
}

fn config_yaml() -> String {
    let mut dets = String::new();
    for i in 0..DETECTORS {
        dets += &format!(
            "  - {{ id: D{i:02}, theta_lab_deg: {}, distance_mm: 200.0, aperture: {{ shape: circle, radius_mm: 2.5 }} }}\n",
            20.0 + 8.0 * i as f64
        );
    }
    let ids: String = (0..DETECTORS).map(|i| format!("    \"{i}\": D{i:02}\n")).collect();
    format!(
        "experiment: {{ name: bench }}
reaction:
  beam: 4He
  target: 58Ni
  energy_mev: 24.0
  beam_charge_state: 2
  states:
    - {{ name: elastic, excitation_mev: 0.0 }}
    - {{ name: first, excitation_mev: 1.454 }}
target: {{ areal_density_ug_cm2: 210.0, molar_mass_g_mol: 57.9353 }}
detectors:
{dets}runs: [run.run.yaml]
stages:
  - type: subtract_background
raw:
  columns: {{ detector: det, energy: adc }}
  detector_ids:
{ids}  overflow_channel: {CHANNELS}
  calibration:
    all: {{ offset_mev: 0.05, gain_mev_per_channel: 0.01 }}
  gates: {{ resolution_mev: 0.08 }}
"
    )
}

fn plan_in(dir: &Path) -> Result<xsflow::plan::Plan, BenchError> {
    std::fs::write(dir.join("bench.yaml"), config_yaml())?;
    std::fs::write(dir.join("run.run.yaml"), "run: bench\nevents_file: events.parquet\ncharge_c: 1.0e-6\n")?;
    xsflow::plan::plan(&dir.join("bench.yaml")).map_err(BenchError::Plan)
}

fn write_events(path: &Path, n: usize, plan: &stages::raw::RawPlan, f32_adc: bool) -> Result<(), BenchError> {
    let gates = plan.gates();
    let mut rng = Rng::new(42);
    let file = std::fs::File::create(path)?;
    let schema =
        Schema::from_iter([Field::new("det".into(), DataType::UInt16), Field::new("adc".into(), DataType::UInt16)]);
    let mut w = ParquetWriter::new(file).with_row_group_size(Some(ROW_GROUP)).batched(&schema)?;
    let mut done = 0;
    while done < n {
        let m = ROW_GROUP.min(n - done);
        let (mut det, mut adc) = (Vec::with_capacity(m), Vec::with_capacity(m));
        for _ in 0..m {
            let d = (rng.next_u64() % DETECTORS as u64) as usize;
            let u = rng.uniform();
            let ch = if u < 0.6 {
                let g = &gates[2 * d + usize::from(u < 0.1)];
                let e = g.energy_kinematic_mev + 0.08 * rng.normal();
                ((e - 0.05) / 0.01).max(0.0)
            } else {
                1500.0 + 1100.0 * rng.uniform()
            };
            det.push(d as u16);
            adc.push((ch as u16).min(CHANNELS + 10));
        }
        let adc = if f32_adc {
            Column::new("adc".into(), adc.iter().map(|c| f32::from(*c) + rng.uniform() as f32).collect::<Vec<f32>>())
        } else {
            Column::new("adc".into(), adc)
        };
        let df = DataFrame::new_infer_height(vec![Column::new("det".into(), det), adc])?;
        w.write_batch(&df)?;
        done += m;
    }
    w.finish()?;
    Ok(())
}

fn peak_rss_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines().find(|l| l.starts_with("VmHWM")).and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// Decode the two columns row group by row group, as the reducer does, and touch them.
fn floor(path: &Path) -> Result<u64, BenchError> {
    let mut reader = ParquetReader::new(std::fs::File::open(path)?);
    let meta = reader.get_metadata()?.clone();
    let (mut offset, mut sum) = (0, 0u64);
    for rg in &meta.row_groups {
        let n = rg.num_rows();
        let mut r = ParquetReader::new(std::fs::File::open(path)?);
        r.set_metadata(meta.clone());
        let df = r.with_columns(Some(vec!["det".into(), "adc".into()])).with_slice(Some((offset, n))).finish()?;
        for c in ["det", "adc"] {
            let s = df.column(c)?.as_materialized_series().u16()?.clone();
            sum += s
                .downcast_iter()
                .map(|a| a.values().as_slice().iter().map(|v| u64::from(*v)).sum::<u64>())
                .sum::<u64>();
        }
        offset += n;
    }
    Ok(sum)
}

fn child(mode: &str, dir: &Path) -> Result<(), BenchError> {
    let plan = plan_in(dir)?;
    let raw = plan.raw.as_ref().ok_or(BenchError::NoRaw)?;
    let path = dir.join("events.parquet");
    let t = Instant::now();
    let detail = match mode {
        "reduce" => {
            let r = xsflow::events::reduce_events(&path, raw)?;
            assert!(r.tally.reconciles());
            format!("events {} in windows {}", r.tally.events, r.tally.in_window)
        }
        _ => format!("checksum {}", floor(&path)?),
    };
    println!("{} {} {}", t.elapsed().as_secs_f64(), peak_rss_mb(), detail);
    Ok(())
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn measure(cmd: &mut dyn FnMut() -> Command) -> Result<(f64, f64), BenchError> {
    let (mut times, mut rss) = (Vec::new(), Vec::new());
    for _ in 0..3 {
        let out = cmd().output()?;
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        let stderr = || String::from_utf8_lossy(&out.stderr).into_owned();
        let line = text.lines().last().ok_or_else(|| BenchError::Output { line: String::new(), stderr: stderr() })?;
        let v: Vec<f64> = line.split_whitespace().take(2).filter_map(|x| x.parse().ok()).collect();
        if v.len() < 2 {
            return Err(BenchError::Output { line: line.to_string(), stderr: stderr() });
        }
        times.push(v[0]);
        rss.push(v[1]);
    }
    Ok((median(times), median(rss)))
}

fn main() -> Result<(), BenchError> {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        return child(&args[i + 1], Path::new(&args[i + 2]));
    }
    let sizes: Vec<usize> =
        args.iter().skip(1).filter_map(|a| a.parse::<f64>().ok()).map(|x| x as usize).collect::<Vec<_>>();
    let sizes = if sizes.is_empty() { vec![100_000_000, 300_000_000] } else { sizes };
    let f32_adc = args.iter().any(|a| a == "--f32");
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .map(|l| l.split(':').nth(1).unwrap_or("").trim().to_string())
        })
        .unwrap_or_default();
    println!("machine: {cpu}, {} logical cores", std::thread::available_parallelism().map_or(1, |n| n.get()));
    let exe = std::env::current_exe()?;
    let baseline = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("benches/baseline_events.py");
    for n in sizes {
        let dir = std::env::temp_dir().join(format!("xsflow-bench-{n}"));
        std::fs::create_dir_all(&dir)?;
        let plan = plan_in(&dir)?;
        let path = dir.join("events.parquet");
        let t = Instant::now();
        write_events(&path, n, plan.raw.as_ref().ok_or(BenchError::NoRaw)?, f32_adc)?;
        let bytes = std::fs::metadata(&path)?.len() as f64;
        let kind = if f32_adc { "f32" } else { "u16" };
        println!("{n} events (ADC {kind}): file {:.0} MB written in {:.1} s", bytes / 1e6, t.elapsed().as_secs_f64());
        let (t_reduce, rss_reduce) = measure(&mut || {
            let mut c = Command::new(&exe);
            c.args(["--child", "reduce", &dir.to_string_lossy()]);
            c
        })?;
        let (t_floor, rss_floor) = measure(&mut || {
            let mut c = Command::new(&exe);
            c.args(["--child", "floor", &dir.to_string_lossy()]);
            c
        })?;
        println!(
            "  xsflow reduce: median {t_reduce:.3} s = {:.1} M events/s = {:.0} MB/s of file; peak RSS {rss_reduce:.0} MB",
            n as f64 / t_reduce / 1e6,
            bytes / t_reduce / 1e6
        );
        println!("  floor (read and decode det, adc only): median {t_floor:.3} s; peak RSS {rss_floor:.0} MB; reduce/floor = {:.2}", t_reduce / t_floor);
        let gates = serde_json::to_string(&plan.raw.as_ref().ok_or(BenchError::NoRaw)?.gates())?;
        std::fs::write(dir.join("gates.json"), gates)?;
        match measure(&mut || {
            let mut c = Command::new("python3");
            c.arg(&baseline).arg(&path).arg(dir.join("gates.json"));
            c
        }) {
            Ok((t_py, rss_py)) => println!(
                "  numpy/pyarrow baseline: median {t_py:.3} s; peak RSS {rss_py:.0} MB; baseline/xsflow = {:.2}",
                t_py / t_reduce
            ),
            Err(e) => println!("  numpy/pyarrow baseline not run: {e}"),
        }
        std::fs::remove_dir_all(&dir)?;
    }
    Ok(())
}
