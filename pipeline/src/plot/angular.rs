//! The angular distribution: dσ/dΩ_cm versus θ_cm on a log axis, statistical and total
//! error bars, the fitted curves with a legend, and a pull panel under each state's panel.

use std::path::Path;

use plotters::prelude::*;

use super::{
    axes, cm_columns, distinct, drawing, empty_page, error_bar, floats, legend, on_page, padded, read, series_colour,
    Format, Page, FONT, INK, PAGE_PX, STAT_BAR, TOTAL_BAR,
};
use crate::error::Diagnostic;
use crate::layout::FIT_JSON;

/// One fitted curve, read from a fit folder.
#[derive(Debug, Clone)]
pub struct FitCurve {
    /// The state the fit was made to.
    pub state: String,
    /// Legend text: the model and χ²/ndf.
    pub label: String,
    /// CM angles, ascending, degrees.
    pub theta_cm_deg: Vec<f64>,
    /// The curve, mb/sr.
    pub dsdo_cm_mb_sr: Vec<f64>,
    /// The CM angles of the points the fit used (first, last), degrees; the curve is drawn
    /// thinner and no pull is shown outside them.
    pub fit_range_deg: Option<(f64, f64)>,
}

/// The fits in `dir`: the folder itself when it holds a fit.json, else each of its
/// sub-folders that does, in name order.
///
/// # Errors
/// A folder that cannot be listed, or a fit folder whose fit.json or curve cannot be read.
pub fn find_fits(dir: &Path) -> Result<Vec<FitCurve>, Diagnostic> {
    if dir.join(FIT_JSON).is_file() {
        return Ok(vec![read_fit(dir)?]);
    }
    std::fs::read_dir(dir).map_err(|e| Diagnostic::new(dir, "", format!("cannot list the fits: {e}")))?;
    crate::layout::fit_dirs(dir).iter().map(|d| read_fit(d)).collect()
}

/// One fit folder: its fit.json (state, model, χ²/ndf) and its curve table.
fn read_fit(dir: &Path) -> Result<FitCurve, Diagnostic> {
    let json_path = dir.join(FIT_JSON);
    let text = std::fs::read_to_string(&json_path)
        .map_err(|e| Diagnostic::new(&json_path, "", format!("cannot read it: {e}")))?;
    let report: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| Diagnostic::new(&json_path, "", format!("cannot read it as JSON: {e}")))?;
    let state = report["state"].as_str().unwrap_or("").to_string();
    let model = report["model"].as_str().unwrap_or("model");
    let label = match report["chi2_per_ndf"].as_f64() {
        Some(c) => format!("{model} fit, χ²/ndf = {c:.2}"),
        None => format!("{model} fit"),
    };
    let used =
        report["data"].as_array().map(|d| d.iter().filter_map(|p| p["theta_cm_deg"].as_f64()).collect::<Vec<_>>());
    let fit_range_deg = used
        .filter(|u| !u.is_empty())
        .map(|u| u.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), t| (l.min(*t), h.max(*t))));
    let curve_path =
        ["curve.parquet", "curve.csv"].iter().map(|f| dir.join(f)).find(|p| p.is_file()).ok_or_else(|| {
            Diagnostic::new(dir, "", "no curve.parquet or curve.csv in this fit folder")
                .with_help("rerun xsflow fit into it")
        })?;
    let table = read(&curve_path)?;
    let theta = floats(&table, "theta_cm_deg", &curve_path)?;
    let dsdo = floats(&table, "dsdo_cm_mb_sr", &curve_path)?;
    let mut pairs: Vec<(f64, f64)> = theta.into_iter().zip(dsdo).collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (theta_cm_deg, dsdo_cm_mb_sr) = pairs.into_iter().unzip();
    Ok(FitCurve { state, label, theta_cm_deg, dsdo_cm_mb_sr, fit_range_deg })
}

impl FitCurve {
    /// Whether `theta_deg` is within the fitted range (everywhere when it is not known).
    fn fitted(&self, theta_deg: f64) -> bool {
        self.fit_range_deg.is_none_or(|(lo, hi)| (lo..=hi).contains(&theta_deg))
    }
}

/// The most decades the dσ/dΩ axis spans.
const DECADES: i32 = 6;

/// One measured point.
#[derive(Debug, Clone, Copy)]
struct Point {
    theta_cm_deg: f64,
    dsdo_cm_mb_sr: f64,
    stat_err_mb_sr: f64,
    /// stat ⊕ sys.
    total_err_mb_sr: f64,
}

/// The curve at `theta_deg`, interpolated linearly in ln σ between its two neighbours
/// (cross sections vary exponentially with angle); `None` outside the curve's range or
/// where the curve is not positive.
pub fn curve_at(theta_cm_deg: &[f64], dsdo_cm_mb_sr: &[f64], theta_deg: f64) -> Option<f64> {
    let i = theta_cm_deg.windows(2).position(|w| w[0] <= theta_deg && theta_deg <= w[1])?;
    let (x0, x1, y0, y1) = (theta_cm_deg[i], theta_cm_deg[i + 1], dsdo_cm_mb_sr[i], dsdo_cm_mb_sr[i + 1]);
    if y0 <= 0.0 || y1 <= 0.0 {
        return None;
    }
    let t = if x1 > x0 { (theta_deg - x0) / (x1 - x0) } else { 0.0 };
    Some((y0.ln() + t * (y1.ln() - y0.ln())).exp())
}

