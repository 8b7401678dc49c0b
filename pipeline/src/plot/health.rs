//! Run health versus run: beam charge, mean live fraction, for a chosen detector the net
//! counts per µC, and the monitor over absolute luminosity where computed, one panel each, with the runs that lie more than a set number of
//! standard deviations from the median marked. A dead detector, a beam off the target or a
//! data-acquisition fault shows as a point out of line.
//!
//! The spread is estimated robustly, σ ≈ 1.4826 · MAD (the median absolute deviation,
//! scaled to the standard deviation of a normal distribution; Rousseeuw & Croux, J. Am.
//! Stat. Assoc. 88 (1993) 1273), so that the outliers themselves do not widen it.

use std::path::Path;

use plotters::prelude::*;

use super::{
    drawing, empty_page, on_page, padded, series_colour, tick_label, Format, Page, FONT, INK, PAGE_PX, REFERENCE,
};
use crate::error::Diagnostic;

/// One run's health figures (absent where the run has none, e.g. a failed run).
#[derive(Debug, Clone, PartialEq)]
pub struct HealthRun {
    /// Run id.
    pub run: String,
    /// Beam charge in µC.
    pub charge_uc: Option<f64>,
    /// Mean live fraction of the run's rows.
    pub live_fraction: Option<f64>,
    /// Net counts (all states) per µC in the chosen detector.
    pub counts_per_uc: Option<f64>,
    /// Monitor over absolute luminosity, where computed.
    pub luminosity_ratio: Option<f64>,
}

/// A run marked as out of line: the quantity (a panel's axis title), the run, its value.
#[derive(Debug, Clone, PartialEq)]
pub struct Outlier {
    /// The panel's quantity with its unit.
    pub quantity: String,
    /// Run id.
    pub run: String,
    /// The run's value.
    pub value: f64,
}

/// MAD → σ for normally distributed values: 1/Φ⁻¹(3/4) = 1.4826 (Rousseeuw & Croux 1993).
const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// The median of `values` (not empty).
fn median(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let n = values.len();
    if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    }
}

/// Which values lie more than `sigmas` robust standard deviations from the median of the
/// present ones. With fewer than three values nothing is marked (no spread to judge by);
/// when more than half are equal (MAD = 0) any other value is marked only if it differs
/// from the median by more than 1e-9 of it (round-off is not an outlier).
pub fn outliers(values: &[Option<f64>], sigmas: f64) -> Vec<bool> {
    let mut present: Vec<f64> = values.iter().flatten().copied().filter(|v| v.is_finite()).collect();
    if present.len() < 3 {
        return vec![false; values.len()];
    }
    let centre = median(&mut present);
    let mut deviations: Vec<f64> = present.iter().map(|v| (v - centre).abs()).collect();
    let sigma = MAD_TO_SIGMA * median(&mut deviations);
    let limit = (sigmas * sigma).max(1e-9 * centre.abs());
    values.iter().map(|v| v.is_some_and(|v| v.is_finite() && (v - centre).abs() > limit)).collect()
}

/// A panel of the plot: its axis title and its values per run.
struct Panel {
    title: &'static str,
    values: Vec<Option<f64>>,
}

