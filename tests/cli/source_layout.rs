//! The repository keeps its own conventions: every Rust source file starts with a `//!` line
//! saying what it is for, every page script with a `//` line, and the codemap in DEVELOPERS.md
//! names every source file (by its path, or by a folder that holds it).

use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Files under `dir` (recursively) whose name ends with `suffix`, relative to `dir`.
fn files(dir: &Path, suffix: &str) -> Vec<PathBuf> {
    let mut found = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(current) = stack.pop() {
        for entry in std::fs::read_dir(&current).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                // Generated wasm glue lives in www/pkg and is not ours.
                if path.file_name().is_some_and(|name| name != "pkg") {
                    stack.push(path);
                }
            } else if path.to_string_lossy().ends_with(suffix) {
                found.push(path.strip_prefix(dir).unwrap().to_path_buf());
            }
        }
    }
    found.sort();
    found
}

/// The Rust source roots: (folder, codemap section heading naming it).
const RUST_ROOTS: [&str; 4] = [
    "crates/eccaudit-core/src",
    "crates/eccaudit-plot/src",
    "crates/eccaudit-web/src",
    "src",
];

#[test]
fn every_source_file_says_what_it_is_for() {
    let mut missing = Vec::new();
    let mut count = 0;
    for source_root in RUST_ROOTS.iter().chain(&["tests", "examples"]) {
        let dir = root().join(source_root);
        for file in files(&dir, ".rs") {
            count += 1;
            let text = std::fs::read_to_string(dir.join(&file)).unwrap();
            if !text.starts_with("//!") {
                missing.push(format!("{source_root}/{}", file.display()));
            }
        }
    }
    for file in files(&root().join("www"), ".js") {
        count += 1;
        let text = std::fs::read_to_string(root().join("www").join(&file)).unwrap();
        if !text.starts_with("// ") {
            missing.push(format!("www/{}", file.display()));
        }
    }
    assert!(count > 100, "only {count} source files found: wrong root?");
    assert!(
        missing.is_empty(),
        "files without a first line saying what they are for: {missing:?}"
    );
}

/// The codemap's text about one source root: its own `###` section for a crate
/// (`### \`crates/eccaudit-core/src/\``), where files are named from the crate's `src/`; the
/// whole codemap for `src/` and `www/`, where files are named by their path from the repository.
fn codemap_section<'a>(codemap: &'a str, source_root: &str) -> (&'a str, String) {
    for section in codemap.split("\n### ").skip(1) {
        let heading = section.lines().next().unwrap_or("");
        if heading.contains(&format!("`{source_root}/`")) {
            return (section, String::new());
        }
    }
    (codemap, format!("{source_root}/"))
}

/// True when `text` quotes (in backticks) `prefix + file`, or a folder holding it
/// (`lsq/`, `src/commands/`).
fn names(text: &str, prefix: &str, file: &Path) -> bool {
    let relative = file.to_string_lossy().replace('\\', "/");
    if text.contains(&format!("`{prefix}{relative}`")) {
        return true;
    }
    let mut folder = file.parent();
    while let Some(dir) = folder.filter(|dir| !dir.as_os_str().is_empty()) {
        let dir_text = dir.to_string_lossy().replace('\\', "/");
        if text.contains(&format!("`{prefix}{dir_text}/`")) {
            return true;
        }
        folder = dir.parent();
    }
    false
}

#[test]
fn the_codemap_names_every_source_file() {
    let developers = std::fs::read_to_string(root().join("DEVELOPERS.md")).unwrap();
    let codemap = developers
        .split("\n## Codemap")
        .nth(1)
        .expect("DEVELOPERS.md has a `## Codemap` section")
        .split("\n## ")
        .next()
        .unwrap();
    let mut missing = Vec::new();
    for source_root in RUST_ROOTS {
        let (text, prefix) = codemap_section(codemap, source_root);
        for file in files(&root().join(source_root), ".rs") {
            if !names(text, &prefix, &file) {
                missing.push(format!("{source_root}/{}", file.display()));
            }
        }
    }
    for file in files(&root().join("www"), ".js") {
        if !names(codemap, "www/", &file) {
            missing.push(format!("www/{}", file.display()));
        }
    }
    assert!(
        missing.is_empty(),
        "source files the codemap in DEVELOPERS.md does not name: {missing:?}"
    );
}
