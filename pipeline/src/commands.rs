//! The verbs of the command line. Each runs its work through the library and returns what
//! it prints (results on stdout; problems and its closing summary on stderr) and how it
//! ended; `main.rs` prints nothing of its own and maps the outcome to the exit code. Tables
//! are rendered by the modules that own them (`kinematics`, `theory`, `fit`, `catalogue`);
//! the problem lists and summary lines of the verbs are here.

use std::fmt::{Display, Write as _};
use std::path::Path;

use stages::physics::kinematics::Mode;
use stages::setup::DetectConfig;
use stages::simulate::{DeadTimeModel, SimulateOptions};
use tracing_subscriber::EnvFilter;

use crate::batch::{BatchOptions, BatchSummary};
use crate::cli::{Command, DeadTimeArg, DetectArg, Format, ReportFormat, StoppingFormat, TableFormat};
use crate::error::{render, Diagnostic, RunFailure};
use crate::plan::{plan, plan_with};
use crate::run::{check_runs, reduce_all};
use crate::{catalogue, fit, kinematics, theory};

/// How a command ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything asked was done.
    Done,
    /// A run or fit failed; the others were still done.
    Failed,
    /// A bad command line or config: nothing was done.
    BadInput,
}

/// What a command prints, and how it ended.
#[derive(Debug)]
pub struct Report {
    /// Results, for a script or a person.
    pub stdout: String,
    /// Problems and the summary line.
    pub stderr: String,
    /// How it ended.
    pub outcome: Outcome,
}

impl Report {
    fn new() -> Self {
        Report { stdout: String::new(), stderr: String::new(), outcome: Outcome::Done }
    }

    /// A report of one line on stderr.
    fn bad_input(line: impl Display) -> Self {
        Report::new().err(line).end(Outcome::BadInput)
    }

    /// Diagnostics on stderr.
    fn diagnostics(diagnostics: &[Diagnostic]) -> Self {
        Report { stderr: render(diagnostics), ..Report::new() }.end(Outcome::BadInput)
    }

    #[must_use]
    fn out(mut self, text: &str) -> Self {
        self.stdout.push_str(text);
        self
    }

    #[must_use]
    fn err(mut self, line: impl Display) -> Self {
        let _ = writeln!(self.stderr, "{line}");
        self
    }

    #[must_use]
    fn end(mut self, outcome: Outcome) -> Self {
        self.outcome = outcome;
        self
    }

    /// The problems of the config and of the runs: one JSON document on stdout, or a block
    /// per problem on stderr.
    #[must_use]
    fn problems(mut self, format: Format, config: &[Diagnostic], runs: &[RunFailure]) -> Self {
        match format {
            Format::Json => {
                let _ = writeln!(self.stdout, "{}", serde_json::json!({ "config": config, "runs": runs }));
            }
            Format::Text => {
                self.stderr += &render(config);
                for f in runs {
                    let _ = writeln!(self.stderr, "run {}:", f.run);
                    self.stderr += &render(&f.problems);
                }
            }
        }
        self
    }

    /// Print the report: stdout, then stderr.
    pub fn print(&self) {
        print!("{}", self.stdout);
        eprint!("{}", self.stderr);
    }
}

/// Send the log to stderr: warnings only when `quiet`, else info, debug (`-v`) or
/// everything (`-vv`); `RUST_LOG` overrides.
pub fn init_logs(verbose: u8, quiet: bool) {
    let level = match (quiet, verbose) {
        (true, _) => "warn",
        (_, 0) => "info",
        (_, 1) => "debug",
        _ => "trace",
    };
    let filter = EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new(level));
    let ansi = std::io::IsTerminal::is_terminal(&std::io::stderr());
    tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_target(false)
        .with_ansi(ansi)
        .init();
}

/// Run a verb and print what it says; the outcome is left to map to an exit code.
pub fn run(command: Command) -> Outcome {
    let report = execute(command);
    report.print();
    report.outcome
}

