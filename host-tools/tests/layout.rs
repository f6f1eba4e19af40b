//! The host tool's layout rule (DEVELOPERS.md): a `cmd/` module parses its
//! arguments, calls the library's engines and prints. So no `cmd/` file
//! reaches into another, and none grows past about 350 lines.
use std::path::Path;

const MAX_LINES: usize = 350;

#[test]
fn cmd_modules_are_thin_and_independent() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/cmd");
    let mut checked = 0;
    for entry in std::fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_none_or(|e| e != "rs") {
            continue;
        }
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        let text = std::fs::read_to_string(&path).unwrap();
        let lines = text.lines().count();
        assert!(
            lines <= MAX_LINES,
            "cmd/{name}: {lines} lines, more than {MAX_LINES}: move the engine into the library"
        );
        if name == "mod.rs" {
            for line in text.lines().map(str::trim) {
                assert!(
                    line.is_empty()
                        || line.starts_with("//")
                        || line.starts_with("pub mod ")
                        || line.starts_with("mod "),
                    "cmd/mod.rs holds only module declarations: {line:?}"
                );
            }
            continue;
        }
        for (i, line) in text.lines().enumerate() {
            let code = line.split("//").next().unwrap_or("");
            for bad in ["super::", "cmd::", "crate::cmd"] {
                assert!(
                    !code.contains(bad),
                    "cmd/{name}:{}: refers to another command module ({bad}): {line}",
                    i + 1
                );
            }
        }
        checked += 1;
    }
    assert!(
        checked >= 8,
        "only {checked} command modules found in {}",
        dir.display()
    );
}
