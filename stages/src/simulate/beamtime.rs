//! The beam-time planner (`xsflow beamtime`): from the expected counts of the simulation
//! ([`super::experiment`], the same first-principles chain, not a copy of it) and a beam
//! current, the time each detector and arm setting needs for a relative statistical
//! precision P on every peak, the count rates and the dead time they imply.
//!
//! For one setting at beam current I (A), with L/Q the luminosity per coulomb:
//!     ℒ = I · L/Q = I/(q e) · n_t                         (luminosity rate, 1/(cm² s))
//!     s = (dσ/dΩ)_lab ΔΩ ε ℒ                              (a peak's arriving rate, 1/s)
//!     R_d = (1 + b) Σ_peaks of d s + Σ_impurity peaks of d s_c,   n = Σ_d R_d
//!                                                         (detector and total rates)
//!     f = live fraction of the dead-time model at n          ([`super::physics::live_fraction`])
//! with b the flat background as a fraction of a detector's peak counts (only with a
//! `raw:` section, as `xsflow simulate` makes it). In the peak window the background rate is
//! β = b (R_d/(1 + b)) w_d, w_d the window's share of the detector's energy range; the
//! side bands, together 1/ρ times as wide as the window, estimate it with variance ρ B. The
//! net counts N = S − B̂ of a run of real time t have S = f s t, B = f β t and
//!     var(N) = S + B + ρ B,
//! so the relative precision P is reached at
//!     t = (s + β (1 + ρ)) / (P² f s²);
//! without background N = f s t = 1/P² (Poisson counting; common practice, e.g. G. F.
//! Knoll, Radiation Detection and Measurement, 4th ed. (2010), ch. 3, from memory). A
//! setting's time is that of its slowest peak; the total is the sum over the settings.

use serde::Serialize;

use super::physics::live_fraction;
use super::{DeadTimeModel, Experiment};
use crate::problem::Checks;
use crate::raw::RawPlan;
use crate::Problem;

/// Seconds per hour.
const S_PER_HOUR: f64 = 3600.0;

/// What the planner is asked for besides the experiment.
#[derive(Debug, Clone, PartialEq)]
pub struct BeamtimeOptions {
    /// Beam current (electric, at the charge state of the config), nA; > 0.
    pub current_na: f64,
    /// Relative statistical precision wanted on every peak, in (0, 1).
    pub precision_rel: f64,
    /// The acquisition's dead-time model.
    pub dead_time: DeadTimeModel,
    /// Its resolving time, µs; >= 0.
    pub resolving_time_us: f64,
    /// Dead-time fraction above which a setting gets a warning, in (0, 1].
    pub dead_time_limit: f64,
    /// Flat background as a fraction of a detector's peak counts (with a `raw:` section);
    /// >= 0.
    pub background_fraction: f64,
}

impl BeamtimeOptions {
    /// Every problem of the options, keyed by their command-line flags.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        c.positive("--current-na", self.current_na);
        c.require(
            self.precision_rel > 0.0 && self.precision_rel < 1.0,
            "--precision",
            self.precision_rel,
            "a relative precision in (0, 1), e.g. 0.01 for 1 %",
        );
        c.non_negative("--resolving-time-us", self.resolving_time_us);
        c.fraction("--dead-time-limit", self.dead_time_limit);
        c.non_negative("--background-fraction", self.background_fraction);
        c.problems
    }
}

/// How a flat background reaches the peak windows: per detector the window's share w_d of
/// its energy range, and the ratio ρ of the window's width to the side bands' together.
#[derive(Debug, Clone, PartialEq)]
pub struct BackgroundShare {
    /// w_d per detector, in config order.
    pub window_fraction: Vec<f64>,
    /// ρ.
    pub side_band_ratio: f64,
}

impl BackgroundShare {
    /// The automatic windows of `raw`: 2·`window_resolutions`·σ wide, two side bands of
    /// `side_band_width_resolutions`·σ each, over each detector's calibrated range of
    /// `overflow_channel` channels.
    pub fn of(raw: &RawPlan) -> BackgroundShare {
        let g = &raw.config.gates;
        let window_mev = 2.0 * g.window_resolutions * g.resolution_mev;
        let n = raw.n_channels() as f64;
        let window_fraction = (0..raw.detector_ids().len())
            .map(|d| {
                let cal = raw.calibration(d);
                let range_mev = (cal.energy_mev(n - 0.5) - cal.energy_mev(-0.5)).abs();
                if range_mev > 0.0 {
                    (window_mev / range_mev).min(1.0)
                } else {
                    1.0
                }
            })
            .collect();
        BackgroundShare { window_fraction, side_band_ratio: g.window_resolutions / g.side_band_width_resolutions }
    }
}

