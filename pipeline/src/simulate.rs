//! `xsflow simulate CONFIG --truth MODEL --out DIR`: synthetic runs with known truth, in the
//! formats the reduction reads. The expected counts and the random numbers come from
//! `stages::simulate`; this module reads the config and the model files, and writes, into
//! DIR: `experiment.yaml` (the config, its `runs:` pointing at the simulated runs),
//! `runs/simNNNN.run.yaml` with each run's data file (list-mode events in Parquet or Arrow
//! IPC, spectra in Parquet or CSV, or a yields table), and `truth.parquet`.
//!
//! A run's data file is written to a temporary name and renamed, then its record is
//! written atomically: a record never names a file that is not complete.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use stages::physics::synthetic::Rng;
use stages::raw::RawPlan;
use stages::simulate::sample::{binomial, poisson_counts, EventBatch, EventSource};
use stages::simulate::{self, DeadTimeModel, Experiment, RunNumbers, SimulateOptions, StateTruth};
use stages::stage::correct_dead_time::DeadTimeMethod;
use stages::{Setup, StageConfig};

use crate::config::{parse_experiment, YamlFile};
use crate::error::Diagnostic;
use crate::plan::plan_with;
use crate::provenance::sha256_hex;
use crate::tables::{csv_bytes, parquet_bytes, write_all_atomic, WriteError};

/// Events per batch (and per Parquet row group): 2^20.
const BATCH: usize = 1 << 20;

/// Where the problems of the command line are reported.
const COMMAND_LINE: &str = "xsflow simulate";

/// The file formats a run's data can be written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DataKind {
    /// List-mode events, Parquet (default with a `raw:` section).
    Events,
    /// List-mode events, Arrow IPC.
    EventsIpc,
    /// Spectra, Parquet.
    Spectra,
    /// Spectra, CSV.
    SpectraCsv,
    /// Yields tables, CSV (default without a `raw:` section).
    Yields,
}

impl DataKind {
    /// The run-record key and file suffix.
    fn file(self) -> (&'static str, &'static str) {
        match self {
            DataKind::Events => ("events_file", "events.parquet"),
            DataKind::EventsIpc => ("events_file", "events.arrow"),
            DataKind::Spectra => ("spectra_file", "spectra.parquet"),
            DataKind::SpectraCsv => ("spectra_file", "spectra.csv"),
            DataKind::Yields => ("yields_file", "yields.csv"),
        }
    }
}

/// What `xsflow simulate` is asked to do.
#[derive(Debug, Clone)]
pub struct Request {
    /// The experiment config.
    pub config: PathBuf,
    /// The elastic state's true cross section: a model file.
    pub truth: PathBuf,
    /// Other states' truths, `STATE=MB_SR` or `STATE=MODEL`.
    pub state_truths: Vec<String>,
    /// The output folder.
    pub out: PathBuf,
    /// The data format; default events with a `raw:` section, else yields.
    pub data: Option<DataKind>,
    /// The dead-time model; default the config's `correct_dead_time` model, else
    /// non-paralyzable.
    pub dead_time: Option<DeadTimeModel>,
    /// Resolving time, µs; default the config's, else 2.
    pub resolving_time_us: Option<f64>,
    /// The settings (its `dead_time` and `resolving_time_us` are replaced by the above).
    pub options: SimulateOptions,
}

/// What was written.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// Runs written.
    pub runs: u32,
    /// Events (or counts) recorded over all runs.
    pub recorded: u64,
    /// The true live fraction of every run.
    pub live_fraction: f64,
    /// The config to reduce them with.
    pub config: PathBuf,
}

/// Resolving time when neither the command line nor the config gives one, µs (a typical
/// conversion time of a peak-sensing ADC, common practice).
const DEFAULT_RESOLVING_TIME_US: f64 = 2.0;

