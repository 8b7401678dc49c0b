//! The config model: schemas generated from the types and committed, every field described,
//! every problem of a config reported at once with its place.

use crate::common::{demo_copy, demo_dir, edit, repo_root, text, xsflow};

#[test]
fn committed_schemas_match_the_types() {
    // `UPDATE_SCHEMAS=1 cargo test` rewrites them.
    let dir = repo_root().join("schemas");
    for name in xsflow::schema::NAMES {
        let generated = xsflow::schema::schema_json(name).expect("known schema");
        let path = dir.join(xsflow::schema::file_name(name));
        if std::env::var_os("UPDATE_SCHEMAS").is_some() {
            std::fs::write(&path, &generated).expect("schemas/ is writable");
        }
        let committed = std::fs::read_to_string(&path).unwrap_or_default();
        assert!(committed == generated, "{} differs from the types; run UPDATE_SCHEMAS=1 cargo test", path.display());
    }
}

/// Every property of every object in a schema, with its path.
fn properties<'a>(path: &str, v: &'a serde_json::Value, out: &mut Vec<(String, &'a serde_json::Value)>) {
    if let Some(props) = v.get("properties").and_then(|p| p.as_object()) {
        for (k, p) in props {
            out.push((format!("{path}.{k}"), p));
            properties(&format!("{path}.{k}"), p, out);
        }
    }
    for key in ["$defs", "oneOf", "anyOf", "items"] {
        match v.get(key) {
            Some(serde_json::Value::Object(m)) if key == "$defs" => {
                m.iter().for_each(|(k, d)| properties(&format!("{path}#{k}"), d, out))
            }
            Some(serde_json::Value::Array(a)) => {
                a.iter().enumerate().for_each(|(i, d)| properties(&format!("{path}/{key}{i}"), d, out))
            }
            Some(o @ serde_json::Value::Object(_)) => properties(&format!("{path}/{key}"), o, out),
            _ => {}
        }
    }
}

#[test]
fn every_field_has_a_description() {
    for name in xsflow::schema::NAMES {
        let schema: serde_json::Value =
            serde_json::from_str(&xsflow::schema::schema_json(name).expect("known")).expect("JSON");
        let mut props = Vec::new();
        properties(name, &schema, &mut props);
        assert!(props.len() > 3, "{name}: too few properties found ({})", props.len());
        for (path, p) in props {
            // The `type:` tag of a stage, `shape:` of an aperture and `model:` of a model file
            // are described by their variant.
            if path.ends_with(".type") || path.ends_with(".shape") || path.ends_with(".model") {
                continue;
            }
            let described = p.get("description").and_then(|d| d.as_str()).is_some_and(|d| !d.trim().is_empty());
            let by_ref = p.get("$ref").is_some() || p.get("allOf").is_some();
            assert!(described || by_ref, "{path} has no description");
        }
    }
}

#[test]
fn demo_config_uses_every_stage_and_is_clean() {
    let text_yaml = std::fs::read_to_string(demo_dir().join("experiment.yaml")).expect("demo config");
    for stage in stages::registry::STAGE_TYPES {
        assert!(text_yaml.contains(&format!("type: {stage}")), "the demo has no example of {stage}");
    }
    let out = xsflow(&demo_dir(), &["check", "experiment.yaml"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
}

#[test]
fn three_planted_mistakes_are_all_reported_with_key_paths() {
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    edit(
        &config,
        "radius_mm: 2.5, radius_err_mm: 0.01 }, efficiency: 1.0 }",
        "radius_mm: -2.5, radius_err_mm: 0.01 }, efficiency: 1.0 }",
    );
    edit(&config, "areal_density_rel_err: 0.03", "areal_density_rel_eror: 0.03");
    edit(&config, "method: clock_ratio", "method: clock_ratio\n    resolving_time_us: 2.0");
    let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("experiment.yaml:28:"), "line of the radius: {msg}");
    assert!(msg.contains("detectors[0].aperture.radius_mm: found -2.5, expected a finite number > 0"), "{msg}");
    assert!(
        msg.contains("experiment.yaml:22:3 target.areal_density_rel_eror: unknown field `areal_density_rel_eror`"),
        "{msg}"
    );
    assert!(msg.contains("did you mean `areal_density_rel_err`?"), "{msg}");
    assert!(
        msg.contains("stages[1].resolving_time_us: (correct_dead_time) found 2, expected no resolving time"),
        "{msg}"
    );
    assert!(msg.contains("3 problem(s)"), "{msg}");
}

#[test]
fn a_stage_that_needs_a_later_column_is_reported_before_any_run() {
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    edit(&config, "  - type: subtract_background\n", "");
    edit(
        &config,
        "  - type: compute_lab_cross_section\n",
        "  - type: compute_lab_cross_section\n  - type: subtract_background\n",
    );
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("stages[5].type: found compute_lab_cross_section, expected column `counts_net` added by an earlier stage: move `subtract_background` before `compute_lab_cross_section`"), "{msg}");
    assert!(!tmp.path().join("out").exists());
}

