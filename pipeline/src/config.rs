//! The experiment config as written: YAML parsed into plain structs, section by section and
//! item by item, so that one mistake does not hide the next. Every problem comes back with
//! its file, line, column and key path; an unknown key gets the closest valid one suggested.

use std::path::{Path, PathBuf};

use schemars::JsonSchema;
use serde::de::DeserializeOwned;
use serde::Deserialize;
use serde_yaml::Value;
use stages::setup::{DetectorConfig, ReactionConfig, TargetConfig};
use stages::{problem_key, Problem, StageConfig};

use crate::error::Diagnostic;
use crate::locate::Locations;

/// What the experiment is, for people reading the outputs.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExperimentInfo {
    /// Short name of the experiment, used in reports.
    pub name: String,
    /// Free text: what was measured, where, when.
    #[serde(default)]
    pub description: String,
}

/// One experiment: the set-up, where its runs are, and the reduction to apply. This is the
/// whole YAML file; `schemas/config.schema.json` is generated from it.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExperimentConfig {
    /// Name and description.
    pub experiment: ExperimentInfo,
    /// Beam, target nucleus, beam energy and charge state.
    pub reaction: ReactionConfig,
    /// Target foil: areal density, molar mass, isotopic fraction, tilt.
    pub target: TargetConfig,
    /// The detectors, in the order the output rows follow.
    pub detectors: Vec<DetectorConfig>,
    /// Rotating arms that carry detectors between runs (optional): each run record may set
    /// an arm's angle in `arm_theta_lab_deg`, and the detectors on it turn with it.
    #[serde(default)]
    pub arms: Option<Vec<stages::setup::ArmConfig>>,
    /// Run record files (YAML, one per run): paths or glob patterns relative to this file.
    pub runs: Vec<String>,
    /// The stages to apply to each run, in order; each has a `type:` and its settings.
    pub stages: Vec<StageConfig>,
    /// How list-mode events and spectra become yields (needed when a run record gives
    /// `events_file` or `spectra_file`).
    #[serde(default)]
    pub raw: Option<stages::raw::RawConfig>,
    /// How runs are combined into one angular distribution per state.
    #[serde(default)]
    pub combine: Option<stages::combine::CombineConfig>,
    /// Models fitted to the combined angular distribution once every run is reduced: each a
    /// fit file and the state it fits (optional).
    #[serde(default)]
    pub fits: Option<Vec<stages::fit::FitEntryConfig>>,
    /// What is drawn beside the tables (optional; plots are drawn by default).
    #[serde(default)]
    pub report: Option<ReportConfig>,
}

/// What `reduce` and `batch` draw into the output folder beside the tables.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ReportConfig {
    /// Draw the plots (SVG): the combined angular distribution with its fits and pulls,
    /// `angular_distribution.svg`. Default true; `false` draws nothing.
    #[serde(default = "yes")]
    pub plots: bool,
    /// Write the HTML report, `report/index.html` and a page per run. Default true.
    #[serde(default = "yes")]
    pub html: bool,
    /// Run health marks a run whose charge, live fraction or counts per µC lies farther
    /// than this many robust standard deviations from the median of the runs. Default 3.
    #[serde(default = "three")]
    pub outlier_sigmas: f64,
    /// The detector whose net counts per µC run health shows (a detector id of
    /// `detectors:`); none by default.
    #[serde(default)]
    pub health_detector: Option<String>,
}

fn three() -> f64 {
    3.0
}

impl Default for ReportConfig {
    fn default() -> Self {
        ReportConfig { plots: true, html: true, outlier_sigmas: three(), health_detector: None }
    }
}

impl ReportConfig {
    /// Its problems; `detectors` are the ids of the config's detectors.
    pub fn validate(&self, detectors: &[&str]) -> Vec<Problem> {
        let mut problems = Vec::new();
        if !(self.outlier_sigmas.is_finite() && self.outlier_sigmas > 0.0) {
            problems.push(Problem::new(
                "report.outlier_sigmas",
                self.outlier_sigmas.to_string(),
                "a number of standard deviations above 0, e.g. 3",
            ));
        }
        if let Some(d) = &self.health_detector {
            if !detectors.contains(&d.as_str()) {
                problems.push(Problem::new(
                    "report.health_detector",
                    d.clone(),
                    format!("a detector id of `detectors:` ({})", detectors.join(", ")),
                ));
            }
        }
        problems
    }
}