/// The pull of a point against a curve: (data − curve) / total error.
fn pull(p: &Point, curve: &FitCurve) -> Option<f64> {
    if !curve.fitted(p.theta_cm_deg) {
        return None;
    }
    let c = curve_at(&curve.theta_cm_deg, &curve.dsdo_cm_mb_sr, p.theta_cm_deg)?;
    (p.total_err_mb_sr > 0.0).then(|| (p.dsdo_cm_mb_sr - c) / p.total_err_mb_sr)
}

/// The SVG of the combined angular distribution in `input` with `fits`.
///
/// # Errors
/// An unreadable table or a missing column, naming the file.
pub fn angular_distribution(input: &Path, fits: &[FitCurve], format: Format) -> Result<Vec<u8>, Diagnostic> {
    let fail = |e: String| Diagnostic::new(input, "", e);
    let (table, cm) = cm_columns(input)?;
    let (states, theta, dsdo, stat) = (cm.state, cm.theta_cm_deg, cm.dsdo_cm_mb_sr, cm.stat_err_mb_sr);
    let sys = floats(&table, "sys_err_mb_sr", input)?;
    if states.is_empty() {
        return empty_page("no data points: the angular distribution is empty", format);
    }
    let points: Vec<(String, Point)> = (0..states.len())
        .map(|i| {
            let p = Point {
                theta_cm_deg: theta[i],
                dsdo_cm_mb_sr: dsdo[i],
                stat_err_mb_sr: stat[i],
                total_err_mb_sr: stat[i].hypot(sys[i]),
            };
            (states[i].clone(), p)
        })
        .collect();
    let names = distinct(&states);
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let columns = root.split_evenly((1, names.len()));
        for (state, area) in names.iter().zip(columns.iter()) {
            let mine: Vec<Point> = points.iter().filter(|(s, _)| s == state).map(|(_, p)| *p).collect();
            let curves: Vec<&FitCurve> = fits.iter().filter(|f| &f.state == state).collect();
            state_panel(area, state, &mine, &curves)
                .map_err(|e| Diagnostic::new(input, format!("state {state}"), e))?;
        }
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}

