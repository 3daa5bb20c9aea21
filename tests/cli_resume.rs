//! Checkpoint and resume through the binary (issue 5): a job stopped by SIGINT right after a
//! checkpoint (injected at a reproducible point with `ICEFOLD_FAULT_SIGINT_AFTER_CHECKPOINT`,
//! through the real signal handler) and resumed with `--resume` writes a file whose every
//! variable is identical, value for value, to an uninterrupted run's; a resume with a changed
//! config is refused with exit 2.

mod common_cli;

use common_cli::*;
use icefold::interrupt::FAULT_ENV;
use std::path::Path;
use std::process::{Command, Output};

fn with_fault(dir: &Path, after: u32, args: &[&str]) -> Output {
    Command::new(BIN)
        .args(args)
        .current_dir(dir)
        .env(FAULT_ENV, after.to_string())
        .output()
        .unwrap()
}

/// Reference run, interrupted run, resume; compare. `ck` is the checkpoint option and value.
fn resume_matches(tag: &str, command: &str, cfg: &str, extra: &[&str], ck: [&str; 2], after: u32) {
    let dir = tempdir(&format!("resume-{tag}"));
    let cfg = config(cfg);
    let base = |out: &'static str| {
        let mut a = vec![command, cfg.as_str(), "-o", out];
        a.extend_from_slice(extra);
        a
    };
    ok(&icefold(&dir, &base("ref.nc")));
    let mut args = base("out.nc");
    args.extend_from_slice(&ck);
    let stopped = with_fault(&dir, after, &args);
    let err = String::from_utf8_lossy(&stopped.stderr);
    assert_eq!(stopped.status.code(), Some(130), "{err}");
    assert!(err.contains("--resume out.nc.restart"), "{err}");
    assert_eq!(attr_i64(&dir.join("out.nc"), "complete"), Some(0));
    assert!(dir.join("out.nc.restart").exists());
    // The partial file says it stopped short of the end.
    let partial = icefold::output::NcReader::open(&dir.join("out.nc")).unwrap();
    let short = match command {
        "run" => {
            partial.attr_f64("model_time_reached_years").unwrap()
                < icefold::output::NcReader::open(&dir.join("ref.nc"))
                    .unwrap()
                    .attr_f64("model_time_reached_years")
                    .unwrap()
        }
        "sweep" => {
            let done = partial.read_f64("control").unwrap().len();
            let all = icefold::output::NcReader::open(&dir.join("ref.nc"))
                .unwrap()
                .read_f64("control")
                .unwrap()
                .len();
            partial.attr_i64("steps_done").unwrap() == Some(done as i64) && done < all
        }
        "branches" => partial.attr_i64("seeds_done").unwrap() < partial.attr_i64("seeds_total").unwrap(),
        "regimes" => {
            let done = partial.attr_i64("rows_done").unwrap();
            done == Some(partial.read_f64("p2").unwrap().len() as i64)
                && done < partial.attr_i64("rows_total").unwrap()
        }
        _ => partial.attr_i64("members_done").unwrap() < partial.attr_i64("members_total").unwrap(),
    };
    assert!(short, "the partial file does not look partial");
    drop(partial);
    args.extend_from_slice(&["--resume", "out.nc.restart"]);
    let resumed = icefold(&dir, &args);
    ok(&resumed);
    assert_eq!(attr_i64(&dir.join("out.nc"), "complete"), Some(1));
    same_values(&dir.join("out.nc"), &dir.join("ref.nc"));
    assert!(
        !dir.join("out.nc.restart").exists(),
        "restart file kept after success"
    );
}

#[test]
fn run_resumed_from_a_checkpoint_is_identical_to_an_uninterrupted_run() {
    // Adaptive implicit scheme with steps shorter than the record spacing at first and longer
    // later: the controller's state and the dense output both matter.
    resume_matches(
        "run",
        "run",
        "classic-step-albedo.toml",
        &["--set", "time.years=300", "--set", "grid.bands=30"],
        ["--checkpoint-every", "40"],
        3,
    );
}