fn yes() -> bool {
    true
}

const SECTIONS: [&str; 11] =
    ["experiment", "reaction", "target", "detectors", "arms", "runs", "stages", "raw", "combine", "fits", "report"];

/// A YAML file read into text, its parsed value and its key locations.
pub struct YamlFile {
    /// Path as given.
    pub path: PathBuf,
    /// Raw bytes (hashed for provenance).
    pub bytes: Vec<u8>,
    /// Parsed document.
    pub value: Value,
    /// Key locations.
    pub locations: Locations,
}

/// Largest YAML file read (a config, run record, model or fit file): far beyond any real
/// one, small enough that a wrong path (a log, a data file) is refused before it is parsed.
pub const MAX_YAML_BYTES: u64 = 16 << 20;

/// Why `path` is not a file that can be read: absent, a folder, or not a regular file (a
/// device such as /dev/zero, a pipe, a socket), which would be read without end; `None`
/// for a regular file (links followed).
pub fn not_a_file(path: &Path) -> Option<String> {
    match std::fs::metadata(path) {
        Err(_) => Some(format!("not found: {}", path.display())),
        Ok(m) if m.is_dir() => Some(format!("{} is a folder", path.display())),
        Ok(m) if !m.is_file() => Some(format!("{} is not a regular file", path.display())),
        Ok(_) => None,
    }
}

impl YamlFile {
    /// Read and parse a YAML file.
    ///
    /// # Errors
    /// A diagnostic for an unreadable file, bytes that are not UTF-8, or a YAML syntax error
    /// (with its position).
    pub fn read(path: &Path) -> Result<Self, Diagnostic> {
        let unreadable = |why: String| {
            Diagnostic::new(path, "", format!("cannot read the file: {why}"))
                .with_help("check the path; relative paths are relative to the file that names them")
        };
        if let Some(why) = not_a_file(path) {
            return Err(unreadable(why));
        }
        let size = std::fs::metadata(path).map_or(0, |m| m.len());
        if size > MAX_YAML_BYTES {
            return Err(unreadable(format!(
                "it holds {size} bytes, more than the {MAX_YAML_BYTES} a YAML file may have"
            )));
        }
        let bytes = std::fs::read(path).map_err(|e| unreadable(e.to_string()))?;
        let text = match String::from_utf8(bytes.clone()) {
            Ok(text) => text,
            Err(e) => {
                // Line and column of the first bad byte, counted in the valid part before it.
                let valid = &bytes[..e.utf8_error().valid_up_to()];
                let line = 1 + valid.iter().filter(|b| **b == b'\n').count();
                let column = 1 + valid.iter().rev().take_while(|b| **b != b'\n').count();
                let byte = bytes[valid.len()];
                return Err(Diagnostic::new(path, "", format!("byte 0x{byte:02x} is not UTF-8 text"))
                    .at(Some((line, column)))
                    .with_help("save the file as UTF-8 (YAML files are UTF-8 text)"));
            }
        };
        if let Some(place) = too_deep(&text) {
            let message = format!(
                "nests lists or mappings ([ or {{) more than {MAX_FLOW_DEPTH} deep, expected a file nested a few levels"
            );
            return Err(Diagnostic::new(path, "", message).at(Some(place)));
        }
        let locations = Locations::of(&text);
        let value: Value = serde_yaml::from_str(&text).map_err(|e| {
            let message = e.to_string();
            if let Some((key, digits)) = too_large_integer(&message) {
                let found = format!(
                    "found {digits}, expected at most 20 digits ({}); write a larger number with an \
                     exponent, such as 1.5e22",
                    u64::MAX
                );
                return Diagnostic::new(path, key, found).at(locations.find(key));
            }
            let place = e.location().map(|l| (l.line(), l.column()));
            let message = match message.strip_prefix("repetition limit exceeded") {
                Some(_) => "expands its aliases (*name) to too many nodes, expected a file whose aliases \
                            repeat a few values (an alias-expansion bomb is refused)"
                    .to_string(),
                None => format!("is not valid YAML: {message}"),
            };
            Diagnostic::new(path, "", message).at(place)
        })?;
        Ok(YamlFile { path: path.to_path_buf(), bytes, locations, value })
    }

