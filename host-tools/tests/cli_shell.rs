//! `heatbound completions SHELL` and `heatbound man`: the completion scripts
//! and the man pages cover every command, the pages are roff that `man`
//! renders (where `man` is installed), and bad input is a usage error.
use std::collections::BTreeSet;
use std::io::Write as _;
use std::process::Stdio;

use assert_cmd::Command;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// Every command `heatbound --help` lists, besides `help`.
fn commands() -> BTreeSet<String> {
    let out = heatbound().arg("--help").output().expect("run heatbound");
    assert!(out.status.success());
    let help = String::from_utf8(out.stdout).expect("UTF-8 help");
    let listed: BTreeSet<String> = help
        .lines()
        .skip_while(|l| !l.starts_with("Commands:"))
        .skip(1)
        .take_while(|l| l.starts_with("  "))
        .filter_map(|l| l.split_whitespace().next())
        .filter(|name| *name != "help")
        .map(str::to_owned)
        .collect();
    // The ones the README and the operator's workflow name, at least.
    for name in [
        "cycle",
        "convert",
        "analyze",
        "watch",
        "simulate",
        "audit",
        "chart",
        "demo",
        "ack",
        "configure",
        "new-run",
        "completions",
        "man",
    ] {
        assert!(
            listed.contains(name),
            "`{name}` missing from --help: {listed:?}"
        );
    }
    listed
}

fn completions(shell: &str) -> String {
    let out = heatbound()
        .args(["completions", shell])
        .output()
        .expect("run heatbound");
    assert!(
        out.status.success(),
        "{shell}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.stderr.is_empty(), "{shell}: stderr is for errors only");
    String::from_utf8(out.stdout).expect("a UTF-8 script")
}

#[test]
fn bash_completion_knows_every_command_and_their_options() {
    let script = completions("bash");
    for name in commands() {
        assert!(script.contains(&name), "bash completion lacks `{name}`");
    }
    // Options of several commands, and a value list.
    for option in [
        "--db",
        "--input",
        "--max-summaries",
        "--key-file",
        "--json",
        "--out",
    ] {
        assert!(script.contains(option), "bash completion lacks `{option}`");
    }
    assert!(
        script.contains("complete -F"),
        "not a bash completion script"
    );
    assert!(script.contains("heatbound__new__run") || script.contains("new-run"));
}

#[test]
fn every_shell_gets_a_script() {
    let names = commands();
    for (shell, marker) in [
        ("zsh", "#compdef heatbound"),
        ("fish", "complete -c heatbound"),
        ("elvish", "edit:completion:arg-completer[heatbound]"),
        ("powershell", "Register-ArgumentCompleter"),
    ] {
        let script = completions(shell);
        assert!(script.contains(marker), "{shell}: no `{marker}`");
        for name in &names {
            assert!(
                script.contains(name.as_str()),
                "{shell} completion lacks `{name}`"
            );
        }
    }
}

#[test]
fn bash_accepts_the_script() {
    // Only where bash is installed: the script must at least parse.
    if std::process::Command::new("bash")
        .arg("--version")
        .output()
        .is_err()
    {
        return;
    }
    let script = completions("bash");
    let status = std::process::Command::new("bash")
        .args(["-n", "-c", &script])
        .status()
        .expect("run bash");
    assert!(status.success(), "bash -n rejects the completion script");
}

#[test]
fn an_unknown_shell_is_a_usage_error() {
    let out = heatbound()
        .args(["completions", "tcsh"])
        .output()
        .expect("run heatbound");
    assert_eq!(out.status.code(), Some(2));
    assert!(out.stdout.is_empty());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.starts_with("heatbound: error: "), "{err}");
    assert!(err.contains("bash") && err.contains("zsh"), "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
}

/// The text of a roff page, with its escaped hyphens plain.
fn plain(roff: &str) -> String {
    roff.replace("\\-", "-")
}

#[test]
fn the_man_page_is_roff_and_names_every_command() {
    let out = heatbound().arg("man").output().expect("run heatbound");
    assert!(out.status.success());
    let page = String::from_utf8(out.stdout).expect("UTF-8 roff");
    assert!(page.contains(".TH heatbound 1"), "no .TH line:\n{page}");
    assert!(page.contains(".SH NAME") && page.contains(".SH SYNOPSIS"));
    let text = plain(&page);
    for name in commands() {
        assert!(
            text.contains(&format!("heatbound-{name}(1)")),
            "the page does not point to heatbound-{name}(1)"
        );
    }
    assert!(
        text.contains("not a safety-rated"),
        "the safety note belongs in the page"
    );
}

#[test]
fn man_renders_the_page() {
    // Only where man is installed (it is not required).
    if std::process::Command::new("man")
        .arg("--version")
        .output()
        .is_err()
    {
        return;
    }
    let page = heatbound()
        .arg("man")
        .output()
        .expect("run heatbound")
        .stdout;
    let mut man = std::process::Command::new("man")
        .args(["-l", "-"])
        .env("MANPAGER", "cat")
        .env("PAGER", "cat")
        .env("MANWIDTH", "100")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run man");
    man.stdin
        .take()
        .expect("man's stdin")
        .write_all(&page)
        .expect("feed man");
    let out = man.wait_with_output().expect("man's output");
    assert!(
        out.status.success(),
        "man -l - failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    // Rendered, not raw: the headings without their macros.
    assert!(text.contains("NAME") && text.contains("SYNOPSIS"), "{text}");
    assert!(!text.contains(".TH") && !text.contains(".SH"), "{text}");
    assert!(
        text.contains("new-run") || text.contains("new‐run"),
        "{text}"
    );
}

#[test]
fn man_out_writes_a_page_per_command() {
    let dir = tempfile::tempdir().expect("a temporary folder");
    let out_dir = dir.path().join("man1");
    let out = heatbound()
        .arg("man")
        .arg("--out")
        .arg(&out_dir)
        .output()
        .expect("run heatbound");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let listed = String::from_utf8(out.stdout).expect("UTF-8");
    let mut expected: Vec<String> = commands()
        .into_iter()
        .map(|name| format!("heatbound-{name}.1"))
        .collect();
    expected.push("heatbound.1".into());
    for file in &expected {
        let path = out_dir.join(file);
        let page =
            std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        assert!(
            page.starts_with(".ie") || page.contains(".TH "),
            "{file}: not roff"
        );
        assert!(
            listed.contains(file.as_str()),
            "{file} not listed:\n{listed}"
        );
    }
    let watch = plain(&std::fs::read_to_string(out_dir.join("heatbound-watch.1")).unwrap());
    assert!(
        watch.contains("--input") && watch.contains("--db"),
        "{watch}"
    );
}

#[test]
fn completions_and_man_print_nothing_else() {
    // A closed pipe ends them quietly; here, simply: no stderr, exit 0.
    for args in [&["completions", "fish"][..], &["man"][..]] {
        let out = heatbound().args(args).output().expect("run heatbound");
        assert!(out.status.success());
        assert!(
            out.stderr.is_empty(),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
}
