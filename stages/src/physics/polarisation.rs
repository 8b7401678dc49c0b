//! The analyzing power of a polarised spin-½ beam from counts, by the cross ratio of a
//! left–right detector pair with the beam spin up and down (issue 16, item 3: the physics;
//! the run records that feed it come later).
//!
//! With N_L↑ the counts of the left detector (Madison convention: +x = ŷ × ẑ, ŷ the spin
//! axis "up") while the beam is polarised up, and so on, the cross ratio and the asymmetry
//!     r = √(N_L↑ N_R↓ / (N_L↓ N_R↑)),   ε = (r − 1)/(r + 1) = P A_y
//! cancel the detectors' efficiencies and solid angles and the integrated charge of each
//! spin state (to first order also the misalignment of the pair), provided the beam
//! polarisation has the same magnitude P in both states (G. G. Ohlsen, P. W. Keaton Jr.,
//! Nucl. Instrum. Methods 109 (1973) 41, section 2 — from memory). Each count is
//! N = n_spin ε_det ΔΩ_det σ (1 ± P A_y), + when the spin points along n̂ = k_in × k_out
//! of that detector, which gives r = (1 + P A_y)/(1 − P A_y) and so ε = P A_y.
//!
//! Uncertainties for Poisson counts (linear propagation, JCGM 100:2008 Eq. (10)):
//!     u(ln r)² = (1/N_L↑ + 1/N_R↓ + 1/N_L↓ + 1/N_R↑)/4,   dε/d ln r = 2r/(r + 1)²,
//! so u(ε) = r/(r + 1)² · √(Σ 1/N); A_y = ε/P, its statistical error u(ε)/P, and the relative
//! error of P is a common normalisation of every A_y measured with that beam, kept apart.

/// Counts of a left–right pair in both spin states of the beam.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpinCounts {
    /// Left detector, spin up.
    pub left_up: f64,
    /// Right detector, spin up.
    pub right_up: f64,
    /// Left detector, spin down.
    pub left_down: f64,
    /// Right detector, spin down.
    pub right_down: f64,
}

/// A_y from the cross ratio, with its statistical error and the relative error of the beam
/// polarisation (a common normalisation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MeasuredAnalyzingPower {
    /// A_y = ε/P.
    pub analyzing_power: f64,
    /// u(ε)/P from the counts.
    pub analyzing_power_stat_err: f64,
    /// u(P)/P.
    pub analyzing_power_norm_rel_err: f64,
}

/// Why an analyzing power cannot be formed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PolarisationError {
    /// A count that is not finite and > 0 (the cross ratio takes logarithms of all four).
    #[error("{which} = {value}: the cross ratio needs counts > 0 in all four spin-detector combinations")]
    Counts {
        /// Which count.
        which: &'static str,
        /// Its value.
        value: f64,
    },
    /// A polarisation outside (0, 1] or a negative error.
    #[error("beam polarisation {polarisation} ± {polarisation_err}: expected 0 < P ≤ 1 and an error ≥ 0")]
    Polarisation {
        /// P.
        polarisation: f64,
        /// u(P).
        polarisation_err: f64,
    },
}