#[test]
fn run_with_annual_means_and_every_step_output_resumes_identically() {
    resume_matches(
        "annual",
        "run",
        "seasonal-globe.toml",
        &["--set", "time.years=6"],
        ["--checkpoint-every", "1"],
        2,
    );
    // Time means integrated over the trajectory: a checkpoint at a record starts the next
    // year's integral afresh; the step in progress is recomputed from the saved stepper.
    resume_matches(
        "annual-means",
        "run",
        "seasonal-globe.toml",
        &["--set", "time.years=6", "--set", "time.output=\"annual_mean\""],
        ["--checkpoint-every", "2"],
        2,
    );
    resume_matches(
        "annual-means-dopri",
        "run",
        "classic-step-albedo.toml",
        &[
            "--set",
            "time.years=30",
            "--set",
            "grid.bands=12",
            "--set",
            "time.method=\"dopri5\"",
            "--set",
            "time.output=\"annual_mean\"",
        ],
        ["--checkpoint-every", "5"],
        2,
    );
    resume_matches(
        "every-step",
        "run",
        "classic-step-albedo.toml",
        &["--set", "time.years=50", "--set", "time.output=\"every_step\""],
        ["--checkpoint-every", "5"],
        2,
    );
}

#[test]
fn explicit_scheme_run_resumes_identically() {
    resume_matches(
        "dopri",
        "run",
        "classic-step-albedo.toml",
        &[
            "--set",
            "time.years=30",
            "--set",
            "grid.bands=12",
            "--set",
            "time.method=\"dopri5\"",
        ],
        ["--checkpoint-every", "5"],
        2,
    );
}

#[test]
fn sweep_resumed_from_a_checkpoint_is_identical() {
    resume_matches(
        "sweep",
        "sweep",
        "sweep-solar.toml",
        &["--set", "grid.bands=30"],
        ["--checkpoint-every-steps", "50"],
        3,
    );
}

#[test]
fn branches_resumed_from_a_checkpoint_are_identical() {
    resume_matches(
        "branches",
        "branches",
        "branches-co2.toml",
        &[],
        ["--checkpoint-every-seeds", "1"],
        1,
    );
}

#[test]
fn ensemble_resumed_from_a_checkpoint_is_identical() {
    resume_matches(
        "ensemble",
        "ensemble",
        "ensemble-lhs.toml",
        &["--set", "ensemble.members=24", "--threads", "2"],
        ["--checkpoint-every-members", "5"],
        2,
    );
}

#[test]
fn regimes_map_resumed_from_a_checkpoint_is_identical() {
    // 12 rows, checkpoints every 3: interrupted after the second checkpoint (6 rows kept).
    resume_matches(
        "regimes",
        "regimes",
        "regimes-classic.toml",
        &["--set", "regimes.rows=12", "--threads", "2"],
        ["--checkpoint-every-rows", "3"],
        2,
    );
}

#[test]
fn resume_with_a_changed_config_is_refused() {
    let dir = tempdir("resume-changed");
    let cfg = config("classic-step-albedo.toml");
    let args = [
        "run",
        &cfg,
        "-o",
        "out.nc",
        "--set",
        "time.years=100",
        "--checkpoint-every",
        "10",
    ];
    assert_eq!(with_fault(&dir, 2, &args).status.code(), Some(130));
    let before = std::fs::read(dir.join("out.nc")).unwrap();
    let out = icefold(
        &dir,
        &[
            "run",
            &cfg,
            "-o",
            "out.nc",
            "--set",
            "time.years=100",
            "--set",
            "transport.diffusivity=0.53",
            "--resume",
            "out.nc.restart",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("config differs"), "{err}");
    assert!(err.contains("config hash"), "{err}");
    assert!(
        err.contains("diffusivity = 0.52") && err.contains("diffusivity = 0.53"),
        "{err}"
    );
    // Nothing was touched.
    assert_eq!(std::fs::read(dir.join("out.nc")).unwrap(), before);
    assert!(dir.join("out.nc.restart").exists());
    // A restart of another command is refused too.
    let sweep = config("sweep-solar.toml");
    let out = icefold(
        &dir,
        &["sweep", &sweep, "-o", "s.nc", "--resume", "out.nc.restart"],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("written by `icefold run`"), "{err}");
    // A damaged restart file is refused, naming it.
    let mut bytes = std::fs::read(dir.join("out.nc.restart")).unwrap();
    bytes.truncate(bytes.len() / 2);
    std::fs::write(dir.join("bad.restart"), bytes).unwrap();
    let out = icefold(
        &dir,
        &[
            "run",
            &cfg,
            "-o",
            "out.nc",
            "--set",
            "time.years=100",
            "--resume",
            "bad.restart",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("bad.restart") && err.contains("truncated"), "{err}");
}
