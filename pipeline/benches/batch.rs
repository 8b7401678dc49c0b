//! Benchmark of `xsflow batch` (release build):
//!     cargo bench -p xsflow --bench batch [-- RUNS [LISTMODE_RUNS EVENTS]]
//! 1. RUNS (default 1000) yields-table runs (copies of the demo's, with their own ids and
//!    counts) processed cold into an empty output folder, then a second batch with nothing
//!    changed (the demo's fits are left out: they are the same work whatever the number of
//!    runs), and cold again with the report and plots turned off; medians of 3;
//! 2. LISTMODE_RUNS (default 20) list-mode runs of EVENTS (default 1e7) events each, with
//!    --jobs 1 and --jobs 2: wall time and peak RSS of the whole process.
//!
//! Each step runs the xsflow binary as a child; figures are printed, not asserted.
//!
//! Figures (2026-12-03, AMD EPYC, 2 logical cores, release build, `-- 1000 1 1e5`):
//! 1000 yields runs cold 7.44 s (7.4 ms per run, peak RSS 106 MB), nothing changed 0.166 s
//! (21 MB); without report and plots cold 4.57 s, so the report adds 2.87 s (63 %): each
//! run page reads the run's table twice and each page and its figures file are written
//! with an fsync.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

/// Why a step of the benchmark failed.
#[derive(Debug, thiserror::Error)]
enum BenchError {
    /// A scratch file or the xsflow child process.
    #[error(transparent)]
    Io(#[from] std::io::Error),
    /// Reading or writing the demo's events.
    #[error(transparent)]
    Table(#[from] polars::prelude::PolarsError),
    /// Reading the demo's events.
    #[error(transparent)]
    Read(#[from] xsflow::tables::TableError),
    /// An xsflow command that failed.
    #[error("xsflow {args} failed: {stderr}")]
    Failed {
        /// Its arguments.
        args: String,
        /// What it printed on stderr.
        stderr: String,
    },
}

fn demo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../sample-runs/alpha-ni58")
}

/// Wall time of an xsflow command, and its peak RSS as `/usr/bin/time` reports it (missing
/// when that program is not installed).
fn run_timed(dir: &Path, args: &[&str]) -> Result<(f64, Option<f64>), BenchError> {
    let exe = env!("CARGO_BIN_EXE_xsflow");
    let time = Path::new("/usr/bin/time");
    let start = Instant::now();
    let out = if time.is_file() {
        Command::new(time).arg("-f").arg("%M").arg(exe).args(args).current_dir(dir).output()
    } else {
        Command::new(exe).args(args).current_dir(dir).output()
    }?;
    let seconds = start.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr);
    if !out.status.success() {
        return Err(BenchError::Failed { args: args.join(" "), stderr: stderr.into_owned() });
    }
    let rss = if time.is_file() {
        stderr.lines().last().and_then(|l| l.trim().parse::<f64>().ok()).map(|kb| kb / 1024.0)
    } else {
        None
    };
    Ok((seconds, rss))
}

/// Times of the repeated steps; each figure printed is their median.
const REPEATS: usize = 3;

/// The median of a few times.
fn median(times: &mut [f64]) -> f64 {
    times.sort_by(f64::total_cmp);
    times[times.len() / 2]
}

fn config_without_fits(src: &Path, dst: &Path, runs: &str) -> Result<(), BenchError> {
    let text = std::fs::read_to_string(src)?;
    // Leave out the top-level `fits:` section: every line from `fits:` to the next
    // top-level key.
    let mut in_fits = false;
    let kept: Vec<&str> = text
        .lines()
        .filter(|l| {
            if l.starts_with(|c: char| c.is_ascii_alphabetic()) {
                in_fits = l.starts_with("fits:");
            }
            !in_fits
        })
        .collect();
    let text = kept
        .join("\n")
        .replace("  - runs/*.run.yaml", &format!("  - {runs}"))
        .replace("  - listmode/*.run.yaml", &format!("  - {runs}"));
    Ok(std::fs::write(dst, text + "\n")?)
}

fn main() -> Result<(), BenchError> {
    let args: Vec<usize> = std::env::args().skip(1).filter_map(|a| a.parse::<f64>().ok()).map(|x| x as usize).collect();
    let n_runs = args.first().copied().unwrap_or(1000);
    let n_listmode = args.get(1).copied().unwrap_or(20);
    let n_events = args.get(2).copied().unwrap_or(10_000_000);
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .map(|l| l.split(':').nth(1).unwrap_or("").trim().to_string())
        })
        .unwrap_or_default();
    println!("machine: {cpu}, {} logical cores", std::thread::available_parallelism().map_or(1, |n| n.get()));

    // 1. Many yields runs.
    let dir = std::env::temp_dir().join("xsflow-bench-batch");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("runs"))?;
    config_without_fits(&demo().join("experiment.yaml"), &dir.join("experiment.yaml"), "runs/*.run.yaml")?;
    let yields = std::fs::read_to_string(demo().join("runs/run0101.yields.csv"))?;
    let record = std::fs::read_to_string(demo().join("runs/run0101.run.yaml"))?;
    for i in 0..n_runs {
        let id = format!("b{i:05}");
        // Distinct data per run: the first count shifted by the run number.
        let y = yields.replacen("D01,elastic,", &format!("D01,elastic,{}", i % 10), 1);
        std::fs::write(dir.join(format!("runs/{id}.yields.csv")), y)?;
        let r = record
            .replace("run: \"0101\"", &format!("run: \"{id}\""))
            .replace("run0101.yields.csv", &format!("{id}.yields.csv"));
        std::fs::write(dir.join(format!("runs/{id}.run.yaml")), r)?;
    }
    // The same runs with the report and plots turned off, to see what they cost.
    let text = std::fs::read_to_string(dir.join("experiment.yaml"))?;
    std::fs::write(dir.join("no-report.yaml"), format!("{text}report: {{ plots: false, html: false }}\n"))?;
    let mut cold = Vec::new();
    let mut bare = Vec::new();
    let mut warm = Vec::new();
    let (mut rss_cold, mut rss_warm) = (None, None);
    for k in 0..REPEATS {
        let out = format!("out{k}");
        let (t, rss) = run_timed(&dir, &["batch", "experiment.yaml", "--out", &out, "-q", "--jobs", "2"])?;
        cold.push(t);
        rss_cold = rss;
        let (t, rss) = run_timed(&dir, &["batch", "experiment.yaml", "--out", &out, "-q", "--jobs", "2"])?;
        warm.push(t);
        rss_warm = rss;
        let plain = format!("plain{k}");
        bare.push(run_timed(&dir, &["batch", "no-report.yaml", "--out", &plain, "-q", "--jobs", "2"])?.0);
    }
    let (cold, warm, bare) = (median(&mut cold), median(&mut warm), median(&mut bare));
    let rss = |r: Option<f64>| r.map_or("-".into(), |m| format!("{m:.0} MB"));
    println!(
        "{n_runs} yields runs, --jobs 2, medians of {REPEATS}: cold {cold:.2} s ({:.1} ms per run, peak RSS {}), \
         nothing changed {warm:.3} s (peak RSS {}); without report and plots cold {bare:.2} s: the report adds \
         {:.2} s ({:.1} %)",
        cold / n_runs as f64 * 1e3,
        rss(rss_cold),
        rss(rss_warm),
        cold - bare,
        (cold / bare - 1.0) * 100.0
    );

    // 2. List-mode runs: the demo's list-mode config, and its Parquet run (detector, ADC,
    // ΔE, pile-up; a PID polygon on D01) scaled up by repeating its rows.
    let lm = std::env::temp_dir().join("xsflow-bench-listmode");
    let _ = std::fs::remove_dir_all(&lm);
    std::fs::create_dir_all(lm.join("listmode"))?;
    config_without_fits(&demo().join("experiment-listmode.yaml"), &lm.join("experiment.yaml"), "listmode/*.run.yaml")?;
    let small = xsflow::tables::read_table(&demo().join("listmode/run0201.events.parquet"))?;
    let reps = n_events.div_ceil(small.height());
    let mut big = small.clone();
    for _ in 1..reps {
        big.vstack_mut(&small)?;
    }
    let mut big = big.head(Some(n_events));
    let mut bytes = Vec::new();
    polars::prelude::ParquetWriter::new(&mut bytes).with_row_group_size(Some(1 << 20)).finish(&mut big)?;
    let record = std::fs::read_to_string(demo().join("listmode/run0201.run.yaml"))?;
    for i in 0..n_listmode {
        let id = format!("m{i:03}");
        std::fs::write(lm.join(format!("listmode/{id}.events.parquet")), &bytes)?;
        let r = record
            .replace("run: \"0201\"", &format!("run: \"{id}\""))
            .replace("run0201.events.parquet", &format!("{id}.events.parquet"));
        std::fs::write(lm.join(format!("listmode/{id}.run.yaml")), r)?;
    }
    let (one, rss_one) = run_timed(&lm, &["batch", "experiment.yaml", "--out", "out1", "-q", "--jobs", "1"])?;
    let (two, rss_two) = run_timed(&lm, &["batch", "experiment.yaml", "--out", "out2", "-q", "--jobs", "2"])?;
    println!(
        "{n_listmode} list-mode runs of {n_events} events: --jobs 1 {one:.2} s (peak RSS {}), --jobs 2 {two:.2} s (peak RSS {}); speed-up {:.2}",
        rss(rss_one),
        rss(rss_two),
        one / two
    );
    let _ = std::fs::remove_dir_all(&dir);
    let _ = std::fs::remove_dir_all(&lm);
    Ok(())
}