/// Simulate the runs and write them.
///
/// # Errors
/// Every problem of the command line, the config and the models (located), or the file
/// that could not be written.
pub fn simulate(req: &Request) -> Result<Summary, Vec<Diagnostic>> {
    let (plan, file, dead_time, resolving_time_us) = prepare(&req.config, req.dead_time, req.resolving_time_us)?;
    let mut options = req.options.clone();
    (options.dead_time, options.resolving_time_us) = (dead_time, resolving_time_us);
    let mut problems = command_line_problems(COMMAND_LINE, &options.validate());
    let data = req.data.unwrap_or(if plan.raw.is_some() { DataKind::Events } else { DataKind::Yields });
    if data != DataKind::Yields && plan.raw.is_none() {
        problems.push(
            Diagnostic::new(&req.config, "raw", format!("--data {data:?} needs a `raw:` section, found none"))
                .with_help("add the raw section (README: Raw data), or simulate yields tables: --data yields"),
        );
    }
    if req.out.join("experiment.yaml").exists() || req.out.join("runs").exists() {
        problems.push(
            Diagnostic::new(&req.out, "--out", "the folder already holds a simulation (experiment.yaml or runs/)")
                .with_help("choose a new folder, or remove this one"),
        );
    }
    let truths = match truths(COMMAND_LINE, &req.truth, &req.state_truths, &req.config, &plan.setup) {
        Ok(t) => t,
        Err(d) => {
            problems.extend(d);
            BTreeMap::new()
        }
    };
    if !problems.is_empty() {
        return Err(problems);
    }
    let experiment = simulate::experiment(&plan.setup, &truths)
        .map_err(|e| vec![Diagnostic::new(&req.config, "", e.to_string())])?;
    let raw = plan.raw.as_ref().filter(|_| data != DataKind::Yields);
    let run = simulate::run_numbers(&experiment, &options, raw.is_some());
    let out = &req.out;
    let written = |e: WriteError| vec![e.diagnostic()];
    let mut master = Rng::new(options.seed);
    let mut recorded = 0;
    let mut truth_rows = TruthRows::default();
    for i in 1..=options.runs {
        let id = format!("sim{i:04}");
        let mut rng = Rng::new(master.next_u64());
        let (key, suffix) = data.file();
        let data_name = format!("{id}.{suffix}");
        let data_path = out.join("runs").join(&data_name);
        let scalers = match raw {
            None => write_yields(&data_path, &experiment, &run, &mut rng),
            Some(raw) => write_raw(&data_path, data, raw, &experiment, &run, &options, &mut rng),
        }
        .map_err(written)?;
        recorded += scalers.recorded;
        let record = run_record(&id, key, &data_name, &run, &options, &scalers, &mut rng);
        write_all_atomic(&[(out.join("runs").join(format!("{id}.run.yaml")), record.into_bytes())]).map_err(written)?;
        truth_rows.add(&id, &experiment, &run);
    }
    let config_copy = out.join("experiment.yaml");
    let provenance = serde_json::json!({
        "program": format!("xsflow {}", env!("CARGO_PKG_VERSION")),
        "config_sha256": sha256_hex(&file.bytes),
        "seed": options.seed,
        "runs": options.runs,
        "events": options.events,
        "real_time_s": options.real_time_s,
        "dead_time": format!("{:?}", options.dead_time),
        "resolving_time_us": options.resolving_time_us,
        "background_fraction": options.background_fraction,
    });
    let truth = truth_rows
        .table()
        .and_then(|mut t| parquet_bytes(&mut t, vec![("xsflow.simulate".into(), provenance.to_string())]))
        .map_err(|e| vec![Diagnostic::new(&out.join("truth.parquet"), "", format!("cannot encode the table: {e}"))])?;
    let config_text = config_for_runs(&file, &req.config);
    write_all_atomic(&[(out.join("truth.parquet"), truth), (config_copy.clone(), config_text.into_bytes())])
        .map_err(written)?;
    Ok(Summary { runs: options.runs, recorded, live_fraction: run.live_fraction, config: config_copy })
}

/// The problems of a verb's settings as diagnostics of its command line.
pub(crate) fn command_line_problems(command: &str, problems: &[stages::Problem]) -> Vec<Diagnostic> {
    problems
        .iter()
        .map(|p| {
            Diagnostic::new(Path::new(command), p.key.clone(), format!("found {}, expected {}", p.found, p.expected))
        })
        .collect()
}

