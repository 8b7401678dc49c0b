//! Closure on known truth (issue 17): spectra simulated here from chosen lab cross
//! sections, independently of the reduction (its own luminosity, solid angle and live
//! fraction formulas, Poisson counts channel by channel), then reduced by `xsflow reduce`
//! with default gates. Over many seeds the pulls (dσ/dΩ_lab − truth)/u_stat must have mean
//! 0 within 3 standard errors and width 1 within 10 %.
//!
//! The generator: a Gaussian peak of σ = the configured resolution at the relativistic
//! kinematic energy of every state and branch (from `xsflow kinematics`, itself checked
//! against references in tests/kinematics.rs), N expected counts
//!     N = (dσ/dΩ_lab) ΔΩ N_beam n_t ε f_live,
//!     ΔΩ = 2π (1 − d/√(d² + r²))            (circular aperture on axis; G. F. Knoll,
//!                                             Radiation Detection and Measurement, ch. 4),
//!     N_beam = Q/(q e),   n_t = ρ_A N_A / M   (CODATA 2018 e and N_A),
//!     f_live = live time / real time,
//! spread over channels c holding [E(c − ½), E(c + ½)) by the normal distribution
//! function, on a flat background of b counts per channel; each channel Poisson.

use std::path::Path;

use stages::physics::peak_acceptance::normal_cdf;
use stages::physics::synthetic::Rng;

use crate::common::{text, xsflow};

const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;
const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;
const CM2_PER_MB: f64 = 1e-27;

/// One simulated experiment: the set-up's numbers as the generator sees them.
struct Experiment {
    beam: &'static str,
    target: &'static str,
    energy_mev: f64,
    charge_state: f64,
    areal_density_ug_cm2: f64,
    molar_mass_g_mol: f64,
    states: &'static [(&'static str, f64)],
    /// (id, lab angle °, distance mm, aperture radius mm, efficiency)
    detectors: &'static [(&'static str, f64, f64, f64, f64)],
    gain_mev_per_channel: f64,
    channels: usize,
    resolution_mev: f64,
    background_per_channel: f64,
    charge_c: f64,
    live_time_s: f64,
    real_time_s: f64,
    /// Expected counts of the strongest peak; the others scale from it.
    peak_counts: f64,
    /// The `background:` method of the `raw:` section.
    background: &'static str,
    /// Each detector's own live time in s, in the order of `detectors` (empty: the run's
    /// one live time serves every detector).
    detector_live_time_s: &'static [f64],
    /// A low-energy tail of every peak: (fraction η, mean length τ in MeV).
    tail: Option<(f64, f64)>,
}

/// A simulated peak: detector, state, branch, its energy and true lab cross section.
#[derive(Debug, Clone)]
struct Truth {
    detector: &'static str,
    state: &'static str,
    branch: u8,
    energy_lab_mev: f64,
    dsdo_lab_mb_sr: f64,
    expected_counts: f64,
}

impl Experiment {
    fn config(&self, runs: usize) -> String {
        let states: Vec<String> =
            self.states.iter().map(|(n, ex)| format!("{{ name: \"{n}\", excitation_mev: {ex} }}")).collect();
        let detectors: String = self
            .detectors
            .iter()
            .map(|(id, theta, d, r, eff)| {
                format!("  - {{ id: {id}, theta_lab_deg: {theta}, distance_mm: {d}, aperture: {{ shape: circle, radius_mm: {r} }}, efficiency: {eff} }}\n")
            })
            .collect();
        let run_files: Vec<String> = (0..runs).map(|i| format!("r{i:03}.run.yaml")).collect();
        format!(
            "experiment: {{ name: closure }}
reaction: {{ beam: {}, target: {}, energy_mev: {}, beam_charge_state: {}, states: [{}] }}
target: {{ areal_density_ug_cm2: {}, molar_mass_g_mol: {} }}
detectors:
{detectors}runs: [{}]
stages:
  - type: subtract_background
  - type: correct_dead_time
    method: clock_ratio
  - type: compute_kinematics
  - type: apply_efficiency
  - type: compute_solid_angle
  - type: normalise
  - type: compute_lab_cross_section
raw:
  columns: {{ detector: det, energy: adc }}
  spectrum_columns: {{ detector: det, channel: ch, counts: n }}
  overflow_channel: {}
  calibration:
    all: {{ offset_mev: 0.0, gain_mev_per_channel: {} }}
  gates:
    resolution_mev: {}
{}  background: {}
",
            self.beam,
            self.target,
            self.energy_mev,
            self.charge_state,
            states.join(", "),
            self.areal_density_ug_cm2,
            self.molar_mass_g_mol,
            run_files.join(", "),
            self.channels,
            self.gain_mev_per_channel,
            self.resolution_mev,
            self.tail
                .map_or(String::new(), |(f, l)| format!("    low_energy_tail: {{ fraction: {f}, length_mev: {l} }}\n")),
            self.background,
        )
    }