/// One peak of one setting.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeakTime {
    /// The detector that sees the peak (its id).
    pub detector: String,
    /// Lab angle of the detector at this setting, degrees.
    pub theta_lab_deg: f64,
    /// The state of the peak.
    pub state: String,
    /// Kinematic branch (1, or 2 for the lower-energy solution).
    pub branch: u8,
    /// CM angle, degrees.
    pub theta_cm_deg: f64,
    /// True dσ/dΩ_cm, mb/sr.
    pub dsdo_cm_mb_sr: f64,
    /// Arriving rate of the peak, 1/s (before dead time).
    pub rate_per_s: f64,
    /// Arriving background rate in its window, 1/s.
    pub background_rate_per_s: f64,
    /// Recorded net counts at the precision asked for.
    pub counts_needed: f64,
    /// Real time needed, hours; `None` for a peak of zero rate (never reached).
    pub hours: Option<f64>,
}

/// One arm setting.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettingTime {
    /// The setting's name (`nominal`, or the arms' angles).
    pub setting: String,
    /// Its peaks.
    pub peaks: Vec<PeakTime>,
    /// Arriving rate per detector (peaks and background), 1/s, in config order.
    pub detector_rates_per_s: Vec<(String, f64)>,
    /// Arriving rate of all detectors, 1/s.
    pub total_rate_per_s: f64,
    /// Live fraction of the acquisition at that rate.
    pub live_fraction: f64,
    /// Dead-time fraction, 1 − live fraction.
    pub dead_time_fraction: f64,
    /// The dead time exceeds the limit.
    pub dead_time_warning: bool,
    /// Real time for every peak of the setting, hours (its slowest peak's).
    pub hours: f64,
    /// The peak that sets it (`detector/state/branch`).
    pub limiting_peak: String,
}

/// The plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Beamtime {
    /// Beam current, nA.
    pub current_na: f64,
    /// Relative statistical precision on every peak.
    pub precision_rel: f64,
    /// The dead-time warning limit.
    pub dead_time_limit: f64,
    /// The settings.
    pub settings: Vec<SettingTime>,
    /// The setting that takes longest.
    pub limiting_setting: String,
    /// Sum over the settings, hours.
    pub total_hours: f64,
}

/// Real time in s for relative precision P on the net counts of a peak arriving at s per
/// second with β per second of background in its window, side bands ρ (module docs), at
/// live fraction f: t = (s + β (1 + ρ))/(P² f s²); infinite for s = 0.
pub fn time_to_precision_s(
    rate_per_s: f64,
    background_rate_per_s: f64,
    side_band_ratio: f64,
    live_fraction: f64,
    precision_rel: f64,
) -> f64 {
    if rate_per_s <= 0.0 || live_fraction <= 0.0 {
        return f64::INFINITY;
    }
    (rate_per_s + background_rate_per_s * (1.0 + side_band_ratio))
        / (precision_rel * precision_rel * live_fraction * rate_per_s * rate_per_s)
}