/// What `simulate` and `beamtime` read first: the plan of the config, its file, and the
/// acquisition's dead-time model and resolving time in µs (the command line's, else the
/// config's `correct_dead_time` model, else non-paralyzable at 2 µs).
///
/// # Errors
/// The config's problems, located.
pub(crate) fn prepare(
    config: &Path,
    model: Option<DeadTimeModel>,
    resolving_time_us: Option<f64>,
) -> Result<(crate::plan::Plan, YamlFile, DeadTimeModel, f64), Vec<Diagnostic>> {
    let plan = plan_with(config, true)?;
    let file = YamlFile::read(config).map_err(|d| vec![d])?;
    let (parsed, _) = parse_experiment(&file);
    let (config_model, config_tau) = dead_time_of(parsed.stages.as_deref().unwrap_or_default());
    Ok((
        plan,
        file,
        model.or(config_model).unwrap_or(DeadTimeModel::NonParalyzable),
        resolving_time_us.or(config_tau).unwrap_or(DEFAULT_RESOLVING_TIME_US),
    ))
}

/// The dead-time model and resolving time of the config's `correct_dead_time` stage, where
/// it uses a model.
fn dead_time_of(stages: &[StageConfig]) -> (Option<DeadTimeModel>, Option<f64>) {
    stages
        .iter()
        .find_map(|s| match s {
            StageConfig::CorrectDeadTime(c) => Some(match c.method {
                DeadTimeMethod::Paralyzable => (Some(DeadTimeModel::Paralyzable), c.resolving_time_us),
                DeadTimeMethod::NonParalyzable => (Some(DeadTimeModel::NonParalyzable), c.resolving_time_us),
                _ => (None, None),
            }),
            _ => None,
        })
        .unwrap_or((None, None))
}

/// Read a model file and check that it is the config's reaction.
fn model(path: &Path, config: &Path, setup: &Setup) -> Result<StateTruth, Vec<Diagnostic>> {
    let file = YamlFile::read(path).map_err(|d| vec![d])?;
    let model: stages::theory::ModelConfig = file.parse("", &file.value).map_err(|d| vec![d])?;
    let r = &setup.reaction;
    let problems = model.reaction().differences(setup, "simulates", "model");
    if problems.is_empty() {
        Ok(StateTruth::Model(Box::new(model)))
    } else {
        Err(problems
            .iter()
            .map(|p| {
                file.problem(p).with_help(format!(
                    "the config {} has {} on {} at {} MeV",
                    config.display(),
                    r.beam,
                    r.target,
                    r.energy_mev
                ))
            })
            .collect())
    }
}

/// The true cross section of every state: `--state-truth` where given, else the `--truth`
/// model for the elastic state; `command` names the command line in messages.
pub(crate) fn truths(
    command: &str,
    truth: &Path,
    state_truths: &[String],
    config: &Path,
    setup: &Setup,
) -> Result<BTreeMap<String, StateTruth>, Vec<Diagnostic>> {
    let Some(resolved) = setup.resolved.as_ref() else { return Ok(BTreeMap::new()) };
    let mut out = BTreeMap::new();
    let mut problems = Vec::new();
    let flag = |value: &str, message: String| {
        Diagnostic::new(Path::new(command), "--state-truth", format!("found {value}, expected {message}"))
    };
    for text in state_truths {
        let Some((state, value)) = text.split_once('=') else {
            problems.push(flag(text, "STATE=MB_SR or STATE=MODEL".into()));
            continue;
        };
        if resolved.channel(state).is_none() {
            problems.push(flag(text, format!("a state of the config: {}", resolved.state_names())));
            continue;
        }
        let truth = match value.parse::<f64>() {
            Ok(v) if v.is_finite() && v >= 0.0 => Ok(StateTruth::Constant(v)),
            Ok(_) => Err(vec![flag(text, "a constant dσ/dΩ_cm >= 0 in mb/sr".into())]),
            Err(_) => model(Path::new(value), config, setup),
        };
        match truth {
            Ok(t) => {
                out.insert(state.to_string(), t);
            }
            Err(d) => problems.extend(d),
        }
    }
    let elastic: Vec<&str> = resolved
        .channels
        .iter()
        .map(|(s, _)| s.name.as_str())
        .filter(|s| resolved.is_elastic(s) && !out.contains_key(*s))
        .collect();
    match model(truth, config, setup) {
        Ok(t) => {
            for s in elastic {
                out.insert(s.to_string(), t.clone());
            }
        }
        Err(d) => problems.extend(d),
    }
    if problems.is_empty() {
        Ok(out)
    } else {
        Err(problems)
    }
}

