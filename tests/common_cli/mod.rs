//! Helpers shared by the binary-level tests: fresh directories, spawning the binary, waiting
//! for a file, sending signals, and comparing every variable of two files.

#![allow(dead_code)]

use icefold::output::NcReader;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

pub const BIN: &str = env!("CARGO_BIN_EXE_icefold");

/// A fresh directory for one test.
pub fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("icefold-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The names of the files in `dir`, sorted.
pub fn files_in(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// A config of the repository.
pub fn config(name: &str) -> String {
    format!("{}/configs/{name}", env!("CARGO_MANIFEST_DIR"))
}

/// Run to completion in `dir`.
pub fn icefold(dir: &Path, args: &[&str]) -> Output {
    Command::new(BIN).args(args).current_dir(dir).output().unwrap()
}

/// Start in the background in `dir`.
pub fn spawn(dir: &Path, args: &[&str]) -> Child {
    Command::new(BIN)
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Assert success.
pub fn ok(out: &Output) {
    assert!(
        out.status.success(),
        "exit {:?}: {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Wait (at most 60 s) until `pred` holds.
pub fn wait_for(what: &str, mut pred: impl FnMut() -> bool) {
    let start = Instant::now();
    while !pred() {
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "timed out waiting for {what}"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
}

/// Whether `dir` holds a temporary output file (`.<name>.partial-*`).
pub fn temp_file_exists(dir: &Path, name: &str) -> bool {
    std::fs::read_dir(dir).unwrap().any(|e| {
        e.unwrap()
            .file_name()
            .to_string_lossy()
            .starts_with(&format!(".{name}.partial-"))
    })
}

/// Send `sig` to the child.
pub fn signal(child: &Child, sig: i32) {
    // SAFETY: plain kill(2) on our own child's pid.
    let r = unsafe { libc::kill(child.id() as libc::pid_t, sig) };
    assert_eq!(r, 0, "kill failed");
}

/// Wait for the child (at most 120 s; killed and failed after that).
pub fn finish(mut child: Child) -> Output {
    let start = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            return child.wait_with_output().unwrap();
        }
        if start.elapsed() > Duration::from_secs(120) {
            let _ = child.kill();
            panic!("child did not stop within 120 s of the signal");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
}

/// Every variable's values of a file (f64; integer variables read as f64), by name.
pub fn all_values(path: &Path) -> Vec<(String, Vec<u64>)> {
    let r = NcReader::open(path).unwrap();
    let mut out = Vec::new();
    for name in r.var_names().unwrap() {
        let v = r.read_f64(&name).unwrap_or_else(|e| panic!("{name}: {e}"));
        // Bit patterns: identical means identical, NaN included.
        out.push((name, v.iter().map(|x| x.to_bits()).collect()));
    }
    for g in r.group_names().unwrap() {
        let gr = r.group(&g).unwrap();
        for name in gr.var_names().unwrap() {
            let v = gr.read_f64(&name).unwrap();
            out.push((format!("{g}/{name}"), v.iter().map(|x| x.to_bits()).collect()));
        }
    }
    out
}

/// Assert that two files hold the same variables with identical values.
pub fn same_values(a: &Path, b: &Path) {
    let (va, vb) = (all_values(a), all_values(b));
    let names = |v: &[(String, Vec<u64>)]| v.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(&va), names(&vb), "variable lists differ");
    assert!(!va.is_empty());
    for ((n, x), (_, y)) in va.iter().zip(&vb) {
        assert_eq!(x.len(), y.len(), "{n}: lengths differ");
        if let Some(k) = x.iter().zip(y).position(|(p, q)| p != q) {
            panic!(
                "{n}[{k}] differs: {} vs {}",
                f64::from_bits(x[k]),
                f64::from_bits(y[k])
            );
        }
    }
}

/// A global integer attribute.
pub fn attr_i64(path: &Path, name: &str) -> Option<i64> {
    NcReader::open(path).unwrap().attr_i64(name).unwrap()
}