    /// Expected counts per unit lab cross section (1 mb/sr) in a detector with this live time.
    fn counts_per_mb_sr(&self, distance_mm: f64, radius_mm: f64, efficiency: f64, live_time_s: f64) -> f64 {
        let solid_angle_sr = 2.0 * std::f64::consts::PI * (1.0 - distance_mm / distance_mm.hypot(radius_mm));
        let beam = self.charge_c / (self.charge_state * ELEMENTARY_CHARGE_C);
        let atoms_per_cm2 = self.areal_density_ug_cm2 * 1e-6 * AVOGADRO_PER_MOL / self.molar_mass_g_mol;
        CM2_PER_MB * solid_angle_sr * beam * atoms_per_cm2 * efficiency * live_time_s / self.real_time_s
    }

    /// Every peak with its truth: the strongest has `peak_counts`, the others less.
    fn truths(&self, dir: &Path) -> Vec<Truth> {
        let mut out = Vec::new();
        for (k, (id, theta, d, r, eff)) in self.detectors.iter().enumerate() {
            for (s, (state, ex)) in self.states.iter().enumerate() {
                for (energy_lab_mev, branch) in kinematic_energies_mev(self, dir, *theta, *ex) {
                    let expected = self.peak_counts / (1.0 + (s + k) as f64 * 0.5) / f64::from(branch);
                    out.push(Truth {
                        detector: id,
                        state,
                        branch,
                        energy_lab_mev,
                        dsdo_lab_mb_sr: expected / self.counts_per_mb_sr(*d, *r, *eff, self.live_time_s_of(k)),
                        expected_counts: expected,
                    });
                }
            }
        }
        out
    }

    /// The live time of detector `k`: its own, or the run's.
    fn live_time_s_of(&self, k: usize) -> f64 {
        self.detector_live_time_s.get(k).copied().unwrap_or(self.live_time_s)
    }

    /// The fraction of a peak at `energy_mev` in the energies [lo, hi): the Gaussian, and
    /// with a tail, (1 − η) of it plus η of the Gaussian convolved with an exponential of
    /// mean length τ towards low energy, by the midpoint rule over the shift t ∈ [0, 40τ)
    /// in steps of τ/40 (a numerical convolution, independent of the closed form the
    /// reduction uses).
    fn peak_fraction(&self, energy_mev: f64, lo: f64, hi: f64) -> f64 {
        let gauss = |shift: f64| {
            let z = |e: f64| (e + shift - energy_mev) / self.resolution_mev;
            normal_cdf(z(hi)) - normal_cdf(z(lo))
        };
        let Some((eta, tau)) = self.tail else {
            return gauss(0.0);
        };
        let steps = 1600;
        let dt = 40.0 * tau / f64::from(steps);
        let tail: f64 = (0..steps)
            .map(|i| {
                let t = (f64::from(i) + 0.5) * dt;
                (-t / tau).exp() / tau * dt * gauss(t)
            })
            .sum();
        (1.0 - eta) * gauss(0.0) + eta * tail
    }

    /// Expected counts per channel of each detector, in the order of `detectors`.
    fn channel_means(&self, truths: &[Truth]) -> Vec<Vec<f64>> {
        let g = self.gain_mev_per_channel;
        self.detectors
            .iter()
            .map(|(id, ..)| {
                let peaks: Vec<&Truth> = truths.iter().filter(|t| t.detector == *id).collect();
                (0..self.channels)
                    .map(|c| {
                        let (lo, hi) = ((c as f64 - 0.5) * g, (c as f64 + 0.5) * g);
                        self.background_per_channel
                            + peaks
                                .iter()
                                .map(|t| t.expected_counts * self.peak_fraction(t.energy_lab_mev, lo, hi))
                                .sum::<f64>()
                    })
                    .collect()
            })
            .collect()
    }