/// The scalers of a written run: what was recorded and what arrived.
#[derive(Debug, Clone, Copy, Default)]
struct Scalers {
    /// Events (or counts) written as recorded.
    recorded: u64,
    /// Triggers the acquisition accepted (recorded events, inside the channels or not).
    accepted: u64,
    /// Triggers that arrived (accepted and lost).
    arrived: u64,
}

/// A yields table of Poisson counts: the expected recorded counts of each peak.
fn write_yields(path: &Path, e: &Experiment, run: &RunNumbers, rng: &mut Rng) -> Result<Scalers, WriteError> {
    let means: Vec<f64> = run.peak_arrivals.iter().map(|a| a * run.live_fraction).collect();
    let counts = poisson_counts(rng, &means);
    let lost = rng.poisson(run.events_arriving * (1.0 - run.live_fraction));
    let mut table = DataFrame::new_infer_height(vec![
        Column::new("detector".into(), e.peaks.iter().map(|p| p.detector_id.clone()).collect::<Vec<_>>()),
        Column::new("state".into(), e.peaks.iter().map(|p| p.state.clone()).collect::<Vec<_>>()),
        Column::new("branch".into(), e.peaks.iter().map(|p| i32::from(p.branch)).collect::<Vec<_>>()),
        Column::new("counts_gross".into(), counts.clone()),
        Column::new("counts_background".into(), vec![0.0; counts.len()]),
        Column::new("peak_energy_lab_mev".into(), e.peaks.iter().map(|p| p.energy_lab_mev).collect::<Vec<_>>()),
    ])
    .and_then(|mut t| csv_bytes(&mut t))
    .map_err(|err| WriteError { path: path.to_path_buf(), error: std::io::Error::other(err) })?;
    write_all_atomic(&[(path.to_path_buf(), std::mem::take(&mut table))])?;
    let recorded = counts.iter().sum();
    Ok(Scalers { recorded, accepted: recorded, arrived: recorded + lost })
}

/// Spectra or list-mode events of a run through the detector response of `raw`.
fn write_raw(
    path: &Path,
    kind: DataKind,
    raw: &RawPlan,
    e: &Experiment,
    run: &RunNumbers,
    options: &SimulateOptions,
    rng: &mut Rng,
) -> Result<Scalers, WriteError> {
    let spectra = simulate::expected_spectra(e, run, raw, options.background_fraction);
    let f = run.live_fraction;
    let recorded_means: Vec<f64> = spectra.arriving.iter().map(|m| m * f).collect();
    let fail = |error: std::io::Error| WriteError { path: path.to_path_buf(), error };
    let polars_fail = |err: PolarsError| fail(std::io::Error::other(err));
    let values = detector_values(raw);
    let flagged = matches!(kind, DataKind::Events | DataKind::EventsIpc) && raw.config.columns.pile_up.is_some();
    let (recorded, lost_written) = match kind {
        DataKind::Spectra | DataKind::SpectraCsv => {
            let counts = poisson_counts(rng, &recorded_means);
            let mut table = spectra_table(raw, &values, &counts).map_err(polars_fail)?;
            let bytes = if kind == DataKind::SpectraCsv {
                csv_bytes(&mut table)
            } else {
                parquet_bytes(&mut table, Vec::new())
            }
            .map_err(polars_fail)?;
            write_all_atomic(&[(path.to_path_buf(), bytes)])?;
            (counts.iter().sum(), 0)
        }
        _ => {
            let lost_means: Vec<f64> = spectra.arriving.iter().map(|m| m * (1.0 - f)).collect();
            let lost = flagged.then_some(lost_means.as_slice());
            let total: f64 = recorded_means.iter().sum::<f64>() + lost.map_or(0.0, |l| l.iter().sum());
            let n = rng.poisson(total);
            let source = EventSource::new(&recorded_means, lost, spectra.channels, n, Rng::new(rng.next_u64()));
            let times = Rng::new(rng.next_u64());
            write_events(path, kind, raw, &values, source, times, n, options.real_time_s)?
        }
    };
    // Accepted triggers: recorded events inside the channels and outside them; arrived
    // triggers add those lost (Poisson thinning keeps the parts independent).
    let outside_recorded = rng.poisson(spectra.outside * f);
    let accepted = recorded + outside_recorded;
    let lost_rest =
        if flagged { rng.poisson(spectra.outside * (1.0 - f)) } else { rng.poisson(run.events_arriving * (1.0 - f)) };
    Ok(Scalers { recorded, accepted, arrived: accepted + lost_written + lost_rest })
}

