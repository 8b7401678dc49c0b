//! `xsflow plot`: the SVG output parsed back (plain string scanning of the elements the
//! SVG backend writes) and checked against the tables it was drawn from: one marker and
//! two error bars per row, the fitted curves present, tick labels spanning the data, a
//! plot that says so for an empty table, and the same bytes every time.

use std::path::Path;

use crate::common::{csv_rows, demo_dir, num, text, xsflow};
use plotters::style::RGBColor;
use xsflow::plot::{INK, SERIES, STAT_BAR, TOTAL_BAR};

/// The opening tags `<name ...>` of an SVG document.
fn elements<'a>(svg: &'a str, name: &str) -> Vec<&'a str> {
    let open = format!("<{name} ");
    svg.match_indices(&open).map(|(i, _)| &svg[i..i + svg[i..].find('>').unwrap_or(0) + 1]).collect()
}

/// The value of attribute `key` of an opening tag.
fn attr<'a>(element: &'a str, key: &str) -> Option<&'a str> {
    let start = element.find(&format!(" {key}=\""))? + key.len() + 3;
    element[start..].split('"').next()
}

/// The colour as the SVG backend writes it.
fn hex(c: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

/// Polylines of one colour and width.
fn lines<'a>(svg: &'a str, colour: RGBColor, width: &str) -> Vec<&'a str> {
    elements(svg, "polyline")
        .into_iter()
        .filter(|e| attr(e, "stroke") == Some(hex(colour).as_str()) && attr(e, "stroke-width") == Some(width))
        .collect()
}

/// Polylines of one colour and width through more than `n` points (curves, not legend
/// samples or ticks).
fn long_lines<'a>(svg: &'a str, colour: RGBColor, width: &str, n: usize) -> Vec<&'a str> {
    lines(svg, colour, width)
        .into_iter()
        .filter(|c| attr(c, "points").is_some_and(|p| p.split_whitespace().count() > n))
        .collect()
}

/// Numeric text labels with the given anchor (`middle`: x ticks, `end`: y ticks), leaving
/// out rotated text (axis titles).
fn tick_values(svg: &str, anchor: &str) -> Vec<f64> {
    svg.split("<text ")
        .skip(1)
        .filter(|t| {
            let tag = &t[..t.find('>').unwrap_or(0)];
            tag.contains(&format!("text-anchor=\"{anchor}\"")) && !tag.contains("transform")
        })
        .filter_map(|t| t[t.find('>')? + 1..t.find("</text>")?].trim().parse::<f64>().ok())
        .collect()
}

/// Draw a plot into `dir/name` and return the SVG.
fn plot(dir: &Path, args: &[&str], name: &str) -> String {
    let out = dir.join(name);
    let mut all: Vec<&str> = vec!["plot"];
    all.extend_from_slice(args);
    let out_text = out.to_string_lossy().to_string();
    all.extend(["--out", &out_text]);
    let o = xsflow(dir, &all);
    assert!(o.status.success(), "{}", text(&o));
    std::fs::read_to_string(&out).expect("the plot is written")
}

#[test]
fn angular_distribution_has_a_marker_and_both_error_bars_per_row_and_every_fit() {
    let tmp = tempfile::tempdir().expect("tmp");
    let table = demo_dir().join("expected/angular_distribution.csv");
    let svg = plot(tmp.path(), &["angular-distribution", &table.to_string_lossy()], "ad.svg");
    let rows = csv_rows(&table);
    assert_eq!(elements(&svg, "circle").len(), rows.len(), "one marker per row");
    assert_eq!(lines(&svg, STAT_BAR, "3").len(), rows.len(), "one statistical bar per row");
    assert_eq!(lines(&svg, TOTAL_BAR, "1").len(), rows.len(), "one total bar per row");
    // The fits beside the table (fits/elastic_optical, fits/inelastic_legendre): one
    // curve each, in the first series colour of its state's panel, with its legend.
    assert_eq!(long_lines(&svg, SERIES[0], "2", 50).len(), 2, "one fitted curve per state");
    assert!(svg.contains("optical fit") && svg.contains("legendre fit"), "legend names the fits");
    // Tick labels span the data: the x ticks come within one 20° step of both ends, the
    // y ticks (one decade apart on the log axis) within a decade of both ends.
    let theta: Vec<f64> = rows.iter().map(|r| num(r, "theta_cm_deg")).collect();
    let dsdo: Vec<f64> = rows.iter().map(|r| num(r, "dsdo_cm_mb_sr")).collect();
    let (x, y) = (tick_values(&svg, "middle"), tick_values(&svg, "end"));
    let min = |v: &[f64]| v.iter().copied().fold(f64::INFINITY, f64::min);
    let max = |v: &[f64]| v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    assert!(min(&x) <= min(&theta) + 20.0 && max(&x) >= max(&theta) - 20.0, "x ticks {x:?}");
    assert!(min(&y) <= min(&dsdo) * 10.0 && max(&y) >= max(&dsdo) / 10.0, "y ticks {y:?}");
    assert!(svg.contains("θ_cm (deg)") && svg.contains("dσ/dΩ_cm (mb/sr)"), "units in the axis titles");
    // The same input gives the same bytes (no timestamps, fixed number formatting), and the
    // output folder stands for its combined table and fits.
    let folder = demo_dir().join("expected");
    let again = plot(tmp.path(), &["angular-distribution", &folder.to_string_lossy()], "again.svg");
    assert!(svg == again, "the plot is byte-deterministic");
}

