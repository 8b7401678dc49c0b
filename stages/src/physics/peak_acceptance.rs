//! The acceptance of a peak window with side-band background: the fraction of a peak's
//! counts that survive counting in a window [a, b) and subtracting a linear background
//! estimated from side bands.
//!
//! A peak of N counts with shape f (normalised to 1) and a background linear in energy give
//!     G = N F_w + B_w,   S = N (F_L + F_R) + B_L + B_R,
//! with F_I = ∫_I f dE the peak's fraction in interval I. The side-band estimate of the
//! background under the window is S · W_w/(W_L + W_R) (W: widths), which is B_w exactly for
//! a linear background when the side bands sit symmetrically about the window, so
//!     G − S W_w/(W_L + W_R) = N A,   A = F_w − (F_L + F_R) W_w/(W_L + W_R).
//! A is the window acceptance: the net counts divided by A estimate N. For a Gaussian of
//! centroid μ and standard deviation σ, F_[a,b) = Φ((b − μ)/σ) − Φ((a − μ)/σ) with Φ the
//! standard normal distribution function, Φ(z) = ½ erfc(−z/√2) (M. Abramowitz,
//! I. A. Stegun, Handbook of Mathematical Functions (1964), Eq. 26.2.2 and 7.1.2); a
//! window of ±k σ about μ holds erf(k/√2) (Eq. 7.1.1 with 26.2.2). The linear side-band
//! background and the peak shape are common practice; the tails of other states' peaks are
//! not included.
//!
//! A peak with a low-energy tail (incomplete charge collection, slit scattering, energy
//! loss straggling) is modelled as a fraction η of its counts in a Gaussian convolved with
//! a one-sided exponential of mean length τ towards low energy (an exponentially modified
//! Gaussian, E. Grushka, Anal. Chem. 44 (1972) 1733, mirrored), the rest in the Gaussian:
//!     F_tail(E) = Φ(u) + exp(σu/τ + σ²/(2τ²)) Φ(−u − σ/τ),   u = (E − μ)/σ,
//! its distribution function (the mirror image of Grushka's, derived by E → 2μ − E), and
//! F = (1 − η) F_Gauss + η F_tail over each interval.
//!
//! The uncertainty of A comes from the uncertainty u(σ) of the resolution:
//!     u(A) = |∂A/∂σ| u(σ),   ∂F_[a,b)/∂σ = (z_a φ(z_a) − z_b φ(z_b))/σ,   z = (x − μ)/σ,
//! φ the standard normal density (first-order propagation, JCGM 100:2008 Eq. 10).

use statrs::function::erf::erfc;

/// An energy interval [low, high) in MeV.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct EnergyInterval {
    /// Low edge, MeV.
    pub low_mev: f64,
    /// High edge, MeV.
    pub high_mev: f64,
}

impl EnergyInterval {
    /// Its width in MeV.
    pub fn width_mev(&self) -> f64 {
        self.high_mev - self.low_mev
    }
}

/// A peak's shape: a Gaussian of centroid μ and standard deviation σ (with its standard
/// uncertainty), all in MeV, with an optional low-energy tail.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakShape {
    /// Centroid μ, MeV.
    pub centroid_mev: f64,
    /// Standard deviation σ, MeV; > 0.
    pub sigma_mev: f64,
    /// Standard uncertainty of σ, MeV.
    pub sigma_err_mev: f64,
    /// The low-energy tail, if any.
    pub tail: Option<LowEnergyTail>,
}

/// A low-energy tail: the fraction η of a peak's counts in a Gaussian convolved with an
/// exponential of mean length τ towards low energy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LowEnergyTail {
    /// η, in [0, 1].
    pub fraction: f64,
    /// τ in MeV; > 0.
    pub length_mev: f64,
}

/// The window and side bands of one peak.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowLayout {
    /// Peak window.
    pub window: EnergyInterval,
    /// Left side band.
    pub left: EnergyInterval,
    /// Right side band.
    pub right: EnergyInterval,
}