/// Run a verb and return what it would print.
pub fn execute(command: Command) -> Report {
    match command {
        Command::Check { config, format } => check(&config, format),
        Command::Reduce { config, out, runs, format } => reduce(&config, out.as_deref(), &runs, format),
        Command::Batch { config, out, jobs, shard, force, dry_run, format } => {
            batch(&config, out.as_deref(), jobs, shard.as_deref(), force, dry_run, format)
        }
        Command::Runs { out, failed, format } => runs(&out, failed, format),
        Command::Merge { dirs, out } => match crate::batch::merge(&dirs, &out) {
            Ok((s, failures)) => {
                let failed = s.failed + s.fits_failed > 0 || !failures.is_empty();
                Report::new().problems(Format::Text, &[], &failures).err(merge_summary(&s, &out)).end(if failed {
                    Outcome::Failed
                } else {
                    Outcome::Done
                })
            }
            Err(d) => Report::diagnostics(&[d]),
        },
        Command::Kinematics {
            beam,
            target,
            energy_mev,
            angles,
            excitation_mev,
            detect,
            ejectile,
            non_relativistic,
            format,
        } => {
            let request = kinematics::Request {
                beam: &beam,
                target: &target,
                ejectile: ejectile.as_deref(),
                energy_mev,
                excitation_mev,
                detect: match detect {
                    DetectArg::Ejectile => DetectConfig::Ejectile,
                    DetectArg::Recoil => DetectConfig::Recoil,
                },
                non_relativistic,
            };
            kinematics_table(&request, &angles, format)
        }
        Command::Stopping { ion, material, energy_mev, thickness_ug_cm2, format } => {
            stopping(&ion, &material, energy_mev, thickness_ug_cm2, format)
        }
        Command::Theory { model, angles, format } => theory_curve(&model, &angles, format),
        Command::Fit { data, model, state, out, format } => {
            fit_command(&data, &model, state.as_deref(), out.as_deref(), format)
        }
        Command::Simulate {
            config,
            truth,
            state_truth,
            out,
            seed,
            runs,
            events,
            data,
            real_time_s,
            dead_time,
            resolving_time_us,
            background_fraction,
            pulser_rate_per_s,
        } => {
            let request = crate::simulate::Request {
                config,
                truth,
                state_truths: state_truth,
                out,
                data,
                dead_time: dead_time.map(dead_time_model),
                resolving_time_us,
                options: SimulateOptions {
                    seed,
                    runs,
                    events,
                    real_time_s,
                    dead_time: DeadTimeModel::NonParalyzable,
                    resolving_time_us: 0.0,
                    background_fraction,
                    pulser_rate_per_s,
                },
            };
            simulate_runs(&request)
        }
        Command::Beamtime {
            config,
            truth,
            state_truth,
            current_na,
            precision,
            dead_time,
            resolving_time_us,
            dead_time_limit,
            background_fraction,
            format,
        } => {
            let request = crate::beamtime::Request {
                config,
                truth,
                state_truths: state_truth,
                dead_time: dead_time.map(dead_time_model),
                resolving_time_us,
                options: stages::simulate::beamtime::BeamtimeOptions {
                    current_na,
                    precision_rel: precision,
                    dead_time: DeadTimeModel::NonParalyzable,
                    resolving_time_us: 0.0,
                    dead_time_limit,
                    background_fraction,
                },
            };
            match crate::beamtime::beamtime(&request) {
                Ok(b) => crate::beamtime::warnings(&b)
                    .iter()
                    .fold(Report::new().out(&crate::beamtime::render(&b, format == StoppingFormat::Json)), |r, w| {
                        r.err(format_args!("warning: {w}"))
                    }),
                Err(diags) => Report::diagnostics(&diags),
            }
        }
        Command::Plot { kind, input, out, fits, detector, outlier_sigmas } => {
            match crate::plot::draw(kind, &input, &out, fits.as_deref(), detector.as_deref(), outlier_sigmas) {
                Ok(()) => Report::new().err(format_args!("plot written to {}", out.display())),
                Err(d) => Report::diagnostics(&[d]),
            }
        }
        Command::Schema { name } => match crate::schema::schema_json(&name) {
            Some(s) => Report::new().out(&s),
            None => Report::new().end(Outcome::BadInput),
        },
    }
}

/// The dead-time model of a command-line choice.
fn dead_time_model(d: DeadTimeArg) -> DeadTimeModel {
    match d {
        DeadTimeArg::NonParalyzable => DeadTimeModel::NonParalyzable,
        DeadTimeArg::Paralyzable => DeadTimeModel::Paralyzable,
    }
}

