//! The core's files reference each other one way only.
//!
//! Reads every `.rs` file under `core/src`, builds the file-level graph of
//! path references and fails, printing the cycle, if there is one. Counted:
//! `mod x;` (an edge from the parent's file to the child's), every
//! `crate::a::b` path (in `use` lines, code and intra-doc links alike, `use`
//! groups `crate::{a::X, b::Y}` expanded), `super::` (to the sibling's file,
//! or the parent's file when the path names an item there) and `self::`,
//! inside `#[cfg(test)]` modules too. Nothing may point back at `lib.rs`, or
//! at a `mod.rs` from a file below it. A reference from a file to itself is
//! not an edge. Detecting a cycle by depth-first search is common practice.
use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::{Path, PathBuf};

type Module = Vec<String>;

fn core_src() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../core/src")
}

fn rs_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<_> = fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.expect("directory entry").path())
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            rs_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The module a file defines: `lib.rs` is the root, `a/mod.rs` and `a.rs`
/// are `a`, `a/b.rs` is `a::b`.
fn module_of(rel: &Path) -> Module {
    let mut parts: Vec<String> = rel
        .iter()
        .map(|c| c.to_string_lossy().into_owned())
        .collect();
    let last = parts.pop().expect("a file name");
    match last.as_str() {
        "lib.rs" | "mod.rs" => {}
        name => parts.push(name.trim_end_matches(".rs").to_owned()),
    }
    parts
}

