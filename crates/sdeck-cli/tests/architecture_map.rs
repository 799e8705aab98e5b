//! The architecture map of DEVELOPERS.md against the workspace: every crate it names
//! exists, every crate is named, and every dependency between our crates goes down the
//! layers and is listed in the importing crate's "may import" cell.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// One row of the map.
#[derive(Debug)]
struct MapRow {
    layer: u32,
    may_import: Vec<String>,
}

fn workspace_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

/// The rows between the `map: begin` and `map: end` markers, by crate name.
fn read_map(developers: &str) -> BTreeMap<String, MapRow> {
    let begin = developers
        .find("<!-- map: begin -->")
        .expect("DEVELOPERS.md has a `<!-- map: begin -->` marker");
    let end = developers
        .find("<!-- map: end -->")
        .expect("DEVELOPERS.md has a `<!-- map: end -->` marker");
    let mut rows = BTreeMap::new();
    for line in developers[begin..end].lines() {
        let cells: Vec<&str> = line.trim().trim_matches('|').split('|').collect();
        if cells.len() != 4 {
            continue;
        }
        let Ok(layer) = cells[0].trim().parse::<u32>() else {
            continue; // the header and the rule under it
        };
        let name = cells[1].trim().trim_matches('`').to_string();
        let may_import = cells[3]
            .split(',')
            .map(str::trim)
            .filter(|short| !short.is_empty() && *short != "—")
            .map(|short| format!("sdeck-{short}"))
            .collect();
        let previous = rows.insert(name.clone(), MapRow { layer, may_import });
        assert!(previous.is_none(), "{name} is named twice in the map");
    }
    rows
}

/// The `sdeck-*` entries of a crate's `[dependencies]` and `[build-dependencies]`.
fn our_dependencies(manifest: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(manifest).expect("the manifest is readable");
    let value: toml::Table = text.parse().expect("the manifest is TOML");
    ["dependencies", "build-dependencies"]
        .iter()
        .filter_map(|section| value.get(*section).and_then(toml::Value::as_table))
        .flat_map(|table| table.keys())
        .filter(|name| name.starts_with("sdeck-"))
        .cloned()
        .collect()
}

fn crates_on_disk() -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(workspace_root().join("crates"))
        .expect("crates/ is readable")
        .filter_map(Result::ok)
        .filter(|entry| entry.path().join("Cargo.toml").is_file())
        .map(|entry| entry.file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

#[test]
fn the_map_names_exactly_the_crates_of_the_workspace() {
    let developers = std::fs::read_to_string(workspace_root().join("DEVELOPERS.md"))
        .expect("DEVELOPERS.md is readable");
    let map = read_map(&developers);
    let on_disk = crates_on_disk();
    assert!(
        on_disk.len() >= 10,
        "crates/ holds the workspace: {on_disk:?}"
    );
    let named: Vec<String> = map.keys().cloned().collect();
    assert_eq!(named, on_disk, "the map and crates/ disagree");
    for (name, row) in &map {
        for imported in &row.may_import {
            assert!(
                map.contains_key(imported),
                "{name} may import {imported}, which the map does not name"
            );
        }
    }
}

#[test]
fn every_dependency_between_our_crates_goes_down_the_layers() {
    let developers = std::fs::read_to_string(workspace_root().join("DEVELOPERS.md"))
        .expect("DEVELOPERS.md is readable");
    let map = read_map(&developers);
    let mut checked = 0;
    for name in crates_on_disk() {
        let Some(row) = map.get(&name) else {
            panic!("{name} is missing from the map");
        };
        let manifest = workspace_root()
            .join("crates")
            .join(&name)
            .join("Cargo.toml");
        for dependency in our_dependencies(&manifest) {
            let Some(below) = map.get(&dependency) else {
                panic!("{name} depends on {dependency}, which the map does not name");
            };
            assert!(
                below.layer < row.layer,
                "{name} (layer {}) depends on {dependency} (layer {}): dependencies go down",
                row.layer,
                below.layer
            );
            assert!(
                row.may_import.contains(&dependency),
                "{name} depends on {dependency}, not in its \"may import\" cell of the map"
            );
            checked += 1;
        }
    }
    assert!(
        checked > 20,
        "only {checked} dependencies read: the manifests moved?"
    );
}

#[test]
fn a_map_row_is_read_with_its_layer_and_imports() {
    let text = "<!-- map: begin -->\n| layer | crate | owns | may import |\n|---|---|---|---|\n\
                | 0 | `sdeck-a` | a thing | — |\n| 3 | `sdeck-b` | b, c | a, d |\n<!-- map: end -->\n";
    let map = read_map(text);
    assert_eq!(map.len(), 2);
    assert_eq!(map["sdeck-a"].layer, 0);
    assert!(map["sdeck-a"].may_import.is_empty());
    assert_eq!(map["sdeck-b"].layer, 3);
    assert_eq!(map["sdeck-b"].may_import, ["sdeck-a", "sdeck-d"]);
}