/// A window acceptance A and its standard uncertainty u(A).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Acceptance {
    /// A, dimensionless.
    pub value: f64,
    /// u(A) from the resolution's uncertainty.
    pub err: f64,
}

/// Standard normal distribution function Φ(z) = ½ erfc(−z/√2) (Abramowitz & Stegun
/// 26.2.2, 7.1.2); erfc keeps full relative precision in the far tails.
pub fn normal_cdf(z: f64) -> f64 {
    0.5 * erfc(-z / std::f64::consts::SQRT_2)
}

/// Standard normal density φ(z) = exp(−z²/2)/√(2π) (Abramowitz & Stegun 26.2.1).
fn normal_density(z: f64) -> f64 {
    (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// The distribution function of the tail component at E: Φ(u) + exp(σu/τ + σ²/2τ²)
/// Φ(−u − σ/τ) (module documentation); the product is taken as 0 where Φ underflows.
fn tail_cdf(e_mev: f64, mu: f64, sigma: f64, tau: f64) -> f64 {
    if e_mev == f64::INFINITY {
        return 1.0;
    }
    if e_mev == f64::NEG_INFINITY {
        return 0.0;
    }
    let (u, r) = ((e_mev - mu) / sigma, sigma / tau);
    let phi = normal_cdf(-u - r);
    let product = if phi > 0.0 { (r * u + 0.5 * r * r + phi.ln()).exp() } else { 0.0 };
    normal_cdf(u) + product
}

/// The fraction of the tail component inside `iv`.
fn tail_fraction(iv: &EnergyInterval, mu: f64, sigma: f64, tau: f64) -> f64 {
    tail_cdf(iv.high_mev, mu, sigma, tau) - tail_cdf(iv.low_mev, mu, sigma, tau)
}

/// The fraction F of a peak inside `iv` and its derivative ∂F/∂σ (1/MeV): analytic for the
/// Gaussian, a central difference (step 10⁻⁴ σ) for the tail component.
fn fraction_and_slope(iv: &EnergyInterval, peak: &PeakShape) -> (f64, f64) {
    let (f_gauss, d_gauss) = gaussian_fraction_and_slope(iv, peak);
    let Some(tail) = peak.tail else {
        return (f_gauss, d_gauss);
    };
    let (mu, s, tau, eta) = (peak.centroid_mev, peak.sigma_mev, tail.length_mev, tail.fraction);
    let h = 1e-4 * s;
    let d_tail = (tail_fraction(iv, mu, s + h, tau) - tail_fraction(iv, mu, s - h, tau)) / (2.0 * h);
    ((1.0 - eta) * f_gauss + eta * tail_fraction(iv, mu, s, tau), (1.0 - eta) * d_gauss + eta * d_tail)
}

/// The fraction F of the Gaussian inside `iv` and its derivative ∂F/∂σ (1/MeV).
fn gaussian_fraction_and_slope(iv: &EnergyInterval, peak: &PeakShape) -> (f64, f64) {
    let (mu, s) = (peak.centroid_mev, peak.sigma_mev);
    let (za, zb) = ((iv.low_mev - mu) / s, (iv.high_mev - mu) / s);
    // Φ(z_b) − Φ(z_a) written with the tail on the side where both edges lie, so that a
    // far-tail interval keeps its relative precision.
    let fraction = if za >= 0.0 { normal_cdf(-za) - normal_cdf(-zb) } else { normal_cdf(zb) - normal_cdf(za) };
    let edge = |z: f64| if z.is_finite() { z * normal_density(z) } else { 0.0 };
    (fraction, (edge(za) - edge(zb)) / s)
}

/// The fraction of a peak inside an interval (for a Gaussian, Φ(z_b) − Φ(z_a)).
pub fn peak_fraction(iv: &EnergyInterval, peak: &PeakShape) -> f64 {
    fraction_and_slope(iv, peak).0
}

/// The window acceptance A = F_w − (F_L + F_R) W_w/(W_L + W_R) of a peak and its
/// uncertainty |∂A/∂σ| u(σ) (see the module documentation). Side bands of zero total width
/// mean no background subtraction: A = F_w.
pub fn window_acceptance(layout: &WindowLayout, peak: &PeakShape) -> Acceptance {
    let (fw, dw) = fraction_and_slope(&layout.window, peak);
    let (fl, dl) = fraction_and_slope(&layout.left, peak);
    let (fr, dr) = fraction_and_slope(&layout.right, peak);
    let side_width = layout.left.width_mev() + layout.right.width_mev();
    let scale = if side_width > 0.0 { layout.window.width_mev() / side_width } else { 0.0 };
    Acceptance { value: fw - (fl + fr) * scale, err: (dw - (dl + dr) * scale).abs() * peak.sigma_err_mev }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn iv(low_mev: f64, high_mev: f64) -> EnergyInterval {
        EnergyInterval { low_mev, high_mev }
    }

    /// The automatic layout in units of σ about μ = 0: window ±k, gap g, side bands of b.
    fn layout(k: f64, g: f64, b: f64) -> WindowLayout {
        WindowLayout { window: iv(-k, k), left: iv(-k - g - b, -k - g), right: iv(k + g, k + g + b) }
    }

    const UNIT: PeakShape = PeakShape { centroid_mev: 0.0, sigma_mev: 1.0, sigma_err_mev: 0.0, tail: None };

    #[test]
    fn window_fraction_is_erf_of_k_over_root_two() {
        // (k, erf(k/√2)): values from memory of the standard normal table (Abramowitz &
        // Stegun Table 26.1), to the digits given; checked against scipy in
        // tests/reference.rs. statrs's erfc is good to ~5e-11 relative.
        let cases = [(1.0, 0.682_689_492), (2.0, 0.954_499_736), (3.0, 0.997_300_204), (5.0, 0.999_999_427)];
        for (k, expected) in cases {
            // 1e-9: the table's nine digits.
            assert_relative_eq!(peak_fraction(&iv(-k, k), &UNIT), expected, max_relative = 1e-9);
        }
    }

    #[test]
    fn acceptance_of_layouts_worked_by_hand() {
        // (layout, peak, expected A). Hand rules: a window far wider than the peak accepts
        // all of it; side bands far out subtract nothing; a shifted peak loses what leaves
        // the window on one side.
        let far = WindowLayout { window: iv(-40.0, 40.0), left: iv(-60.0, -50.0), right: iv(50.0, 60.0) };
        let none = WindowLayout { window: iv(-3.0, 3.0), left: iv(-3.0, -3.0), right: iv(3.0, 3.0) };
        let shifted = PeakShape { centroid_mev: 3.0, ..UNIT };
        let half = WindowLayout { window: iv(-30.0, 3.0), left: iv(-80.0, -70.0), right: iv(70.0, 80.0) };
        let cases = [
            (far, UNIT, 1.0),
            (none, UNIT, peak_fraction(&iv(-3.0, 3.0), &UNIT)),
            // The peak centred on the window's upper edge: half of it inside.
            (half, shifted, 0.5),
        ];
        for (layout, peak, expected) in cases {
            // 1e-12: the cases are exact limits (half a peak at an edge, all of it far out,
            // the same call twice), which statrs's erfc gives to round-off.
            assert_relative_eq!(window_acceptance(&layout, &peak).value, expected, max_relative = 1e-12);
        }
    }

    #[test]
    fn default_layout_loses_the_tails_and_the_side_band_share() {
        // ±3σ window, 1σ gap, 3σ bands (the defaults): 1 − erf(3/√2) = 2.700e-3 outside
        // the window, and 2 (Φ(−4) − Φ(−7)) = 6.334e-5 in the side bands subtracted with
        // weight W_w/(W_L + W_R) = 1; in all 0.2763 % (the figure of issue 17).
        let a = window_acceptance(&layout(3.0, 1.0, 3.0), &UNIT).value;
        // 1e-6 absolute: the figure is quoted to four digits.
        assert!((1.0 - a - 2.7633e-3).abs() < 1e-6, "{}", 1.0 - a);
    }

    #[test]
    fn tail_component_is_a_distribution_with_the_right_mean() {
        // The tail component Gaussian − exponential has mean μ − τ and variance σ² + τ²
        // (sum of independent variables); its distribution function rises from 0 to 1.
        // Moments by the midpoint rule on [−60, 20] σ in 0.001 σ steps (1e-6: the rule's
        // error for this smooth density, measured).
        let (mu, sigma, tau) = (0.0, 1.0, 2.5);
        let (lo, hi, n) = (-60.0, 20.0, 80_000);
        let step = (hi - lo) / f64::from(n);
        let (mut mean, mut second) = (0.0, 0.0);
        for i in 0..n {
            let a = lo + f64::from(i) * step;
            let p = tail_cdf(a + step, mu, sigma, tau) - tail_cdf(a, mu, sigma, tau);
            assert!(p >= -1e-15, "density below 0 at {a}");
            let x = a + 0.5 * step;
            mean += p * x;
            second += p * x * x;
        }
        assert!((tail_cdf(hi, mu, sigma, tau) - 1.0).abs() < 1e-12 && tail_cdf(lo, mu, sigma, tau) < 1e-9);
        assert!((mean + tau).abs() < 1e-6, "mean {mean}");
        assert!((second - mean * mean - (sigma * sigma + tau * tau)).abs() < 1e-5, "variance");
    }

    #[test]
    fn acceptance_with_a_tail_matches_scipy_exponnorm() {
        // (η, τ/σ, expected A for the default layout): scipy.stats.exponnorm (K = τ/σ) of
        // the mirrored variable, A = F_w − (F_L + F_R) over [−3, 3), [−7, −4), [4, 7) σ.
        let gauss = window_acceptance(&layout(3.0, 1.0, 3.0), &UNIT).value;
        let tail =
            |fraction: f64, length_mev: f64| PeakShape { tail: Some(LowEnergyTail { fraction, length_mev }), ..UNIT };
        let cases =
            [(0.0, 2.0, gauss), (0.01, 2.0, 0.993_545_252_6), (0.1, 0.5, 0.995_541_885_9), (0.3, 4.0, 0.791_781_246_7)];
        for (eta, tau, expected) in cases {
            let a = window_acceptance(&layout(3.0, 1.0, 3.0), &tail(eta, tau)).value;
            // 1e-9: statrs's erfc (~5e-11) and the ten digits quoted.
            assert!((a - expected).abs() < 1e-9, "η {eta}, τ {tau}: {a}");
        }
    }

    #[test]
    fn acceptance_error_matches_a_numerical_derivative() {
        // u(A) = |∂A/∂σ| u(σ) against a central difference of A in σ (step 1e-5 σ).
        for (k, g, b) in [(1.0, 0.5, 2.0), (2.0, 1.0, 3.0), (3.0, 1.0, 3.0)] {
            let l = layout(k, g, b);
            let peak = PeakShape { sigma_err_mev: 0.1, ..UNIT };
            let h = 1e-5;
            let at = |s: f64| window_acceptance(&l, &PeakShape { sigma_mev: s, ..UNIT }).value;
            let numeric = (at(1.0 + h) - at(1.0 - h)) / (2.0 * h) * 0.1;
            // 1e-6 relative: the central difference's truncation error, O(h²), and
            // round-off, O(1e-16/h).
            assert_relative_eq!(window_acceptance(&l, &peak).err, numeric.abs(), max_relative = 1e-6);
        }
    }
}