/// The value each detector (config order) has in the data files: the key of
/// `raw.detector_ids` that maps to it, else its id.
fn detector_values(raw: &RawPlan) -> Vec<String> {
    raw.detector_ids()
        .iter()
        .map(|id| {
            raw.config.detector_ids.iter().find(|(_, v)| v == id).map_or_else(|| (*id).to_string(), |(k, _)| k.clone())
        })
        .collect()
}

/// The detector column: whole numbers 0…65535 as UInt16 when every value is one, else text.
fn detector_column(name: &str, values: &[String], detectors: &[u16]) -> Column {
    let numbers: Option<Vec<u16>> =
        values.iter().map(|v| v.parse::<u16>().ok().filter(|n| n.to_string() == *v)).collect();
    match numbers {
        Some(n) => Column::new(name.into(), detectors.iter().map(|d| n[usize::from(*d)]).collect::<Vec<u16>>()),
        None => {
            Column::new(name.into(), detectors.iter().map(|d| values[usize::from(*d)].as_str()).collect::<Vec<&str>>())
        }
    }
}

/// One row per detector and channel.
fn spectra_table(raw: &RawPlan, values: &[String], counts: &[u64]) -> PolarsResult<DataFrame> {
    let c = &raw.config.spectrum_columns;
    let channels = raw.n_channels();
    let detectors: Vec<u16> = (0..counts.len()).map(|i| (i / channels) as u16).collect();
    DataFrame::new_infer_height(vec![
        detector_column(&c.detector, values, &detectors),
        Column::new(c.channel.as_str().into(), (0..counts.len()).map(|i| (i % channels) as u32).collect::<Vec<_>>()),
        Column::new(c.counts.as_str().into(), counts.to_vec()),
    ])
}

/// A batch of events as a table with the `raw.columns` names: detector, energy (ADC
/// channel), and where mapped the pile-up flag, ΔE (inside the detector's PID polygon:
/// the mean of its vertices, which a convex polygon holds; 0 without one) and the time
/// in s (a Poisson process at the run's recorded rate).
fn event_table(
    raw: &RawPlan,
    values: &[String],
    delta_e: &[f64],
    batch: EventBatch,
    time: &mut (Rng, f64, f64),
) -> PolarsResult<DataFrame> {
    let c = &raw.config.columns;
    let energy = if raw.n_channels() <= 1 << 16 {
        Column::new(c.energy.as_str().into(), batch.channel.iter().map(|v| *v as u16).collect::<Vec<u16>>())
    } else {
        Column::new(c.energy.as_str().into(), batch.channel)
    };
    let mut columns = vec![detector_column(&c.detector, values, &batch.detector), energy];
    if let Some(name) = &c.pile_up {
        columns.push(Column::new(name.as_str().into(), batch.pile_up));
    }
    if let Some(name) = &c.delta_e {
        let de: Vec<f64> = batch.detector.iter().map(|d| delta_e[usize::from(*d)]).collect();
        columns.push(Column::new(name.as_str().into(), de));
    }
    if let Some(name) = &c.time {
        let (rng, now_s, mean_gap_s) = time;
        let t: Vec<f64> = batch
            .detector
            .iter()
            .map(|_| {
                *now_s -= *mean_gap_s * rng.uniform().ln();
                *now_s
            })
            .collect();
        columns.push(Column::new(name.as_str().into(), t));
    }
    DataFrame::new_infer_height(columns)
}

