//! `xsflow kinematics`: a two-body kinematics table at chosen lab angles, for a person (an
//! aligned table) or a script (JSON, CSV).

use std::collections::BTreeMap;
use std::fmt::Write as _;

use polars::prelude::{Column, DataFrame, PolarsResult};
use serde::Serialize;
use stages::physics::kinematics::{Detect, Mode, Solution};
use stages::setup::{DetectConfig, ReactionConfig, ResolvedReaction, StateConfig};
use tracing::warn;

use crate::cli::TableFormat;
use crate::tables::csv_text;

/// One solution at one lab angle, as printed.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct KinematicsRow {
    /// Lab angle of the detected particle, degrees.
    pub theta_lab_deg: f64,
    /// CM angle of the ejectile, degrees.
    pub theta_cm_deg: f64,
    /// Lab kinetic energy of the detected particle, MeV.
    pub energy_lab_mev: f64,
    /// dΩ_lab/dΩ_cm of the detected particle.
    pub domega_lab_per_domega_cm: f64,
    /// 1, or 2 for the lower-energy solution of a double-valued angle.
    pub branch: u8,
    /// Lab angle of the residual nucleus, degrees.
    pub recoil_theta_lab_deg: f64,
    /// Lab kinetic energy of the residual nucleus, MeV.
    pub recoil_energy_lab_mev: f64,
    /// Lab angle of the ejectile, degrees.
    pub ejectile_theta_lab_deg: f64,
    /// Lab kinetic energy of the ejectile, MeV.
    pub ejectile_energy_lab_mev: f64,
}

impl KinematicsRow {
    fn new(s: &Solution, detect: Detect) -> Self {
        let (own, partner) = (
            (s.theta_lab_rad.to_degrees(), s.energy_lab_mev),
            (s.partner_theta_lab_rad.to_degrees(), s.partner_energy_lab_mev),
        );
        let (ejectile, recoil) = if detect == Detect::Ejectile { (own, partner) } else { (partner, own) };
        KinematicsRow {
            theta_lab_deg: own.0,
            theta_cm_deg: s.theta_cm_rad.to_degrees(),
            energy_lab_mev: own.1,
            domega_lab_per_domega_cm: s.domega_lab_per_domega_cm,
            branch: s.branch,
            recoil_theta_lab_deg: recoil.0,
            recoil_energy_lab_mev: recoil.1,
            ejectile_theta_lab_deg: ejectile.0,
            ejectile_energy_lab_mev: ejectile.1,
        }
    }
}

/// What `--angles` accepts, for messages.
const ACCEPTED_ANGLES: &str = "A:B:STEP (e.g. 10:170:10) or a list (e.g. 15,30,45), angles in (0, 180) degrees";

/// The most angles one `--angles` range may give.
const MAX_ANGLES: usize = 100_000;

/// An `--angles` text that gives no angles.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("--angles {text}: {problem}; accepted: {ACCEPTED_ANGLES}")]
pub struct AnglesError {
    /// The text given.
    pub text: String,
    /// What is wrong with it.
    pub problem: AnglesProblem,
}

/// What is wrong with an `--angles` text.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AnglesProblem {
    /// A part that is no finite number.
    #[error("`{0}` is not a number")]
    NotANumber(String),
    /// A range of other than three parts.
    #[error("a range needs three numbers")]
    RangeParts,
    /// A range that runs backwards or does not advance.
    #[error("a range needs A <= B and STEP > 0")]
    RangeOrder,
    /// A range of too many angles.
    #[error("more than {MAX_ANGLES} angles")]
    TooMany,
    /// An angle outside (0, 180) degrees.
    #[error("{0} is outside (0, 180)")]
    Outside(f64),
}

/// Parse `A:B:STEP` (inclusive of B when the steps reach it) or a comma list `10,20,35`.
///
/// # Errors
/// The text and what is wrong with it; its message names the accepted forms.
pub fn parse_angles(text: &str) -> Result<Vec<f64>, AnglesError> {
    let bad = |problem| AnglesError { text: text.to_string(), problem };
    let number = |s: &str| {
        s.trim()
            .parse::<f64>()
            .ok()
            .filter(|x| x.is_finite())
            .ok_or_else(|| bad(AnglesProblem::NotANumber(s.to_string())))
    };
    let angles = if text.contains(':') {
        let parts: Vec<&str> = text.split(':').collect();
        let [a, b, step] = parts[..] else { return Err(bad(AnglesProblem::RangeParts)) };
        let (a, b, step) = (number(a)?, number(b)?, number(step)?);
        if step <= 0.0 || b < a {
            return Err(bad(AnglesProblem::RangeOrder));
        }
        let n = ((b - a) / step + 1e-9).floor() as usize;
        if n > MAX_ANGLES {
            return Err(bad(AnglesProblem::TooMany));
        }
        (0..=n).map(|i| a + step * i as f64).collect()
    } else {
        text.split(',').map(number).collect::<Result<Vec<_>, _>>()?
    };
    if let Some(x) = angles.iter().find(|x| !(**x > 0.0 && **x < 180.0)) {
        return Err(bad(AnglesProblem::Outside(*x)));
    }
    Ok(angles)
}