/// `Failed` when anything failed.
fn failed_if(any: bool) -> Outcome {
    if any {
        Outcome::Failed
    } else {
        Outcome::Done
    }
}

/// The problems of a config that did not plan, and their count; `consequence` ends the
/// count's line.
fn config_problems(format: Format, diags: &[Diagnostic], config: &Path, consequence: &str) -> Report {
    Report::new()
        .problems(format, diags, &[])
        .err(format_args!("{} problem(s) in {}{consequence}", diags.len(), config.display()))
        .end(Outcome::BadInput)
}

fn check(config: &Path, format: Format) -> Report {
    let p = match plan(config) {
        Ok(p) => p,
        Err(diags) => return config_problems(format, &diags, config, ""),
    };
    let failures = check_runs(&p);
    let report = Report::new().problems(format, &[], &failures);
    let n: usize = failures.iter().map(|f| f.problems.len()).sum();
    if n == 0 {
        report.err(format_args!("{}: config and {} run(s) are valid", config.display(), p.runs.len()))
    } else {
        report
            .err(format_args!("{n} problem(s) in {} of {} run(s)", failures.len(), p.runs.len()))
            .end(Outcome::BadInput)
    }
}

/// `; N fit(s) converged, M failed`, or nothing when no fit ran.
fn fits_clause(fits_ok: usize, fits_failed: usize, shown: bool) -> String {
    if shown {
        format!("; {fits_ok} fit(s) converged, {fits_failed} failed")
    } else {
        String::new()
    }
}

fn reduce(config: &Path, out: Option<&Path>, runs: &[String], format: Format) -> Report {
    let mut p = match plan(config) {
        Ok(p) => p,
        Err(diags) => return config_problems(format, &diags, config, "; nothing was reduced"),
    };
    if let Err(d) = p.select_runs(runs) {
        return Report::new().problems(format, &[d], &[]).end(Outcome::BadInput);
    }
    let out_dir = out.map_or_else(|| p.config_dir.join("out"), Path::to_path_buf);
    let (summary, failures) = reduce_all(&p, &out_dir);
    let report = match format {
        Format::Json => Report::new().out(&format!(
            "{}\n",
            serde_json::json!({
                "ok": summary.ok, "failed": summary.failed,
                "fits_ok": summary.fits_ok, "fits_failed": summary.fits_failed,
                "out": out_dir, "failures": failures
            })
        )),
        Format::Text => Report::new().problems(format, &[], &failures),
    };
    let fits = fits_clause(summary.fits_ok, summary.fits_failed, !p.fits.is_empty());
    report
        .err(format_args!(
            "{} run(s) reduced, {} failed{fits}; outputs in {}",
            summary.ok,
            summary.failed,
            out_dir.display()
        ))
        .end(failed_if(summary.failed + summary.fits_failed > 0))
}

fn merge_summary(s: &BatchSummary, out: &Path) -> String {
    format!(
        "merge: {} run(s) ok, {} failed; {} fit(s) converged, {} failed; outputs in {}",
        s.ok,
        s.failed,
        s.fits_ok,
        s.fits_failed,
        out.display()
    )
}

/// Angles of `--angles`, or the report of what is wrong with them.
fn angles(text: &str) -> Result<Vec<f64>, Report> {
    kinematics::parse_angles(text).map_err(Report::bad_input)
}

fn kinematics_table(request: &kinematics::Request<'_>, angles_text: &str, format: TableFormat) -> Report {
    let angles = match angles(angles_text) {
        Ok(a) => a,
        Err(report) => return report,
    };
    let reaction = match kinematics::resolve(request) {
        Ok(r) => r,
        Err(lines) => return lines.iter().fold(Report::new(), Report::err).end(Outcome::BadInput),
    };
    let mode = if request.non_relativistic { Mode::NonRelativistic } else { Mode::Relativistic };
    let rows = kinematics::rows(&reaction, &angles, mode);
    printed_table(kinematics::render(&reaction, &rows, format, mode))
}