/// Plan the settings (a name and the experiment's peaks at that setting each), with the
/// flat background of `background` (None: no background).
pub fn plan(settings: &[(String, Experiment)], background: Option<&BackgroundShare>, o: &BeamtimeOptions) -> Beamtime {
    let b = if background.is_some() { o.background_fraction } else { 0.0 };
    let rho = background.map_or(0.0, |s| s.side_band_ratio);
    let mut planned = Vec::new();
    for (name, e) in settings {
        let luminosity_per_cm2_s = o.current_na * 1e-9 * e.luminosity_per_cm2_per_c;
        let rates: Vec<f64> = e.peaks.iter().map(|p| p.counts_per_luminosity_cm2 * luminosity_per_cm2_s).collect();
        let mut detectors: Vec<(usize, String, f64)> = Vec::new();
        for (p, r) in e.peaks.iter().zip(&rates) {
            match detectors.iter_mut().find(|(d, ..)| *d == p.detector) {
                Some((_, _, sum)) => *sum += r,
                None => detectors.push((p.detector, p.detector_id.clone(), *r)),
            }
        }
        // Each detector's arriving rate: its peaks with their background, and the peaks of
        // the foil's impurities.
        let detector_rates: Vec<(String, f64)> = detectors
            .iter()
            .map(|(d, id, s)| {
                let impurities: f64 = e
                    .contaminants
                    .iter()
                    .filter(|c| c.detector == *d)
                    .map(|c| c.counts_per_luminosity_cm2 * luminosity_per_cm2_s)
                    .sum();
                (id.clone(), s * (1.0 + b) + impurities)
            })
            .collect();
        let total_rate_per_s: f64 = detector_rates.iter().map(|(_, r)| r).sum();
        let f = live_fraction(o.dead_time, total_rate_per_s, o.resolving_time_us * 1e-6);
        let peaks: Vec<PeakTime> = e
            .peaks
            .iter()
            .zip(&rates)
            .map(|(p, s)| {
                let peak_sum = detectors.iter().find(|(d, ..)| *d == p.detector).map_or(0.0, |(_, _, x)| *x);
                let w = background.and_then(|share| share.window_fraction.get(p.detector)).copied().unwrap_or(0.0);
                let beta = b * peak_sum * w;
                let t = time_to_precision_s(*s, beta, rho, f, o.precision_rel);
                PeakTime {
                    detector: p.detector_id.clone(),
                    theta_lab_deg: p.theta_lab_deg,
                    state: p.state.clone(),
                    branch: p.branch,
                    theta_cm_deg: p.theta_cm_deg,
                    dsdo_cm_mb_sr: p.dsdo_cm_mb_sr,
                    rate_per_s: *s,
                    background_rate_per_s: beta,
                    counts_needed: if t.is_finite() { f * s * t } else { f64::INFINITY },
                    hours: t.is_finite().then_some(t / S_PER_HOUR),
                }
            })
            .collect();
        let slowest = peaks.iter().filter_map(|p| p.hours.map(|h| (h, p))).max_by(|a, b| a.0.total_cmp(&b.0));
        let (hours, limiting_peak) =
            slowest.map_or((0.0, String::new()), |(h, p)| (h, format!("{}/{}/{}", p.detector, p.state, p.branch)));
        planned.push(SettingTime {
            setting: name.clone(),
            peaks,
            detector_rates_per_s: detector_rates,
            total_rate_per_s,
            live_fraction: f,
            dead_time_fraction: 1.0 - f,
            dead_time_warning: 1.0 - f > o.dead_time_limit,
            hours,
            limiting_peak,
        });
    }
    let limiting_setting =
        planned.iter().max_by(|a, b| a.hours.total_cmp(&b.hours)).map_or(String::new(), |s| s.setting.clone());
    Beamtime {
        current_na: o.current_na,
        precision_rel: o.precision_rel,
        dead_time_limit: o.dead_time_limit,
        total_hours: planned.iter().map(|s| s.hours).sum(),
        settings: planned,
        limiting_setting,
    }
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use approx::assert_relative_eq;

    use super::*;
    use crate::physics::constants::{AVOGADRO_PER_MOL, ELEMENTARY_CHARGE_C};
    use crate::setup::testing::setup;
    use crate::simulate::{experiment, StateTruth};

    fn options(current_na: f64, precision_rel: f64, resolving_time_us: f64) -> BeamtimeOptions {
        BeamtimeOptions {
            current_na,
            precision_rel,
            dead_time: DeadTimeModel::NonParalyzable,
            resolving_time_us,
            dead_time_limit: 0.1,
            background_fraction: 0.0,
        }
    }

    fn truth(dsdo_cm_mb_sr: f64) -> BTreeMap<String, StateTruth> {
        BTreeMap::from([("elastic".to_string(), StateTruth::Constant(dsdo_cm_mb_sr))])
    }

    #[test]
    fn a_peak_rate_and_its_time_worked_by_hand() {
        // 10 nA of 4He²⁺ on 100 µg/cm² of M = 58 g/mol (the test set-up), one detector of
        // ΔΩ = 1 msr and ε = 0.5 at 40°, dσ/dΩ_cm = 1000 mb/sr:
        //     I/(q e)  = 1e-8 / (2 · 1.602176634e-19)        = 3.1207548e10 /s
        //     N_target = 1e-4 g/cm² · 6.02214076e23 / 58      = 1.0383001e18 /cm²
        //     rate     = I/(q e) · N_target · (dσ/dΩ)_lab · ΔΩ · ε
        //              = 3.1207548e10 · 1.0383001e18 · (1000/J) · 1e-27 · 1e-3 · 0.5
        //              = 16.2014 / J per second,
        // J = dΩ_lab/dΩ_cm of the peak (from the set-up's kinematics). At P = 1 %, no
        // background and no dead time, N = 1/P² = 1e4 counts, t = 1e4/rate.
        let s = setup(
            "[{ id: A, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 }, efficiency: 0.5 }]",
        );
        let e = experiment(&s, &truth(1000.0)).expect("experiment");
        let j = e.peaks[0].domega_lab_per_domega_cm;
        let by_hand =
            1e-8 / (2.0 * ELEMENTARY_CHARGE_C) * (1e-4 * AVOGADRO_PER_MOL / 58.0) * (1000.0 / j) * 1e-27 * 1e-3 * 0.5;
        let plan = plan(&[("nominal".into(), e)], None, &options(10.0, 0.01, 0.0));
        let peak = &plan.settings[0].peaks[0];
        // 1e-12: the same products in another order.
        assert_relative_eq!(peak.rate_per_s, by_hand, max_relative = 1e-12);
        assert_relative_eq!(by_hand * j, 16.2014, max_relative = 1e-5); // the figure above, 6 digits
        assert_relative_eq!(peak.counts_needed, 1e4, max_relative = 1e-12);
        assert_relative_eq!(peak.hours.expect("reached"), 1e4 / by_hand / 3600.0, max_relative = 1e-12);
        assert_relative_eq!(plan.total_hours, peak.hours.expect("reached"), max_relative = 1e-15);
        assert_eq!(plan.limiting_setting, "nominal");
        assert!(!plan.settings[0].dead_time_warning);
    }

    #[test]
    fn times_to_precision_worked_by_hand() {
        // (s, β, ρ, f, P, t worked by hand from t = (s + β(1 + ρ))/(P² f s²))
        let cases = [
            (100.0, 0.0, 1.0, 1.0, 0.01, 100.0),       // N = 1e4 at 100/s
            (100.0, 0.0, 1.0, 0.5, 0.01, 200.0),       // half the time live
            (100.0, 50.0, 1.0, 1.0, 0.01, 200.0),      // (100 + 100)/(1e-4 · 1e4)
            (100.0, 50.0, 0.5, 1.0, 0.1, 1.75),        // (100 + 75)/(1e-2 · 1e4)
            (0.0, 1.0, 1.0, 1.0, 0.01, f64::INFINITY), // never
        ];
        for (s, beta, rho, f, p, want) in cases {
            let t = time_to_precision_s(s, beta, rho, f, p);
            if want.is_finite() {
                // 1e-12: a few products and one division.
                assert_relative_eq!(t, want, max_relative = 1e-12);
            } else {
                assert!(t.is_infinite(), "{s}: {t}");
            }
        }
    }

    #[test]
    fn rates_dead_time_and_the_limiting_setting() {
        let detectors = "[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 2.0 } }, { id: B, theta_lab_deg: 90.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]";
        let near = experiment(&setup(detectors), &truth(1e4)).expect("experiment");
        let far = experiment(&setup(detectors), &truth(1e3)).expect("experiment");
        // A resolving time that makes n τ = 0.25: f = 1/(1 + 0.25) = 0.8, 20 % dead.
        let o = options(1.0, 0.02, 0.0);
        let rate = plan(&[("a".into(), near.clone())], None, &o).settings[0].total_rate_per_s;
        let o = BeamtimeOptions { resolving_time_us: 0.25 / rate * 1e6, ..o };
        let p = plan(&[("near".into(), near), ("far".into(), far)], None, &o);
        let (a, b) = (&p.settings[0], &p.settings[1]);
        // (1e-12: one product and a division.)
        assert_relative_eq!(a.live_fraction, 0.8, max_relative = 1e-12);
        assert!(a.dead_time_warning, "20 % > 10 %");
        assert!(!b.dead_time_warning, "ten times less rate: 2.4 % dead");
        assert_relative_eq!(
            a.detector_rates_per_s.iter().map(|d| d.1).sum::<f64>(),
            a.total_rate_per_s,
            max_relative = 1e-12
        );
        // The far setting has a tenth of the rate: it limits, and its slowest peak is B.
        assert_eq!(p.limiting_setting, "far");
        assert_eq!(b.limiting_peak, "B/elastic/1");
        assert_relative_eq!(p.total_hours, a.hours + b.hours, max_relative = 1e-15);
        // Every peak of a setting reaches at least N = 1/P² = 2500 counts.
        assert!(a.peaks.iter().all(|q| q.counts_needed >= 2500.0 * (1.0 - 1e-12)));
    }

    #[test]
    fn bad_options_name_their_flag() {
        // (what is changed, the key of the one problem)
        type Change = fn(&mut BeamtimeOptions);
        let cases: [(Change, &str); 4] = [
            (|o| o.current_na = 0.0, "--current-na"),
            (|o| o.precision_rel = 1.0, "--precision"),
            (|o| o.dead_time_limit = 0.0, "--dead-time-limit"),
            (|o| o.background_fraction = -0.1, "--background-fraction"),
        ];
        assert!(options(10.0, 0.01, 1.0).validate().is_empty());
        for (change, key) in cases {
            let mut o = options(10.0, 0.01, 1.0);
            change(&mut o);
            let p = o.validate();
            assert_eq!(p.len(), 1, "{key}: {p:?}");
            assert_eq!(p[0].key, key);
        }
    }
}
