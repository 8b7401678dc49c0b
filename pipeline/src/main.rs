//! The `xsflow` binary: parse the command line, run the verb, map the outcome to an exit
//! code (0 done, 1 a run failed, 2 bad command line or config).

use std::path::Path;
use std::process::ExitCode;

use clap::Parser;
use stages::physics::kinematics::Mode;
use stages::setup::DetectConfig;
use tracing_subscriber::EnvFilter;
use xsflow::cli::{Cli, Command, DetectArg, Format, ReportFormat, TableFormat};
use xsflow::error::{report, Diagnostic, RunFailure};
use xsflow::plan::plan;
use xsflow::run::{check_runs, reduce_all};
use xsflow::{fit, kinematics, theory};

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    init_logs(cli.verbose, cli.quiet);
    ExitCode::from(match cli.command {
        Command::Check { config, format } => check(&config, format),
        Command::Reduce { config, out, runs, format } => reduce(&config, out.as_deref(), &runs, format),
        Command::Batch { config, out, jobs, shard, force, dry_run, format } => {
            batch(&config, out.as_deref(), jobs, shard.as_deref(), force, dry_run, format)
        }
        Command::Runs { out, failed, format } => runs(&out, failed, format),
        Command::Merge { dirs, out } => match xsflow::batch::merge(&dirs, &out) {
            Ok((s, failures)) => {
                print_problems(Format::Text, &[], &failures);
                eprintln!(
                    "merge: {} run(s) ok, {} failed; {} fit(s) converged, {} failed; outputs in {}",
                    s.ok,
                    s.failed,
                    s.fits_ok,
                    s.fits_failed,
                    out.display()
                );
                u8::from(s.failed + s.fits_failed > 0 || !failures.is_empty())
            }
            Err(d) => {
                report(&[d]);
                2
            }
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
        Command::Theory { model, angles, format } => theory_curve(&model, &angles, format),
        Command::Fit { data, model, state, out, format } => {
            fit_command(&data, &model, state.as_deref(), out.as_deref(), format)
        }
        Command::Schema { name } => match xsflow::schema::schema_json(&name) {
            Some(s) => {
                print!("{s}");
                0
            }
            None => 2,
        },
    })
}

