//! Pure physics on numbers: no tables, no files. Each function states its formula, its
//! symbols with units, where it holds, and its published source.

pub mod constants;
pub mod coulomb;
pub mod cross_section;
pub mod dead_time;
pub mod dual;
pub mod interpolate;
pub mod kinematics;
pub mod least_squares;
pub mod luminosity;
pub mod model_fit;
pub mod normalisation;
pub mod nuclide;
pub mod optical;
pub mod partial_waves;
pub mod peak_acceptance;
pub mod peak_fit;
pub mod polarisation;
pub mod polygon;
pub mod rutherford;
pub mod small_signal;
pub mod solid_angle;
pub mod stopping;
pub mod synthetic;
pub mod uncertainty;

/// A formula asked for a value outside the range where it holds.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PhysicsError {
    /// The non-paralyzable model needs m·τ < 1.
    #[error("recorded rate {rate_per_s} /s with resolving time {resolving_time_us} µs gives m·τ = {m_tau} >= 1, which the non-paralyzable model cannot produce; check the rate and the resolving time")]
    NonParalyzableSaturated {
        /// Recorded rate in 1/s.
        rate_per_s: f64,
        /// Resolving time in µs.
        resolving_time_us: f64,
        /// Their product.
        m_tau: f64,
    },
    /// The paralyzable model cannot record more than 1/(e·τ).
    #[error("recorded rate {rate_per_s} /s exceeds the paralyzable model's maximum observable rate 1/(e·τ) = {max_rate_per_s} /s for resolving time {resolving_time_us} µs")]
    ParalyzableAboveMaximum {
        /// Recorded rate in 1/s.
        rate_per_s: f64,
        /// Maximum observable rate 1/(e·τ) in 1/s.
        max_rate_per_s: f64,
        /// Resolving time in µs.
        resolving_time_us: f64,
    },
    /// An argument lies outside the range a formula accepts.
    #[error("{quantity} = {value} is outside the accepted range: {accepted}")]
    OutsideDomain {
        /// Name of the quantity with its unit.
        quantity: String,
        /// The value given.
        value: f64,
        /// What would be accepted.
        accepted: String,
    },
    /// An interpolation table does not cover the point asked for.
    #[error(
        "{quantity} = {value} lies outside the table range [{min}, {max}]; extend the table (no extrapolation is done)"
    )]
    OutsideTable {
        /// Name of the abscissa with its unit.
        quantity: String,
        /// The value asked for.
        value: f64,
        /// First tabulated point.
        min: f64,
        /// Last tabulated point.
        max: f64,
    },
}
