use super::*;

const MINIMAL: &str = r#"
[experiment]
name = "t"
seed = 1

[data]
table = "d.csv"
target = "y"
features = ["x"]

[[candidate]]
family = "polynomial"
degree = [1, 2]
"#;

/// Parses and validates `text` as `s.toml`; the error's text on failure.
fn check(text: &str) -> Result<Vec<FamilySpec>, String> {
    let spec = parse(Path::new("s.toml"), text).map_err(|e| e.to_string())?;
    validate(Path::new("s.toml"), &spec).map_err(|e| e.to_string())
}

#[test]
fn minimal_spec_takes_defaults() {
    let spec = parse(Path::new("s.toml"), MINIMAL).unwrap();
    validate(Path::new("s.toml"), &spec).unwrap();
    assert_eq!(spec.split.holdout, 0.2);
    assert_eq!(spec.split.method, SplitMethod::Kfold);
    assert_eq!(spec.choose.rule, Rule::OneSe);
    // No metric named: the plan takes the task's default (mse for numbers).
    assert_eq!(spec.choose.metric, None);
    assert_eq!(
        crate::plan::default_metric(crate::spec::Task::Regression),
        Metric::Mse
    );
}

#[test]
fn unknown_candidate_key_suggests_the_near_one() {
    let err = check(&MINIMAL.replace("degree = [1, 2]", "degre = [1, 2]")).unwrap_err();
    assert!(err.contains("did you mean `degree`"), "{err}");
    assert!(err.starts_with("s.toml:"), "{err}");
}

#[test]
fn unknown_top_level_key_has_line_and_column() {
    let err = check(&MINIMAL.replace("seed = 1", "seed = 1\nsed = 2")).unwrap_err();
    assert!(err.starts_with("s.toml:5:1:"), "{err}");
    assert!(err.contains("did you mean `seed`"), "{err}");
}

#[test]
fn yaml_and_toml_parse_to_the_same_spec() {
    let yaml = r#"
experiment: {name: t, seed: 1}
data: {table: d.csv, target: y, features: [x]}
candidate:
  - {family: polynomial, degree: [1, 2]}
"#;
    let from_yaml = parse(Path::new("s.yaml"), yaml).unwrap();
    let from_toml = parse(Path::new("s.toml"), MINIMAL).unwrap();
    assert_eq!(from_yaml, from_toml);
}

#[test]
fn bad_values_name_their_key() {
    let err = check(&MINIMAL.replace("degree = [1, 2]", "degree = [0, 2]")).unwrap_err();
    assert!(err.contains("candidate[1] (polynomial).degree"), "{err}");
    assert!(err.contains("degree = 0"), "{err}");
}

#[test]
fn smoothing_spline_df_below_two_is_refused_and_two_is_allowed() {
    let with = |settings: &str| {
        let text = MINIMAL.replace("family = \"polynomial\"\ndegree = [1, 2]", settings);
        let spec = parse(Path::new("s.toml"), &text).unwrap();
        validate(Path::new("s.toml"), &spec).map_err(|e| e.to_string())
    };
    with("family = \"smoothing-spline\"\ndf = [2, 3, 5, 8, 12, 20]").unwrap();
    let err = with("family = \"smoothing-spline\"\ndf = [1.5, 3]").unwrap_err();
    assert!(err.contains("candidate[1] (smoothing-spline).df"), "{err}");
    assert!(err.contains("df = 1.5 is below 2"), "{err}");
}

