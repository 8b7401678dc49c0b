//! The names in an output folder, in one place for every module that writes or reads one
//! (runs, the combined distribution, fits, batches), so that none of them imports another
//! for a file name; and the rule for ids that become folder names (run ids, fit names).

/// One run's cross-section table, in `<out>/<run>/`.
pub const CROSS_SECTIONS_PARQUET: &str = "cross_sections.parquet";
/// CSV copy of the same table.
pub const CROSS_SECTIONS_CSV: &str = "cross_sections.csv";
/// Provenance record beside the tables of a run or of a fit.
pub const PROVENANCE_JSON: &str = "provenance.json";
/// Key of the provenance record in the Parquet file metadata.
pub const PROVENANCE_KEY: &str = "xsflow.provenance";

/// File names of the combined distribution in the output folder.
pub const ANGULAR_DISTRIBUTION_PARQUET: &str = "angular_distribution.parquet";
/// Its CSV copy.
pub const ANGULAR_DISTRIBUTION_CSV: &str = "angular_distribution.csv";
/// Its covariance matrix, long format (i, j, covariance).
pub const COVARIANCE_CSV: &str = "angular_distribution_covariance.csv";
/// The provenance record of both (also in the Parquet file's metadata).
pub const ANGULAR_DISTRIBUTION_PROVENANCE_JSON: &str = "angular_distribution_provenance.json";
/// Its plot with the fits and pulls (unless `report: { plots: false }`).
pub const ANGULAR_DISTRIBUTION_SVG: &str = "angular_distribution.svg";

/// Folder of the fits inside the output folder (`<out>/fits/<name>/`).
pub const FITS_DIR: &str = "fits";
/// A fit's report as JSON, in its folder (also `fit.yaml`, `curve.csv`, `curve.parquet`).
pub const FIT_JSON: &str = "fit.json";

/// A fit's landscape of minima (fits with several), in its folder.
pub const LANDSCAPE_SVG: &str = "landscape.svg";

/// Folder of the HTML report inside the output folder.
pub const REPORT_DIR: &str = "report";
/// The report's first page, in its folder.
pub const REPORT_INDEX: &str = "index.html";
/// Folder of the run pages inside the report folder (`report/runs/<run>.html`).
pub const REPORT_RUNS_DIR: &str = "runs";
/// A run's spectra with their gates (list-mode and spectrum runs), in `<out>/<run>/`.
pub const SPECTRA_PARQUET: &str = "spectra.parquet";
/// A run's binned (E, ΔE) histogram with its PID polygons (list-mode runs with PID), in
/// `<out>/<run>/`.
pub const PID_PARQUET: &str = "pid.parquet";
/// A run's event tallies and gates (list-mode and spectrum runs), in `<out>/<run>/`.
pub const RAW_JSON: &str = "raw.json";

/// Whether an id may name an output folder: letters, digits, '-', '_' and '.', not
/// starting with '.' (no hidden folders, no `..`, no separators).
pub fn is_folder_name(id: &str) -> bool {
    !id.starts_with('.') && id.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

/// The fit folders in `dir` (each holding a fit.json), in name order; none when `dir`
/// cannot be listed.
pub fn fit_dirs(dir: &std::path::Path) -> Vec<std::path::PathBuf> {
    let mut dirs: Vec<std::path::PathBuf> = std::fs::read_dir(dir)
        .into_iter()
        .flatten()
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.join(FIT_JSON).is_file())
        .collect();
    dirs.sort();
    dirs
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folder_names_are_plain() {
        // (id, accepted)
        let cases =
            [("0101", true), ("run-7_b.2", true), (".hidden", false), ("..", false), ("a/b", false), ("a b", false)];
        for (id, ok) in cases {
            assert_eq!(is_folder_name(id), ok, "{id:?}");
        }
    }
}