/// The run-health SVG and the runs marked as outliers.
///
/// # Errors
/// A drawing failure (none is expected for finite values).
pub fn run_health(runs: &[HealthRun], sigmas: f64, format: Format) -> Result<(Vec<u8>, Vec<Outlier>), Diagnostic> {
    let fail = |e: String| Diagnostic::new(Path::new("run health"), "", e);
    let mut panels = vec![
        Panel { title: "charge (µC)", values: runs.iter().map(|r| r.charge_uc).collect() },
        Panel { title: "live fraction (1)", values: runs.iter().map(|r| r.live_fraction).collect() },
    ];
    if runs.iter().any(|r| r.counts_per_uc.is_some()) {
        panels.push(Panel { title: "net counts per µC", values: runs.iter().map(|r| r.counts_per_uc).collect() });
    }
    if runs.iter().any(|r| r.luminosity_ratio.is_some()) {
        panels.push(Panel {
            title: "monitor / absolute luminosity",
            values: runs.iter().map(|r| r.luminosity_ratio).collect(),
        });
    }
    if runs.is_empty() || panels.iter().all(|p| p.values.iter().all(Option::is_none)) {
        return Ok((empty_page("no run to show: nothing was reduced", format)?, Vec::new()));
    }
    let mut marked = Vec::new();
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let areas = root.split_evenly((panels.len(), 1));
        let n = runs.len();
        // Label at most about 16 runs on the axis, evenly spaced.
        let every = n.div_ceil(16).max(1);
        let run_label = |x: &f64| {
            let i = x.round();
            if (x - i).abs() > 1e-6 || i < 0.0 || i as usize >= n || (i as usize) % every != 0 {
                String::new()
            } else {
                runs[i as usize].run.clone()
            }
        };
        for (k, (panel, area)) in panels.iter().zip(areas.iter()).enumerate() {
            let flags = outliers(&panel.values, sigmas);
            let (y_lo, y_hi) = padded(panel.values.iter().flatten().copied(), 0.12, (0.0, 1.0));
            let last = k + 1 == panels.len();
            let mut chart = ChartBuilder::on(area)
                .margin(10)
                .x_label_area_size(if last { 40 } else { 22 })
                .y_label_area_size(72)
                .build_cartesian_2d(-0.5..(n as f64 - 0.5), y_lo..y_hi)
                .map_err(drawing)
                .map_err(fail)?;
            let y_label = |v: &f64| tick_label(*v);
            let mut mesh = chart.configure_mesh();
            mesh.disable_mesh()
                .axis_style(INK.stroke_width(1))
                .label_style((FONT, 13).into_font().color(&INK))
                .x_labels(n.min(16 * every).max(2))
                .x_label_formatter(&run_label)
                .y_label_formatter(&y_label)
                .y_labels(5)
                .y_desc(panel.title);
            if last {
                mesh.x_desc("run");
            }
            mesh.draw().map_err(drawing).map_err(fail)?;
            let mut present: Vec<f64> = panel.values.iter().flatten().copied().collect();
            if !present.is_empty() {
                let centre = median(&mut present);
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(-0.5, centre), (n as f64 - 0.5, centre)],
                        REFERENCE.stroke_width(1),
                    )))
                    .map_err(drawing)
                    .map_err(fail)?;
            }
            let colour = series_colour(0);
            let points: Vec<(f64, f64, bool)> =
                panel.values.iter().enumerate().filter_map(|(i, v)| v.map(|v| (i as f64, v, flags[i]))).collect();
            chart
                .draw_series(points.iter().map(|&(x, y, _)| Circle::new((x, y), 3, colour.filled())))
                .map_err(drawing)
                .map_err(fail)?;
            // Outliers: a ring around the point, in the second series colour.
            chart
                .draw_series(
                    points
                        .iter()
                        .filter(|p| p.2)
                        .map(|&(x, y, _)| Circle::new((x, y), 8, series_colour(1).stroke_width(2))),
                )
                .map_err(drawing)
                .map_err(fail)?;
            for (i, flagged) in flags.iter().enumerate() {
                if let (true, Some(v)) = (*flagged, panel.values[i]) {
                    marked.push(Outlier { quantity: panel.title.to_string(), run: runs[i].run.clone(), value: v });
                }
            }
        }
        root.present().map_err(drawing).map_err(fail)?;
    });
    Ok((page.finish().map_err(fail)?, marked))
}

/// What run health needs of a run's cross_sections table: net counts per detector (summed
/// over states and branches) and, in monitor mode with `compare_absolute`, the monitor over
/// absolute luminosity.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RunFigures {
    /// (detector, net counts), in table order.
    pub counts_by_detector: Vec<(String, f64)>,
    /// Monitor luminosity over absolute luminosity, where the run computed it.
    pub luminosity_monitor_over_absolute: Option<f64>,
}

