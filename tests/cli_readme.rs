//! README.md's (and configs/slurm/README.md's) shell examples run as written: every ```sh (or
//! bash, shell) block, in order, in one fresh directory holding a copy of configs/, with the
//! built `icefold` first on PATH, must exit 0. A block is left out only when the line before it
//! says why: `<!-- readme-test: skip (REASON) -->` (set-up commands, a job that must be
//! interrupted, a cluster).

mod common_cli;

use common_cli::{tempdir, BIN};
use std::path::Path;
use std::process::Command;

/// A fenced shell block of the README: its first line number, text, and skip reason if any.
struct Block {
    line: usize,
    text: String,
    skip: Option<String>,
}

fn shell_blocks(readme: &str) -> Vec<Block> {
    let mut blocks = Vec::new();
    let mut lines = readme.lines().enumerate().peekable();
    let mut previous = "";
    while let Some((i, line)) = lines.next() {
        let fence = line.trim_start();
        if let Some(lang) = fence.strip_prefix("```") {
            let runs = matches!(lang.trim(), "sh" | "bash" | "shell");
            let mut text = String::new();
            for (_, l) in lines.by_ref() {
                if l.trim_start().starts_with("```") {
                    break;
                }
                text.push_str(l);
                text.push('\n');
            }
            if runs {
                let skip = previous
                    .trim()
                    .strip_prefix("<!-- readme-test: skip")
                    .map(|r| r.trim_end_matches("-->").trim().to_string());
                blocks.push(Block {
                    line: i + 1,
                    text,
                    skip,
                });
            }
            previous = "";
            continue;
        }
        if !line.trim().is_empty() {
            previous = line;
        }
    }
    blocks
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let target = to.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            copy_dir(&e.path(), &target);
        } else {
            std::fs::copy(e.path(), target).unwrap();
        }
    }
}

#[test]
fn readme_shell_examples_run_as_written() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = tempdir("readme");
    copy_dir(&root.join("configs"), &dir.join("configs"));
    let bin_dir = Path::new(BIN).parent().unwrap();
    let path = format!(
        "{}:{}",
        bin_dir.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    let mut ran = 0;
    for readme in ["README.md", "configs/slurm/README.md"] {
        let text = std::fs::read_to_string(root.join(readme)).unwrap();
        for b in shell_blocks(&text) {
            if let Some(reason) = &b.skip {
                assert!(
                    reason.starts_with('(') && reason.len() > 3,
                    "{readme} line {}: a skipped block says why: `<!-- readme-test: skip (REASON) -->`",
                    b.line
                );
                continue;
            }
            let out = Command::new("bash")
                .args(["-euo", "pipefail", "-c", &b.text])
                .current_dir(&dir)
                .env("PATH", &path)
                .output()
                .unwrap();
            assert!(
                out.status.success(),
                "{readme}: the block at line {} failed (exit {:?}):\n{}\nstderr:\n{}",
                b.line,
                out.status.code(),
                b.text,
                String::from_utf8_lossy(&out.stderr)
            );
            ran += 1;
        }
    }
    assert!(ran >= 1, "no README shell block ran");
}

#[test]
fn the_block_reader_finds_fences_and_skip_marks() {
    let text = "intro\n<!-- readme-test: skip (set-up) -->\n```sh\nmake demo\n```\n\n```python\nx = 1\n```\n\n```bash\nicefold --help\nicefold check a.toml\n```\n";
    let b = shell_blocks(text);
    assert_eq!(b.len(), 2);
    assert_eq!(b[0].skip.as_deref(), Some("(set-up)"));
    assert_eq!(b[1].skip, None);
    assert_eq!(b[1].text, "icefold --help\nicefold check a.toml\n");
    assert_eq!(b[1].line, 11);
}

#[test]
fn make_demo_writes_only_where_git_ignores() {
    // Before, `make demo` wrote into the tracked outputs-demo/, so a fresh clone was dirty
    // after its first command (kessra-run.nc differs by its creation time).
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let makefile = std::fs::read_to_string(root.join("Makefile")).unwrap();
    let recipe: Vec<&str> = makefile
        .lines()
        .skip_while(|l| !l.starts_with("demo:"))
        .skip(1)
        .take_while(|l| l.starts_with('\t'))
        .collect();
    let line = recipe
        .iter()
        .find(|l| l.contains(" demo"))
        .expect("the demo recipe runs `icefold demo`");
    let dir = line
        .split("--out-dir")
        .nth(1)
        .and_then(|r| r.split_whitespace().next())
        .unwrap_or("icefold-demo"); // the command's default
    for name in ["kessra-run.nc", "kessra-run-map.png", "demo-kessra.toml"] {
        let path = format!("{dir}/{name}");
        let ignored = Command::new("git")
            .args(["check-ignore", "-q", &path])
            .current_dir(root)
            .status();
        match ignored {
            Ok(s) if s.code() == Some(128) => return, // not a git checkout (e.g. a source archive)
            Ok(s) => assert!(
                s.success(),
                "`make demo` writes {path}, which git does not ignore"
            ),
            Err(_) => return, // no git here
        }
    }
}