/// Write the events of a run (Parquet row groups or IPC record batches of [`BATCH`]
/// events), drawn on a second thread while this one encodes; returns the events written
/// as recorded and as lost (flagged).
#[allow(clippy::too_many_arguments)]
fn write_events(
    path: &Path,
    kind: DataKind,
    raw: &RawPlan,
    values: &[String],
    source: Option<EventSource>,
    times: Rng,
    n: u64,
    real_time_s: f64,
) -> Result<(u64, u64), WriteError> {
    let fail = |error: std::io::Error| WriteError { path: path.to_path_buf(), error };
    let polars_fail = |err: PolarsError| fail(std::io::Error::other(err));
    let delta_e: Vec<f64> = raw
        .detector_ids()
        .iter()
        .map(|id| raw.config.pid.get(*id).map_or(0.0, |v| v.iter().map(|p| p[1]).sum::<f64>() / v.len().max(1) as f64))
        .collect();
    let mut time = (times, 0.0, real_time_s / (n.max(1) as f64));
    let dir = path.parent().unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir).map_err(fail)?;
    let name = path.file_name().map_or_else(|| "events".into(), |n| n.to_string_lossy().into_owned());
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let empty = EventBatch::default();
    let schema = event_table(raw, values, &delta_e, empty, &mut time).map_err(polars_fail)?.schema().clone();
    let file = File::create(&tmp).map_err(fail)?;
    let (send, receive) = std::sync::mpsc::sync_channel::<EventBatch>(2);
    let counted = std::thread::scope(|scope| {
        scope.spawn(move || {
            if let Some(mut source) = source {
                while let Some(batch) = source.next_batch(BATCH) {
                    if send.send(batch).is_err() {
                        return;
                    }
                }
            }
        });
        let mut lost = 0u64;
        let mut all = 0u64;
        let mut write = |w: &mut dyn FnMut(&DataFrame) -> PolarsResult<()>| -> PolarsResult<()> {
            for batch in receive.iter() {
                all += batch.pile_up.len() as u64;
                lost += batch.pile_up.iter().map(|p| u64::from(*p)).sum::<u64>();
                w(&event_table(raw, values, &delta_e, batch, &mut time)?)?;
            }
            Ok(())
        };
        let result = if kind == DataKind::EventsIpc {
            // Plain columns: no dictionaries, so no IPC field holds children or an id.
            let fields = (0..schema.len())
                .map(|_| polars_arrow::io::ipc::IpcField { fields: Vec::new(), dictionary_id: None })
                .collect();
            IpcWriter::new(file).batched(&schema, fields).and_then(|mut w| {
                write(&mut |df| w.write_batch(df))?;
                w.finish()
            })
        } else {
            // zstd at level 1, not the default 3: the encoding is most of the time.
            polars::polars_utils::compression::ZstdLevel::try_new(1)
                .and_then(|level| {
                    ParquetWriter::new(file)
                        .with_compression(ParquetCompression::Zstd(Some(level)))
                        .with_row_group_size(Some(BATCH))
                        .set_parallel(false)
                        .batched(&schema)
                })
                .and_then(|mut w| {
                    write(&mut |df| w.write_batch(df))?;
                    w.finish().map(|_| ())
                })
        };
        result.map(|()| (all - lost, lost))
    });
    let done = counted.map_err(polars_fail).and_then(|c| {
        File::open(&tmp).and_then(|f| f.sync_all()).and_then(|()| std::fs::rename(&tmp, path)).map_err(fail)?;
        Ok(c)
    });
    if done.is_err() {
        // Never renamed: nothing else to undo.
        let _ = std::fs::remove_file(&tmp);
    }
    done
}

