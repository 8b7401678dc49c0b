//! The landscape of an optical-model fit with several starts: the χ² of every distinct
//! minimum against its real depth V_R, and against its real volume integral per nucleon
//! pair J_R/(A_p A_t), the number physicists use to name the families of potentials that
//! the discrete ambiguity of V_R allows. Read from the fit's `fit.json` (`minima`).

use std::path::{Path, PathBuf};

use plotters::prelude::*;

use super::{drawing, empty_page, on_page, padded, series_colour, tick_label, Format, Page, FONT, INK, PAGE_PX};
use crate::error::Diagnostic;

/// One minimum as the plot needs it.
#[derive(Debug, Clone, PartialEq)]
pub struct Minimum {
    /// χ² at the minimum.
    pub chi2: f64,
    /// Real depth, MeV.
    pub real_depth_mev: f64,
    /// J_R/(A_p A_t), MeV fm³.
    pub volume_integral_mev_fm3: Option<f64>,
    /// Whether its minimisation converged.
    pub converged: bool,
}

/// The minima of a fit report (`fit.json` as JSON); empty when it has none, or when the
/// real depth was not a free parameter.
pub fn minima_of(fit: &serde_json::Value) -> Vec<Minimum> {
    fit["minima"]
        .as_array()
        .map(Vec::as_slice)
        .unwrap_or_default()
        .iter()
        .filter_map(|m| {
            Some(Minimum {
                chi2: m["chi2"].as_f64()?,
                real_depth_mev: m["parameters"]["real.depth_mev"].as_f64()?,
                volume_integral_mev_fm3: m["real_volume_integral_mev_fm3"].as_f64(),
                converged: m["converged"].as_bool().unwrap_or(false),
            })
        })
        .collect()
}

/// The fit.json of `input`: the file, or the one in a fit folder.
fn fit_file(input: &Path) -> PathBuf {
    if input.is_dir() {
        input.join(crate::layout::FIT_JSON)
    } else {
        input.to_path_buf()
    }
}

/// The landscape SVG of the fit in `input` (a fit folder or its fit.json).
///
/// # Errors
/// An unreadable fit.json, naming it.
pub fn landscape(input: &Path, format: Format) -> Result<Vec<u8>, Diagnostic> {
    let file = fit_file(input);
    let text =
        std::fs::read_to_string(&file).map_err(|e| Diagnostic::new(&file, "", format!("cannot read it: {e}")))?;
    let fit: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| Diagnostic::new(&file, "", format!("not a fit report (JSON): {e}")))?;
    draw_minima(&minima_of(&fit), format)
}

/// The landscape SVG of `minima`: a page that says so when there are fewer than two.
///
/// # Errors
/// A drawing failure.
pub fn draw_minima(minima: &[Minimum], format: Format) -> Result<Vec<u8>, Diagnostic> {
    if minima.len() < 2 {
        return empty_page("no landscape: the fit found fewer than two minima of the real depth", format);
    }
    let fail = |e: String| Diagnostic::new(Path::new("fit landscape"), "", e);
    let best = minima.iter().enumerate().min_by(|a, b| a.1.chi2.total_cmp(&b.1.chi2)).map(|(i, _)| i);
    let (y_lo, y_hi) = padded(minima.iter().map(|m| m.chi2).chain([0.0]), 0.12, (0.0, 1.0));
    let panels: [(&str, Vec<Option<f64>>); 2] = [
        ("real depth V_R (MeV)", minima.iter().map(|m| Some(m.real_depth_mev)).collect()),
        ("J_R / (A_p A_t) (MeV fm³)", minima.iter().map(|m| m.volume_integral_mev_fm3).collect()),
    ];
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let areas = root.split_evenly((1, 2));
        for ((x_desc, xs), area) in panels.iter().zip(areas.iter()) {
            let (x_lo, x_hi) = padded(xs.iter().flatten().copied(), 0.15, (0.0, 1.0));
            let mut chart = ChartBuilder::on(area)
                .margin(14)
                .x_label_area_size(48)
                .y_label_area_size(60)
                .build_cartesian_2d(x_lo..x_hi, y_lo.max(0.0)..y_hi)
                .map_err(drawing)
                .map_err(fail)?;
            let label = |v: &f64| tick_label(*v);
            chart
                .configure_mesh()
                .disable_mesh()
                .axis_style(INK.stroke_width(1))
                .label_style((FONT, 14).into_font().color(&INK))
                .x_label_formatter(&label)
                .y_label_formatter(&label)
                .x_labels(6)
                .x_desc(*x_desc)
                .y_desc("χ² at the minimum")
                .draw()
                .map_err(drawing)
                .map_err(fail)?;
            for (i, (m, x)) in minima.iter().zip(xs).enumerate() {
                let Some(x) = *x else { continue };
                // The best minimum in the second series colour; a start that did not
                // converge as an open circle.
                let colour = if Some(i) == best { series_colour(1) } else { series_colour(0) };
                let style = if m.converged { colour.filled() } else { colour.stroke_width(2) };
                chart
                    .draw_series(std::iter::once(Circle::new((x, m.chi2), 6, style)))
                    .map_err(drawing)
                    .map_err(fail)?;
                // Its χ² beside the marker, offset in pixels.
                let label = EmptyElement::at((x, m.chi2))
                    + Text::new(format!("χ² {}", tick_label(m.chi2)), (9, -16), (FONT, 13).into_font().color(&INK));
                chart.draw_series(std::iter::once(label)).map_err(drawing).map_err(fail)?;
            }
        }
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn minima_are_read_from_a_fit_report() {
        let fit = serde_json::json!({"minima": [
            {"chi2": 2.2, "converged": true, "parameters": {"real.depth_mev": 150.0}, "real_volume_integral_mev_fm3": 330.0},
            {"chi2": 5.6, "converged": false, "parameters": {"real.depth_mev": 116.0}},
            {"chi2": 9.0, "converged": true, "parameters": {"imag_volume.depth_mev": 20.0}},
        ]});
        let got = minima_of(&fit);
        assert_eq!(got.len(), 2, "the minimum without a real depth is left out");
        assert_eq!(got[0].volume_integral_mev_fm3, Some(330.0));
        assert!(!got[1].converged && got[1].volume_integral_mev_fm3.is_none());
    }

    #[test]
    fn the_plot_has_a_marker_per_minimum_in_each_panel() {
        let minima: Vec<Minimum> = [(2.2, 150.0, 330.0), (5.6, 116.0, 260.0), (24.1, 230.0, 500.0)]
            .iter()
            .map(|&(chi2, v, j)| Minimum { chi2, real_depth_mev: v, volume_integral_mev_fm3: Some(j), converged: true })
            .collect();
        let svg = String::from_utf8(draw_minima(&minima, Format::Svg).expect("drawn")).expect("SVG is text");
        assert_eq!(svg.matches("r=\"6\"").count(), 6, "three minima in two panels");
        assert!(svg.contains("χ² 2.2") && svg.contains("χ² 24.1"), "each minimum labelled");
        let one = draw_minima(&minima[..1], Format::Svg).expect("drawn");
        assert!(String::from_utf8_lossy(&one).contains("fewer than two minima"));
    }
}
