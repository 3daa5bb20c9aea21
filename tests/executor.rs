//! The job executor's loop, the same for every long job: checkpoints counted once each (fault
//! injection after the N-th checkpoint stops every job at the same place), a checkpoint that
//! cannot be written is the same typed error everywhere (exit 1, no output file), and a job
//! computed in memory honours the stop flag with an error instead of a silent partial result.

mod common_cli;

use common_cli::*;
use icefold::interrupt::FAULT_ENV;
use icefold::jobs::{Checkpointing, Progress};
use std::process::Command;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;

/// The in-process tests of this file take turns: the stop flag is process-wide.
static IN_PROCESS: Mutex<()> = Mutex::new(());

#[test]
fn regimes_checkpoints_are_counted_once_each() {
    // 12 rows, a checkpoint every 3, SIGINT after the second checkpoint: 6 rows kept. Before,
    // the regimes job counted each checkpoint twice and stopped after the first (3 rows).
    let dir = tempdir("exec-regimes-count");
    let cfg = config("regimes-classic.toml");
    let out = Command::new(BIN)
        .args([
            "regimes",
            &cfg,
            "-o",
            "map.nc",
            "--set",
            "regimes.rows=12",
            "--threads",
            "2",
            "--checkpoint-every-rows",
            "3",
        ])
        .current_dir(&dir)
        .env(FAULT_ENV, "2")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{err}");
    assert_eq!(attr_i64(&dir.join("map.nc"), "rows_done"), Some(6), "{err}");
    assert!(err.contains("stopped after 6 of 12 rows"), "{err}");
}

/// Run `args` with `<out>.restart` made a directory, so no checkpoint can be written there.
fn checkpoint_blocked(tag: &str, args: &[&str], out: &str) {
    let dir = tempdir(&format!("exec-blocked-{tag}"));
    std::fs::create_dir(dir.join(format!("{out}.restart"))).unwrap();
    let run = icefold(&dir, args);
    let err = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(1), "{tag}: {err}");
    assert!(
        err.contains(&format!("restart file {out}.restart")),
        "{tag}: {err}"
    );
    assert!(
        !dir.join(out).exists(),
        "{tag}: output written after a failed checkpoint"
    );
}

#[test]
fn a_checkpoint_that_cannot_be_written_is_exit_1_for_every_job() {
    // Before, ensemble and regimes called it bad input (exit 2); run, sweep and branches exit 1.
    let ens = config("ensemble-lhs.toml");
    checkpoint_blocked(
        "ensemble",
        &[
            "ensemble",
            &ens,
            "-o",
            "e.nc",
            "--set",
            "ensemble.members=4",
            "--checkpoint-every-members",
            "2",
        ],
        "e.nc",
    );
    let reg = config("regimes-classic.toml");
    checkpoint_blocked(
        "regimes",
        &[
            "regimes",
            &reg,
            "-o",
            "m.nc",
            "--set",
            "regimes.rows=4",
            "--checkpoint-every-rows",
            "2",
        ],
        "m.nc",
    );
    let run = config("classic-step-albedo.toml");
    checkpoint_blocked(
        "run",
        &[
            "run",
            &run,
            "-o",
            "r.nc",
            "--set",
            "time.years=20",
            "--checkpoint-every",
            "5",
        ],
        "r.nc",
    );
}

#[test]
fn a_job_in_memory_stopped_by_a_signal_says_so() {
    let _turn = IN_PROCESS.lock().unwrap_or_else(|e| e.into_inner());
    let cfg = icefold::config::load(std::path::Path::new(&config("sweep-solar.toml")), &[]).unwrap();
    icefold::interrupt::StopFlag.request(libc::SIGTERM);
    let e = icefold::jobs::sweep::run_sweep(&cfg).unwrap_err();
    icefold::interrupt::StopFlag.clear();
    assert_eq!(e.exit_code(), 128 + libc::SIGTERM, "{e}");
    let text = e.to_string();
    assert!(
        text.contains("stopped after sweep step 1 of") && text.contains("no file written"),
        "{text}"
    );
}

/// A progress report that counts what it is told.
#[derive(Default)]
struct Counted {
    started: Mutex<Vec<(u64, String)>>,
    last: AtomicU64,
    added: AtomicU64,
    finished: AtomicU64,
}

impl Progress for Counted {
    fn start(&self, total: u64, unit: &str) {
        self.started.lock().unwrap().push((total, unit.to_string()));
    }
    fn set(&self, done: u64) {
        self.last.store(done, Ordering::SeqCst);
    }
    fn add(&self, n: u64) {
        self.added.fetch_add(n, Ordering::SeqCst);
    }
    fn finish(&self) {
        self.finished.fetch_add(1, Ordering::SeqCst);
    }
}

#[test]
fn jobs_report_progress_through_the_trait() {
    let _turn = IN_PROCESS.lock().unwrap_or_else(|e| e.into_inner());
    let dir = tempdir("exec-progress");
    let load = |name: &str, set: &str| {
        icefold::config::load(std::path::Path::new(&config(name)), &[set.to_string()]).unwrap()
    };
    // A run: one unit per model year, the last position the end of the run.
    let run = Counted::default();
    let cfg = load("classic-step-albedo.toml", "time.years=10");
    icefold::jobs::run::run_job(&cfg, &dir.join("r.nc"), "test", &run, &Checkpointing::default()).unwrap();
    assert_eq!(*run.started.lock().unwrap(), [(10, "model years".to_string())]);
    assert_eq!(run.last.load(Ordering::SeqCst), 10);
    assert_eq!(run.finished.load(Ordering::SeqCst), 1);
    // An ensemble on two threads: every member counted once.
    let ens = Counted::default();
    let cfg = load("ensemble-lhs.toml", "ensemble.members=6");
    let opts = icefold::jobs::ensemble::EnsembleOptions {
        shard: None,
        threads: Some(2),
    };
    icefold::jobs::ensemble::ensemble_job(
        &cfg,
        &dir.join("e.nc"),
        "test",
        opts,
        &ens,
        &Checkpointing::default(),
    )
    .unwrap();
    assert_eq!(*ens.started.lock().unwrap(), [(6, "members".to_string())]);
    assert_eq!(ens.added.load(Ordering::SeqCst), 6);
    assert_eq!(ens.finished.load(Ordering::SeqCst), 1);
}
