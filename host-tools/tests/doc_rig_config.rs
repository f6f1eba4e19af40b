//! docs/rig-config.md cannot fall behind `heatbound::config::RigFile`:
//! every key of the file (found by serialising a `RigFile` with every
//! `Option` set) is documented, every example on the page validates, and
//! the page's "every key at its default" listing validates to the built-in
//! defaults.
use std::path::PathBuf;

use heatbound::alarm::RuleId;
use heatbound::config::{Losses, RigConfig};
use heatbound_host::rigfile::config_from_text;

fn doc() -> String {
    let path = repo().join("docs/rig-config.md");
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("the workspace")
        .to_path_buf()
}

/// Every dotted key of `value`: `mode`, `uncertainty.hot_k`, …
fn keys(prefix: &str, value: &toml::Value, out: &mut Vec<String>) {
    if let toml::Value::Table(table) = value {
        for (k, v) in table {
            let key = if prefix.is_empty() {
                k.clone()
            } else {
                format!("{prefix}.{k}")
            };
            if v.is_table() {
                keys(&key, v, out);
            } else {
                out.push(key);
            }
        }
    }
}

/// A `RigFile` with every key written: the defaults, with `ambient_k` and
/// `[losses]` (which have no default value) set.
fn every_key() -> Vec<String> {
    let config = RigConfig {
        ambient_k: Some(293.15),
        losses: Some(Losses {
            ua_w_per_k: 0.35,
            u_ua_w_per_k: 0.02,
        }),
        ..RigConfig::default()
    };
    let file = config.to_file();
    let value = toml::Value::try_from(&file).expect("RigFile serialises");
    let mut out = Vec::new();
    keys("", &value, &mut out);
    out
}

#[test]
fn every_key_of_rigfile_is_documented() {
    let doc = doc();
    let all = every_key();
    // 5 top-level, 6 + 6 + 4 in the sections, 5 + 7 × 6 under [alarms],
    // 2 under [losses].
    assert_eq!(all.len(), 70, "{all:?}");
    for key in &all {
        let mut parts = key.split('.');
        let documented = match (parts.next(), parts.next(), parts.next()) {
            // A rule's key is documented once for all rules, and each rule's table by name.
            (Some("alarms"), Some(rule), Some(leaf)) => {
                assert!(
                    RuleId::parse(rule).is_some(),
                    "alarms.{rule}: not a rule id"
                );
                assert!(
                    doc.contains(&format!("`[alarms.{rule}]`")),
                    "docs/rig-config.md does not list `[alarms.{rule}]`"
                );
                format!("`alarms.<rule>.{leaf}`")
            }
            _ => format!("`{key}`"),
        };
        assert!(
            doc.contains(&documented),
            "docs/rig-config.md does not document {documented} (from RigFile's `{key}`)"
        );
    }
    for rule in RuleId::ALL {
        assert!(
            doc.contains(&format!("`[alarms.{}]`", rule.as_str())),
            "docs/rig-config.md lacks the rule {}",
            rule.as_str()
        );
    }
}

/// The ```toml blocks of the page.
fn toml_blocks(doc: &str) -> Vec<String> {
    let mut blocks = Vec::new();
    let mut current: Option<String> = None;
    for line in doc.lines() {
        match (&mut current, line.trim_end()) {
            (None, "```toml") => current = Some(String::new()),
            (Some(_), "```") => blocks.extend(current.take()),
            (Some(text), _) => {
                text.push_str(line);
                text.push('\n');
            }
            (None, _) => {}
        }
    }
    blocks
}

/// `a` and `b` agree: numbers to 1e-6 relative (the page rounds), the
/// rest exactly.
fn agree(path: &str, a: &toml::Value, b: &toml::Value) {
    match (a, b) {
        (toml::Value::Table(x), toml::Value::Table(y)) => {
            let kx: Vec<_> = x.keys().collect();
            let ky: Vec<_> = y.keys().collect();
            assert_eq!(kx, ky, "{path}: keys differ");
            for (k, v) in x {
                agree(&format!("{path}.{k}"), v, &y[k]);
            }
        }
        (toml::Value::Float(x), toml::Value::Float(y)) => {
            let scale = x.abs().max(y.abs()).max(f64::MIN_POSITIVE);
            assert!(
                (x - y).abs() / scale < 1e-6,
                "{path}: {x} on the page, {y} built in"
            );
        }
        _ => assert_eq!(a, b, "{path}"),
    }
}

#[test]
fn the_examples_validate_and_the_defaults_are_the_defaults() {
    let doc = doc();
    let blocks = toml_blocks(&doc);
    assert!(
        blocks.len() >= 2,
        "an example and the defaults: {}",
        blocks.len()
    );
    for (i, block) in blocks.iter().enumerate() {
        config_from_text(block, &format!("docs/rig-config.md, example {}", i + 1))
            .unwrap_or_else(|e| panic!("{}", heatbound_host::term::error_line(&e)));
    }
    let defaults = blocks
        .iter()
        .find(|b| {
            b.contains("[alarms.sensor_fault]")
                && b.contains("latching = false\n")
                && b.contains("stale_s")
        })
        .expect("the listing of every key at its default");
    let listed = config_from_text(defaults, "the defaults listing").unwrap();
    agree(
        "",
        &toml::Value::try_from(listed.to_file()).unwrap(),
        &toml::Value::try_from(RigConfig::default().to_file()).unwrap(),
    );
    // And it writes every key but those without a default value:
    // ambient_k and [losses].
    let written: toml::Value = toml::from_str(defaults).unwrap();
    let mut keys_written = Vec::new();
    keys("", &written, &mut keys_written);
    let mut expected: Vec<String> = every_key()
        .into_iter()
        .filter(|k| k != "ambient_k" && !k.starts_with("losses."))
        .collect();
    expected.sort();
    keys_written.sort();
    assert_eq!(keys_written, expected);
}

#[test]
fn the_example_rig_file_points_to_the_page() {
    let path = repo().join("examples/rig.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.contains("docs/rig-config.md"), "examples/rig.toml");
    config_from_text(&text, "examples/rig.toml").unwrap();
}