/// What the command was asked for.
pub struct Request<'a> {
    /// Beam particle.
    pub beam: &'a str,
    /// Target nucleus.
    pub target: &'a str,
    /// Ejectile, default the beam.
    pub ejectile: Option<&'a str>,
    /// Beam kinetic energy in MeV.
    pub energy_mev: f64,
    /// Excitation of the residual in MeV.
    pub excitation_mev: f64,
    /// Which particle is detected.
    pub detect: DetectConfig,
    /// Galilean instead of relativistic kinematics.
    pub non_relativistic: bool,
}

/// A value of a kinematics request that is not accepted, named by its command-line flag.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{flag}: found {found}, expected {expected}")]
pub struct FlagProblem {
    /// The flag (`--energy-mev`), or the key of the problem when no flag sets it.
    pub flag: String,
    /// The value found.
    pub found: String,
    /// What is accepted.
    pub expected: String,
}

/// The reaction of a request, or the problems, phrased with the command-line flags.
///
/// # Errors
/// Each problem, named by its flag.
pub fn resolve(req: &Request<'_>) -> Result<ResolvedReaction, Vec<FlagProblem>> {
    let config = ReactionConfig {
        beam: req.beam.to_string(),
        target: req.target.to_string(),
        energy_mev: req.energy_mev,
        beam_charge_state: None,
        ejectile: req.ejectile.map(str::to_string),
        detect: req.detect,
        states: vec![StateConfig { name: "state".into(), excitation_mev: req.excitation_mev }],
        atomic_masses_u: BTreeMap::new(),
    };
    config.resolve().map_err(|problems| {
        problems
            .into_iter()
            .map(|p| {
                let flag = match p.key.as_str() {
                    "energy_mev" => "--energy-mev",
                    "states[0].excitation_mev" => "--excitation-mev",
                    "beam" => "--beam",
                    "target" => "--target",
                    "ejectile" => "--ejectile",
                    other => other,
                };
                FlagProblem { flag: flag.to_string(), found: p.found, expected: p.expected }
            })
            .collect()
    })
}

/// Every solution at every angle; angles past the kinematic limit give no row and a warning
/// naming the limit.
pub fn rows(reaction: &ResolvedReaction, angles_deg: &[f64], mode: Mode) -> Vec<KinematicsRow> {
    let Some((_, channel)) = reaction.channels.first() else { return Vec::new() };
    let mut out = Vec::new();
    for &deg in angles_deg {
        let solutions = channel.at_lab_angle(deg.to_radians(), reaction.detect, mode);
        if solutions.is_empty() {
            let max = channel.max_lab_angle_rad(reaction.detect, mode).to_degrees();
            warn!(
                theta_lab_deg = deg,
                max_lab_angle_deg = max,
                "no solution: the angle is beyond the maximum lab angle {max:.4} deg"
            );
        }
        out.extend(solutions.iter().map(|s| KinematicsRow::new(s, reaction.detect)));
    }
    out
}

/// The rows as a table, one column per field of [`KinematicsRow`] in its order.
///
/// # Errors
/// The table library's error.
pub fn table(rows: &[KinematicsRow]) -> PolarsResult<DataFrame> {
    let col =
        |name: &str, f: fn(&KinematicsRow) -> f64| Column::new(name.into(), rows.iter().map(f).collect::<Vec<_>>());
    DataFrame::new_infer_height(vec![
        col("theta_lab_deg", |r| r.theta_lab_deg),
        col("theta_cm_deg", |r| r.theta_cm_deg),
        col("energy_lab_mev", |r| r.energy_lab_mev),
        col("domega_lab_per_domega_cm", |r| r.domega_lab_per_domega_cm),
        Column::new("branch".into(), rows.iter().map(|r| r.branch).collect::<Vec<_>>()),
        col("recoil_theta_lab_deg", |r| r.recoil_theta_lab_deg),
        col("recoil_energy_lab_mev", |r| r.recoil_energy_lab_mev),
        col("ejectile_theta_lab_deg", |r| r.ejectile_theta_lab_deg),
        col("ejectile_energy_lab_mev", |r| r.ejectile_energy_lab_mev),
    ])
}

fn values(r: &KinematicsRow) -> [f64; 9] {
    [
        r.theta_lab_deg,
        r.theta_cm_deg,
        r.energy_lab_mev,
        r.domega_lab_per_domega_cm,
        f64::from(r.branch),
        r.recoil_theta_lab_deg,
        r.recoil_energy_lab_mev,
        r.ejectile_theta_lab_deg,
        r.ejectile_energy_lab_mev,
    ]
}

