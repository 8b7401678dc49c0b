//! The command line: one clap-derive struct; each flag's doc comment is its `--help` text.

use std::path::PathBuf;

use clap::{Parser, Subcommand, ValueEnum};

/// xsflow: absolute differential cross sections from charged-particle scattering runs.
#[derive(Debug, Parser)]
#[command(name = "xsflow", version, about, propagate_version = true)]
pub struct Cli {
    /// More log lines (-v: per run file, -vv: everything); RUST_LOG overrides.
    #[arg(short, long, action = clap::ArgAction::Count, global = true)]
    pub verbose: u8,
    /// Only warnings and errors in the log.
    #[arg(short, long, global = true, conflicts_with = "verbose")]
    pub quiet: bool,
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// How results are printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Lines for a person.
    Text,
    /// One JSON document.
    Json,
}

/// How a table is printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum TableFormat {
    /// Aligned columns for a terminal.
    Table,
    /// A JSON array, one object per row.
    Json,
    /// CSV with a header line.
    Csv,
}

/// How a fit report is printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ReportFormat {
    /// Lines for a person.
    Text,
    /// JSON.
    Json,
    /// YAML.
    Yaml,
}

/// How `xsflow stopping` prints its result.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum StoppingFormat {
    /// Aligned lines with units.
    Table,
    /// One JSON object, units in the keys.
    Json,
}

/// The detected particle, on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DetectArg {
    /// The ejectile (the scattered beam particle for elastic and inelastic scattering).
    Ejectile,
    /// The residual nucleus.
    Recoil,
}

/// A dead-time model, on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DeadTimeArg {
    /// Each recorded event blocks the acquisition for the resolving time.
    NonParalyzable,
    /// Every arriving event extends the blocked time.
    Paralyzable,
}