    /// One run's spectra (CSV: det, ch, n), Poisson about `means`, and its record.
    fn write_run(&self, dir: &Path, index: usize, means: &[Vec<f64>], rng: &mut Rng) {
        let mut csv = String::from("det,ch,n\n");
        for ((id, ..), channels) in self.detectors.iter().zip(means) {
            for (c, mean) in channels.iter().enumerate() {
                let n = rng.poisson(*mean);
                if n > 0 {
                    csv.push_str(&format!("{id},{c},{n}\n"));
                }
            }
        }
        std::fs::write(dir.join(format!("r{index:03}.spectra.csv")), csv).expect("spectra");
        let mut record = format!(
            "run: r{index:03}\nspectra_file: r{index:03}.spectra.csv\ncharge_c: {}\nlive_time_s: {}\nreal_time_s: {}\n",
            self.charge_c, self.live_time_s, self.real_time_s
        );
        if !self.detector_live_time_s.is_empty() {
            record.push_str("detectors:\n");
            for (k, (id, ..)) in self.detectors.iter().enumerate() {
                record.push_str(&format!("  {id}: {{ live_time_s: {} }}\n", self.live_time_s_of(k)));
            }
        }
        std::fs::write(dir.join(format!("r{index:03}.run.yaml")), record).expect("record");
    }
}

