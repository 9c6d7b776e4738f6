//! The import graph of the library (common practice, no source: a layered design keeps the
//! physics free of file formats and rendering). Each top-level module of `src/` may import only
//! modules of strictly lower layers, so there is no cycle; the scenario file module is imported
//! by nothing in the library (the binary reads files and hands the library a `Model`).
//!
//! The graph is read from the source text: every `crate::name` outside comments and unit-test
//! modules, including grouped `use crate::{a, b}` imports, is an edge from the file's top-level
//! module to `name`.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// Bottom to top. A module may import modules of lower layers only.
const LAYERS: &[&[&str]] = &[
    &["units", "seed", "quad", "stats", "fit"],
    &["potential"],
    &["landscape", "system"],
    &["theory"],
    &["simulate", "uncertainty", "observe"],
    &["model"],
    &["scan"],
    &["report", "scenario"],
];

fn files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The names a line refers to as `crate::name` or inside `crate::{..}`.
fn crate_refs(line: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut rest = line;
    while let Some(i) = rest.find("crate::") {
        let after = &rest[i + "crate::".len()..];
        if let Some(group) = after.strip_prefix('{') {
            let end = group.find('}').unwrap_or(group.len());
            for item in group[..end].split(',') {
                let name: String = item
                    .trim()
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                out.push(name);
            }
        } else {
            out.push(
                after
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect(),
            );
        }
        rest = after;
    }
    out.retain(|n| !n.is_empty());
    out
}

/// Edges between top-level library modules (the binary's files and lib.rs excluded).
fn graph() -> BTreeMap<String, BTreeSet<String>> {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut all = Vec::new();
    files(&src, &mut all);
    let mut g: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for f in all {
        let rel = f.strip_prefix(&src).unwrap();
        let first = rel
            .components()
            .next()
            .unwrap()
            .as_os_str()
            .to_string_lossy();
        let module = first.trim_end_matches(".rs").to_string();
        if ["lib", "main", "cli"].contains(&module.as_str()) {
            continue;
        }
        let text = std::fs::read_to_string(&f).unwrap();
        let entry = g.entry(module.clone()).or_default();
        // unit tests (a `mod tests` at the end of a file) may use anything
        for line in text.lines().take_while(|l| l.trim() != "#[cfg(test)]") {
            if line.trim_start().starts_with("//") {
                continue;
            }
            for name in crate_refs(line) {
                if name != module {
                    entry.insert(name);
                }
            }
        }
    }
    g
}

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|l| l.contains(&module))
}

#[test]
fn every_module_has_a_layer() {
    let missing: Vec<String> = graph()
        .keys()
        .filter(|m| layer_of(m).is_none())
        .cloned()
        .collect();
    assert!(missing.is_empty(), "modules without a layer: {missing:?}");
}

#[test]
fn modules_import_only_lower_layers() {
    let mut bad = Vec::new();
    for (from, tos) in graph() {
        let Some(lf) = layer_of(&from) else { continue };
        for to in tos {
            match layer_of(&to) {
                Some(lt) if lt < lf => {}
                _ => bad.push(format!("{from} -> {to}")),
            }
        }
    }
    assert!(bad.is_empty(), "imports against the layering: {bad:?}");
}

#[test]
fn there_is_no_import_cycle() {
    let g = graph();
    // depth-first search with colours; a grey node met again closes a cycle
    fn visit(
        n: &str,
        g: &BTreeMap<String, BTreeSet<String>>,
        colour: &mut BTreeMap<String, u8>,
        path: &mut Vec<String>,
    ) -> Option<Vec<String>> {
        match colour.get(n) {
            Some(1) => {
                let i = path.iter().position(|p| p == n).unwrap();
                let mut c = path[i..].to_vec();
                c.push(n.to_string());
                return Some(c);
            }
            Some(2) => return None,
            _ => {}
        }
        colour.insert(n.to_string(), 1);
        path.push(n.to_string());
        for m in g.get(n).into_iter().flatten() {
            if let Some(c) = visit(m, g, colour, path) {
                return Some(c);
            }
        }
        path.pop();
        colour.insert(n.to_string(), 2);
        None
    }
    let mut colour = BTreeMap::new();
    for n in g.keys() {
        let cycle = visit(n, &g, &mut colour, &mut Vec::new());
        assert!(
            cycle.is_none(),
            "import cycle: {}",
            cycle.unwrap().join(" -> ")
        );
    }
}

#[test]
fn the_physics_never_sees_the_scenario_file() {
    let g = graph();
    let importers: Vec<&String> = g
        .iter()
        .filter(|(_, tos)| tos.contains("scenario"))
        .map(|(m, _)| m)
        .collect();
    assert!(
        importers.is_empty(),
        "library modules importing the scenario module: {importers:?}"
    );
}

#[test]
fn the_reader_finds_grouped_and_plain_imports() {
    assert_eq!(
        crate_refs("use crate::{seed, units::Kind}; let x = crate::quad::rule();"),
        ["seed", "units", "quad"]
    );
}
