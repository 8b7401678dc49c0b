//! Dead-time corrections: the fraction of the run during which the acquisition could accept
//! an event (the live fraction f_live), by measurement (clocks, pulser, trigger scalers) or
//! by a model of the counting system with a resolving time τ.
//!
//! Source for the models: G. F. Knoll, Radiation Detection and Measurement (Wiley, 4th ed.
//! 2010), ch. 4, section VII "Dead time", Eqs. (4.23) non-paralyzable and (4.24) paralyzable
//! (equation numbers from memory).

use super::PhysicsError;

/// A live fraction with its standard uncertainty (absolute).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LiveFraction {
    /// f_live in (0, 1].
    pub value: f64,
    /// Standard uncertainty of f_live.
    pub err: f64,
}

/// Live fraction from the live and real clocks: f = t_live / t_real (common practice).
/// The clocks are taken as exact; a method uncertainty is added by the caller.
pub fn clock_ratio(live_time_s: f64, real_time_s: f64) -> LiveFraction {
    LiveFraction { value: live_time_s / real_time_s, err: 0.0 }
}

/// Live fraction from the clocks, with the statistical uncertainty of a pulser of N signals
/// recorded through the same acquisition:
///     f = t_live / t_real,   u(f) = sqrt(f (1 - f) / N)
/// The clocks measure the fraction of the run the acquisition was live; the pulser checks
/// it with N trials, each recorded with probability f, so its recorded fraction k/N has
/// the binomial variance f (1 - f) / N (binomial distribution: Knoll ch. 3, from memory;
/// taking it as the clock ratio's uncertainty is common practice). f is the clocks' value,
/// which k/N estimates: a detector with its own clocks and the run's pulser counts gets the
/// binomial error of its own live fraction.
pub fn clock_ratio_with_pulser(live_time_s: f64, real_time_s: f64, pulser_sent: u64) -> LiveFraction {
    let f = live_time_s / real_time_s;
    LiveFraction { value: f, err: binomial_err(f, pulser_sent) }
}

/// Standard deviation of the fraction kept when each of n offered events is kept with
/// probability f: sqrt(f (1 - f) / n) (binomial distribution; common practice).
fn binomial_err(f: f64, n: u64) -> f64 {
    (f * (1.0 - f) / n as f64).sqrt()
}

/// Live fraction from a ratio of counts where each of N offered events is kept with
/// probability f (pulser: recorded/sent; triggers: accepted/raw):
///     f = k / N,   u(f) = sqrt(f (1 - f) / N)
/// The binomial standard deviation of a proportion (common practice; e.g. Knoll ch. 3).
pub fn count_ratio(kept: u64, offered: u64) -> LiveFraction {
    let f = kept as f64 / offered as f64;
    LiveFraction { value: f, err: binomial_err(f, offered) }
}

/// Non-paralyzable model: each recorded event blocks the system for τ, and events arriving
/// meanwhile are lost without extending the blocked time (Knoll Eq. 4.23):
///     n = m / (1 - m τ),   f = m / n = 1 - m τ,   df/dτ = -m
/// m: recorded rate in 1/s, n: true rate in 1/s, τ: resolving time in s. Holds for m τ < 1.
///
/// Returns f and df/dτ (per second of τ).
///
/// # Errors
/// [`PhysicsError::NonParalyzableSaturated`] when m τ >= 1.
pub fn non_paralyzable(recorded_rate_per_s: f64, resolving_time_s: f64) -> Result<(f64, f64), PhysicsError> {
    let m_tau = recorded_rate_per_s * resolving_time_s;
    if m_tau >= 1.0 {
        return Err(PhysicsError::NonParalyzableSaturated {
            rate_per_s: recorded_rate_per_s,
            resolving_time_us: resolving_time_s * 1e6,
            m_tau,
        });
    }
    Ok((1.0 - m_tau, -recorded_rate_per_s))
}