fn init_logs(verbose: u8, quiet: bool) {
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

fn print_problems(format: Format, config: &[Diagnostic], runs: &[RunFailure]) {
    match format {
        Format::Json => println!("{}", serde_json::json!({ "config": config, "runs": runs })),
        Format::Text => {
            report(config);
            for f in runs {
                eprintln!("run {}:", f.run);
                report(&f.problems);
            }
        }
    }
}

fn check(config: &Path, format: Format) -> u8 {
    match plan(config) {
        Err(diags) => {
            print_problems(format, &diags, &[]);
            eprintln!("{} problem(s) in {}", diags.len(), config.display());
            2
        }
        Ok(p) => {
            let failures = check_runs(&p);
            print_problems(format, &[], &failures);
            let n: usize = failures.iter().map(|f| f.problems.len()).sum();
            if n == 0 {
                eprintln!("{}: config and {} run(s) are valid", config.display(), p.runs.len());
                0
            } else {
                eprintln!("{n} problem(s) in {} of {} run(s)", failures.len(), p.runs.len());
                2
            }
        }
    }
}

fn reduce(config: &Path, out: Option<&Path>, runs: &[String], format: Format) -> u8 {
    let mut p = match plan(config) {
        Ok(p) => p,
        Err(diags) => {
            print_problems(format, &diags, &[]);
            eprintln!("{} problem(s) in {}; nothing was reduced", diags.len(), config.display());
            return 2;
        }
    };
    if let Err(d) = p.select_runs(runs) {
        print_problems(format, &[d], &[]);
        return 2;
    }
    let out_dir = out.map_or_else(|| p.config_dir.join("out"), Path::to_path_buf);
    let (summary, failures) = reduce_all(&p, &out_dir);
    match format {
        Format::Json => println!(
            "{}",
            serde_json::json!({
                "ok": summary.ok, "failed": summary.failed,
                "fits_ok": summary.fits_ok, "fits_failed": summary.fits_failed,
                "out": out_dir, "failures": failures
            })
        ),
        Format::Text => print_problems(format, &[], &failures),
    }
    let fits = if p.fits.is_empty() {
        String::new()
    } else {
        format!("; {} fit(s) converged, {} failed", summary.fits_ok, summary.fits_failed)
    };
    eprintln!("{} run(s) reduced, {} failed{fits}; outputs in {}", summary.ok, summary.failed, out_dir.display());
    u8::from(summary.failed + summary.fits_failed > 0)
}

fn kinematics_table(request: &kinematics::Request<'_>, angles: &str, format: TableFormat) -> u8 {
    let angles = match kinematics::parse_angles(angles) {
        Ok(a) => a,
        Err(msg) => {
            eprintln!("{msg}");
            return 2;
        }
    };
    let reaction = match kinematics::resolve(request) {
        Ok(r) => r,
        Err(lines) => {
            for l in lines {
                eprintln!("{l}");
            }
            return 2;
        }
    };
    let mode = if request.non_relativistic { Mode::NonRelativistic } else { Mode::Relativistic };
    let rows = kinematics::rows(&reaction, &angles, mode);
    print!("{}", kinematics::render(&reaction, &rows, format, mode));
    0
}

fn theory_curve(model: &Path, angles: &str, format: TableFormat) -> u8 {
    let angles = match kinematics::parse_angles(angles) {
        Ok(a) => a,
        Err(msg) => {
            eprintln!("{msg}");
            return 2;
        }
    };
    match theory::curve(model, &angles) {
        Ok(curve) => {
            print!("{}", theory::render(&curve, format));
            0
        }
        Err(diags) => {
            report(&diags);
            2
        }
    }
}

fn fit_command(data: &Path, model: &Path, state: Option<&str>, out: Option<&Path>, format: ReportFormat) -> u8 {
    let loaded = match fit::load(model, None) {
        Ok(l) => l,
        Err(diags) => {
            report(&diags);
            return 2;
        }
    };
    let (table, files) = match fit::read_data(data) {
        Ok(t) => t,
        Err(d) => {
            report(&[d]);
            return 2;
        }
    };
    let state = match fit::choose_state(&table, state) {
        Ok(s) => s,
        Err(m) => {
            report(&[Diagnostic::new(data, "state", m)]);
            return 2;
        }
    };
    let mut output = match fit::run(&loaded, &table, &state) {
        Ok(o) => o,
        Err(m) => {
            report(&[Diagnostic::new(model, "", m)]);
            return 2;
        }
    };
    let out_dir = out.map_or_else(|| model.parent().unwrap_or(Path::new(".")).join("fit"), Path::to_path_buf);
    let record = match fit::provenance_json(&loaded, &files, Path::new(".")) {
        Ok(r) => r,
        Err(d) => {
            report(&[d]);
            return 2;
        }
    };
    if let Err(d) = fit::write(&out_dir, &mut output, &record) {
        report(&[d]);
        return 2;
    }
    match format {
        ReportFormat::Text => print!("{}", fit::render_text(&output.report)),
        ReportFormat::Json => println!("{}", serde_json::to_string_pretty(&output.report).unwrap_or_default()),
        ReportFormat::Yaml => print!("{}", serde_yaml::to_string(&output.report).unwrap_or_default()),
    }
    if output.report.converged {
        eprintln!("fit converged; outputs in {}", out_dir.display());
        0
    } else {
        eprintln!(
            "fit did NOT converge ({}); outputs in {} are the last state, not a result",
            output.report.termination,
            out_dir.display()
        );
        1
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
) -> u8 {
    let shard = match shard.map(xsflow::batch::parse_shard).transpose() {
        Ok(s) => s,
        Err(m) => {
            eprintln!("{m}");
            return 2;
        }
    };
    let p = match xsflow::plan::plan_with(config, true) {
        Ok(p) => p,
        Err(diags) => {
            print_problems(format, &diags, &[]);
            eprintln!("{} problem(s) in {}; nothing was processed", diags.len(), config.display());
            return 2;
        }
    };
    let out = out.map_or_else(|| p.config_dir.join("out"), Path::to_path_buf);
    let opts = xsflow::batch::BatchOptions { out: out.clone(), jobs, shard, force, dry_run };
    let (summary, failures, lines) = match xsflow::batch::batch(&p, &opts) {
        Ok(r) => r,
        Err(d) => {
            report(&[d]);
            return 2;
        }
    };
    match format {
        Format::Json => {
            println!("{}", serde_json::json!({ "summary": summary, "out": out, "failures": failures, "runs": lines }))
        }
        Format::Text => {
            if dry_run {
                for l in &lines {
                    println!("{l}");
                }
            }
            print_problems(format, &[], &failures);
        }
    }
    let fits = if p.fits.is_empty() || shard.is_some() || dry_run || summary.fits_ok + summary.fits_failed == 0 {
        String::new()
    } else {
        format!("; {} fit(s) converged, {} failed", summary.fits_ok, summary.fits_failed)
    };
    let verb = if dry_run { "would be processed" } else { "ok" };
    eprintln!(
        "batch: {} {verb}, {} failed, {} skipped (unchanged){}{fits}; outputs in {}",
        if dry_run { lines.len() - summary.skipped } else { summary.ok },
        summary.failed,
        summary.skipped,
        if summary.other_shards > 0 { format!(", {} in other shards", summary.other_shards) } else { String::new() },
        out.display()
    );
    u8::from(summary.failed + summary.fits_failed > 0)
}

fn runs(out: &Path, failed: bool, format: TableFormat) -> u8 {
    if !out.join(xsflow::catalogue::CATALOGUE_FILE).is_file() {
        eprintln!(
            "{}: no run catalogue here (xsflow batch writes {})",
            out.display(),
            xsflow::catalogue::CATALOGUE_FILE
        );
        return 2;
    }
    let entries = match xsflow::catalogue::Catalogue::open(out).and_then(|c| c.list(failed)) {
        Ok(e) => e,
        Err(m) => {
            eprintln!("{m}");
            return 2;
        }
    };
    match format {
        TableFormat::Json => println!("{}", serde_json::to_string_pretty(&entries).unwrap_or_default()),
        TableFormat::Csv => {
            match xsflow::catalogue::entries_table(&entries).and_then(|mut t| xsflow::tables::csv_bytes(&mut t)) {
                Ok(bytes) => print!("{}", String::from_utf8_lossy(&bytes)),
                Err(e) => {
                    eprintln!("cannot write the run list as CSV: {e}");
                    return 1;
                }
            }
        }
        TableFormat::Table => {
            println!(
                "{:<12} {:<7} {:>9} {:>12} {:>12} {:>8}  error",
                "run", "status", "seconds", "events", "charge_c", "live"
            );
            for e in &entries {
                println!(
                    "{:<12} {:<7} {:>9.3} {:>12} {:>12} {:>8}  {}",
                    e.run,
                    e.status,
                    e.seconds,
                    e.events.map(|x| x.to_string()).unwrap_or_else(|| "-".into()),
                    e.charge_c.map(|x| format!("{x:.4e}")).unwrap_or_else(|| "-".into()),
                    e.live_fraction.map(|x| format!("{x:.4}")).unwrap_or_else(|| "-".into()),
                    e.error.lines().next().unwrap_or("")
                );
            }
        }
    }
    0
}
