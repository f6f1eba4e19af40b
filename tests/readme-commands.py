#!/usr/bin/env python3
"""Runs every shell command in README.md, in order, so none can rot.

Each ```sh block runs with `bash -euo pipefail` from the repository root,
and must succeed. Two kinds of block are not run, and say so:
- a block whose first line is a comment starting `# needs ` (a board on a
  debug probe): only its syntax is checked, with `bash -n`;
- the test command itself (`cargo test --workspace`), which CI runs as its
  own step.

The commands run with a home and an install root of their own (a temporary
folder), so installing the tool, completions and man pages touches nothing
of the user's; the files they write in the repository are removed at the
end. `.ci/run` runs this after the tests:

    python3 tests/readme-commands.py
"""
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SKIP_EXACT = {"cargo test --workspace": "CI runs the tests as a step of their own"}


def blocks(readme):
    """The ```sh blocks of the README, with their line numbers."""
    out = []
    lines = readme.splitlines()
    i = 0
    while i < len(lines):
        if lines[i].strip() == "```sh":
            start = i + 1
            j = start
            while j < len(lines) and lines[j].strip() != "```":
                j += 1
            out.append((start + 1, "\n".join(lines[start:j])))
            i = j
        i += 1
    return out


def untracked():
    """Every file git does not track (ignored ones included), outside target dirs."""
    r = subprocess.run(
        ["git", "ls-files", "--others", "--directory", "--no-empty-directory"],
        cwd=ROOT, capture_output=True, text=True, check=True,
    )
    ignored = subprocess.run(
        ["git", "ls-files", "--others", "--ignored", "--exclude-standard", "--directory"],
        cwd=ROOT, capture_output=True, text=True, check=True,
    )
    return set(r.stdout.split()) | set(ignored.stdout.split())


def main():
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as f:
        found = blocks(f.read())
    if not found:
        sys.exit("README.md has no ```sh block")
    home = tempfile.mkdtemp(prefix="heatbound-readme-")
    env = dict(os.environ)
    # Keep the toolchain where it is, then move home and the install root.
    env.setdefault("RUSTUP_HOME", os.path.join(os.path.expanduser("~"), ".rustup"))
    env.setdefault("CARGO_HOME", os.path.join(os.path.expanduser("~"), ".cargo"))
    env["CARGO_INSTALL_ROOT"] = os.path.join(home, "cargo-root")
    env["CARGO_TARGET_DIR"] = os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target"))
    env["HOME"] = home
    env["XDG_RUNTIME_DIR"] = os.path.join(home, "run")
    os.makedirs(env["XDG_RUNTIME_DIR"], mode=0o700)
    env["PATH"] = os.path.join(home, "cargo-root", "bin") + os.pathsep + env["PATH"]
    before = untracked()
    failed = []
    try:
        for n, (line, text) in enumerate(found, 1):
            first = text.strip().splitlines()[0] if text.strip() else ""
            label = f"[{n}/{len(found)}] README.md:{line}: {first}"
            if text.strip() in SKIP_EXACT:
                print(f"{label}\n    not run: {SKIP_EXACT[text.strip()]}", flush=True)
                continue
            if first.startswith("# needs "):
                r = subprocess.run(["bash", "-n", "-c", text], cwd=ROOT, env=env)
                print(f"{label}\n    syntax checked only ({first[2:]}): "
                      f"{'ok' if r.returncode == 0 else 'FAILED'}", flush=True)
                if r.returncode != 0:
                    failed.append(label)
                continue
            print(label, flush=True)
            t0 = time.monotonic()
            r = subprocess.run(
                ["bash", "-euo", "pipefail", "-c", text],
                cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                text=True, timeout=1200,
            )
            took = time.monotonic() - t0
            if r.returncode != 0:
                print(r.stdout[-4000:])
                print(f"    FAILED with exit {r.returncode} after {took:.0f} s", flush=True)
                failed.append(label)
            else:
                print(f"    ok in {took:.0f} s", flush=True)
    finally:
        # Remove what the commands wrote in the repository, and their home.
        for path in sorted(untracked() - before):
            if path.startswith(("target", "fuzz/target")) or "/target" in path:
                continue
            full = os.path.join(ROOT, path)
            if os.path.isdir(full):
                shutil.rmtree(full, ignore_errors=True)
            elif os.path.exists(full):
                os.remove(full)
        shutil.rmtree(home, ignore_errors=True)
    if failed:
        sys.exit("README commands that failed:\n" + "\n".join(failed))
    print(f"all {len(found)} README blocks pass", flush=True)


if __name__ == "__main__":
    main()
