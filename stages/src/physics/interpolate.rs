//! Interpolation in tables of measured values.

use super::PhysicsError;

/// Linear interpolation y(x) between tabulated points (x_i, y_i) with x_i strictly
/// increasing:
///     y = y_i + (y_{i+1} - y_i) (x - x_i) / (x_{i+1} - x_i),   x_i <= x <= x_{i+1}
/// (common practice). No extrapolation: a point outside [x_0, x_{n-1}] is an error.
/// The caller guarantees at least two points and equal lengths (checked when the table is
/// read).
///
/// # Errors
/// [`PhysicsError::OutsideTable`] when `x` is outside the table or not finite.
pub fn linear(xs: &[f64], ys: &[f64], x: f64, quantity: &str) -> Result<f64, PhysicsError> {
    let outside = || PhysicsError::OutsideTable {
        quantity: quantity.to_string(),
        value: x,
        min: xs.first().copied().unwrap_or(f64::NAN),
        max: xs.last().copied().unwrap_or(f64::NAN),
    };
    let (first, last) = match (xs.first(), xs.last()) {
        (Some(f), Some(l)) if xs.len() >= 2 && ys.len() == xs.len() => (*f, *l),
        _ => return Err(outside()),
    };
    if !(first..=last).contains(&x) {
        return Err(outside());
    }
    // partition_point: the first index with xs[i] > x; clamp so that [i-1, i] is a segment.
    let i = xs.partition_point(|&xi| xi <= x).clamp(1, xs.len() - 1);
    let (x0, x1, y0, y1) = (xs[i - 1], xs[i], ys[i - 1], ys[i]);
    Ok(y0 + (y1 - y0) * (x - x0) / (x1 - x0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn linear_hits_nodes_midpoints_and_refuses_outside() {
        let xs = [1.0, 2.0, 4.0];
        let ys = [10.0, 20.0, 0.0];
        for (x, y) in [(1.0, 10.0), (1.5, 15.0), (2.0, 20.0), (3.0, 10.0), (4.0, 0.0)] {
            // 1e-15: one weight and one product-sum, exact or rounded once.
            assert_relative_eq!(linear(&xs, &ys, x, "e").expect("inside"), y, max_relative = 1e-15);
        }
        for x in [0.999, 4.001, f64::NAN] {
            assert!(matches!(linear(&xs, &ys, x, "e"), Err(PhysicsError::OutsideTable { .. })));
        }
    }
}
