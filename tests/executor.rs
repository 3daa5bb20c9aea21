//! The job executor's loop, the same for every long job: checkpoints counted once each (fault
//! injection after the N-th checkpoint stops every job at the same place), a checkpoint that
//! cannot be written is the same typed error everywhere (exit 1, no output file), and a job
//! computed in memory honours the stop flag with an error instead of a silent partial result.

mod common_cli;

use common_cli::*;
use icefold::interrupt::FAULT_ENV;
use std::process::Command;

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
    // The only in-process test of this file: the stop flag is process-wide.
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