/// Paralyzable model: every arriving event, recorded or not, extends the blocked time by τ
/// (Knoll Eq. 4.24):
///     m = n exp(-n τ)
/// Inverted on the low-rate branch (n τ <= 1) with the principal branch W_0 of the Lambert W
/// function (W e^W = x; R. M. Corless et al., Adv. Comput. Math. 5 (1996) 329):
///     n = -W_0(-m τ) / τ,   f = m / n = exp(W_0(-m τ)),
///     df/dτ = f W / (τ (1 + W))   with W = W_0(-m τ)
/// Holds for m τ <= 1/e; above that no true rate gives the recorded one.
///
/// Returns f and df/dτ (per second of τ).
///
/// # Errors
/// [`PhysicsError::ParalyzableAboveMaximum`] when m τ > 1/e.
pub fn paralyzable(recorded_rate_per_s: f64, resolving_time_s: f64) -> Result<(f64, f64), PhysicsError> {
    let x = -recorded_rate_per_s * resolving_time_s;
    let w = lambert_w0(x).ok_or(PhysicsError::ParalyzableAboveMaximum {
        rate_per_s: recorded_rate_per_s,
        max_rate_per_s: 1.0 / (std::f64::consts::E * resolving_time_s),
        resolving_time_us: resolving_time_s * 1e6,
    })?;
    let f = w.exp();
    let df_dtau = if x == 0.0 { -recorded_rate_per_s } else { f * w / (resolving_time_s * (1.0 + w)) };
    Ok((f, df_dtau))
}

/// Counting error of a model live fraction f(m) whose recorded rate m = M/T is counted
/// from the M accepted triggers of the run, as it acts on a cross section ∝ N/f:
///     u(f)/f = √(k² + 2k) / √M,   k = −(df/dm) m / f
/// The Poisson error of M alone gives k/√M (u(m) = √M/T; GUM Eq. (10)). But every counted
/// peak event is also an accepted trigger, so cov(N, M) = N (for net counts, the side-band
/// estimate of the background is part of M as well), and
///     var(ln(N/f)) = var(N)/N² + k²/M + 2k cov(N, M)/(N M) = var(N)/N² + (k² + 2k)/M,
/// the same (k² + 2k)/M for every peak of the run, and also their covariance: one error of
/// the run's live fraction, shared by its rows, as the other dead-time errors are (JCGM
/// 100:2008 (GUM), Eq. (13), the law of propagation with correlated inputs). Found by the
/// closure of simulated runs with 30 % paralyzable dead time, whose pull width was 1.11
/// with k/√M. f the live fraction, df/dm per (1/s), m in 1/s, M the trigger count.
pub fn counted_trigger_live_fraction_err(live_fraction: f64, df_drate: f64, rate_per_s: f64, triggers: u64) -> f64 {
    if triggers == 0 || live_fraction <= 0.0 {
        return 0.0;
    }
    let k = -df_drate * rate_per_s / live_fraction;
    live_fraction * (k * k + 2.0 * k).max(0.0).sqrt() / (triggers as f64).sqrt()
}

/// df/dm of a dead-time model whose live fraction depends on the recorded rate m and the
/// resolving time τ only through their product x = m τ (both models here):
///     df/dm = (df/dx) τ = (df/dτ) τ / m,
/// and at m = 0, df/dm = −τ (both models: f = 1 − m τ + O((m τ)²)). With u(m) it gives
/// the rate's share of u(f) by the law of propagation of uncertainty (JCGM 100:2008
/// (GUM), Eq. (10)). m in 1/s, τ in s, df/dτ per second of τ.
pub fn df_drate(recorded_rate_per_s: f64, resolving_time_s: f64, df_dtau: f64) -> f64 {
    if recorded_rate_per_s > 0.0 {
        df_dtau * resolving_time_s / recorded_rate_per_s
    } else {
        -resolving_time_s
    }
}

/// True rate n in 1/s of the paralyzable model for a recorded rate m and resolving time τ in s:
/// n = -W_0(-m τ)/τ (see [`paralyzable`]); `None` above the maximum observable rate.
pub fn paralyzable_true_rate(recorded_rate_per_s: f64, resolving_time_s: f64) -> Option<f64> {
    let x = -recorded_rate_per_s * resolving_time_s;
    if x == 0.0 {
        return Some(recorded_rate_per_s);
    }
    lambert_w0(x).map(|w| -w / resolving_time_s)
}

