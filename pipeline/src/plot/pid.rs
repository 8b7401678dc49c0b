//! One telescope's ΔE–E histogram from a run's pid.parquet: each occupied bin a cell whose
//! shade grows with log counts, and the detector's PID polygon (from the file's metadata)
//! drawn over it, so that one sees at a glance whether the particle band sits inside it.

use std::path::Path;

use plotters::prelude::*;

use super::{
    distinct, drawing, empty_page, floats, on_page, padded, read, series_colour, strings, Format, Page, FONT, INK,
    PAGE_PX,
};
use crate::error::Diagnostic;

/// One occupied bin: E edges (MeV), ΔE edges, counts.
struct Cell {
    energy_mev: (f64, f64),
    delta_e: (f64, f64),
    counts: f64,
}

/// The PID polygon of `detector` from the metadata of `input` (empty when there is none).
fn polygon(input: &Path, detector: &str) -> Result<Vec<(f64, f64)>, Diagnostic> {
    let meta = crate::tables::parquet_metadata(input).map_err(|e| Diagnostic::new(input, "", e.to_string()))?;
    let Some((_, text)) = meta.iter().find(|(k, _)| k == crate::run::PID_POLYGONS_KEY) else {
        return Ok(Vec::new());
    };
    let all: std::collections::BTreeMap<String, Vec<[f64; 2]>> = serde_json::from_str(text).map_err(|e| {
        Diagnostic::new(input, format!("metadata `{}`", crate::run::PID_POLYGONS_KEY), format!("not JSON: {e}"))
    })?;
    Ok(all.get(detector).map(|v| v.iter().map(|p| (p[0], p[1])).collect()).unwrap_or_default())
}

/// The SVG of the ΔE–E histogram of `detector` (default the first) in `input`.
///
/// # Errors
/// An unreadable table, a missing column or an unknown detector, naming the file.
pub fn pid(input: &Path, detector: Option<&str>, format: Format) -> Result<Vec<u8>, Diagnostic> {
    let table = read(input)?;
    let detectors = strings(&table, "detector", input)?;
    let Some(first) = detectors.first() else {
        return empty_page("no ΔE–E histogram: the table is empty", format);
    };
    let detector = detector.unwrap_or(first).to_string();
    if !detectors.contains(&detector) {
        let known = distinct(&detectors).join(", ");
        return Err(Diagnostic::new(input, "detector", format!("found {detector}, expected one of {known}")));
    }
    let column = |n: &str| floats(&table, n, input);
    let (e_lo, e_hi, de_lo, de_hi, counts) = (
        column("energy_low_mev")?,
        column("energy_high_mev")?,
        column("delta_e_low")?,
        column("delta_e_high")?,
        column("counts")?,
    );
    let cells: Vec<Cell> = (0..detectors.len())
        .filter(|&i| detectors[i] == detector)
        .map(|i| Cell { energy_mev: (e_lo[i], e_hi[i]), delta_e: (de_lo[i], de_hi[i]), counts: counts[i] })
        .collect();
    let outline = polygon(input, &detector)?;
    let (x_lo, x_hi) = padded(
        cells.iter().flat_map(|c| [c.energy_mev.0, c.energy_mev.1]).chain(outline.iter().map(|p| p.0)),
        0.05,
        (0.0, 1.0),
    );
    let (y_lo, y_hi) = padded(
        cells.iter().flat_map(|c| [c.delta_e.0, c.delta_e.1]).chain(outline.iter().map(|p| p.1)),
        0.05,
        (0.0, 1.0),
    );
    let most = cells.iter().fold(1.0_f64, |m, c| m.max(c.counts));
    let fail = |e: String| Diagnostic::new(input, "", e);
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("detector {detector}: ΔE–E"), (FONT, 18).into_font().color(&INK))
            .margin(16)
            .x_label_area_size(48)
            .y_label_area_size(64)
            .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)
            .map_err(drawing)
            .map_err(fail)?;
        super::axes(&mut chart, Some("E (MeV)"), "ΔE (ADC units)", 10).map_err(fail)?;
        // Shade: 0.15 for one count up to 1 for the fullest bin, linear in log counts.
        let shade = |n: f64| 0.15 + 0.85 * (n.max(1.0).ln() / most.ln().max(1e-9)).min(1.0);
        let ink = series_colour(0);
        chart
            .draw_series(cells.iter().map(|c| {
                Rectangle::new(
                    [(c.energy_mev.0, c.delta_e.0), (c.energy_mev.1, c.delta_e.1)],
                    ink.mix(shade(c.counts)).filled(),
                )
            }))
            .map_err(drawing)
            .map_err(fail)?;
        if !outline.is_empty() {
            let mut closed = outline.clone();
            closed.push(outline[0]);
            chart
                .draw_series(std::iter::once(PathElement::new(closed, series_colour(1).stroke_width(2))))
                .map_err(drawing)
                .map_err(fail)?;
        }
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}