fn stopping(
    ion: &str,
    material: &str,
    energy_mev: f64,
    thickness_ug_cm2: Option<f64>,
    format: StoppingFormat,
) -> Report {
    match crate::stopping::compute(ion, material, energy_mev, thickness_ug_cm2) {
        Ok((result, warnings)) => {
            let report = warnings
                .iter()
                .fold(Report::new().out(&crate::stopping::render(&result, format == StoppingFormat::Json)), |r, w| {
                    r.err(format_args!("warning: {w}"))
                });
            report.end(failed_if(result.stops_inside))
        }
        Err(lines) => lines.iter().fold(Report::new(), Report::err).end(Outcome::BadInput),
    }
}

fn theory_curve(model: &Path, angles_text: &str, format: TableFormat) -> Report {
    let angles = match angles(angles_text) {
        Ok(a) => a,
        Err(report) => return report,
    };
    match theory::curve(model, &angles) {
        Ok(curve) => printed_table(theory::render(&curve, format)),
        Err(diags) => Report::diagnostics(&diags),
    }
}

fn fit_command(data: &Path, model: &Path, state: Option<&str>, out: Option<&Path>, format: ReportFormat) -> Report {
    let loaded = match fit::load(model, None) {
        Ok(l) => l,
        Err(diags) => return Report::diagnostics(&diags),
    };
    let (table, files) = match fit::read_data(data) {
        Ok(t) => t,
        Err(d) => return Report::diagnostics(&[d]),
    };
    let state = match fit::choose_state(&table, state) {
        Ok(s) => s,
        Err(e) => return Report::diagnostics(&[Diagnostic::new(data, "state", e.to_string())]),
    };
    let mut output = match fit::run(&loaded, &table, &state) {
        Ok(o) => o,
        // A column the fit needs is the data's fault; everything else is the fit file's.
        Err(e @ fit::FitError::Data(stages::StageError::MissingColumn { .. })) => {
            return Report::diagnostics(&[Diagnostic::new(data, "", e.to_string())])
        }
        Err(e) => return Report::diagnostics(&[Diagnostic::new(model, "", e.to_string())]),
    };
    let out_dir = out.map_or_else(|| model.parent().unwrap_or(Path::new(".")).join("fit"), Path::to_path_buf);
    let record = match fit::provenance_json(&loaded, &files, Path::new(".")) {
        Ok(r) => r,
        Err(d) => return Report::diagnostics(&[d]),
    };
    if let Err(d) = fit::write(&out_dir, &mut output, &record) {
        return Report::diagnostics(&[d]);
    }
    let report = Report::new().out(&fit::render(&output.report, format));
    if output.report.converged {
        report.err(format_args!("fit converged; outputs in {}", out_dir.display()))
    } else {
        report
            .err(format_args!(
                "fit did NOT converge ({}); outputs in {} are the last state, not a result",
                output.report.termination,
                out_dir.display()
            ))
            .end(Outcome::Failed)
    }
}

fn simulate_runs(request: &crate::simulate::Request) -> Report {
    match crate::simulate::simulate(request) {
        Ok(s) => Report::new().err(format_args!(
            "{} run(s) simulated, {} events recorded at live fraction {:.4}; reduce them with: xsflow reduce {}",
            s.runs,
            s.recorded,
            s.live_fraction,
            s.config.display()
        )),
        Err(diags) => Report::diagnostics(&diags),
    }
}

