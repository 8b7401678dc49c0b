//! Combination of independent uncertainties.

/// Root sum of squares of independent contributions:
///     u = sqrt(sum_i u_i^2)
/// The combined standard uncertainty of a sum (absolute u_i) or a product of powers
/// (relative u_i) of uncorrelated inputs, to first order.
/// Source: JCGM 100:2008 (GUM), section 5.1.2, Eq. (10), and 5.1.6 for products.
pub fn quadrature(parts: &[f64]) -> f64 {
    parts.iter().map(|u| u * u).sum::<f64>().sqrt()
}

/// Standard uncertainty of a measured value from the partial derivatives of the formula and
/// the standard uncertainties of the uncorrelated inputs:
///     u_c(y) = sqrt(sum_i (df/dx_i)^2 u(x_i)^2)
/// Source: JCGM 100:2008 (GUM), section 5.1.2, Eq. (10).
///
/// # Panics
/// Never; `zip` stops at the shorter slice.
pub fn propagate(gradient: &[f64], input_err: &[f64]) -> f64 {
    gradient.iter().zip(input_err).map(|(g, u)| (g * u).powi(2)).sum::<f64>().sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn quadrature_of_three_four_is_five() {
        // 3-4-5 triangle, common practice. 1e-15: exact in binary (√25), one rounding at most;
        // the empty sum is 0 exactly (approx's default tolerance, f64::EPSILON).
        assert_relative_eq!(quadrature(&[3.0, 4.0]), 5.0, max_relative = 1e-15);
        assert_relative_eq!(quadrature(&[]), 0.0);
    }

    #[test]
    fn propagate_weights_each_input_by_its_derivative() {
        // y = 2a + 3b with u(a) = 1, u(b) = 2: u(y) = sqrt(4 + 36), GUM Eq. (10). 1e-15:
        // exact products and sum, one rounded square root on each side.
        assert_relative_eq!(propagate(&[2.0, 3.0], &[1.0, 2.0]), 40f64.sqrt(), max_relative = 1e-15);
    }
}
