//! The direction of imports: the report model is a leaf. Its types (and its renderers) name
//! nothing of the checks, the rules, the configuration or the pipeline, so that a check can
//! change without the report changing and the renderers only lay out.

use crate::util::root;

/// Modules the report may not reach into.
const ABOVE_THE_REPORT: [&str; 10] = [
    "audit", "assemble", "bundle", "clean", "compare", "config", "derive", "load", "pipeline",
    "rules",
];

fn rust_files(dir: &std::path::Path, out: &mut Vec<std::path::PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

#[test]
fn the_report_model_and_renderers_import_nothing_above_them() {
    let mut files = Vec::new();
    rust_files(&root().join("src/report"), &mut files);
    assert!(files.len() > 5, "the report's files were found");
    let mut found = Vec::new();
    for path in files {
        let text = std::fs::read_to_string(&path).unwrap();
        // Unit tests may build reports from anything.
        let code = text.split("#[cfg(test)]").next().unwrap_or_default();
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        if name == "tests.rs" {
            continue;
        }
        for module in ABOVE_THE_REPORT {
            if code.contains(&format!("crate::{module}::"))
                || code.contains(&format!("crate::{module};"))
            {
                found.push(format!("{} uses crate::{module}", path.display()));
            }
        }
    }
    assert!(found.is_empty(), "{found:#?}");
}

/// The module a `src/` file belongs to, to `depth` levels (`audit`, `audit::model`).
fn module_of(path: &std::path::Path, depth: usize) -> Vec<String> {
    let rel = path.strip_prefix(root().join("src")).unwrap();
    let mut parts: Vec<String> = rel
        .iter()
        .map(|p| p.to_string_lossy().trim_end_matches(".rs").to_string())
        .collect();
    if parts.last().is_some_and(|p| p == "mod") {
        parts.pop();
    }
    if parts == ["lib"] || parts == ["main"] {
        return vec![];
    }
    parts.truncate(depth);
    parts
}

/// The paths a file names after `crate::`, brace groups expanded one level
/// (`crate::{bundle, report::Status}` names `bundle` and `report::Status`).
fn crate_paths(code: &str) -> Vec<Vec<String>> {
    let mut found = Vec::new();
    for (at, _) in code.match_indices("crate::") {
        let rest = &code[at + "crate::".len()..];
        let path_of = |text: &str| -> Vec<String> {
            text.split("::")
                .map(|p| {
                    p.chars()
                        .take_while(|c| c.is_alphanumeric() || *c == '_')
                        .collect::<String>()
                })
                .take_while(|p| !p.is_empty())
                .collect()
        };
        if let Some(group) = rest.strip_prefix('{') {
            let mut depth = 0;
            let mut item = String::new();
            for c in group.chars() {
                match c {
                    '{' => depth += 1,
                    '}' if depth == 0 => break,
                    '}' => depth -= 1,
                    ',' if depth == 0 => {
                        found.push(path_of(item.trim()));
                        item.clear();
                        continue;
                    }
                    _ => {}
                }
                item.push(c);
            }
            found.push(path_of(item.trim()));
        } else {
            found.push(path_of(rest));
        }
    }
    found
}

/// Edges between the crate's modules at `depth` levels, each with a file that makes it.
fn module_graph(
    depth: usize,
) -> std::collections::BTreeMap<String, std::collections::BTreeMap<String, String>> {
    let src = root().join("src");
    let is_module = |parts: &[String]| {
        let p = parts.iter().fold(src.clone(), |p, part| p.join(part));
        p.is_dir() || p.with_extension("rs").is_file()
    };
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    let mut graph = std::collections::BTreeMap::new();
    for path in files {
        let from = module_of(&path, depth);
        // Unit tests (`tests.rs`, `#[cfg(test)]`) may build anything from anything.
        if from.is_empty() || path.file_name().is_some_and(|n| n == "tests.rs") {
            continue;
        }
        let text = std::fs::read_to_string(&path).unwrap();
        let code = text.split("#[cfg(test)]").next().unwrap_or_default();
        for target in crate_paths(code) {
            let mut to: Vec<String> = Vec::new();
            for part in target.iter().take(depth) {
                let mut next = to.clone();
                next.push(part.clone());
                if !is_module(&next) {
                    break;
                }
                to = next;
            }
            if to.is_empty() || to == from || from.starts_with(&to) {
                continue;
            }
            graph
                .entry(from.join("::"))
                .or_insert_with(std::collections::BTreeMap::new)
                .entry(to.join("::"))
                .or_insert_with(|| path.display().to_string());
        }
    }
    graph
}

/// A cycle of the graph, if it has one, as the modules and the files that close it.
fn a_cycle(
    graph: &std::collections::BTreeMap<String, std::collections::BTreeMap<String, String>>,
) -> Option<Vec<String>> {
    fn visit(
        node: &str,
        graph: &std::collections::BTreeMap<String, std::collections::BTreeMap<String, String>>,
        path: &mut Vec<String>,
        done: &mut std::collections::BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(i) = path.iter().position(|p| p == node) {
            let mut cycle = path[i..].to_vec();
            cycle.push(node.to_string());
            return Some(
                cycle
                    .windows(2)
                    .map(|w| format!("{} -> {} ({})", w[0], w[1], graph[&w[0]][&w[1]]))
                    .collect(),
            );
        }
        if done.contains(node) {
            return None;
        }
        path.push(node.to_string());
        for next in graph.get(node).into_iter().flat_map(|n| n.keys()) {
            if let Some(c) = visit(next, graph, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(node.to_string());
        None
    }
    let mut done = std::collections::BTreeSet::new();
    graph
        .keys()
        .find_map(|n| visit(n, graph, &mut Vec::new(), &mut done))
}

#[test]
fn the_import_graph_of_the_modules_has_no_cycle() {
    for depth in [1, 2] {
        let graph = module_graph(depth);
        assert!(graph.len() > 10, "the modules were found: {graph:?}");
        if let Some(cycle) = a_cycle(&graph) {
            panic!("an import cycle between modules (depth {depth}):\n{cycle:#?}");
        }
    }
}

#[test]
fn the_cycle_finder_finds_a_planted_cycle() {
    // The test above must be able to fail: the same finder on a graph with a cycle.
    let mut graph = std::collections::BTreeMap::new();
    for (a, b) in [("config", "rules"), ("rules", "audit"), ("audit", "config")] {
        graph
            .entry(a.to_string())
            .or_insert_with(std::collections::BTreeMap::new)
            .insert(b.to_string(), format!("src/{a}.rs"));
    }
    let cycle = a_cycle(&graph).expect("a cycle");
    assert_eq!(cycle.len(), 3, "{cycle:?}");
    assert_eq!(
        crate_paths("use crate::{bundle, report::Status, audit::{Check, Context}};"),
        vec![
            vec!["bundle".to_string()],
            vec!["report".into(), "Status".into()],
            vec!["audit".into()]
        ]
    );
}

#[test]
fn commands_sit_above_everything_and_stages_never_import_them() {
    let graph = module_graph(1);
    let offenders: Vec<String> = graph
        .iter()
        .filter(|(from, _)| *from != "command")
        .flat_map(|(from, to)| {
            to.iter()
                .filter(|(m, _)| ["command", "cli"].contains(&m.as_str()) && *from != "config")
                .map(move |(m, file)| format!("{from} -> {m} ({file})"))
        })
        .collect();
    assert!(offenders.is_empty(), "{offenders:#?}");
}
