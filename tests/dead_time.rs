//! Dead time per detector: a run whose detectors are read by separate acquisition channels,
//! with very different live fractions, reduced with each detector's own.

use std::collections::HashMap;

use approx::assert_relative_eq;

use crate::common::{csv_rows, demo_copy, edit, num, text, xsflow};

/// The demo's run 0101 reduced into `out`; its rows by (detector, state).
fn reduce_0101(dir: &std::path::Path, out: &str) -> HashMap<(String, String), HashMap<String, String>> {
    let done = xsflow(dir, &["reduce", "experiment.yaml", "--run", "0101", "--out", out]);
    assert_eq!(done.status.code(), Some(0), "{}", text(&done));
    csv_rows(&dir.join(out).join("0101/cross_sections.csv"))
        .into_iter()
        .map(|r| ((r["detector"].clone(), r["state"].clone()), r))
        .collect()
}

#[test]
fn each_detectors_cross_section_uses_its_own_live_fraction() {
    // Run 0101 of the demo: real time 3600 s, one live clock of 3421 s (f = 0.95028) for all
    // twelve detectors, a pulser of N = 36000 signals; clock_ratio with method_rel_err
    // 0.002. Reduced once as it is, then with each detector's own live clock: D01 live 95 %
    // of the time, D02 only 60 %, the others as the run.
    let tmp = demo_copy();
    let base = reduce_0101(tmp.path(), "base");
    let own_live_s: Vec<(String, f64)> = (1..=12)
        .map(|i| {
            let live_s = match i {
                1 => 3420.0,
                2 => 2160.0,
                _ => 3421.0,
            };
            (format!("D{i:02}"), live_s)
        })
        .collect();
    let detectors = own_live_s.iter().map(|(d, t)| format!("  {d}: {{ live_time_s: {t:.1} }}\n")).collect::<String>();
    edit(&tmp.path().join("runs/run0101.run.yaml"), "charge_c:", &format!("detectors:\n{detectors}charge_c:"));
    let own = reduce_0101(tmp.path(), "own");
    assert_eq!(own.len(), base.len());
    let (method_rel_err, pulser_sent) = (0.002, 36000.0);
    for ((detector, state), row) in &own {
        let was = &base[&(detector.clone(), state.clone())];
        let live_s = own_live_s.iter().find(|(d, _)| d == detector).expect("a detector of the demo").1;
        let f = live_s / 3600.0;
        // Tolerances 1e-12 relative: the same arithmetic in another order (CSV round trip of
        // shortest decimals); 1e-9 where a difference of squares loses digits.
        assert_relative_eq!(num(row, "live_fraction"), f, max_relative = 1e-12);
        // The binomial error of the run's pulser at this detector's own live fraction,
        // √(f (1 − f) / N), and the method's in quadrature.
        let f_err = (f * (1.0 - f) / pulser_sent).sqrt().hypot(f * method_rel_err);
        assert_relative_eq!(num(row, "live_fraction_err"), f_err, max_relative = 1e-12);
        // dσ/dΩ = Y / (ε f L ΔΩ): the product with the live fraction is the same whichever
        // live fraction the row has, so D02's cross section rises by 0.95028 / 0.6 = 1.584.
        for column in ["dsdo_lab_mb_sr", "dsdo_cm_mb_sr"] {
            assert_relative_eq!(
                num(row, column) * f,
                num(was, column) * num(was, "live_fraction"),
                max_relative = 1e-12
            );
        }
        // The live fraction's error is each detector's own now: it left the run's
        // normalisation (in quadrature) and joined each row's statistical error.
        assert_relative_eq!(
            num(row, "norm_rel_err").powi(2),
            num(was, "norm_rel_err").powi(2) - (num(was, "live_fraction_err") / num(was, "live_fraction")).powi(2),
            max_relative = 1e-9
        );
        let counting = num(was, "stat_err_lab_mb_sr") * num(was, "live_fraction") / f;
        assert_relative_eq!(
            num(row, "stat_err_lab_mb_sr"),
            counting.hypot(num(row, "dsdo_lab_mb_sr") * f_err / f),
            max_relative = 1e-12
        );
        assert_relative_eq!(
            num(row, "sys_err_lab_mb_sr") * f,
            num(was, "sys_err_lab_mb_sr") * num(was, "live_fraction"),
            max_relative = 1e-12
        );
    }
    // The two detectors of the issue, by value: D01 0.95, D02 0.60.
    assert_relative_eq!(num(&own[&("D01".into(), "elastic".into())], "live_fraction"), 0.95, max_relative = 1e-15);
    assert_relative_eq!(num(&own[&("D02".into(), "elastic".into())], "live_fraction"), 0.6, max_relative = 1e-15);
}