/// The run-health figures of a run's cross_sections table.
///
/// # Errors
/// An unreadable table or a missing column, naming the file.
pub fn run_figures(table: &Path) -> Result<RunFigures, Diagnostic> {
    let frame = super::read(table)?;
    let detectors = super::strings(&frame, "detector", table)?;
    let counts = super::floats(&frame, "counts_net", table)?;
    let mut out: Vec<(String, f64)> = Vec::new();
    for (d, c) in detectors.into_iter().zip(counts) {
        match out.iter_mut().find(|(k, _)| *k == d) {
            Some((_, sum)) => *sum += c,
            None => out.push((d, c)),
        }
    }
    let ratio = frame
        .column("luminosity_monitor_over_absolute")
        .ok()
        .and_then(|_| super::optional_floats(&frame, "luminosity_monitor_over_absolute", table).ok())
        .and_then(|v| v.into_iter().flatten().find(|x| x.is_finite()));
    Ok(RunFigures { counts_by_detector: out, luminosity_monitor_over_absolute: ratio })
}

/// The outliers as a sentence for the report, or `None` when there are none.
pub fn describe(marked: &[Outlier], sigmas: f64) -> Option<String> {
    if marked.is_empty() {
        return None;
    }
    let list: Vec<String> =
        marked.iter().map(|o| format!("run {}, {} = {}", o.run, o.quantity, tick_label(o.value))).collect();
    Some(format!("More than {} σ from the median: {}.", tick_label(sigmas), list.join("; ")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn outliers_are_judged_by_the_median_and_the_mad() {
        // (values, sigmas, marked); hand-worked: for [10, 10.2, 9.9, 10.1, 14] the median
        // is 10.1, the MAD 0.1 (deviations 0.1, 0.1, 0.2, 0, 3.9), σ = 0.148, so 14 is
        // 26 σ out and the rest within 1.4 σ.
        type Case<'a> = (&'a [Option<f64>], f64, &'a [bool]);
        let cases: [Case; 5] = [
            (&[Some(10.0), Some(10.2), Some(9.9), Some(10.1), Some(14.0)], 3.0, &[false, false, false, false, true]),
            (&[Some(10.0), Some(10.2), Some(9.9), Some(10.1), Some(14.0)], 30.0, &[false; 5]),
            (&[Some(1.0), None, Some(1.0), Some(1.0), Some(0.5)], 3.0, &[false, false, false, false, true]),
            (&[Some(1.0), Some(1.0 + 1e-12), Some(1.0)], 3.0, &[false; 3]),
            (&[Some(1.0), Some(50.0)], 3.0, &[false; 2]),
        ];
        for (values, sigmas, want) in cases {
            assert_eq!(outliers(values, sigmas), want, "{values:?} at {sigmas} σ");
        }
    }

    #[test]
    fn the_plot_has_one_point_per_value_and_rings_the_outliers() {
        let runs: Vec<HealthRun> = (0..6)
            .map(|i| HealthRun {
                run: format!("0{i}"),
                charge_uc: Some(if i == 4 { 3.0 } else { 10.0 + 0.1 * i as f64 }),
                live_fraction: Some(0.95),
                counts_per_uc: None,
                luminosity_ratio: None,
            })
            .collect();
        let (svg, marked) = run_health(&runs, 3.0, Format::Svg).expect("drawn");
        let svg = String::from_utf8(svg).expect("SVG is text");
        assert_eq!(marked, vec![Outlier { quantity: "charge (µC)".into(), run: "04".into(), value: 3.0 }]);
        // 12 filled points (6 runs × 2 panels) of radius 3 and one ring of radius 8.
        assert_eq!(svg.matches("r=\"3\"").count(), 12, "{svg}");
        assert_eq!(svg.matches("r=\"8\"").count(), 1);
        assert!(describe(&marked, 3.0).is_some_and(|s| s.contains("run 04, charge (µC) = 3")));
    }

    #[test]
    fn nothing_to_show_is_said() {
        let (svg, marked) = run_health(&[], 3.0, Format::Svg).expect("drawn");
        let svg = String::from_utf8(svg).expect("SVG is text");
        assert!(svg.contains("nothing was reduced") && marked.is_empty());
    }
}