/// The analyzing power of one left–right pair by the cross-ratio method (module docs).
///
/// # Errors
/// A count that is not > 0; a polarisation outside (0, 1] or a negative or non-finite error.
pub fn cross_ratio(
    counts: &SpinCounts,
    polarisation: f64,
    polarisation_err: f64,
) -> Result<MeasuredAnalyzingPower, PolarisationError> {
    let c = counts;
    for (which, value) in
        [("left_up", c.left_up), ("right_up", c.right_up), ("left_down", c.left_down), ("right_down", c.right_down)]
    {
        if !(value.is_finite() && value > 0.0) {
            return Err(PolarisationError::Counts { which, value });
        }
    }
    let p_ok = polarisation > 0.0 && polarisation <= 1.0;
    if !(p_ok && polarisation_err.is_finite() && polarisation_err >= 0.0) {
        return Err(PolarisationError::Polarisation { polarisation, polarisation_err });
    }
    let r = (c.left_up * c.right_down / (c.left_down * c.right_up)).sqrt();
    let asymmetry = (r - 1.0) / (r + 1.0);
    let inverse_sum = 1.0 / c.left_up + 1.0 / c.right_down + 1.0 / c.left_down + 1.0 / c.right_up;
    let asymmetry_err = r / (r + 1.0).powi(2) * inverse_sum.sqrt();
    Ok(MeasuredAnalyzingPower {
        analyzing_power: asymmetry / polarisation,
        analyzing_power_stat_err: asymmetry_err / polarisation,
        analyzing_power_norm_rel_err: polarisation_err / polarisation,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn cross_ratio_of_hand_worked_invented_counts() {
        // Invented counts, worked by hand from the module's formulas:
        // (L↑, R↑, L↓, R↓, P, u(P), A_y, u_stat, u(P)/P)
        let cases = [
            // r² = 800·500/(400·250) = 4, r = 2, ε = 1/3, A_y = (1/3)/0.8 = 0.416 666…;
            // u(ε) = (2/9)√(1/800 + 1/500 + 1/400 + 1/250) = (2/9)√0.00975 = 0.021 942 7…
            (800.0, 250.0, 400.0, 500.0, 0.8, 0.02, 5.0 / 12.0, 0.027_428_36, 0.025),
            // No asymmetry: r = 1, ε = 0; u(ε) = (1/4)√(4/1000) = 0.015 811 4, / 0.5.
            (1000.0, 1000.0, 1000.0, 1000.0, 0.5, 0.0, 0.0, 0.031_622_78, 0.0),
            // Swapping the spin states flips the sign: r = 1/2, ε = −1/3.
            (400.0, 500.0, 800.0, 250.0, 0.8, 0.02, -5.0 / 12.0, 0.027_428_36, 0.025),
        ];
        for (lu, ru, ld, rd, p, p_err, ay, stat, norm) in cases {
            let counts = SpinCounts { left_up: lu, right_up: ru, left_down: ld, right_down: rd };
            let m = cross_ratio(&counts, p, p_err).expect("valid");
            // 1e-12 absolute: a few roundings of numbers of order 1.
            assert!((m.analyzing_power - ay).abs() < 1e-12, "{m:?}");
            // 1e-6: the hand values have six significant digits.
            assert_relative_eq!(m.analyzing_power_stat_err, stat, max_relative = 1e-6);
            assert!((m.analyzing_power_norm_rel_err - norm).abs() < 1e-15, "{m:?}");
        }
    }

    #[test]
    fn efficiencies_and_charges_cancel() {
        // N = n_spin ε_det σ(1 ± P A_y) (module docs) with invented unequal efficiencies and
        // charges returns A_y itself, exactly up to rounding (1e-12).
        let (p, a_y, sigma) = (0.7, 0.35, 1000.0);
        let (up, down, eff_l, eff_r) = (1.3, 0.8, 0.9, 0.55);
        let counts = SpinCounts {
            left_up: up * eff_l * sigma * (1.0 + p * a_y),
            right_up: up * eff_r * sigma * (1.0 - p * a_y),
            left_down: down * eff_l * sigma * (1.0 - p * a_y),
            right_down: down * eff_r * sigma * (1.0 + p * a_y),
        };
        let m = cross_ratio(&counts, p, 0.01).expect("valid");
        assert!((m.analyzing_power - a_y).abs() < 1e-12, "{m:?}");
    }

    #[test]
    fn bad_counts_and_polarisations_are_refused() {
        // (counts, P, u(P), what the message says)
        let good = SpinCounts { left_up: 10.0, right_up: 10.0, left_down: 10.0, right_down: 10.0 };
        let cases = [
            (SpinCounts { right_down: 0.0, ..good }, 0.8, 0.01, "right_down = 0"),
            (SpinCounts { left_up: f64::NAN, ..good }, 0.8, 0.01, "left_up = NaN"),
            (good, 0.0, 0.01, "beam polarisation 0 ± 0.01"),
            (good, 1.2, 0.01, "beam polarisation 1.2"),
            (good, 0.8, -0.01, "expected 0 < P ≤ 1 and an error ≥ 0"),
        ];
        for (counts, p, p_err, message) in cases {
            let err = cross_ratio(&counts, p, p_err).expect_err("refused").to_string();
            assert!(err.contains(message), "{err}");
        }
    }
}
