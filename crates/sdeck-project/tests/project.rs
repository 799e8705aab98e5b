//! Tests of the project resolver: nearest file wins, globs, levels, deny and the errors.

use sdeck_checks::RuleLevel;
use sdeck_diagnostics::{RuleId, Severity};
use sdeck_project::{find_project, settings_for, DenyLevel, ProjectCache};
use std::fs;
use std::path::Path;

fn write(path: &Path, text: &str) {
    if let Some(parent) = path.parent() {
        fs::create_dir_all(parent).unwrap();
    }
    fs::write(path, text).unwrap();
}

#[test]
fn no_project_file_gives_defaults() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("a/b/rate.sde");
    write(&model, "");
    // The temp dir may sit under a folder with a project file only on odd machines; the
    // search stops at the root, so this holds wherever no sdeck.toml is above /tmp.
    if find_project(&model).unwrap().is_none() {
        assert!(settings_for(&model).levels.is_empty());
    }
}

#[test]
fn nearest_file_wins_and_is_not_merged() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nunused = \"off\"\n[files]\nexclude = [\"flawed/**\"]\n[check]\ndeny = \"warnings\"\n",
    );
    write(
        &dir.path().join("flawed/sdeck.toml"),
        "[rules]\nfeller-condition = \"error\"\n",
    );
    let outer = find_project(&dir.path().join("rate.sde")).unwrap().unwrap();
    assert_eq!(
        outer.settings.levels.get(&RuleId::Unused),
        Some(&RuleLevel::Off)
    );
    assert!(outer.deny_warnings());
    assert!(outer.is_excluded(&dir.path().join("flawed/feller.sde")));
    assert!(outer.is_excluded(&dir.path().join("flawed/deeper/x.sde")));
    assert!(!outer.is_excluded(&dir.path().join("rate.sde")));

    let inner = find_project(&dir.path().join("flawed/feller.sde"))
        .unwrap()
        .unwrap();
    assert_eq!(
        inner.settings.levels.get(&RuleId::FellerCondition),
        Some(&RuleLevel::On(Severity::Error))
    );
    // Not merged: the outer `unused = "off"` does not reach the inner project.
    assert_eq!(inner.settings.levels.get(&RuleId::Unused), None);
    assert!(!inner.deny_warnings());
    assert!(!inner.is_excluded(&dir.path().join("flawed/feller.sde")));
}

#[test]
fn relative_paths_and_dot_dot_resolve_like_absolute_ones() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nexclude = [\"old\"]\n",
    );
    let project = find_project(dir.path()).unwrap().unwrap();
    assert!(project.is_excluded(&dir.path().join("models/../old/a.sde")));
    assert!(project.is_excluded(&dir.path().join("./old/sub/b.sde")));
    assert!(!project.is_excluded(&dir.path().join("older/a.sde")));
    // A path outside the project's folder is not its business.
    assert!(!project.is_excluded(Path::new("/elsewhere/old/a.sde")));
}

#[test]
fn include_limits_the_files_and_star_stays_in_one_folder() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\ninclude = [\"desk/*.sde\"]\n",
    );
    let project = find_project(dir.path()).unwrap().unwrap();
    assert!(!project.is_excluded(&dir.path().join("desk/a.sde")));
    assert!(project.is_excluded(&dir.path().join("desk/sub/a.sde")));
    assert!(project.is_excluded(&dir.path().join("other/a.sde")));
}

#[test]
fn every_level_is_read() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nunused = \"off\"\nunit-scale = \"hint\"\nfeller-condition = \"info\"\nsyntax = \"warning\"\nfactor-domain = \"error\"\n[check]\ndeny = \"errors\"\n",
    );
    let project = find_project(dir.path()).unwrap().unwrap();
    let level = |r: &str| {
        let rule = sdeck_diagnostics::rules::by_name(r)?;
        project.settings.levels.get(&rule.id).copied()
    };
    assert_eq!(level("unused"), Some(RuleLevel::Off));
    assert_eq!(level("unit-scale"), Some(RuleLevel::On(Severity::Hint)));
    assert_eq!(
        level("feller-condition"),
        Some(RuleLevel::On(Severity::Info))
    );
    assert_eq!(level("syntax"), Some(RuleLevel::On(Severity::Warning)));
    assert_eq!(level("factor-domain"), Some(RuleLevel::On(Severity::Error)));
    assert_eq!(project.deny, Some(DenyLevel::Errors));
}

