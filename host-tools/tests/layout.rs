//! The host tool's layout rule (DEVELOPERS.md, host layout): the engines are
//! library modules of `heatbound_host`; a `cmd/` module only parses its
//! arguments, calls engines and prints. So no `cmd/` file imports another
//! `cmd/` module, and none grows past [`MAX_LINES`].
//!
//! The limit and the rule are this project's own convention (common practice:
//! thin command layers over a library), not an outside standard.

use std::path::Path;

/// The most lines a `cmd/` file may have (project convention).
const MAX_LINES: usize = 350;

/// Every `cmd/*.rs` file except `mod.rs`, with its text.
fn cmd_files() -> Vec<(String, String)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("src")
        .join("cmd");
    let mut files: Vec<(String, String)> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: cannot list: {e}", dir.display()))
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "rs"))
        .filter(|p| p.file_name().is_some_and(|n| n != "mod.rs"))
        .map(|p| {
            let text = std::fs::read_to_string(&p)
                .unwrap_or_else(|e| panic!("{}: cannot read: {e}", p.display()));
            (p.display().to_string(), text)
        })
        .collect();
    files.sort();
    files
}

#[test]
fn cmd_files_exist() {
    // If the directory moved, the other checks would pass on nothing.
    let files = cmd_files();
    assert!(
        files.iter().any(|(p, _)| p.ends_with("watch.rs")),
        "no cmd/watch.rs found among {files:?}"
    );
}

#[test]
fn no_cmd_file_exceeds_the_line_limit() {
    let long: Vec<String> = cmd_files()
        .iter()
        .map(|(p, t)| (p, t.lines().count()))
        .filter(|(_, n)| *n > MAX_LINES)
        .map(|(p, n)| format!("{p}: {n} lines"))
        .collect();
    assert!(
        long.is_empty(),
        "cmd files over {MAX_LINES} lines (move the logic into a library module): {long:?}"
    );
}

#[test]
fn no_cmd_file_references_another_cmd_module() {
    let mut found = Vec::new();
    for (path, text) in cmd_files() {
        for (i, line) in text.lines().enumerate() {
            let code = line.trim_start();
            if code.starts_with("//") {
                continue;
            }
            if code.contains("super::") || code.contains("cmd::") {
                found.push(format!("{path}:{}: {}", i + 1, code));
            }
        }
    }
    assert!(
        found.is_empty(),
        "cmd modules must not use each other (call a library module instead): {found:?}"
    );
}