fn is_ident(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

/// Parses a path or `use` tree at the start of `s` (after `crate::`,
/// `super::` or `self::`) into every full path it names.
fn use_tree(s: &str) -> (Vec<Vec<String>>, usize) {
    let mut segs = Vec::new();
    let mut i = 0;
    let b = s.as_bytes();
    loop {
        if b.get(i) == Some(&b'{') {
            i += 1;
            let mut out = Vec::new();
            loop {
                while b
                    .get(i)
                    .is_some_and(|c| c.is_ascii_whitespace() || *c == b',')
                {
                    i += 1;
                }
                if i >= s.len() || b[i] == b'}' {
                    i += 1;
                    break;
                }
                let (paths, used) = use_tree(&s[i..]);
                i += used.max(1);
                for p in paths {
                    let mut full = segs.clone();
                    full.extend(p);
                    out.push(full);
                }
            }
            return (out, i);
        }
        let start = i;
        while i < s.len() && is_ident(s[i..].chars().next().unwrap_or(' ')) {
            i += s[i..].chars().next().map_or(1, char::len_utf8);
        }
        if i > start {
            segs.push(s[start..i].to_owned());
        }
        if s[i..].starts_with("::") {
            i += 2;
            continue;
        }
        break;
    }
    (vec![segs], i)
}

/// Drops string literals' contents so that braces in them are not counted.
fn strip_strings(line: &str) -> String {
    let mut out = String::new();
    let mut in_str = false;
    let mut prev = ' ';
    for c in line.chars() {
        if c == '"' && prev != '\\' {
            in_str = !in_str;
            out.push(c);
        } else if !in_str {
            out.push(c);
        }
        prev = if prev == '\\' && c == '\\' { ' ' } else { c };
    }
    out
}

struct Graph {
    files: BTreeMap<Module, String>,
    edges: BTreeMap<String, BTreeSet<(String, String)>>,
}

impl Graph {
    /// The file that holds `path`: the longest prefix that is a file module.
    fn file_of(&self, path: &[String]) -> Option<&String> {
        (0..=path.len())
            .rev()
            .find_map(|n| self.files.get(&path[..n]))
    }
}

fn build() -> Graph {
    let root = core_src();
    let mut paths = Vec::new();
    rs_files(&root, &mut paths);
    assert!(paths.len() > 5, "premise: found the core's files");
    let mut files = BTreeMap::new();
    let mut texts = Vec::new();
    for p in &paths {
        let rel = p.strip_prefix(&root).expect("under core/src");
        let name = rel.to_string_lossy().into_owned();
        files.insert(module_of(rel), name.clone());
        texts.push((
            module_of(rel),
            name,
            fs::read_to_string(p).expect("readable"),
        ));
    }
    let mut g = Graph {
        files,
        edges: BTreeMap::new(),
    };
    for (module, name, text) in &texts {
        let mut edges = BTreeSet::new();
        // Inline modules open at brace depth d: (name, d).
        let mut inline: Vec<(String, usize)> = Vec::new();
        let mut depth = 0usize;
        for (n, line) in text.lines().enumerate() {
            let at = format!("{name}:{}", n + 1);
            let trimmed = line.trim_start();
            let code = !trimmed.starts_with("//");
            let mut here = module.clone();
            here.extend(inline.iter().map(|(m, _)| m.clone()));
            if code {
                let t = strip_strings(trimmed);
                let decl = t
                    .trim_start_matches("pub ")
                    .trim_start_matches("pub(crate) ");
                if let Some(rest) = decl.strip_prefix("mod ") {
                    let child: String = rest.chars().take_while(|c| is_ident(*c)).collect();
                    if rest[child.len()..].trim_start().starts_with(';') {
                        let mut m = here.clone();
                        m.push(child);
                        if let Some(f) = g.file_of(&m).filter(|f| *f != name) {
                            edges.insert((f.clone(), format!("{at}: mod")));
                        }
                    } else if rest[child.len()..].contains('{') {
                        inline.push((child, depth));
                    }
                }
            }
            // Path references anywhere on the line, comments and doc links
            // included.
            for (prefix, base) in [("crate::", 0), ("super::", 1), ("self::", 2)] {
                let mut from = 0;
                while let Some(k) = line[from..].find(prefix) {
                    let pos = from + k;
                    from = pos + prefix.len();
                    if line[..pos].chars().next_back().is_some_and(is_ident) {
                        continue;
                    }
                    let mut start = match base {
                        0 => Vec::new(),
                        1 => here[..here.len().saturating_sub(1)].to_vec(),
                        _ => here.clone(),
                    };
                    // super::super::…
                    let mut rest = &line[from..];
                    while base == 1 && rest.starts_with("super::") {
                        start.pop();
                        rest = &rest["super::".len()..];
                    }
                    let (targets, _) = use_tree(rest);
                    for t in targets {
                        let mut full = start.clone();
                        full.extend(t.into_iter().filter(|s| s != "self"));
                        if let Some(f) = g.file_of(&full).filter(|f| *f != name) {
                            edges.insert((f.clone(), format!("{at}: {}", line.trim())));
                        }
                    }
                }
            }
            if code {
                for c in strip_strings(trimmed).chars() {
                    match c {
                        '{' => depth += 1,
                        '}' => {
                            depth = depth.saturating_sub(1);
                            if inline.last().is_some_and(|(_, d)| *d == depth) {
                                inline.pop();
                            }
                        }
                        _ => {}
                    }
                }
            }
        }
        g.edges.insert(name.clone(), edges);
    }
    g
}

/// A cycle in the graph, as the files and the reference that closes each step.
fn find_cycle(g: &Graph) -> Option<Vec<String>> {
    fn visit(
        g: &Graph,
        f: &str,
        stack: &mut Vec<(String, String)>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(i) = stack.iter().position(|(s, _)| s == f) {
            return Some(
                stack[i..]
                    .iter()
                    .map(|(file, why)| format!("{file}  --[{why}]-->"))
                    .chain([f.to_owned()])
                    .collect(),
            );
        }
        if done.contains(f) {
            return None;
        }
        for (to, why) in g.edges.get(f).into_iter().flatten() {
            stack.push((f.to_owned(), why.clone()));
            if let Some(c) = visit(g, to, stack, done) {
                return Some(c);
            }
            stack.pop();
        }
        done.insert(f.to_owned());
        None
    }
    let mut done = BTreeSet::new();
    g.edges
        .keys()
        .find_map(|f| visit(g, f, &mut Vec::new(), &mut done))
}

#[test]
fn the_graph_sees_the_references_it_must() {
    // Premises, so that the checks below cannot pass on an empty graph.
    let g = build();
    let edges =
        |f: &str| -> BTreeSet<String> { g.edges[f].iter().map(|(to, _)| to.clone()).collect() };
    assert!(edges("lib.rs").contains("units.rs"), "mod units;");
    assert!(edges("lib.rs").contains("gas/mod.rs"), "mod gas;");
    assert!(
        edges("gas/mod.rs").contains("units.rs"),
        "use crate::units::MOLAR_GAS_CONSTANT"
    );
    assert!(edges("units.rs").is_empty(), "units is a leaf");
    let (paths, _) = use_tree("{a::X, b::{c::Y, Z}}, rest");
    assert_eq!(paths, [vec!["a", "X"], vec!["b", "c", "Y"], vec!["b", "Z"]]);
}

#[test]
fn nothing_points_back_at_lib_rs_or_a_mod_rs_from_below() {
    let g = build();
    let mut bad = Vec::new();
    for (from, edges) in &g.edges {
        for (to, why) in edges {
            let below = to
                .strip_suffix("mod.rs")
                .is_some_and(|dir| from.starts_with(dir));
            if to == "lib.rs" || below {
                bad.push(format!("{from} -> {to}: {why}"));
            }
        }
    }
    assert!(bad.is_empty(), "references back up:\n{}", bad.join("\n"));
}

#[test]
fn the_core_has_no_reference_cycle() {
    let g = build();
    if let Some(c) = find_cycle(&g) {
        panic!("reference cycle:\n{}", c.join("\n"));
    }
}
