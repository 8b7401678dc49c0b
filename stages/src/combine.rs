//! Combining runs into one angular distribution per state: rows of the same state at the
//! same lab angle (within a tolerance) are averaged; rows at other angles (other arm
//! settings) become other points. The covariance matrix of the result keeps the
//! normalisation correlations.
//!
//! For the rows i of one point k, with weights w_i = 1/(σ_stat,i² + σ_p2p,i²) and W_k = Σ w_i
//! (common practice):
//!     y_k = Σ w_i y_i / W_k,   σ_stat,k² = Σ w_i² σ_stat,i² / W_k²,
//!     σ_p2p,k = Σ w_i σ_p2p,i / W_k   (the point-to-point errors of one detector — solid
//!                                      angle, efficiency — are common to its runs),
//! Each run's normalisation error splits into a part shared by every run (the target:
//! `target_atoms_rel_err`, when the table has it) and an independent part
//! ν_r² = norm_rel_err² − shared², per run (beam charge, dead time). With
//! a_rk = Σ_{i∈k, run r} w_i y_i / W_k and b_k = Σ_{i∈k} w_i y_i s_i / W_k (s_i the shared
//! relative error):
//!     C_kl = δ_kl (σ_stat,k² + σ_p2p,k²) + Σ_r a_rk a_rl ν_r² + b_k b_l.
//! The combined table's `sys_err_mb_sr` holds σ_p2p,k ⊕ √(Σ_r a_rk² ν_r²) (what a fit with
//! diagonal errors should use) and `norm_rel_err` the shared part b_k/y_k, which a fit
//! takes as its normalisation prior.

/// The `combine:` section of a config.
#[derive(Debug, Clone, serde::Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CombineConfig {
    /// Rows of one state whose lab angles differ by at most this are one point (default
    /// 0.05°).
    #[serde(default = "default_tolerance")]
    pub angle_tolerance_deg: f64,
}

fn default_tolerance() -> f64 {
    0.05
}

impl Default for CombineConfig {
    fn default() -> Self {
        CombineConfig { angle_tolerance_deg: default_tolerance() }
    }
}

/// One reduced row.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Run id.
    pub run: String,
    /// Detector id.
    pub detector: String,
    /// State.
    pub state: String,
    /// Lab angle, degrees.
    pub theta_lab_deg: f64,
    /// CM angle, degrees.
    pub theta_cm_deg: f64,
    /// dσ/dΩ_cm, mb/sr.
    pub y: f64,
    /// Statistical error.
    pub stat: f64,
    /// Point-to-point error.
    pub sys: f64,
    /// Total relative normalisation error of the run.
    pub norm_rel_err: f64,
    /// Its part shared by every run.
    pub shared_rel_err: f64,
}

/// One point of the combined distribution.
#[derive(Debug, Clone, PartialEq)]
pub struct Point {
    /// State.
    pub state: String,
    /// Weighted mean lab angle.
    pub theta_lab_deg: f64,
    /// Weighted mean CM angle.
    pub theta_cm_deg: f64,
    /// Weighted mean dσ/dΩ_cm.
    pub y: f64,
    /// Statistical error.
    pub stat: f64,
    /// Point-to-point error, independent normalisations included.
    pub sys: f64,
    /// Shared relative normalisation error.
    pub norm_rel_err: f64,
    /// The rows combined (`run/detector`, joined by `+`).
    pub members: String,
    /// How many rows.
    pub rows: usize,
}