/// The run record: charge, clocks and scalers consistent with the true live fraction.
/// The clocks give live time = f · real time; a pulser of `pulser_rate_per_s` is recorded
/// with probability f per signal; triggers count the events that arrived and those
/// accepted.
fn run_record(
    id: &str,
    key: &str,
    data_name: &str,
    run: &RunNumbers,
    options: &SimulateOptions,
    scalers: &Scalers,
    rng: &mut Rng,
) -> String {
    let pulser_sent = (options.pulser_rate_per_s * options.real_time_s).round().max(1.0) as u64;
    let pulser_recorded = binomial(rng, pulser_sent, run.live_fraction);
    format!(
        "# Simulated run (xsflow simulate, seed {seed}): invented data with known truth.\n\
         run: {id}\n{key}: {data_name}\ncharge_c: {charge}\nlive_time_s: {live}\nreal_time_s: {real}\n\
         pulser_sent: {pulser_sent}\npulser_recorded: {pulser_recorded}\n\
         triggers_raw: {arrived}\ntriggers_accepted: {accepted}\n",
        seed = options.seed,
        charge = run.charge_c,
        live = run.live_fraction * options.real_time_s,
        real = options.real_time_s,
        arrived = scalers.arrived.max(1),
        accepted = scalers.accepted,
    )
}

/// The config, its `runs:` pointing at the simulated run records and its fit files' paths
/// made absolute (the copy lives elsewhere).
fn config_for_runs(file: &YamlFile, config: &Path) -> String {
    use serde_yaml::Value;
    let mut value = file.value.clone();
    let dir = config.parent().unwrap_or(Path::new("."));
    if let Some(map) = value.as_mapping_mut() {
        map.insert("runs".into(), Value::Sequence(vec!["runs/*.run.yaml".into()]));
        if let Some(Value::Sequence(fits)) = map.get_mut("fits") {
            for fit in fits {
                if let Some(Value::String(p)) = fit.get_mut("model_file") {
                    let joined = dir.join(&*p);
                    *p = std::path::absolute(&joined).unwrap_or(joined).to_string_lossy().into_owned();
                }
            }
        }
    }
    let body = serde_yaml::to_string(&value).unwrap_or_default();
    format!("# Written by xsflow simulate from {}; the runs are simulated.\n{body}", config.display())
}

/// The rows of `truth.parquet`.
#[derive(Debug, Default)]
struct TruthRows {
    text: BTreeMap<&'static str, Vec<String>>,
    numbers: Vec<(&'static str, Vec<f64>)>,
    branch: Vec<i32>,
}

impl TruthRows {
    fn add(&mut self, run_id: &str, e: &Experiment, run: &RunNumbers) {
        for (p, arriving) in e.peaks.iter().zip(&run.peak_arrivals) {
            for (name, v) in [("run", run_id), ("detector", p.detector_id.as_str()), ("state", p.state.as_str())] {
                self.text.entry(name).or_default().push(v.to_string());
            }
            self.branch.push(i32::from(p.branch));
            let numbers = [
                ("theta_lab_deg", p.theta_lab_deg),
                ("theta_cm_deg", p.theta_cm_deg),
                ("energy_lab_mev", p.energy_lab_mev),
                ("domega_lab_per_domega_cm", p.domega_lab_per_domega_cm),
                ("dsdo_cm_mb_sr", p.dsdo_cm_mb_sr),
                ("dsdo_lab_mb_sr", p.dsdo_lab_mb_sr),
                ("solid_angle_msr", p.solid_angle_sr * 1e3),
                ("efficiency", p.efficiency),
                ("live_fraction", run.live_fraction),
                ("charge_c", run.charge_c),
                ("luminosity_per_cm2", run.luminosity_per_cm2),
                ("counts_expected", arriving * run.live_fraction),
            ];
            if self.numbers.is_empty() {
                self.numbers = numbers.iter().map(|(n, _)| (*n, Vec::new())).collect();
            }
            for ((_, column), (_, v)) in self.numbers.iter_mut().zip(numbers) {
                column.push(v);
            }
        }
    }

    fn table(&self) -> PolarsResult<DataFrame> {
        let mut columns: Vec<Column> = ["run", "detector", "state"]
            .iter()
            .map(|n| Column::new((*n).into(), self.text.get(n).cloned().unwrap_or_default()))
            .collect();
        columns.push(Column::new("branch".into(), self.branch.clone()));
        columns.extend(self.numbers.iter().map(|(n, v)| Column::new((*n).into(), v.clone())));
        DataFrame::new_infer_height(columns)
    }
}