fn error_of(text: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("sdeck.toml");
    write(&file, text);
    let error = find_project(dir.path()).unwrap_err();
    assert_eq!(error.file, sdeck_project::absolute(&file));
    // The Display form names the file, for the CLI's message.
    assert!(error.to_string().contains("sdeck.toml"));
    error.message
}

#[test]
fn unknown_keys_rules_and_levels_are_errors_naming_the_key() {
    assert!(error_of("[rule]\nunused = \"off\"\n").contains("`rule`"));
    assert!(error_of("[files]\nexlude = [\"a\"]\n").contains("`files.exlude`"));
    assert!(error_of("[check]\ndenny = \"warnings\"\n").contains("`check.denny`"));
    let misspelt = error_of("[rules]\nunsued = \"off\"\n");
    assert!(misspelt.contains("`rules.unsued`"), "{misspelt}");
    assert!(misspelt.contains("did you mean `unused`"), "{misspelt}");
    assert!(error_of("[rules]\nunused = \"loud\"\n").contains("\"loud\""));
    assert!(error_of("[rules]\nunused = 3\n").contains("`rules.unused`"));
    assert!(error_of("[check]\ndeny = \"hints\"\n").contains("\"hints\""));
    assert!(error_of("[files]\nexclude = \"flawed\"\n").contains("list"));
    assert!(error_of("[files]\nexclude = [\"a[\"]\n").contains("not valid"));
    assert!(error_of("[rules\nunused = \"off\"\n").contains("not valid TOML"));
}

#[test]
fn broken_file_gives_default_settings_through_settings_for() {
    let dir = tempfile::tempdir().unwrap();
    write(&dir.path().join("sdeck.toml"), "[rules]\nunused = \"of\"\n");
    assert!(settings_for(&dir.path().join("x.sde")).levels.is_empty());
}

#[test]
fn the_cache_agrees_with_find_project() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nunused = \"off\"\n",
    );
    write(
        &dir.path().join("a/b/sdeck.toml"),
        "[rules]\nunused = \"error\"\n",
    );
    let mut cache = ProjectCache::new();
    for rel in ["x.sde", "a/x.sde", "a/b/x.sde", "a/b/c/x.sde", "a/x.sde"] {
        let path = dir.path().join(rel);
        let cached = cache.project_for(&path).unwrap().unwrap();
        let direct = find_project(&path).unwrap().unwrap();
        assert_eq!(cached.file, direct.file, "{rel}");
        assert_eq!(cached.settings, direct.settings, "{rel}");
    }
}

#[test]
fn plausibility_thresholds_are_read_with_their_units() {
    let project = sdeck_project::Project::parse(
        "[plausibility]\nmax-volatility = \"300%\"\nmin-half-life = \"1 hour\"\nmax-half-life = \"200 year\"\nmax-rate-level = 0.8\n",
        "sdeck.toml".into(),
        ".".into(),
    )
    .expect("a valid project");
    let p = project.settings.plausibility;
    assert!((p.max_volatility - 3.0).abs() < 1e-15);
    assert!((p.min_half_life - 1.0 / 8760.0).abs() < 1e-15);
    assert!((p.max_half_life - 200.0).abs() < 1e-12);
    assert!((p.max_rate_level - 0.8).abs() < 1e-15);
}

#[test]
fn a_bad_plausibility_threshold_says_how_to_write_it() {
    for (text, words) in [
        (
            "[plausibility]\nmax-volatility = \"lots\"\n",
            "positive percentage",
        ),
        (
            "[plausibility]\nmin-half-life = \"3 fortnights\"\n",
            "time unit",
        ),
        (
            "[plausibility]\nmax-vol = 2\n",
            "unknown key `plausibility.max-vol`",
        ),
    ] {
        let error =
            sdeck_project::Project::parse(text, "sdeck.toml".into(), ".".into()).expect_err(text);
        assert!(error.message.contains(words), "{}", error.message);
    }
}