/// Principal branch W_0(x) of the Lambert W function for real x in [-1/e, 0], the solution
/// of w e^w = x with w >= -1.
///
/// Start: the branch-point series w ≈ -1 + p - p²/3 + 11p³/72 with p = sqrt(2(e x + 1)) near
/// x = -1/e, else w ≈ x; then Halley's iteration
///     w ← w - r / (e^w (w + 1) - (w + 2) r / (2w + 2)),   r = w e^w - x
/// (Corless et al., Adv. Comput. Math. 5 (1996) 329, Eqs. 4.22 and 5.9). Returns `None`
/// for x < -1/e (no real solution) or x not finite; x > 0 is outside the range this
/// module needs and also gives `None`.
pub fn lambert_w0(x: f64) -> Option<f64> {
    let branch_point = -1.0 / std::f64::consts::E;
    if !x.is_finite() || x > 0.0 || x < branch_point {
        return None;
    }
    if x == 0.0 {
        return Some(0.0);
    }
    let p = (2.0 * (std::f64::consts::E * x + 1.0)).max(0.0).sqrt();
    let mut w = if p < 0.5 { -1.0 + p - p * p / 3.0 + 11.0 / 72.0 * p * p * p } else { x * (1.0 - x) };
    for _ in 0..64 {
        let ew = w.exp();
        let r = w * ew - x;
        if w <= -1.0 + 1e-15 {
            break;
        }
        let step = r / (ew * (w + 1.0) - (w + 2.0) * r / (2.0 * w + 2.0));
        w -= step;
        if step.abs() <= 4.0 * f64::EPSILON * w.abs().max(f64::MIN_POSITIVE) {
            break;
        }
    }
    Some(w.max(-1.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn the_live_fraction_moves_with_the_recorded_rate_as_worked_by_hand() {
        // (model, true rate n in 1/s, τ in s, df/dm worked by hand)
        // Paralyzable: m = n e^(−nτ), f = m/n; dm/dn = e^(−nτ)(1 − nτ), so
        // df/dm = 1/n − (m/n²)(dn/dm) = −τ/(1 − nτ): n τ = 0.5 gives −2τ.
        // Non-paralyzable: f = 1 − m τ, df/dm = −τ at any rate.
        // (paralyzable?, n, τ, df/dm)
        let cases: [(bool, f64, f64, f64); 4] = [
            (true, 5e4, 1e-5, -2e-5),
            (true, 1e3, 1e-6, -1e-6 / (1.0 - 1e-3)),
            (false, 5e4, 1e-5, -1e-5),
            (true, 0.0, 1e-5, -1e-5),
        ];
        for (is_paralyzable, n, tau, want) in cases {
            let m = if is_paralyzable { n * (-n * tau).exp() } else { n / (1.0 + n * tau) };
            let (_, df_dtau) =
                if is_paralyzable { paralyzable(m, tau) } else { non_paralyzable(m, tau) }.expect("below the maximum");
            // 1e-9: the Lambert W iteration converges to about 1e-15, the rest is a few products.
            assert_relative_eq!(df_drate(m, tau, df_dtau), want, max_relative = 1e-9);
        }
        // The trigger count's share of u(f): non-paralyzable, m τ = 0.09 from M = 90000
        // triggers: f = 0.91, k = m τ/(1 − m τ) = 0.098901, u(f) = f √(k² + 2k)/√M =
        // 1.3820274961085252e-3 (worked in Python); 1e-12: a few products and a root.
        let (f, m, tau) = (0.91, 9000.0, 1e-5);
        let u = counted_trigger_live_fraction_err(f, df_drate(m, tau, -m), m, 90_000);
        assert_relative_eq!(u, 1.382_027_496_108_525_2e-3, max_relative = 1e-12);
    }

    #[test]
    fn lambert_w0_solves_its_defining_equation() {
        // w e^w = x is the definition (Corless et al. 1996, Eq. 1.1).
        for x in [-0.3678, -0.3, -0.1, -1e-3, -1e-9] {
            let w = lambert_w0(x).expect("in range");
            // 1e-13: Halley's iteration stops at a step of 4ε|w|, and w e^w rounds twice
            // more: a few ε in all (measured exact), with room for the cases near −1/e.
            assert_relative_eq!(w * w.exp(), x, max_relative = 1e-13);
        }
        // W_0(-1/e) = -1 at the branch point (Corless et al. 1996, section 4). 1e-7: −1/e is
        // rounded by ~1e-16, and W has a square-root branch point there, w + 1 ≈
        // √(2(e x + 1)) ≈ √(2 · 2e-16) ≈ 2e-8.
        assert_relative_eq!(lambert_w0(-1.0 / std::f64::consts::E).expect("branch point"), -1.0, epsilon = 1e-7);
        assert_eq!(lambert_w0(-0.4), None);
    }

    #[test]
    fn models_agree_at_low_rate_and_differ_at_high_rate() {
        // At m τ → 0 both models give f = 1 - m τ to first order (Knoll ch. 4).
        let (f_np, _) = non_paralyzable(100.0, 1e-6).expect("valid");
        let (f_p, _) = paralyzable(100.0, 1e-6).expect("valid");
        // 1e-15: one subtraction.
        assert_relative_eq!(f_np, 1.0 - 1e-4, max_relative = 1e-15);
        // 1e-8: the two models differ at second order, (m τ)²/2 = 5e-9 here.
        assert_relative_eq!(f_p, f_np, max_relative = 1e-8);
        // At m τ = 0.3 the paralyzable system has lost more (f = e^{-nτ} with nτ > mτ/(1-mτ)).
        let (f_np, _) = non_paralyzable(3e5, 1e-6).expect("valid");
        let (f_p, _) = paralyzable(3e5, 1e-6).expect("valid");
        assert!(f_p < f_np);
    }

    #[test]
    fn paralyzable_derivative_matches_finite_difference() {
        let (m, tau, h) = (2e5, 1.5e-6, 1e-12);
        let (_, d) = paralyzable(m, tau).expect("valid");
        let fd = (paralyzable(m, tau + h).expect("valid").0 - paralyzable(m, tau - h).expect("valid").0) / (2.0 * h);
        // 1e-9: round-off of the difference quotient, ε f/(h |f'|) ≈ 1.1e-16 · 0.6/(1e-12 ·
        // 4e5) ≈ 2e-10; its truncation, h² |f'''/f'|/6 ≈ h² n²/6, is ~2e-14 (measured 3e-11).
        assert_relative_eq!(d, fd, max_relative = 1e-9);
    }

    #[test]
    fn saturated_rates_are_errors_not_nan() {
        assert!(matches!(non_paralyzable(1e6, 1e-6), Err(PhysicsError::NonParalyzableSaturated { .. })));
        assert!(matches!(paralyzable(4e5, 1e-6), Err(PhysicsError::ParalyzableAboveMaximum { .. })));
    }

    #[test]
    fn clock_ratio_takes_the_binomial_error_of_its_pulser() {
        // (live s, real s, pulser signals sent N, f, u); u = √(f (1 − f) / N), the binomial
        // standard deviation of a proportion, worked by hand: √(0.9 · 0.1 / 10⁴) = 0.003,
        // √(0.5 · 0.5 / 100) = 0.05, and 0 when the acquisition was never dead.
        let cases = [(90.0, 100.0, 10_000, 0.9, 0.003), (50.0, 100.0, 100, 0.5, 0.05), (100.0, 100.0, 10, 1.0, 0.0)];
        for (live_s, real_s, sent, value, err) in cases {
            let f = clock_ratio_with_pulser(live_s, real_s, sent);
            // 1e-14: one division and one square root.
            assert_relative_eq!(f.value, value, max_relative = 1e-14);
            assert_relative_eq!(f.err, err, max_relative = 1e-14);
        }
    }

    #[test]
    fn count_ratio_is_binomial() {
        // 900 of 1000 kept: f = 0.9, u = sqrt(0.9 · 0.1 / 1000) (binomial, common practice).
        let f = count_ratio(900, 1000);
        // 1e-15: one division, and a square root of a product.
        assert_relative_eq!(f.value, 0.9, max_relative = 1e-15);
        assert_relative_eq!(f.err, (0.09f64 / 1000.0).sqrt(), max_relative = 1e-15);
    }
}