/// Combine rows; points sorted by state, then angle. Returns the points and their
/// covariance matrix (row-major).
///
/// # Errors
/// A row with a non-finite value or error.
pub fn combine(rows: &[Row], tolerance_deg: f64) -> Result<(Vec<Point>, Vec<f64>), String> {
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by(|&a, &b| {
        rows[a].state.cmp(&rows[b].state).then(rows[a].theta_lab_deg.total_cmp(&rows[b].theta_lab_deg))
    });
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for i in order {
        let r = &rows[i];
        if !(r.stat.is_finite() && r.sys.is_finite() && r.y.is_finite()) {
            return Err(format!("{}/{} ({}): a non-finite value or error", r.run, r.detector, r.state));
        }
        match groups.last_mut() {
            Some(g)
                if rows[g[0]].state == r.state
                    && (r.theta_lab_deg - rows[g[0]].theta_lab_deg).abs() <= tolerance_deg =>
            {
                g.push(i);
            }
            _ => groups.push(vec![i]),
        }
    }
    let runs: Vec<&str> = {
        let mut r: Vec<&str> = rows.iter().map(|r| r.run.as_str()).collect();
        r.sort_unstable();
        r.dedup();
        r
    };
    let n = groups.len();
    // a[k][r] and b[k] of the module docs; ν_r per run.
    let mut a = vec![vec![0.0; runs.len()]; n];
    let mut nu = vec![0.0; runs.len()];
    let mut b = vec![0.0; n];
    // σ_p2p,k, kept for the covariance (the point's `sys` also holds the independent part).
    let mut p2p = vec![0.0; n];
    let mut points = Vec::with_capacity(n);
    for (k, g) in groups.iter().enumerate() {
        // A row with no counts has no error; it takes the smallest error of the point's other
        // rows (or, when all are zero, equal weights), so that it still pulls the mean down.
        let var = |i: usize| rows[i].stat.powi(2) + rows[i].sys.powi(2);
        let floor = g.iter().map(|&i| var(i)).filter(|v| *v > 0.0).fold(f64::INFINITY, f64::min);
        let w: Vec<f64> = g
            .iter()
            .map(|&i| match (var(i), floor.is_finite()) {
                (v, _) if v > 0.0 => 1.0 / v,
                (_, true) => 1.0 / floor,
                _ => 1.0,
            })
            .collect();
        let wsum: f64 = w.iter().sum();
        // Written as the first row's value plus the weighted mean offset, so that rows with
        // one value (the same angle) give exactly that value.
        let mean = |f: &dyn Fn(&Row) -> f64| {
            let first = f(&rows[g[0]]);
            first + g.iter().zip(&w).map(|(&i, wi)| wi * (f(&rows[i]) - first)).sum::<f64>() / wsum
        };
        let y = mean(&|r| r.y);
        let stat = g.iter().zip(&w).map(|(&i, wi)| (wi * rows[i].stat).powi(2)).sum::<f64>().sqrt() / wsum;
        for (&i, wi) in g.iter().zip(&w) {
            let r = &rows[i];
            let ri = runs.binary_search(&r.run.as_str()).unwrap_or(0);
            a[k][ri] += wi * r.y / wsum;
            nu[ri] = (r.norm_rel_err.powi(2) - r.shared_rel_err.powi(2)).max(0.0).sqrt();
            b[k] += wi * r.y * r.shared_rel_err / wsum;
        }
        let independent: f64 = a[k].iter().zip(&nu).map(|(a, nu)| (a * nu).powi(2)).sum();
        p2p[k] = mean(&|r| r.sys);
        points.push(Point {
            state: rows[g[0]].state.clone(),
            theta_lab_deg: mean(&|r| r.theta_lab_deg),
            theta_cm_deg: mean(&|r| r.theta_cm_deg),
            y,
            stat,
            sys: (p2p[k].powi(2) + independent).sqrt(),
            norm_rel_err: if y == 0.0 { 0.0 } else { b[k] / y },
            members: g.iter().map(|&i| format!("{}/{}", rows[i].run, rows[i].detector)).collect::<Vec<_>>().join("+"),
            rows: g.len(),
        });
    }
    let mut cov = vec![0.0; n * n];
    for k in 0..n {
        for l in 0..n {
            let ind: f64 = (0..runs.len()).map(|r| a[k][r] * a[l][r] * nu[r] * nu[r]).sum();
            let diag = if k == l { points[k].stat.powi(2) + p2p[k].powi(2) } else { 0.0 };
            cov[k * n + l] = diag + ind + b[k] * b[l];
        }
    }
    Ok((points, cov))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn row(run: &str, theta: f64, y: f64, stat: f64) -> Row {
        Row {
            run: run.into(),
            detector: "D1".into(),
            state: "elastic".into(),
            theta_lab_deg: theta,
            theta_cm_deg: theta + 1.0,
            y,
            stat,
            sys: 0.0,
            norm_rel_err: 0.05,
            shared_rel_err: 0.03,
        }
    }

    #[test]
    fn two_runs_at_one_angle_average_and_keep_their_normalisations() {
        // y = 10 ± 1 and 12 ± 2 at 30°: weights 1 and 1/4, mean (10 + 3)/1.25 = 10.4,
        // stat error 1/√1.25 (worked by hand). Independent normalisation 4 % per run
        // (√(5² − 3²)), shared 3 %.
        let rows = [row("a", 30.0, 10.0, 1.0), row("b", 30.01, 12.0, 2.0), row("a", 50.0, 5.0, 0.5)];
        let (p, cov) = combine(&rows, 0.05).expect("combines");
        assert_eq!(p.len(), 2);
        assert_relative_eq!(p[0].y, 10.4, max_relative = 1e-12);
        assert_relative_eq!(p[0].stat, 1.0 / 1.25f64.sqrt(), max_relative = 1e-12);
        assert_relative_eq!(p[0].norm_rel_err, 0.03, max_relative = 1e-12);
        // a_{0,a} = 10/1.25 = 8, a_{0,b} = 3/1.25 = 2.4; ν = 0.04.
        let ind0 = (8.0f64 * 0.04).powi(2) + (2.4f64 * 0.04).powi(2);
        assert_relative_eq!(cov[0], p[0].stat.powi(2) + ind0 + (10.4f64 * 0.03).powi(2), max_relative = 1e-12);
        // Points 0 and 1 share run a's independent normalisation and the shared one.
        assert_relative_eq!(cov[1], 8.0 * 5.0 * 0.04 * 0.04 + 10.4 * 0.03 * 5.0 * 0.03, max_relative = 1e-12);
        assert_relative_eq!(cov[1], cov[2], max_relative = 1e-15);
    }
}