#[test]
fn thin_plate_settings_are_checked_before_fitting() {
    let two = MINIMAL.replace(r#"features = ["x"]"#, r#"features = ["x", "z"]"#);
    let with =
        |settings: &str| check(&two.replace("family = \"polynomial\"\ndegree = [1, 2]", settings));
    with("family = \"thin-plate\"\ndf = [3.5, 8]\nknots = 50\nexact_limit = 100").unwrap();
    let err = with("family = \"thin-plate\"\ndf = [5, 3]").unwrap_err();
    assert!(err.contains("candidate[1] (thin-plate).df"), "{err}");
    assert!(err.contains("df = 3 must be above 3"), "{err}");
    let err = with("family = \"thin-plate\"\npenalty = [1]\nknots = 3").unwrap_err();
    assert!(
        err.contains(".knots: knots = 3 is outside [4, 5000]"),
        "{err}"
    );
    let err = with("family = \"thin-plate\"\npenalty = [1]\nexact_limit = 5001").unwrap_err();
    assert!(err.contains(".exact_limit: exact_limit = 5001"), "{err}");
}

#[test]
fn closest_ignores_far_words() {
    assert_eq!(closest("folds", &["folds", "fold"]), Some("folds"));
    assert_eq!(closest("zzzzzz", &["holdout", "method"]), None);
}

/// A spec holding one candidate of `def` with its default grid, on as many
/// features as the family takes.
fn default_spec(def: &crate::models::registry::FamilyDef) -> String {
    let features = match def.feature_count {
        Some(1) => r#"["x"]"#,
        _ => r#"["x", "z"]"#,
    };
    format!(
        "[experiment]\nname = \"t\"\nseed = 1\n\n[data]\ntable = \"d.csv\"\ntarget = \"y\"\n\
         features = {features}\n\n[[candidate]]\nfamily = \"{}\"\n{}\n",
        def.name, def.default_grid
    )
}

#[test]
fn every_family_default_grid_validates_and_reports_its_spec_name() {
    for def in crate::models::registry::FAMILIES {
        let families = check(&default_spec(def)).unwrap_or_else(|e| panic!("{}: {e}", def.name));
        assert_eq!(families.len(), 1);
        assert_eq!(families[0].def.name, def.name);
        let plan = crate::plan::CandidatePlan::from_spec(&families[0]);
        assert_eq!(plan.family_name, def.name, "fits report another name");
        let settings = families[0].family.settings();
        assert!(!settings.is_empty(), "{}", def.name);
        // Grid points are labelled by one of the family's own keys.
        for setting in settings {
            if let Some((key, _)) = setting.param {
                assert!(def.key(key).is_some(), "{} labels by `{key}`", def.name);
            }
            assert!(plan.id(&setting).starts_with(def.name));
        }
    }
}

#[test]
fn canonical_spec_holds_only_keys_each_family_takes_and_runs_the_same() {
    for def in crate::models::registry::FAMILIES {
        let text = default_spec(def);
        let spec = parse(Path::new("s.toml"), &text).unwrap();
        let canonical = crate::spec::canonical(&spec);
        for candidate in &canonical.candidates {
            for (key, _) in &candidate.settings {
                assert!(def.key(key).is_some(), "{} shows `{key}`", def.name);
            }
        }
        // The canonical spec, written out and read back, validates and
        // binds the same fits.
        let written = toml::to_string(&canonical).unwrap();
        let again = parse(Path::new("s.toml"), &written).unwrap();
        let before = validate(Path::new("s.toml"), &spec).unwrap();
        let after = validate(Path::new("s.toml"), &again).unwrap();
        assert_eq!(before[0].identity(), after[0].identity(), "{}", def.name);
        assert_eq!(crate::spec::canonical(&again), canonical);
    }
}

#[test]
fn a_key_of_another_family_is_named_with_what_the_family_takes() {
    let err = check(&MINIMAL.replace(
        "family = \"polynomial\"\ndegree = [1, 2]",
        "family = \"ridge\"\npenalty = [1]\nintercept = true",
    ))
    .unwrap_err();
    assert!(
        err.contains("candidate[1] (ridge).intercept: `intercept` is not a setting of family \"ridge\" (it takes: penalty)"),
        "{err}"
    );
}

#[test]
fn an_unknown_family_is_placed_and_the_near_name_offered() {
    let err = check(&MINIMAL.replace("\"polynomial\"", "\"polynomal\"")).unwrap_err();
    assert!(err.starts_with("s.toml:12:10:"), "{err}");
    assert!(err.contains("did you mean `polynomial`"), "{err}");
}

#[test]
fn every_default_grid_narrows_to_each_of_its_settings() {
    // Infeasible settings are left out by rebuilding the family on a part
    // of its grid (execute/feasible.rs); that must give exactly that part.
    for def in crate::models::registry::FAMILIES {
        let families = check(&default_spec(def)).unwrap_or_else(|e| panic!("{}: {e}", def.name));
        let plan = crate::plan::CandidatePlan::from_spec(&families[0]);
        let all = plan.settings.clone();
        for (s, setting) in all.iter().enumerate() {
            let alone = crate::execute::feasible::restricted(&plan, &[s])
                .unwrap_or_else(|e| panic!("{} setting {s}: {e}", def.name));
            assert_eq!(alone.settings(), vec![*setting], "{}", def.name);
        }
        if all.len() > 1 {
            let tail: Vec<usize> = (1..all.len()).collect();
            let rest = crate::execute::feasible::restricted(&plan, &tail).unwrap();
            assert_eq!(rest.settings(), all[1..].to_vec(), "{}", def.name);
        }
    }
}