/// One state: the cross sections above, the pulls below.
fn state_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    state: &str,
    points: &[Point],
    curves: &[&FitCurve],
) -> Result<(), String> {
    let height = area.dim_in_pixel().1;
    let (top, bottom) = area.split_vertically(height * 7 / 10);
    let (x_lo, x_hi) = padded(points.iter().map(|p| p.theta_cm_deg), 0.06, (0.0, 180.0));
    let (x_lo, x_hi) = (x_lo.max(0.0), x_hi.min(180.0));
    let lows = points.iter().map(|p| {
        if p.dsdo_cm_mb_sr > p.total_err_mb_sr {
            p.dsdo_cm_mb_sr - p.total_err_mb_sr
        } else {
            p.dsdo_cm_mb_sr / 2.0
        }
    });
    let highs = points.iter().map(|p| p.dsdo_cm_mb_sr + p.total_err_mb_sr);
    let in_range = |c: &&FitCurve| {
        c.theta_cm_deg
            .iter()
            .zip(&c.dsdo_cm_mb_sr)
            .filter(|(t, _)| (x_lo..=x_hi).contains(*t))
            .map(|(_, y)| *y)
            .collect::<Vec<_>>()
    };
    let curve_values: Vec<f64> = curves.iter().flat_map(in_range).filter(|y| *y > 0.0).collect();
    let positive = lows.chain(highs).chain(curve_values.iter().copied()).filter(|y| *y > 0.0);
    let (y_lo, y_hi) = positive.fold((f64::INFINITY, 0.0_f64), |(l, h), y| (l.min(y), h.max(y)));
    // At most DECADES below the highest value: a point whose net counts are about zero
    // would otherwise stretch the axis over many empty decades. Such a point (and one at or
    // below zero) gets no marker; its error bars start at the bottom of the axis.
    let y_lo = y_lo.max(y_hi * 10f64.powi(-DECADES));
    let (y_lo, y_hi) = if y_lo.is_finite() && y_hi > y_lo { (y_lo / 1.6, y_hi * 1.6) } else { (0.1, 10.0) };

    let mut chart = ChartBuilder::on(&top)
        .caption(format!("state {state}"), (FONT, 18).into_font().color(&INK))
        .margin_left(10)
        .margin_right(18)
        .margin_top(8)
        .x_label_area_size(22)
        .y_label_area_size(62)
        .build_cartesian_2d(x_lo..x_hi, (y_lo..y_hi).log_scale())
        .map_err(drawing)?;
    axes(&mut chart, None, "dσ/dΩ_cm (mb/sr)", 10)?;
    let bars = |err_mb_sr: fn(&Point) -> f64, style: ShapeStyle| {
        points.iter().map(move |p| {
            let (y, e) = (p.dsdo_cm_mb_sr, err_mb_sr(p));
            error_bar(p.theta_cm_deg, (y - e).max(y_lo), (y + e).max(y_lo), style)
        })
    };
    chart
        .draw_series(bars(|p| p.total_err_mb_sr, TOTAL_BAR.stroke_width(1)))
        .map_err(drawing)?
        .label("total error (stat ⊕ sys)")
        .legend(|(x, y)| Rectangle::new([(x, y - 1), (x + 18, y + 1)], TOTAL_BAR.filled()));
    chart
        .draw_series(bars(|p| p.stat_err_mb_sr, STAT_BAR.stroke_width(3)))
        .map_err(drawing)?
        .label("data, statistical error")
        .legend(|(x, y)| Rectangle::new([(x + 7, y - 5), (x + 11, y + 5)], STAT_BAR.filled()));
    chart
        .draw_series(
            points
                .iter()
                .filter(|p| p.dsdo_cm_mb_sr >= y_lo)
                .map(|p| Circle::new((p.theta_cm_deg, p.dsdo_cm_mb_sr), 3, INK.filled())),
        )
        .map_err(drawing)?;
    for (i, c) in curves.iter().enumerate() {
        let colour = super::series_colour(i);
        let line = |fitted: bool| {
            let mut pts: Vec<(f64, f64)> = Vec::new();
            let mut runs = Vec::new();
            for (t, y) in c.theta_cm_deg.iter().zip(&c.dsdo_cm_mb_sr) {
                if (x_lo..=x_hi).contains(t) && *y > 0.0 && c.fitted(*t) == fitted {
                    pts.push((*t, *y));
                } else if !pts.is_empty() {
                    runs.push(std::mem::take(&mut pts));
                }
            }
            runs.push(pts);
            runs.into_iter().filter(|r| r.len() > 1)
        };
        for run in line(false) {
            chart.draw_series(LineSeries::new(run, colour.stroke_width(1))).map_err(drawing)?;
        }
        let mut fitted = line(true);
        chart
            .draw_series(LineSeries::new(fitted.next().unwrap_or_default(), colour.stroke_width(2)))
            .map_err(drawing)?
            .label(c.label.clone())
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2)));
    }
    legend(&mut chart, SeriesLabelPosition::UpperRight, 13)?;

    let pulls: Vec<(usize, f64, f64)> = curves
        .iter()
        .enumerate()
        .flat_map(|(i, c)| points.iter().filter_map(move |p| pull(p, c).map(|v| (i, p.theta_cm_deg, v))))
        .collect();
    let p_max = pulls.iter().fold(3.0_f64, |m, (_, _, v)| m.max(v.abs() * 1.15)).ceil();
    let mut pull_chart = ChartBuilder::on(&bottom)
        .margin_left(10)
        .margin_right(18)
        .margin_bottom(6)
        .x_label_area_size(40)
        .y_label_area_size(62)
        .build_cartesian_2d(x_lo..x_hi, -p_max..p_max)
        .map_err(drawing)?;
    axes(&mut pull_chart, Some("θ_cm (deg)"), "pull (σ_total)", 5)?;
    pull_chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(x_lo, 0.0), (x_hi, 0.0)],
            super::REFERENCE.stroke_width(1),
        )))
        .map_err(drawing)?;
    pull_chart
        .draw_series(pulls.iter().map(|(i, t, v)| {
            let colour = series_colour(*i);
            Cross::new((*t, *v), 4, colour.stroke_width(2))
        }))
        .map_err(drawing)?;
    if curves.is_empty() {
        let style = TextStyle::from((FONT, 13).into_font()).color(&INK);
        pull_chart
            .draw_series(std::iter::once(Text::new(
                "no fit for this state",
                (x_lo + 0.03 * (x_hi - x_lo), p_max * 0.6),
                style,
            )))
            .map_err(drawing)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn curve_is_interpolated_in_log_between_its_points() {
        // (angles, values, at, expected): exact in ln σ, so 1e-12 relative covers rounding.
        // (curve angles, curve values, angle asked, value expected)
        type Case = (&'static [f64], &'static [f64], f64, Option<f64>);
        let cases: [Case; 5] = [
            (&[10.0, 20.0], &[100.0, 1.0], 15.0, Some(10.0)),
            (&[10.0, 20.0], &[100.0, 1.0], 10.0, Some(100.0)),
            (&[10.0, 20.0, 30.0], &[100.0, 1.0, 4.0], 25.0, Some(2.0)),
            (&[10.0, 20.0], &[100.0, 1.0], 25.0, None),
            (&[10.0, 20.0], &[100.0, 0.0], 15.0, None),
        ];
        for (t, y, at, want) in cases {
            match (curve_at(t, y, at), want) {
                (Some(got), Some(w)) => assert_relative_eq!(got, w, max_relative = 1e-12),
                (got, w) => assert_eq!(got.is_some(), w.is_some(), "at {at}"),
            }
        }
    }
}