#[test]
fn ratio_to_rutherford_has_a_marker_per_row_with_a_ratio() {
    let tmp = tempfile::tempdir().expect("tmp");
    let table = demo_dir().join("expected/0101/cross_sections.csv");
    let svg = plot(tmp.path(), &["ratio-rutherford", &table.to_string_lossy()], "rr.svg");
    let with_ratio = csv_rows(&table).iter().filter(|r| !r["ratio_rutherford"].is_empty()).count();
    assert!(with_ratio > 0, "the demo run compares its elastic rows with Rutherford");
    assert_eq!(elements(&svg, "circle").len(), with_ratio);
    // A reduce output folder: every run's rows with a ratio.
    let folder = demo_dir().join("expected");
    let svg = plot(tmp.path(), &["ratio-rutherford", &folder.to_string_lossy()], "all.svg");
    let all: usize = ["0101", "0102", "0103", "0104"]
        .iter()
        .map(|r| {
            csv_rows(&folder.join(r).join("cross_sections.csv"))
                .iter()
                .filter(|r| !r["ratio_rutherford"].is_empty())
                .count()
        })
        .sum();
    assert_eq!(elements(&svg, "circle").len(), all);
}

#[test]
fn spectrum_shades_each_gate_and_prints_its_net_counts() {
    let tmp = tempfile::tempdir().expect("tmp");
    let run = demo_dir().join("expected-listmode/0201");
    let spectra = run.join("spectra.parquet").to_string_lossy().to_string();
    let svg = plot(tmp.path(), &["spectrum", &spectra, "--detector", "D01"], "sp.svg");
    for row in csv_rows(&run.join("cross_sections.csv")).iter().filter(|r| r["detector"] == "D01") {
        let net = format!(
            "{}: net {} ± {}",
            row["state"],
            num(row, "counts_net").round(),
            num(row, "counts_net_err").round()
        );
        assert!(svg.contains(&net), "{net} printed");
    }
    assert_eq!(long_lines(&svg, INK, "1", 100).len(), 1, "the spectrum's outline");
    let o = xsflow(tmp.path(), &["plot", "spectrum", &spectra, "--detector", "D99", "--out", "x.svg"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o).contains("found D99, expected one of D01"), "{}", text(&o));
}

#[test]
fn an_empty_table_gives_a_plot_that_says_so_and_a_missing_column_an_error() {
    let tmp = tempfile::tempdir().expect("tmp");
    let header = "state,theta_cm_deg,dsdo_cm_mb_sr,stat_err_mb_sr,sys_err_mb_sr\n";
    std::fs::write(tmp.path().join("empty.csv"), header).expect("write");
    let svg = plot(tmp.path(), &["angular-distribution", "empty.csv"], "empty.svg");
    assert!(svg.contains("no data points"), "{svg}");
    std::fs::write(tmp.path().join("bad.csv"), "state,theta_cm_deg\nelastic,20\n").expect("write");
    let o = xsflow(tmp.path(), &["plot", "angular-distribution", "bad.csv", "--out", "bad.svg"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o).contains("column `dsdo_cm_mb_sr`: not found"), "{}", text(&o));
    assert!(!tmp.path().join("bad.svg").exists(), "nothing written on an error");
}

#[test]
fn reduce_draws_the_expected_angular_distribution_unless_the_config_says_no() {
    // Byte equality: the SVG has integer coordinates and fixed tick labels, so the committed
    // expected plot is what any machine draws from the same tables.
    let tmp = crate::common::demo_copy();
    let o = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out", "-q"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let name = xsflow::layout::ANGULAR_DISTRIBUTION_SVG;
    let got = std::fs::read(tmp.path().join("out").join(name)).expect("reduce draws the plot");
    let want = std::fs::read(demo_dir().join("expected").join(name)).expect("expected plot committed");
    assert!(got == want, "the plot differs from the committed expected one");

    let config = tmp.path().join("experiment.yaml");
    let mut yaml = std::fs::read_to_string(&config).expect("config");
    yaml.push_str("report: { plots: false }\n");
    std::fs::write(&config, yaml).expect("write");
    let o = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "off", "--run", "0101", "-q"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    assert!(tmp.path().join("off/angular_distribution.csv").is_file(), "the tables are still written");
    assert!(!tmp.path().join("off").join(name).exists(), "plots: false draws nothing");
}