fn batch(
    config: &Path,
    out: Option<&Path>,
    jobs: usize,
    shard: Option<&str>,
    force: bool,
    dry_run: bool,
    format: Format,
) -> Report {
    let shard = match shard.map(crate::batch::parse_shard).transpose() {
        Ok(s) => s,
        Err(m) => return Report::bad_input(m),
    };
    let p = match plan_with(config, true) {
        Ok(p) => p,
        Err(diags) => return config_problems(format, &diags, config, "; nothing was processed"),
    };
    let out = out.map_or_else(|| p.config_dir.join("out"), Path::to_path_buf);
    let opts = BatchOptions { out: out.clone(), jobs, shard, force, dry_run };
    let (summary, failures, lines) = match crate::batch::batch(&p, &opts) {
        Ok(r) => r,
        Err(d) => return Report::diagnostics(&[d]),
    };
    let report = match format {
        Format::Json => Report::new().out(&format!(
            "{}\n",
            serde_json::json!({ "summary": summary, "out": out, "failures": failures, "runs": lines })
        )),
        Format::Text => {
            let listed = if dry_run { lines.iter().map(|l| format!("{l}\n")).collect() } else { String::new() };
            Report::new().out(&listed).problems(format, &[], &failures)
        }
    };
    let fits_ran = !(p.fits.is_empty() || shard.is_some() || dry_run || summary.fits_ok + summary.fits_failed == 0);
    let fits = fits_clause(summary.fits_ok, summary.fits_failed, fits_ran);
    let verb = if dry_run { "would be processed" } else { "ok" };
    report
        .err(format_args!(
            "batch: {} {verb}, {} failed, {} skipped (unchanged){}{fits}; outputs in {}",
            if dry_run { lines.len() - summary.skipped } else { summary.ok },
            summary.failed,
            summary.skipped,
            if summary.other_shards > 0 {
                format!(", {} in other shards", summary.other_shards)
            } else {
                String::new()
            },
            out.display()
        ))
        .end(failed_if(summary.failed + summary.fits_failed > 0))
}

fn runs(out: &Path, failed: bool, format: TableFormat) -> Report {
    if !out.join(catalogue::CATALOGUE_FILE).is_file() {
        return Report::bad_input(format_args!(
            "{}: no run catalogue here (xsflow batch writes {})",
            out.display(),
            catalogue::CATALOGUE_FILE
        ));
    }
    let entries = match catalogue::Catalogue::open(out).and_then(|c| c.list(failed)) {
        Ok(e) => e,
        Err(m) => return Report::bad_input(m),
    };
    printed_table(catalogue::render(&entries, format))
}

/// A rendered table on stdout, or why it could not be written.
fn printed_table(rendered: polars::prelude::PolarsResult<String>) -> Report {
    match rendered {
        Ok(text) => Report::new().out(&text),
        Err(e) => Report::new().err(format_args!("cannot write the table as CSV: {e}")).end(Outcome::Failed),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_command_lines_print_why_and_do_nothing() {
        // (verb, what its stderr starts with)
        let cases = [
            (
                Command::Kinematics {
                    beam: "4He".into(),
                    target: "58Ni".into(),
                    energy_mev: 24.0,
                    angles: "10:5:1".into(),
                    excitation_mev: 0.0,
                    detect: DetectArg::Ejectile,
                    ejectile: None,
                    non_relativistic: false,
                    format: TableFormat::Json,
                },
                "--angles 10:5:1: a range needs A <= B and STEP > 0",
            ),
            (
                Command::Batch {
                    config: "none.yaml".into(),
                    out: None,
                    jobs: 1,
                    shard: Some("3/2".into()),
                    force: false,
                    dry_run: false,
                    format: Format::Text,
                },
                "--shard 3/2: expected K/N with whole numbers 1 <= K <= N",
            ),
            (Command::Schema { name: "nonsense".into() }, ""),
        ];
        for (command, stderr) in cases {
            let what = format!("{command:?}");
            let report = execute(command);
            assert_eq!(report.outcome, Outcome::BadInput, "{what}");
            assert!(report.stdout.is_empty(), "{what}: {}", report.stdout);
            assert!(report.stderr.starts_with(stderr), "{what}: {}", report.stderr);
        }
    }

    #[test]
    fn problems_go_to_stdout_as_one_json_document_or_to_stderr_as_text() {
        let d = Diagnostic::new(Path::new("a.yaml"), "runs", "found [], expected a run");
        let runs = [RunFailure { run: "0101".into(), problems: vec![d.clone()] }];
        let json = Report::new().problems(Format::Json, std::slice::from_ref(&d), &runs);
        assert!(json.stderr.is_empty());
        let doc: serde_json::Value = serde_json::from_str(&json.stdout).expect("JSON");
        assert_eq!(doc["runs"][0]["run"], "0101");
        assert_eq!(doc["config"][0]["key"], "runs");
        let text = Report::new().problems(Format::Text, std::slice::from_ref(&d), &runs);
        assert!(text.stdout.is_empty());
        assert_eq!(text.stderr, format!("{d}\nrun 0101:\n{d}\n"));
    }
}
