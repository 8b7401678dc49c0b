//! One detector's energy spectrum from a run's spectra.parquet: counts per channel on a
//! log axis, each state's window and side bands shaded (the gates are in the file's
//! metadata), where the background was fitted its fitted background shaded (from the run's
//! raw.json), and the net counts of each state printed from the run's cross_sections table.

use std::path::Path;

use plotters::prelude::*;

use super::{
    axes, drawing, empty_page, floats, legend, on_page, read, series_colour, strings, tick_label, Format, Page, FONT,
    INK, PAGE_PX,
};
use crate::error::Diagnostic;

/// The metadata key of the gates in spectra.parquet (written by `run.rs`).
const GATES_KEY: &str = "xsflow.gates";

/// A state's gate on one detector, as far as the plot needs it.
#[derive(Debug, Clone)]
struct Gate {
    name: String,
    state: String,
    branch: i64,
    window_mev: (f64, f64),
    left_mev: (f64, f64),
    right_mev: (f64, f64),
}

fn interval(v: &serde_json::Value) -> Option<(f64, f64)> {
    Some((v["low_mev"].as_f64()?, v["high_mev"].as_f64()?))
}

/// The gates of `detector` from the metadata of `input`.
fn gates(input: &Path, detector: &str) -> Result<Vec<Gate>, Diagnostic> {
    let meta = crate::tables::parquet_metadata(input).map_err(|e| Diagnostic::new(input, "", e.to_string()))?;
    let Some((_, text)) = meta.iter().find(|(k, _)| k == GATES_KEY) else {
        return Ok(Vec::new());
    };
    let list: Vec<serde_json::Value> = serde_json::from_str(text).map_err(|e| {
        Diagnostic::new(input, format!("metadata `{GATES_KEY}`"), format!("cannot read it as JSON: {e}"))
    })?;
    Ok(list
        .iter()
        .filter(|g| g["detector"].as_str() == Some(detector))
        .filter_map(|g| {
            let state = g["state"].as_str()?.to_string();
            let branch = g["branch"].as_i64().unwrap_or(1);
            let name = if branch == 1 { state.clone() } else { format!("{state} (branch {branch})") };
            Some(Gate {
                name,
                state,
                branch,
                window_mev: interval(&g["window"])?,
                left_mev: interval(&g["left"])?,
                right_mev: interval(&g["right"])?,
            })
        })
        .collect())
}

/// Net counts and their error per (state, branch) of `detector`, from the cross_sections
/// table beside the spectra; empty when there is none.
fn net_counts(input: &Path, detector: &str) -> Result<Vec<(String, i64, f64, f64)>, Diagnostic> {
    let dir = input.parent().unwrap_or(Path::new("."));
    let Some(path) = [crate::layout::CROSS_SECTIONS_PARQUET, crate::layout::CROSS_SECTIONS_CSV]
        .iter()
        .map(|f| dir.join(f))
        .find(|p| p.is_file())
    else {
        return Ok(Vec::new());
    };
    let table = read(&path)?;
    let detectors = strings(&table, "detector", &path)?;
    let states = strings(&table, "state", &path)?;
    let branches = floats(&table, "branch", &path)?;
    let net = floats(&table, "counts_net", &path)?;
    let err = floats(&table, "counts_net_err", &path)?;
    Ok((0..detectors.len())
        .filter(|&i| detectors[i] == detector)
        .map(|i| (states[i].clone(), branches[i] as i64, net[i], err[i]))
        .collect())
}

/// The fitted background of `detector`'s peak fit, from the run's raw.json beside the
/// spectra, sampled at 200 energies over the fit region (counts per channel); empty when
/// the detector's background came from side bands.
fn fitted_background(input: &Path, detector: &str) -> Vec<(f64, f64)> {
    let dir = input.parent().unwrap_or(Path::new("."));
    let Some(raw) = std::fs::read_to_string(dir.join(crate::layout::RAW_JSON))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
    else {
        return Vec::new();
    };
    let fits = raw["peak_fits"].as_array().map(Vec::as_slice).unwrap_or_default();
    let Some(b) = fits.iter().find(|f| f["detector"].as_str() == Some(detector)).map(|f| &f["background"]) else {
        return Vec::new();
    };
    let (Some(b0), Some(b1), Some(lo), Some(hi)) =
        (b["b0"].as_f64(), b["b1"].as_f64(), b["region_mev"][0].as_f64(), b["region_mev"][1].as_f64())
    else {
        return Vec::new();
    };
    let exponential = b["shape"].as_str() == Some("exponential");
    // The peak-fit model's background (stages::physics::peak_fit::PeakModel::value).
    let at = |e: f64| if exponential { b0 * (-b1 * e).exp() } else { b0 + b1 * e };
    (0..=200).map(|i| lo + (hi - lo) * f64::from(i) / 200.0).map(|e| (e, at(e))).collect()
}

/// One channel of a spectrum; the table lists only channels with counts.
#[derive(Debug, Clone, Copy)]
struct Bin {
    channel: f64,
    /// The channel's centre, MeV.
    energy_mev: f64,
    counts: f64,
}

/// The width of one channel, MeV: the energy span over the channel span of the table (the
/// calibration is linear in channel), 1 keV when there is a single channel.
fn channel_width_mev(bins: &[Bin]) -> f64 {
    match (bins.first(), bins.last()) {
        (Some(a), Some(b)) if b.channel > a.channel => (b.energy_mev - a.energy_mev) / (b.channel - a.channel),
        _ => 1e-3,
    }
}