#[test]
fn a_png_is_drawn_when_the_file_name_asks_for_one() {
    let tmp = tempfile::tempdir().expect("tmp");
    let table = demo_dir().join("expected/angular_distribution.parquet").to_string_lossy().to_string();
    let o = xsflow(tmp.path(), &["plot", "angular-distribution", &table, "--out", "ad.PNG"]);
    assert!(o.status.success(), "{}", text(&o));
    let png = std::fs::read(tmp.path().join("ad.PNG")).expect("written");
    // PNG signature, then the IHDR chunk: width and height as big-endian u32 (PNG spec, ISO/IEC 15948).
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    assert_eq!(&png[12..16], b"IHDR");
    let (w, h) = (
        u32::from_be_bytes([png[16], png[17], png[18], png[19]]),
        u32::from_be_bytes([png[20], png[21], png[22], png[23]]),
    );
    assert_eq!((w, h), xsflow::plot::PAGE_PX);
    // A blank white page compresses to 3.1 kB (zlib level 6, measured); the demo plot is 82 kB.
    assert!(png.len() > 20_000, "{} bytes", png.len());
}

#[test]
fn pid_draws_a_cell_per_occupied_bin_and_the_polygon_closed() {
    let tmp = tempfile::tempdir().expect("tmp");
    let file = demo_dir().join("expected-listmode/0201/pid.parquet");
    let svg = plot(tmp.path(), &["pid", &file.to_string_lossy()], "pid.svg");
    let detectors = xsflow::tables::read_table(&file).map(|t| stages::table::str_values(&t, "detector"));
    let rows = detectors.expect("pid table").expect("detector column").iter().filter(|d| *d == "D01").count();
    let cells = elements(&svg, "rect").into_iter().filter(|r| attr(r, "fill") == Some(hex(SERIES[0]).as_str())).count();
    assert_eq!(cells, rows, "one cell per occupied (E, ΔE) bin");
    // The demo's polygon for D01 has four vertices: closed, five points.
    let outline = lines(&svg, SERIES[1], "2");
    assert_eq!(outline.len(), 1, "{svg}");
    assert_eq!(attr(outline[0], "points").map(|p| p.split_whitespace().count()), Some(5));
}

/// A demo copy whose run records' charge is replaced by what `edit` gives for the record
/// file's name (`None`: left alone).
fn demo_with_charge(edit: impl Fn(&str) -> Option<String>) -> tempfile::TempDir {
    let tmp = crate::common::demo_copy();
    for entry in std::fs::read_dir(tmp.path().join("runs")).expect("runs") {
        let path = entry.expect("entry").path();
        let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        if let (true, Some(charge)) = (name.ends_with(".run.yaml"), edit(&name)) {
            let record = std::fs::read_to_string(&path).expect("record");
            let edited: String = record
                .lines()
                .map(|l| if l.starts_with("charge_c:") { format!("charge_c: {charge}\n") } else { format!("{l}\n") })
                .collect();
            std::fs::write(&path, edited).expect("write");
        }
    }
    tmp
}