    /// A located diagnostic for a problem at `key` of this file.
    pub fn problem(&self, p: &Problem) -> Diagnostic {
        Diagnostic::new(&self.path, p.key.clone(), format!("found {}, expected {}", p.found, p.expected))
            .at(self.locations.find(&p.key))
    }

    /// Deserialize the value at `key` (already looked up) into `T`, with every error located.
    ///
    /// # Errors
    /// The serde error, located at the deepest key it names, with a suggestion for an
    /// unknown key or variant.
    pub fn parse<T: DeserializeOwned>(&self, key: &str, value: &Value) -> Result<T, Diagnostic> {
        serde_path_to_error::deserialize::<_, T>(value.clone()).map_err(|e| {
            let mut path = key.to_string();
            for seg in e.path().iter() {
                match seg {
                    serde_path_to_error::Segment::Seq { index } => path = problem_key(&path, &format!("[{index}]")),
                    serde_path_to_error::Segment::Map { key } => path = problem_key(&path, key),
                    serde_path_to_error::Segment::Enum { .. } | serde_path_to_error::Segment::Unknown => {}
                }
            }
            serde_message(&self.path, &self.locations, path, &e.inner().to_string())
        })
    }
}

/// Turn a serde message into a diagnostic: locate it, and suggest the closest name for an
/// unknown field or variant.
fn serde_message(file: &Path, locations: &Locations, mut key: String, message: &str) -> Diagnostic {
    let message = message.split(" at line ").next().unwrap_or(message);
    let message = plain_message(&key, message).unwrap_or_else(|| message.to_string());
    let mut help = None;
    for what in ["unknown field `", "unknown variant `"] {
        if let Some(rest) = message.strip_prefix(what) {
            let (name, tail) = rest.split_once('`').unwrap_or((rest, ""));
            let accepted: Vec<&str> = tail.split('`').skip(1).step_by(2).collect();
            if what.starts_with("unknown field") && !key.ends_with(name) {
                key = problem_key(&key, name);
            }
            help = Some(match closest(name, &accepted) {
                Some(best) => format!("did you mean `{best}`? accepted: {}", accepted.join(", ")),
                None => format!("accepted: {}", accepted.join(", ")),
            });
        }
    }
    let d = Diagnostic::new(file, key.clone(), message).at(locations.find(&key));
    match help {
        Some(h) => d.with_help(h),
        None => d,
    }
}

/// Deepest nesting of flow lists and mappings read; the parser takes minutes to refuse
/// 100 000 nested `[` (issue 18), this scan refuses them at once.
const MAX_FLOW_DEPTH: usize = 100;

/// Line and column where flow brackets (`[`, `{`) first nest deeper than
/// [`MAX_FLOW_DEPTH`], outside quotes and comments; `None` when they never do. A bracket
/// inside a plain scalar counts too, which can only make the depth larger by a few.
fn too_deep(text: &str) -> Option<(usize, usize)> {
    let mut depth = 0usize;
    let mut quote = None;
    for (line_index, line) in text.lines().enumerate() {
        let mut previous = ' ';
        for (column_index, ch) in line.chars().enumerate() {
            match (quote, ch) {
                (Some(q), _) if ch == q => quote = None,
                (Some(_), _) => {}
                (None, '"' | '\'') => quote = Some(ch),
                (None, '#') if previous.is_whitespace() => break,
                (None, '[' | '{') => {
                    depth += 1;
                    if depth > MAX_FLOW_DEPTH {
                        return Some((line_index + 1, column_index + 1));
                    }
                }
                (None, ']' | '}') => depth = depth.saturating_sub(1),
                (None, _) => {}
            }
            previous = ch;
        }
    }
    None
}