/// A step outline over the channels: a flat top across each channel, down to `floor`
/// across runs of channels the table leaves out (no counts).
fn outline(bins: &[Bin], width_mev: f64, floor: f64) -> Vec<(f64, f64)> {
    let mut steps = Vec::with_capacity(bins.len() * 4);
    for (i, b) in bins.iter().enumerate() {
        let (lo, hi) = (b.energy_mev - width_mev / 2.0, b.energy_mev + width_mev / 2.0);
        let joined = i > 0 && b.channel - bins[i - 1].channel < 1.5;
        if !joined {
            steps.push((lo, floor));
        }
        steps.push((lo, b.counts.max(floor)));
        steps.push((hi, b.counts.max(floor)));
        let next_joined = bins.get(i + 1).is_some_and(|n| n.channel - b.channel < 1.5);
        if !next_joined {
            steps.push((hi, floor));
        }
    }
    steps
}

/// The SVG of one detector's spectrum in `input` (default: the first detector).
///
/// # Errors
/// An unreadable table, a missing column or an unknown detector, naming the file.
pub fn spectrum(input: &Path, detector: Option<&str>, format: Format) -> Result<Vec<u8>, Diagnostic> {
    let table = read(input)?;
    let detectors = strings(&table, "detector", input)?;
    let energy = floats(&table, "energy_mev", input)?;
    let counts = floats(&table, "counts", input)?;
    let Some(first) = detectors.first() else {
        return empty_page("no spectrum: the table is empty", format);
    };
    let detector = detector.unwrap_or(first).to_string();
    if !detectors.contains(&detector) {
        let known = super::distinct(&detectors).join(", ");
        return Err(Diagnostic::new(input, "detector", format!("found {detector}, expected one of {known}")));
    }
    let channels = floats(&table, "channel", input)?;
    let mut bins: Vec<Bin> = (0..detectors.len())
        .filter(|&i| detectors[i] == detector)
        .map(|i| Bin { channel: channels[i], energy_mev: energy[i], counts: counts[i] })
        .collect();
    bins.sort_by(|a, b| a.channel.total_cmp(&b.channel));
    let gates = gates(input, &detector)?;
    let net = net_counts(input, &detector)?;
    let width = channel_width_mev(&bins);
    let x_lo =
        bins.iter().map(|b| b.energy_mev).chain(gates.iter().map(|g| g.left_mev.0)).fold(f64::INFINITY, f64::min);
    let x_hi =
        bins.iter().map(|b| b.energy_mev).chain(gates.iter().map(|g| g.right_mev.1)).fold(f64::NEG_INFINITY, f64::max);
    let (x_lo, x_hi) = super::padded([x_lo, x_hi].into_iter(), 0.04, (0.0, 1.0));
    let y_hi = bins.iter().fold(1.0_f64, |m, b| m.max(b.counts)) * 3.0;
    let floor = 0.5;
    let fail = |e: String| Diagnostic::new(input, "", e);
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("detector {detector}"), (FONT, 18).into_font().color(&INK))
            .margin(16)
            .x_label_area_size(48)
            .y_label_area_size(64)
            .build_cartesian_2d(x_lo..x_hi, (floor..y_hi).log_scale())
            .map_err(drawing)
            .map_err(fail)?;
        let y_desc = format!("counts per {} keV channel", tick_label(width * 1000.0));
        axes(&mut chart, Some("energy (MeV)"), &y_desc, 10).map_err(fail)?;
        for (i, g) in gates.iter().enumerate() {
            let colour = series_colour(i);
            let band = |(lo, hi): (f64, f64), alpha: f64| {
                Rectangle::new([(lo, floor), (hi, y_hi)], colour.mix(alpha).filled())
            };
            chart
                .draw_series([band(g.left_mev, 0.10), band(g.right_mev, 0.10), band(g.window_mev, 0.25)])
                .map_err(drawing)
                .map_err(fail)?;
            let counted = net.iter().find(|n| n.0 == g.state && n.1 == g.branch);
            let text = match counted {
                Some((_, _, n, e)) => format!("{}: net {} ± {}", g.name, tick_label(n.round()), tick_label(e.round())),
                None => format!("{}: window {}–{} MeV", g.name, tick_label(g.window_mev.0), tick_label(g.window_mev.1)),
            };
            chart
                .draw_series(std::iter::empty::<Rectangle<(f64, f64)>>())
                .map_err(drawing)
                .map_err(fail)?
                .label(text)
                .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], colour.mix(0.4).filled()));
        }
        // A peak fit's background, shaded from the floor up to it.
        let background = fitted_background(input, &detector);
        if let (Some(first), Some(last)) = (background.first(), background.last()) {
            let mut area: Vec<(f64, f64)> = background.iter().map(|&(e, b)| (e, b.clamp(floor, y_hi))).collect();
            area.extend([(last.0, floor), (first.0, floor)]);
            chart
                .draw_series(std::iter::once(Polygon::new(area, super::REFERENCE.mix(0.6).filled())))
                .map_err(drawing)
                .map_err(fail)?
                .label("fitted background")
                .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], super::REFERENCE.filled()));
        }
        let steps = outline(&bins, width, floor);
        chart.draw_series(LineSeries::new(steps, INK.stroke_width(1))).map_err(drawing).map_err(fail)?;
        if !gates.is_empty() || !background.is_empty() {
            legend(&mut chart, SeriesLabelPosition::UpperLeft, 14).map_err(fail)?;
        }
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}