#[test]
fn cross_section_schema_lists_the_output_columns_in_order() {
    // The demo uses every stage; its columns, with those of the list-mode demo (window
    // acceptance), are the schema's, in the schema's order, less only optional columns of
    // other modes (monitor normalisation).
    let schema: serde_json::Value =
        serde_json::from_str(&xsflow::schema::schema_json("cross_sections").expect("known")).expect("JSON");
    let listed: Vec<&str> = schema["properties"].as_object().expect("properties").keys().map(String::as_str).collect();
    let required: Vec<&str> =
        schema["required"].as_array().expect("required").iter().filter_map(|v| v.as_str()).collect();
    let mut seen = Vec::new();
    for output in ["expected/0101/cross_sections.csv", "expected-listmode/0201/cross_sections.csv"] {
        let csv = std::fs::read_to_string(demo_dir().join(output)).expect("expected demo output");
        let header: Vec<String> = csv.lines().next().expect("header").split(',').map(String::from).collect();
        let in_order: Vec<&str> = listed.iter().copied().filter(|c| header.iter().any(|h| h == c)).collect();
        assert_eq!(header, in_order, "{output}: every output column is in the schema, in order");
        for c in &required {
            assert!(header.iter().any(|h| h == c), "required column {c} missing from {output}");
        }
        seen.extend(header);
    }
    let absent: Vec<&str> = listed.iter().copied().filter(|c| !seen.iter().any(|h| h == c)).collect();
    assert_eq!(absent, ["luminosity_monitor_over_absolute"]);
}

/// Issue 11: fits have their own section; the old form under `stages:` says where they went.
#[test]
fn issue_11_a_fit_entry_under_stages_says_where_fits_moved() {
    let tmp = demo_copy();
    let config = tmp.path().join("experiment.yaml");
    edit(&config, "\nfits:", "");
    edit(
        &config,
        "  - model_file: fits/elastic-optical.yaml",
        "  - type: fit\n    model_file: fits/elastic-optical.yaml",
    );
    edit(
        &config,
        "  - model_file: fits/inelastic-legendre.yaml",
        "  - type: fit\n    model_file: fits/inelastic-legendre.yaml",
    );
    let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    for i in [8, 9] {
        assert!(msg.contains(&format!("stages[{i}].type: a fit is not a per-run stage")), "{msg}");
    }
    assert!(msg.contains("top-level `fits:` list") && !msg.contains("unknown variant"), "{msg}");
}

/// Issue 11: a fit file for another reaction or energy than the experiment it fits passed
/// silently; each difference is now named with the experiment's value.
#[test]
fn issue_11_a_fit_file_for_another_reaction_is_refused() {
    // (edit of the fit file, expected message)
    let cases = [
        (
            "energy_mev: 24.0",
            "energy_mev: 25.0",
            "reaction.energy_mev: found 25, expected 24 MeV, the beam energy of the experiment it fits",
        ),
        ("target: 58Ni", "target: 60Ni", "reaction.target: found 60Ni, expected 58Ni as in the experiment it fits"),
    ];
    for (from, to, want) in cases {
        let tmp = demo_copy();
        edit(&tmp.path().join("fits/elastic-optical.yaml"), from, to);
        let out = xsflow(tmp.path(), &["check", "experiment.yaml"]);
        let msg = text(&out);
        assert_eq!(out.status.code(), Some(2), "{msg}");
        assert!(msg.contains("elastic-optical.yaml:") && msg.contains(want), "{want}:\n{msg}");
    }
}