/// The verbs.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Validate a config, its run records and yields tables without reducing; every problem
    /// at once. Exit 0 when clean, 2 when not.
    Check {
        /// The experiment config (YAML).
        config: PathBuf,
        /// Output format of the problem list.
        #[arg(long, value_enum, default_value_t = Format::Text)]
        format: Format,
    },
    /// Reduce runs to lab cross sections: one folder per run in the output folder, with
    /// cross_sections.parquet, cross_sections.csv and provenance.json. Exit 0 when every run
    /// was reduced, 1 when a run failed (the others are still done), 2 for a bad config.
    Reduce {
        /// The experiment config (YAML).
        config: PathBuf,
        /// Output folder; default `out` beside the config.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Reduce only this run id (repeat for several); default all runs.
        #[arg(long = "run", value_name = "ID")]
        runs: Vec<String>,
        /// Output format of the summary.
        #[arg(long, value_enum, default_value_t = Format::Text)]
        format: Format,
    },
    /// Process every new or changed run of a config into one output folder, with a run
    /// catalogue (catalogue.sqlite): unchanged runs (same record, data file and config) are
    /// skipped. Exit 0 when no run failed, 1 when some did (the others are still done), 2 for
    /// a bad config or an unusable output folder.
    Batch {
        /// The experiment config (YAML).
        config: PathBuf,
        /// Output folder; default `out` beside the config.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Runs processed at once.
        #[arg(long, default_value_t = 1)]
        jobs: usize,
        /// Process only shard K of N (1 <= K <= N), split by a hash of the run id that is the
        /// same on every machine, for a cluster job array.
        #[arg(long, value_name = "K/N")]
        shard: Option<String>,
        /// Reprocess every run, changed or not.
        #[arg(long)]
        force: bool,
        /// Only list what would be processed, and why.
        #[arg(long)]
        dry_run: bool,
        /// Output format of the summary.
        #[arg(long, value_enum, default_value_t = Format::Text)]
        format: Format,
    },
    /// Merge the output folders of the shards of one batch (`batch --shard K/N`) into one:
    /// run folders, catalogue, the combined distribution and the fits, exactly as a single
    /// batch gives. Refuses shards of different N or configs, missing or repeated shards.
    Merge {
        /// The shards' output folders.
        #[arg(required = true)]
        dirs: Vec<PathBuf>,
        /// The merged output folder.
        #[arg(long)]
        out: PathBuf,
    },
    /// List the run catalogue of a batch output folder.
    Runs {
        /// The batch output folder.
        #[arg(default_value = "out")]
        out: PathBuf,
        /// Only failed runs.
        #[arg(long)]
        failed: bool,
        /// Output format.
        #[arg(long, value_enum, default_value_t = TableFormat::Table)]
        format: TableFormat,
    },
    /// Two-body kinematics a + A -> b + B at lab angles of the detected particle: CM angle,
    /// lab energy, Jacobian, both solutions where the angle is double valued, and the
    /// partner's angle and energy. Angles past the kinematic limit give no row and a warning.
    Kinematics {
        /// Beam particle: 4He, He4, he-4, alpha, p, d, t, n, 16O, ...
        #[arg(long)]
        beam: String,
        /// Target nucleus, e.g. 58Ni.
        #[arg(long)]
        target: String,
        /// Beam kinetic energy in MeV.
        #[arg(long = "energy-mev", allow_negative_numbers = true, value_parser = representable_f64)]
        energy_mev: f64,
        /// Lab angles in degrees: A:B:STEP or a comma list (a leading minus is read as a
        /// value, so that a negative angle gets a clear error).
        #[arg(long, allow_hyphen_values = true)]
        angles: String,
        /// Excitation energy of the residual nucleus in MeV.
        #[arg(long = "excitation-mev", default_value_t = 0.0, allow_negative_numbers = true)]
        excitation_mev: f64,
        /// Which particle the detector sees.
        #[arg(long, value_enum, default_value_t = DetectArg::Ejectile)]
        detect: DetectArg,
        /// Outgoing light particle; default the beam (elastic and inelastic scattering).
        #[arg(long)]
        ejectile: Option<String>,
        /// Galilean kinematics instead of relativistic, for comparison.
        #[arg(long)]
        non_relativistic: bool,
        /// Output format.
        #[arg(long, value_enum, default_value_t = TableFormat::Table)]
        format: TableFormat,
    },
    /// Stopping power (electronic, nuclear, total) and range of an ion in a material, and
    /// with --thickness-ug-cm2 the energy loss, exit energy and straggling of a layer.
    /// Sources and validity: README, section "Energy loss in matter". Exit 1 when the ion
    /// stops inside the layer (its range is printed instead).
    Stopping {
        /// The ion: 4He, alpha, p, 16O, 58Ni, ...
        #[arg(long)]
        ion: String,
        /// The material: an element (Ni), a nuclide (58Ni) or a formula (C2H4, Al2O3).
        #[arg(long)]
        material: String,
        /// Kinetic energy of the ion in MeV.
        #[arg(long = "energy-mev", allow_negative_numbers = true, value_parser = representable_f64)]
        energy_mev: f64,
        /// Areal density of a layer in µg/cm²: adds energy loss, exit energy, straggling.
        #[arg(long = "thickness-ug-cm2", allow_negative_numbers = true, value_parser = representable_f64)]
        thickness_ug_cm2: Option<f64>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = StoppingFormat::Table)]
        format: StoppingFormat,
    },
    /// A model curve at CM angles: optical model (Woods–Saxon, computed here), Rutherford,
    /// or hard sphere, from a model file (`xsflow schema model` shows its form).
    Theory {
        /// The model file (YAML).
        model: PathBuf,
        /// CM angles in degrees: A:B:STEP or a comma list (a leading minus is read as a
        /// value, so that a negative angle gets a clear error).
        #[arg(long, default_value = "10:170:10", allow_hyphen_values = true)]
        angles: String,
        /// Output format.
        #[arg(long, value_enum, default_value_t = TableFormat::Table)]
        format: TableFormat,
    },
    /// Fit a model to the reduced angular distribution of one state: Rutherford with a
    /// free normalisation, a Legendre series, a theory curve with a free scale, or the
    /// optical model with free potential parameters (`xsflow schema fit` shows the fit
    /// file). Writes fit.yaml, fit.json, curve.csv and curve.parquet into --out. Exit 0 when
    /// the fit converged, 1 when it did not (the report says why), 2 for bad input.
    Fit {
        /// The reduced data: a cross_sections table (Parquet or CSV), or a `reduce` output
        /// folder (all its runs).
        data: PathBuf,
        /// The fit file (YAML).
        model: PathBuf,
        /// The state to fit; needed when the data hold several.
        #[arg(long)]
        state: Option<String>,
        /// Output folder; default `fit` beside the fit file.
        #[arg(long)]
        out: Option<PathBuf>,
        /// How the report is printed.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
    },
    /// Synthetic runs with known truth, from an experiment config and a true cross section:
    /// writes into --out the run records and data files (list-mode events, spectra or
    /// yields, in the formats `reduce` reads), experiment.yaml (the config, its runs pointing
    /// at them) and truth.parquet (per run, detector, state and branch: expected counts,
    /// true lab and CM cross sections, live fraction, solid angle). Deterministic for a seed.
    Simulate {
        /// The experiment config (YAML), as `reduce` reads it.
        config: PathBuf,
        /// The elastic state's true cross section: a model file of `xsflow theory` for the
        /// config's beam, target and energy.
        #[arg(long)]
        truth: PathBuf,
        /// Another state's true CM cross section: STATE=MB_SR (a constant, mb/sr) or
        /// STATE=MODEL (a model file); repeat for each state that is not elastic.
        #[arg(long = "state-truth", value_name = "STATE=VALUE")]
        state_truth: Vec<String>,
        /// Output folder (new, or without experiment.yaml and runs/).
        #[arg(long)]
        out: PathBuf,
        /// Seed of the random numbers.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Number of runs (1 to 9999).
        #[arg(long, default_value_t = 1)]
        runs: u32,
        /// Expected events arriving at the detectors per run, before dead time (1 to 2^40;
        /// 1e8 is accepted); the beam charge follows from it.
        #[arg(long, default_value_t = 1e6)]
        events: f64,
        /// The run files' format; default `events` with a `raw:` section, else `yields`.
        #[arg(long, value_enum)]
        data: Option<crate::simulate::DataKind>,
        /// Real time of each run in s.
        #[arg(long = "real-time-s", default_value_t = 3600.0)]
        real_time_s: f64,
        /// The acquisition's dead-time model; default the config's correct_dead_time model,
        /// else non-paralyzable.
        #[arg(long = "dead-time", value_enum)]
        dead_time: Option<DeadTimeArg>,
        /// Resolving time of the acquisition in µs; default the config's, else 2.
        #[arg(long = "resolving-time-us")]
        resolving_time_us: Option<f64>,
        /// Flat background in each detector: its counts over all channels as a fraction of
        /// the detector's peak counts (raw data only).
        #[arg(long = "background-fraction", default_value_t = 0.01)]
        background_fraction: f64,
        /// Pulser rate in 1/s (its recorded signals follow the live fraction).
        #[arg(long = "pulser-rate-per-s", default_value_t = 10.0)]
        pulser_rate_per_s: f64,
    },
    /// Plan beam time: for each arm setting, the rate of every peak at a beam current, the
    /// time to reach a relative statistical precision on every angle and state (net peak
    /// counts, with the flat background of a `raw:` section), the detector and total rates
    /// and the dead time they imply (a warning above --dead-time-limit), the setting that
    /// takes longest and the total hours. Same config and truth as `xsflow simulate`.
    Beamtime {
        /// The experiment config (YAML), as `reduce` reads it; its run records' arm
        /// settings are planned as well.
        config: PathBuf,
        /// The elastic state's true cross section: a model file of `xsflow theory`.
        #[arg(long)]
        truth: PathBuf,
        /// Another state's true CM cross section: STATE=MB_SR or STATE=MODEL.
        #[arg(long = "state-truth", value_name = "STATE=VALUE")]
        state_truth: Vec<String>,
        /// Beam current in nA (electric, at the config's charge state).
        #[arg(long = "current-na", allow_negative_numbers = true)]
        current_na: f64,
        /// Relative statistical precision wanted on every peak, e.g. 0.01 for 1 %.
        #[arg(long, allow_negative_numbers = true)]
        precision: f64,
        /// The acquisition's dead-time model; default the config's correct_dead_time
        /// model, else non-paralyzable.
        #[arg(long = "dead-time", value_enum)]
        dead_time: Option<DeadTimeArg>,
        /// Resolving time of the acquisition in µs; default the config's, else 2.
        #[arg(long = "resolving-time-us")]
        resolving_time_us: Option<f64>,
        /// Dead-time fraction above which a setting is warned of.
        #[arg(long = "dead-time-limit", default_value_t = 0.1)]
        dead_time_limit: f64,
        /// Flat background in each detector as a fraction of its peak counts (with a
        /// `raw:` section), as `xsflow simulate` makes it.
        #[arg(long = "background-fraction", default_value_t = 0.01)]
        background_fraction: f64,
        /// Output format.
        #[arg(long, value_enum, default_value_t = StoppingFormat::Table)]
        format: StoppingFormat,
    },
    /// Draw a plot (SVG, or PNG for a `.png` file) from output tables alone: the angular
    /// distribution with its fits and pulls, the ratio to Rutherford, a run's spectrum with
    /// its gates or ΔE–E histogram, run health, or an optical fit's landscape of minima.
    Plot {
        /// What to draw.
        #[arg(value_enum)]
        kind: crate::plot::Kind,
        /// The table: angular_distribution.* (angular-distribution), cross_sections.*
        /// (ratio-rutherford), a run's spectra.parquet (spectrum) or pid.parquet (pid), a
        /// `batch` output folder
        /// (run-health) or a fit folder or its fit.json (fit-landscape); for the first two
        /// also a `reduce` output folder (its combined table, or every run's table).
        input: PathBuf,
        /// The file to write: PNG when its name ends in `.png`, SVG otherwise.
        #[arg(long)]
        out: PathBuf,
        /// A fit folder, or a folder of them, whose curves are drawn; default the `fits`
        /// folder beside the input, when there is one.
        #[arg(long)]
        fits: Option<PathBuf>,
        /// The spectrum's or the ΔE–E histogram's detector (default the first in the
        /// table), or the detector whose net counts per µC run health shows.
        #[arg(long)]
        detector: Option<String>,
        /// Run health marks runs farther than this many standard deviations from the median.
        #[arg(long, default_value_t = 3.0)]
        outlier_sigmas: f64,
    },
    /// Print a JSON Schema: the config (default), a run record, or a table.
    Schema {
        /// Which schema.
        #[arg(value_parser = crate::schema::NAMES, default_value = "config")]
        name: String,
    },
}

/// A number flag that a 64-bit float can hold: `1e400` is refused as written instead of
/// becoming infinity (the range checks after it then say what is accepted).
fn representable_f64(text: &str) -> Result<f64, String> {
    let value: f64 = text.parse().map_err(|e| format!("{e}, expected a number"))?;
    if value.is_infinite() && !text.to_ascii_lowercase().contains("inf") {
        return Err(format!(
            "found {text}, expected a finite number (beyond about ±1.8e308, the range of a 64-bit float)"
        ));
    }
    Ok(value)
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn command_line_definition_is_consistent() {
        // clap's own consistency check: clashing flags fail here, not for users.
        Cli::command().debug_assert();
    }
}
