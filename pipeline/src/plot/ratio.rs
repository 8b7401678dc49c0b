//! The ratio to Rutherford versus θ_cm on a linear axis, one colour per state, with the
//! statistical error of each point (σ_stat / σ_Ruth).

use std::path::{Path, PathBuf};

use plotters::prelude::*;

use super::{
    axes, cm_columns, distinct, drawing, empty_page, error_bar, legend, on_page, optional_floats, padded,
    series_colour, Format, Page, PAGE_PX,
};
use crate::error::Diagnostic;

/// (state, θ_cm in degrees, ratio to Rutherford, its statistical error) of one row.
type RatioPoint = (String, f64, f64, f64);

/// The rows of one cross_sections table that have a ratio to Rutherford (rows of states
/// not compared with Rutherford have an empty cell and are left out).
fn ratio_points(file: &Path) -> Result<Vec<RatioPoint>, Diagnostic> {
    let (table, cm) = cm_columns(file)?;
    let (states, theta, dsdo, stat) = (cm.state, cm.theta_cm_deg, cm.dsdo_cm_mb_sr, cm.stat_err_mb_sr);
    let ratio = optional_floats(&table, "ratio_rutherford", file)?;
    // The statistical error scales with the ratio: σ_stat / σ_Ruth = ratio · σ_stat / σ.
    Ok((0..states.len())
        .filter_map(|i| {
            let r = ratio[i].filter(|r| r.is_finite())?;
            let err = if dsdo[i] > 0.0 { r * stat[i] / dsdo[i] } else { 0.0 };
            Some((states[i].clone(), theta[i], r, err))
        })
        .collect())
}

/// The cross_sections tables of `input`: the file itself, or for a `reduce` output folder
/// each run's `<run>/cross_sections.parquet`, in name order.
fn tables_of(input: &Path) -> Result<Vec<PathBuf>, Diagnostic> {
    if !input.is_dir() {
        return Ok(vec![input.to_path_buf()]);
    }
    let entries = std::fs::read_dir(input).map_err(|e| Diagnostic::new(input, "", format!("cannot list it: {e}")))?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(Result::ok)
        .map(|e| e.path().join(crate::layout::CROSS_SECTIONS_PARQUET))
        .filter(|p| p.is_file())
        .collect();
    files.sort();
    Ok(files)
}

/// The SVG of the ratio to Rutherford of the rows of `input` (a cross_sections table or a
/// `reduce` output folder) that have one.
///
/// # Errors
/// An unreadable table or a missing column, naming the file.
pub fn ratio_rutherford(input: &Path, format: Format) -> Result<Vec<u8>, Diagnostic> {
    let mut points = Vec::new();
    for file in tables_of(input)? {
        points.extend(ratio_points(&file)?);
    }
    if points.is_empty() {
        return empty_page("no data points with a ratio to Rutherford", format);
    }
    let names = distinct(&points.iter().map(|p| p.0.clone()).collect::<Vec<_>>());
    let fail = |e: String| Diagnostic::new(input, "", e);
    let (x_lo, x_hi) = padded(points.iter().map(|p| p.1), 0.05, (0.0, 180.0));
    let (y_lo, y_hi) = padded(points.iter().flat_map(|p| [p.2 - p.3, p.2 + p.3]).chain([1.0]), 0.08, (0.0, 2.0));
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(16)
            .x_label_area_size(48)
            .y_label_area_size(64)
            .build_cartesian_2d(x_lo.max(0.0)..x_hi.min(180.0), y_lo.max(0.0)..y_hi)
            .map_err(drawing)
            .map_err(fail)?;
        axes(&mut chart, Some("θ_cm (deg)"), "dσ/dΩ / dσ/dΩ_Rutherford (1)", 10).map_err(fail)?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(x_lo, 1.0), (x_hi, 1.0)],
                super::REFERENCE.stroke_width(1),
            )))
            .map_err(drawing)
            .map_err(fail)?;
        for (i, name) in names.iter().enumerate() {
            let colour = series_colour(i);
            let mine: Vec<&RatioPoint> = points.iter().filter(|p| &p.0 == name).collect();
            chart
                .draw_series(mine.iter().map(|p| error_bar(p.1, p.2 - p.3, p.2 + p.3, colour.stroke_width(2))))
                .map_err(drawing)
                .map_err(fail)?;
            chart
                .draw_series(mine.iter().map(|p| Circle::new((p.1, p.2), 3, colour.filled())))
                .map_err(drawing)
                .map_err(fail)?
                .label(format!("state {name}"))
                .legend(move |(x, y)| Rectangle::new([(x + 4, y - 4), (x + 12, y + 4)], colour.filled()));
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight, 14).map_err(fail)?;
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}