/// The rows in the chosen format, with a heading for the table format; CSV through the
/// one CSV writer ([`csv_text`]).
///
/// # Errors
/// The table library's error (CSV only).
pub fn render(
    reaction: &ResolvedReaction,
    rows: &[KinematicsRow],
    format: TableFormat,
    mode: Mode,
) -> PolarsResult<String> {
    Ok(match format {
        TableFormat::Json => {
            serde_json::to_string_pretty(rows).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}")) + "\n"
        }
        TableFormat::Csv => csv_text(&mut table(rows)?)?,
        TableFormat::Table => {
            let mut s = String::new();
            if let Some((_, ch)) = reaction.channels.first() {
                let detected =
                    if reaction.detect == Detect::Ejectile { &reaction.ejectile.name } else { &reaction.recoil.name };
                let _ = writeln!(
                    s,
                    "{}({}, {}){}  T = {} MeV  E_x = {} MeV  Q = {:.4} MeV  detected: {detected}  max lab angle: {:.4} deg  ({})",
                    reaction.target.name,
                    reaction.beam.name,
                    reaction.ejectile.name,
                    reaction.recoil.name,
                    ch.energy_mev(),
                    ch.excitation_mev(),
                    ch.q_value_mev(),
                    ch.max_lab_angle_rad(reaction.detect, mode).to_degrees(),
                    if mode == Mode::Relativistic { "relativistic" } else { "non-relativistic" },
                );
            }
            let heads = [
                "theta_lab",
                "theta_cm",
                "E_lab/MeV",
                "dOmega_lab/dOmega_cm",
                "branch",
                "recoil_theta",
                "recoil_E/MeV",
                "ejectile_theta",
                "ejectile_E/MeV",
            ];
            let widths: Vec<usize> = heads.iter().map(|h| h.len().max(10)).collect();
            let line = |cells: Vec<String>| {
                cells.iter().zip(&widths).map(|(c, w)| format!("{c:>w$}")).collect::<Vec<_>>().join("  ") + "\n"
            };
            s += &line(heads.iter().map(|h| (*h).to_string()).collect());
            for r in rows {
                let v = values(r);
                s += &line(
                    v.iter()
                        .enumerate()
                        .map(|(i, x)| {
                            if i == 4 {
                                format!("{x}")
                            } else if i == 3 {
                                format!("{x:.6}")
                            } else {
                                format!("{x:.4}")
                            }
                        })
                        .collect(),
                );
            }
            s
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(theta_lab_deg: f64, branch: u8) -> KinematicsRow {
        KinematicsRow {
            theta_lab_deg,
            theta_cm_deg: theta_lab_deg + 0.5,
            energy_lab_mev: 23.949509358004224,
            domega_lab_per_domega_cm: 1.0 / 3.0,
            branch,
            recoil_theta_lab_deg: 84.0,
            recoil_energy_lab_mev: 0.05,
            ejectile_theta_lab_deg: theta_lab_deg,
            ejectile_energy_lab_mev: 23.949509358004224,
        }
    }

    #[test]
    fn angles_that_cannot_be_read_say_why() {
        // (text, what is wrong)
        let cases = [
            ("10:x:1", AnglesProblem::NotANumber("x".into())),
            ("10:20", AnglesProblem::RangeParts),
            ("20:10:1", AnglesProblem::RangeOrder),
            ("10:20:0", AnglesProblem::RangeOrder),
            ("0.001:179:0.001", AnglesProblem::TooMany),
            ("10,190", AnglesProblem::Outside(190.0)),
            ("0", AnglesProblem::Outside(0.0)),
        ];
        for (text, problem) in cases {
            let err = parse_angles(text).expect_err(text);
            assert_eq!(err, AnglesError { text: text.into(), problem: problem.clone() }, "{text}");
            assert!(err.to_string().starts_with(&format!("--angles {text}: {problem}; accepted: A:B:STEP")), "{err}");
        }
        assert_eq!(parse_angles("10:30:10").expect("a range").len(), 3, "B is included when the steps reach it");
    }

    #[test]
    fn csv_goes_through_the_one_writer_and_reads_back_bit_for_bit() {
        let rows = [row(10.0, 1), row(12.25, 2)];
        let text = csv_text(&mut table(&rows).expect("table")).expect("csv");
        // (line, what the writer gives: floats in their shortest round-trip form with a
        // decimal point, the branch as a whole number)
        let cases = [
            (0, "theta_lab_deg,theta_cm_deg,energy_lab_mev,domega_lab_per_domega_cm,branch,recoil_theta_lab_deg,recoil_energy_lab_mev,ejectile_theta_lab_deg,ejectile_energy_lab_mev"),
            (1, "10.0,10.5,23.949509358004224,0.3333333333333333,1,84.0,0.05,10.0,23.949509358004224"),
            (2, "12.25,12.75,23.949509358004224,0.3333333333333333,2,84.0,0.05,12.25,23.949509358004224"),
        ];
        let lines: Vec<&str> = text.lines().collect();
        for (i, want) in cases {
            assert_eq!(lines[i], want, "line {i}");
        }
        let tmp = tempfile::tempdir().expect("scratch");
        let path = tmp.path().join("kinematics.csv");
        std::fs::write(&path, &text).expect("write");
        let back = crate::tables::read_table(&path).expect("the CSV reads back");
        let jacobians = stages::table::f64_values(&back, "domega_lab_per_domega_cm").expect("column");
        // Shortest round-trip form: the value read back is the same double, bit for bit.
        assert!(jacobians.iter().all(|x| x.to_bits() == (1.0_f64 / 3.0).to_bits()), "{jacobians:?}");
    }
}