/// The relativistic kinematic energies and branches of a state at a lab angle, from
/// `xsflow kinematics`.
fn kinematic_energies_mev(e: &Experiment, dir: &Path, theta_lab_deg: f64, excitation_mev: f64) -> Vec<(f64, u8)> {
    let (energy, angles, ex) =
        (e.energy_mev.to_string(), format!("{theta_lab_deg}:{theta_lab_deg}:1"), excitation_mev.to_string());
    let args = ["kinematics", "--beam", e.beam, "--target", e.target, "--energy-mev", &energy, "--angles", &angles];
    let out = xsflow(dir, &[&args[..], &["--excitation-mev", &ex, "--format", "json"]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let rows: serde_json::Value = serde_json::from_slice(&out.stdout).expect("kinematics json");
    rows.as_array()
        .expect("rows")
        .iter()
        .map(|r| (r["energy_lab_mev"].as_f64().expect("energy"), r["branch"].as_u64().expect("branch") as u8))
        .collect()
}

/// Pulls (measured − truth)/u_stat of every row of `runs` runs simulated from `seed`, with
/// and without the window acceptance (dσ/dΩ·A undoes the correction).
fn pulls(e: &Experiment, seed: u64, runs: usize) -> (Vec<f64>, Vec<f64>) {
    let tmp = tempfile::tempdir().expect("scratch");
    let truths = e.truths(tmp.path());
    let means = e.channel_means(&truths);
    let mut rng = Rng::new(seed);
    for i in 0..runs {
        e.write_run(tmp.path(), i, &means, &mut rng);
    }
    std::fs::write(tmp.path().join("experiment.yaml"), e.config(runs)).expect("config");
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out", "-q"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let (mut after, mut before) = (Vec::new(), Vec::new());
    for i in 0..runs {
        let csv = std::fs::read_to_string(tmp.path().join(format!("out/r{i:03}/cross_sections.csv"))).expect("csv");
        let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
        let col = |name: &str| header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("column {name}"));
        let mut rows = 0;
        for line in csv.lines().skip(1) {
            let f: Vec<&str> = line.split(',').collect();
            let num = |name: &str| f[col(name)].parse::<f64>().expect("number");
            let truth = truths
                .iter()
                .find(|t| {
                    t.detector == f[col("detector")]
                        && t.state == f[col("state")]
                        && f[col("branch")] == t.branch.to_string()
                })
                .unwrap_or_else(|| panic!("a simulated peak for {line}"));
            let (value, err) = (num("dsdo_lab_mb_sr"), num("stat_err_lab_mb_sr"));
            after.push((value - truth.dsdo_lab_mb_sr) / err);
            before.push((value * num("window_acceptance") - truth.dsdo_lab_mb_sr) / err);
            rows += 1;
        }
        assert_eq!(rows, truths.len(), "every simulated peak has its row: {csv}");
    }
    (after, before)
}

/// Mean, its standard error, and the standard deviation.
fn moments(x: &[f64]) -> (f64, f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (mean, sd / n.sqrt(), sd)
}

fn assert_closes(name: &str, e: &Experiment, seed: u64, runs: usize) {
    let (after, before) = pulls(e, seed, runs);
    let (mean, se, width) = moments(&after);
    let (mean_before, se_before, width_before) = moments(&before);
    // Printed for the record (cargo test -- --nocapture).
    println!(
        "{name}: {} pulls; mean {mean:.3} ± {se:.3}, width {width:.3}; without the window acceptance mean {mean_before:.3} ± {se_before:.3}, width {width_before:.3}",
        after.len()
    );
    // The criteria of issue 17: mean within 3 standard errors of 0, width within 10 % of 1.
    assert!(mean.abs() < 3.0 * se, "{name}: pull mean {mean} ± {se}");
    assert!((width - 1.0).abs() < 0.1, "{name}: pull width {width}");
}

#[test]
fn issue_17_single_branch_yields_close_on_truth() {
    assert_closes("single branch", &single_branch("side_bands"), 17, 100);
}

#[test]
fn issue_17_fitted_peak_areas_close_on_truth() {
    // The peak-fit background integrates the fitted Gaussian: no acceptance correction.
    assert_closes("single branch, peak fit", &single_branch("peak_fit_linear"), 18, 100);
}

#[test]
fn issue_17_per_detector_dead_time_closes_on_truth() {
    // Three acquisition channels of very different dead time: live fractions 0.98, 0.75
    // and 0.40 of the 3600 s real time.
    let e = Experiment { detector_live_time_s: &[3528.0, 2700.0, 1440.0], ..single_branch("side_bands") };
    assert_closes("per-detector dead time", &e, 19, 100);
}

#[test]
fn issue_17_peaks_with_a_low_energy_tail_close_on_truth() {
    // 5 % of every peak in a tail of mean length 0.2 MeV (2.5 σ): the default window keeps
    // 0.978 of such a peak where a Gaussian's acceptance is 0.9972. One state: the tail of
    // the elastic peak reaches the side bands of the 2+ state 1.454 MeV below and biases it
    // by about −0.05 % (pull mean −0.29 with both states), which xsflow warns of and does
    // not correct.
    let e = Experiment { tail: Some((0.05, 0.2)), states: &[("elastic", 0.0)], ..single_branch("side_bands") };
    assert_closes("low-energy tail", &e, 21, 100);
}

fn single_branch(background: &'static str) -> Experiment {
    // 4He on 58Ni at 24 MeV (invented numbers): elastic and 2+ at three angles, ~10^6
    // counts in the strongest peak, 20 background counts per 10 keV channel.
    Experiment {
        beam: "4He",
        target: "58Ni",
        energy_mev: 24.0,
        charge_state: 2.0,
        areal_density_ug_cm2: 100.0,
        molar_mass_g_mol: 57.935_342,
        states: &[("elastic", 0.0), ("2+_1.454", 1.454)],
        detectors: &[("A30", 30.0, 200.0, 2.5, 1.0), ("A60", 60.0, 150.0, 2.5, 0.97), ("A90", 90.0, 120.0, 3.0, 0.9)],
        gain_mev_per_channel: 0.01,
        channels: 4096,
        resolution_mev: 0.08,
        background_per_channel: 20.0,
        charge_c: 1e-6,
        live_time_s: 3300.0,
        real_time_s: 3600.0,
        peak_counts: 1e6,
        background,
        detector_live_time_s: &[],
        tail: None,
    }
}

#[test]
fn issue_17_both_branches_close_on_truth() {
    // 28Si on 12C at 60 MeV (invented numbers): both solutions at 10°, 15° and 20°.
    let e = Experiment {
        beam: "28Si",
        target: "12C",
        energy_mev: 60.0,
        charge_state: 8.0,
        areal_density_ug_cm2: 40.0,
        molar_mass_g_mol: 12.0,
        states: &[("elastic", 0.0)],
        detectors: &[("F10", 10.0, 400.0, 2.0, 1.0), ("F15", 15.0, 400.0, 2.0, 1.0), ("F20", 20.0, 400.0, 2.0, 1.0)],
        gain_mev_per_channel: 0.02,
        channels: 4096,
        resolution_mev: 0.15,
        background_per_channel: 10.0,
        charge_c: 2e-7,
        live_time_s: 1800.0,
        real_time_s: 2000.0,
        peak_counts: 1e6,
        background: "side_bands",
        detector_live_time_s: &[],
        tail: None,
    };
    assert_closes("both branches", &e, 20, 100);
}