/// A serde message about a number or an empty file, said in the terms of the file: the
/// value found and what is accepted, without the parser's internal type names.
fn plain_message(key: &str, message: &str) -> Option<String> {
    if let Some(rest) = message.strip_prefix("invalid type: string \"") {
        // A number the parser could not hold (1e400) arrives as a string.
        let (text, expected) = rest.split_once("\", expected ")?;
        let number: f64 = text.parse().ok()?;
        return (!number.is_finite() && matches!(expected, "f64" | "f32")).then(|| {
            format!("found {text}, expected a finite number (beyond about ±1.8e308, the range of a 64-bit float)")
        });
    }
    if let Some(rest) = message.strip_prefix("invalid value: integer `") {
        let (digits, expected) = rest.split_once("`, expected ")?;
        return Some(format!("found {digits}, expected {}", plain_expectation(expected)?));
    }
    if key.is_empty() && message.starts_with("invalid type: unit value, expected internally tagged enum") {
        let tag = if message.ends_with("ModelConfig") { " with a `model:` key" } else { "" };
        return Some(format!("found an empty file, expected a mapping{tag}"));
    }
    None
}

/// What a parser's integer type accepts, in plain words.
fn plain_expectation(rust_type: &str) -> Option<String> {
    let most = match rust_type {
        "u8" => u64::from(u8::MAX),
        "u16" => u64::from(u16::MAX),
        "u32" => u64::from(u32::MAX),
        "u64" | "usize" => u64::MAX,
        _ => return None,
    };
    Some(format!("a whole number from 0 to {most}"))
}

/// The key and digits of an integer too long for the YAML parser (more than 64 bits), from
/// its message "KEY: invalid type: integer `DIGITS` as u128, expected any YAML value".
fn too_large_integer(message: &str) -> Option<(&str, &str)> {
    let (key, rest) = message.split_once(": invalid type: integer `")?;
    let (digits, rest) = rest.split_once('`')?;
    rest.starts_with(" as u128").then_some((key, digits))
}

/// The accepted name closest to `name`, if any is close enough to be a likely typo.
pub fn closest<'a>(name: &str, accepted: &[&'a str]) -> Option<&'a str> {
    accepted
        .iter()
        .map(|a| (strsim::normalized_damerau_levenshtein(name, a), *a))
        .filter(|(score, _)| *score >= 0.5)
        .max_by(|x, y| x.0.total_cmp(&y.0))
        .map(|(_, a)| a)
}

/// An experiment config with the sections that parsed; a section that did not is `None`
/// and its problems are in the diagnostics returned beside it.
#[derive(Debug, Clone, Default)]
pub struct PartialConfig {
    /// `experiment:`.
    pub experiment: Option<ExperimentInfo>,
    /// `reaction:`.
    pub reaction: Option<ReactionConfig>,
    /// `target:`.
    pub target: Option<TargetConfig>,
    /// `detectors:`, when every item parsed.
    pub detectors: Option<Vec<DetectorConfig>>,
    /// `arms:`, when present and every item parsed.
    pub arms: Option<Vec<stages::setup::ArmConfig>>,
    /// `runs:`.
    pub runs: Option<Vec<String>>,
    /// `stages:`, when every item parsed.
    pub stages: Option<Vec<StageConfig>>,
    /// `raw:`, when present and parsed.
    pub raw: Option<stages::raw::RawConfig>,
    /// `combine:`, when present and parsed.
    pub combine: Option<stages::combine::CombineConfig>,
    /// `fits:`, when present and every item parsed.
    pub fits: Option<Vec<stages::fit::FitEntryConfig>>,
    /// `report:`, when present and parsed.
    pub report: Option<ReportConfig>,
}

