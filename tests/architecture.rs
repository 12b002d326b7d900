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