#[test]
fn run_health_marks_the_run_with_a_fraction_of_the_charge_and_the_report_names_it() {
    // Run 0103's record says a sixth of its charge while its yields are unchanged (a
    // current integrator fault): its net counts per µC, six times the others', are ringed.
    // Its charge alone is not out of line: the demo's runs have charges of 20 to 35 µC, and
    // 2 µC is 2.1 robust σ below their median (hand-worked: median 25, MAD 7.5).
    let tmp = demo_with_charge(|name| name.contains("0103").then(|| "2.0e-06".to_string()));
    let config = tmp.path().join("experiment.yaml");
    let text_before = std::fs::read_to_string(&config).expect("config");
    std::fs::write(&config, format!("{text_before}\nreport:\n  health_detector: D05\n")).expect("config");
    let o = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "out", "-q"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let svg = plot(tmp.path(), &["run-health", "out", "--detector", "D05"], "health.svg");
    // Three panels (charge, live fraction, counts per µC) of four runs; one ring.
    assert_eq!(elements(&svg, "circle").iter().filter(|c| attr(c, "r") == Some("3")).count(), 12, "{svg}");
    assert_eq!(elements(&svg, "circle").iter().filter(|c| attr(c, "r") == Some("8")).count(), 1, "{svg}");
    assert!(svg.contains("net counts per µC"), "the third panel");
    let index = std::fs::read_to_string(tmp.path().join("out/report/index.html")).expect("report");
    assert!(index.contains("median: run 0103, net counts per µC = "), "the report names it: {index}");
    assert!(index.contains("4 run(s): 4 ok · 0 failed · 0 skipped"), "summary line");
    // Without a catalogue there is no run health to draw.
    let o = xsflow(tmp.path(), &["plot", "run-health", "runs", "--out", "x.svg"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(text(&o).contains("no catalogue.sqlite here"), "{}", text(&o));
}

#[test]
fn run_health_shows_the_monitor_over_absolute_luminosity_where_it_is_computed() {
    let tmp = crate::common::demo_copy();
    std::fs::copy(demo_dir().join("experiment-monitor.yaml"), tmp.path().join("experiment-monitor.yaml"))
        .expect("monitor config");
    let o = xsflow(tmp.path(), &["batch", "experiment-monitor.yaml", "--out", "out", "-q"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let svg = plot(tmp.path(), &["run-health", "out"], "health.svg");
    assert!(svg.contains("monitor / absolute luminosity"), "the fourth quantity's panel");
    // Charge, live fraction and the ratio: three panels of four runs.
    assert_eq!(elements(&svg, "circle").iter().filter(|c| attr(c, "r") == Some("3")).count(), 12, "{svg}");
    let index = std::fs::read_to_string(tmp.path().join("out/report/index.html")).expect("report");
    assert!(index.contains("monitor / absolute luminosity"), "the report's health plot has it too");
}

#[test]
fn a_batch_where_every_run_failed_reports_each_failure_and_nothing_to_plot() {
    let tmp = demo_with_charge(|_| Some("0".to_string()));
    let o = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "out", "-q"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    let index = std::fs::read_to_string(tmp.path().join("out/report/index.html")).expect("report");
    assert!(index.contains("4 run(s): 0 ok · 4 failed"), "{index}");
    assert_eq!(index.matches("<div class=\"problem\">").count(), 4, "each failure with its message");
    assert!(index.contains("No combined distribution: no run was reduced."), "{index}");
    // The records fail to load (charge 0 is refused), so no run has a charge or a live
    // fraction: run health says there is nothing to show and draws no point.
    assert!(index.contains("no run to show: nothing was reduced"), "{index}");
    assert_eq!(index.matches("r=\"3\"").count(), 0, "{index}");
}

#[test]
fn a_reduction_where_every_run_failed_draws_nothing_and_says_why() {
    // Nothing reduced means nothing written (DESIGN: outputs appear whole or not at all);
    // the summary says so instead of a plot.
    let tmp = crate::common::demo_copy();
    for entry in std::fs::read_dir(tmp.path().join("runs")).expect("runs") {
        let path = entry.expect("entry").path();
        if path.to_string_lossy().ends_with(".run.yaml") {
            let record = std::fs::read_to_string(&path).expect("record");
            let broken: String = record
                .lines()
                .map(|l| if l.starts_with("charge_c:") { "charge_c: 0\n".into() } else { format!("{l}\n") })
                .collect();
            std::fs::write(&path, broken).expect("write");
        }
    }
    let o = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out", "-q"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(text(&o).contains("0 run(s) reduced, 4 failed"), "{}", text(&o));
    assert!(!tmp.path().join("out").join(xsflow::layout::ANGULAR_DISTRIBUTION_SVG).exists());
}

#[test]
fn points_at_zero_neither_crash_nor_stretch_the_log_axis() {
    // A state whose net counts are about zero: a point at 0 and one at 1e-14 mb/sr. They get
    // error bars from the axis bottom but no marker, and the axis stays within six decades
    // below the highest point (1000 mb/sr), with its 1.6 margin.
    let tmp = tempfile::tempdir().expect("tmp");
    let table = "state,theta_cm_deg,dsdo_cm_mb_sr,stat_err_mb_sr,sys_err_mb_sr\n\
                 elastic,20,1000,10,5\nelastic,30,0,1,0\nelastic,40,1e-14,1,0\n";
    std::fs::write(tmp.path().join("zero.csv"), table).expect("write");
    let svg = plot(tmp.path(), &["angular-distribution", "zero.csv"], "zero.svg");
    assert_eq!(elements(&svg, "circle").len(), 1, "a marker only for the point on the axis");
    assert_eq!(lines(&svg, STAT_BAR, "3").len(), 3, "every row keeps its error bar");
    // The positive labels are the log axis's (the pull panel's are -2, 0, 2).
    let y = tick_values(&svg, "end");
    assert!(y.iter().filter(|v| **v > 0.0).all(|v| *v >= 1e-4), "y ticks {y:?}");
}