/// Parse an experiment config section by section and list item by list item, so that every
/// problem is reported at once.
///
/// Returns the sections that parsed and the diagnostics of the rest (syntax, unknown or
/// missing sections, each item's own problems).
pub fn parse_experiment(file: &YamlFile) -> (PartialConfig, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let Some(map) = file.value.as_mapping() else {
        let d = Diagnostic::new(
            &file.path,
            "",
            "expected a mapping with sections experiment, reaction, target, detectors, runs, stages",
        );
        return (PartialConfig::default(), vec![d]);
    };
    for k in map.keys() {
        let name = k.as_str().unwrap_or("");
        if !SECTIONS.contains(&name) {
            let help = match closest(name, &SECTIONS) {
                Some(best) => format!("did you mean `{best}`? sections: {}", SECTIONS.join(", ")),
                None => format!("sections: {}", SECTIONS.join(", ")),
            };
            diags.push(
                Diagnostic::new(&file.path, name, format!("unknown section `{}`", yaml_text(k)))
                    .at(file.locations.find(name))
                    .with_help(help),
            );
        }
    }
    let section = |name: &str, diags: &mut Vec<Diagnostic>| -> Option<Value> {
        let v = map.get(name).cloned();
        if v.is_none() {
            diags.push(
                Diagnostic::new(&file.path, name, "missing section")
                    .at(Some((1, 1)))
                    .with_help(format!("add `{name}:`; schemas/config.schema.json shows its form")),
            );
        }
        v
    };
    let config = PartialConfig {
        experiment: section("experiment", &mut diags).and_then(|v| keep(file.parse("experiment", &v), &mut diags)),
        reaction: section("reaction", &mut diags).and_then(|v| keep(file.parse("reaction", &v), &mut diags)),
        target: section("target", &mut diags).and_then(|v| keep(file.parse("target", &v), &mut diags)),
        detectors: section("detectors", &mut diags).and_then(|v| parse_list(file, "detectors", &v, &mut diags)),
        arms: map.get("arms").and_then(|v| parse_list(file, "arms", v, &mut diags)),
        runs: section("runs", &mut diags).and_then(|v| keep(file.parse("runs", &v), &mut diags)),
        stages: section("stages", &mut diags).and_then(|v| {
            let before = diags.len();
            let parsed = parse_list(file, "stages", &v, &mut diags);
            moved_fit_entries(file, &v, before, &mut diags);
            parsed
        }),
        raw: map.get("raw").and_then(|v| keep(file.parse("raw", v), &mut diags)),
        combine: map.get("combine").and_then(|v| keep(file.parse("combine", v), &mut diags)),
        fits: map.get("fits").and_then(|v| parse_list(file, "fits", v, &mut diags)),
        report: map.get("report").and_then(|v| keep(file.parse("report", v), &mut diags)),
    };
    (config, diags)
}

/// A `type: fit` entry under `stages:` (the form before fits had their own section) is
/// reported with where it moved, in place of the parser's messages about it (those from
/// `first` on); its other keys are those of a `fits:` entry.
fn moved_fit_entries(file: &YamlFile, stages: &Value, first: usize, diags: &mut Vec<Diagnostic>) {
    for (i, item) in stages.as_sequence().into_iter().flatten().enumerate() {
        if item.get("type").and_then(Value::as_str) == Some("fit") {
            let at = format!("stages[{i}]");
            let about_item = |d: &Diagnostic| d.key == at || d.key.starts_with(&format!("{at}."));
            let parser_messages = diags.split_off(first);
            diags.extend(parser_messages.into_iter().filter(|d| !about_item(d)));
            let key = format!("{at}.type");
            diags.push(
                Diagnostic::new(&file.path, key.clone(), "a fit is not a per-run stage; fits have their own section")
                    .at(file.locations.find(&key))
                    .with_help(
                        "move the entry, without `type: fit`, to a top-level `fits:` list (README: Theory and fits)",
                    ),
            );
        }
    }
}

/// Parse a YAML list item by item; `None` if any item failed (its diagnostics are kept).
fn parse_list<T: DeserializeOwned>(
    file: &YamlFile,
    key: &str,
    value: &Value,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<T>> {
    let Some(items) = value.as_sequence() else {
        diags.push(
            Diagnostic::new(&file.path, key, format!("found {}, expected a list", yaml_text(value)))
                .at(file.locations.find(key)),
        );
        return None;
    };
    let before = diags.len();
    let parsed: Vec<T> = items
        .iter()
        .enumerate()
        .filter_map(|(i, item)| keep(file.parse::<T>(&format!("{key}[{i}]"), item), diags))
        .collect();
    (diags.len() == before).then_some(parsed)
}

fn keep<T>(r: Result<T, Diagnostic>, diags: &mut Vec<Diagnostic>) -> Option<T> {
    r.map_err(|d| diags.push(d)).ok()
}

/// A short YAML rendering of a value for messages.
pub fn yaml_text(v: &Value) -> String {
    serde_yaml::to_string(v).map(|s| s.trim().to_string()).unwrap_or_else(|_| format!("{v:?}"))
}
