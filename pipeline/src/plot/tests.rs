//! Checks of the shared plot helpers.

use super::*;

#[test]
fn tick_labels_have_one_fixed_form() {
    // (value, label): common practice for axis labels, 4 significant digits at most.
    let cases = [
        (0.0, "0"),
        (1.0, "1"),
        (10.0, "10"),
        (1000.0, "1000"),
        (0.5, "0.5"),
        (0.25, "0.25"),
        (12.5, "12.5"),
        (-2.0, "-2"),
        (1e6, "1e6"),
        (1e-4, "1e-4"),
        (180.0, "180"),
        (33.333_333, "33.33"),
    ];
    for (v, want) in cases {
        assert_eq!(tick_label(v), want, "{v}");
    }
}
