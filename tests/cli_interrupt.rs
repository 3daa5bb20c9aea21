//! Interruption through the binary (issue 5): SIGINT and SIGTERM mid-run leave a readable file
//! marked `complete = 0` whose records are a prefix of the uninterrupted run's, with exit 130
//! and 143; SIGKILL never leaves a finished-looking file at the target path; an interrupted
//! sweep writes its finished steps with `complete = 0`.

mod common_cli;

use common_cli::*;
use icefold::output::NcReader;
use std::path::Path;

/// A run long enough never to finish during a test (a million model years, a record a year,
/// 18 bands so records are cheap; max step 1 year so a reference run ending 10 years later
/// takes the same steps up to the compared records).
const LONG: &[&str] = &[
    "--set",
    "time.years=1000000",
    "--set",
    "grid.bands=18",
    "--set",
    "time.max_step_years=1",
];

fn interrupted_run(tag: &str, sig: i32, code: i32) {
    let dir = tempdir(tag);
    let cfg = config("classic-step-albedo.toml");
    let mut args = vec!["run", cfg.as_str(), "-o", "out.nc"];
    args.extend_from_slice(LONG);
    let child = spawn(&dir, &args);
    wait_for("the temporary output", || temp_file_exists(&dir, "out.nc"));
    std::thread::sleep(std::time::Duration::from_millis(300));
    signal(&child, sig);
    let out = finish(child);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(code), "{err}");
    assert!(err.contains("interrupted by signal"), "{err}");
    assert!(err.contains("complete = 0"), "{err}");
    let path = dir.join("out.nc");
    let r = NcReader::open(&path).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    let name = if sig == libc::SIGINT { "SIGINT" } else { "SIGTERM" };
    assert_eq!(r.attr_str("interrupted_by").unwrap().as_deref(), Some(name));
    let t = r.read_f64("time").unwrap();
    assert!(t.len() >= 2, "only {} records", t.len());
    let reached = r.attr_f64("model_time_reached_years").unwrap().unwrap();
    assert_eq!(reached, *t.last().unwrap());
    assert!(reached < 1e6);
    assert!(!temp_file_exists(&dir, "out.nc"), "temporary file left behind");
    // The records are a prefix of an uninterrupted run 10 years longer.
    let years = format!("time.years={}", reached + 10.0);
    let reference = icefold(
        &dir,
        &[
            "run",
            &cfg,
            "-o",
            "ref.nc",
            "--set",
            &years,
            "--set",
            "grid.bands=18",
            "--set",
            "time.max_step_years=1",
        ],
    );
    ok(&reference);
    let rr = NcReader::open(&dir.join("ref.nc")).unwrap();
    assert_eq!(rr.attr_i64("complete").unwrap(), Some(1));
    for var in [
        "time",
        "surface_temperature",
        "toa_imbalance",
        "ice_edge_latitude_north",
    ] {
        let a = r.read_f64(var).unwrap();
        let b = rr.read_f64(var).unwrap();
        assert!(b.len() > a.len(), "{var}");
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&a), bits(&b[..a.len()]), "{var} is not a prefix");
    }
}

#[test]
fn sigint_mid_run_keeps_a_readable_prefix_and_exits_130() {
    interrupted_run("int", libc::SIGINT, 130);
}

#[test]
fn sigterm_mid_run_keeps_a_readable_prefix_and_exits_143() {
    interrupted_run("term", libc::SIGTERM, 143);
}

fn killed(dir: &Path, extra: &[&str]) {
    let cfg = config("classic-step-albedo.toml");
    let mut args = vec!["run", cfg.as_str(), "-o", "out.nc"];
    args.extend_from_slice(LONG);
    args.extend_from_slice(extra);
    let child = spawn(dir, &args);
    wait_for("the temporary output", || temp_file_exists(dir, "out.nc"));
    std::thread::sleep(std::time::Duration::from_millis(300));
    signal(&child, libc::SIGKILL);
    let out = finish(child);
    assert_eq!(out.status.code(), None, "killed by a signal, no exit status");
}

#[test]
fn sigkill_mid_run_leaves_no_file_at_the_target() {
    let dir = tempdir("kill");
    killed(&dir, &[]);
    assert!(!dir.join("out.nc").exists(), "a file appeared at the target path");
    // What is left is the temporary file beside it, under a name no reader takes for output.
    assert!(temp_file_exists(&dir, "out.nc"));
}

#[test]
fn sigkill_mid_run_keeps_the_previous_file_intact() {
    let dir = tempdir("kill-prev");
    let cfg = config("classic-step-albedo.toml");
    ok(&icefold(
        &dir,
        &["run", &cfg, "-o", "out.nc", "--set", "time.years=5"],
    ));
    let before = std::fs::read(dir.join("out.nc")).unwrap();
    killed(&dir, &["--overwrite"]);
    assert_eq!(
        std::fs::read(dir.join("out.nc")).unwrap(),
        before,
        "previous file changed"
    );
    assert_eq!(attr_i64(&dir.join("out.nc"), "complete"), Some(1));
}

#[test]
fn interrupted_sweep_writes_its_finished_steps_with_complete_0() {
    let dir = tempdir("sweep");
    let cfg = config("sweep-solar.toml");
    let child = spawn(
        &dir,
        // 20001 values a leg: far more than finish during the test.
        &[
            "sweep",
            &cfg,
            "-o",
            "sw.nc",
            "--checkpoint-every-steps",
            "1",
            "--set",
            "sweep.steps=20001",
        ],
    );
    // The first checkpoint follows the first finished step.
    wait_for("the first checkpoint", || dir.join("sw.nc.restart").exists());
    signal(&child, libc::SIGINT);
    let out = finish(child);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{err}");
    assert!(err.contains("--resume"), "{err}");
    let r = NcReader::open(&dir.join("sw.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    let done = r.attr_i64("steps_done").unwrap().unwrap();
    assert!((1..40002).contains(&done), "{done}");
    assert_eq!(r.read_f64("control").unwrap().len() as i64, done);
    assert_eq!(
        r.attr_f64("control_reached").unwrap(),
        r.read_f64("control").unwrap().last().copied()
    );
    drop(r);
    let shown = icefold(&dir, &["inspect", "sw.nc"]);
    ok(&shown);
    let text = String::from_utf8_lossy(&shown.stdout);
    assert!(
        text.contains(&format!(
            "complete:   NO (stopped after sweep step {done}, control"
        )),
        "{text}"
    );
    assert!(text.contains("stopped by: SIGINT"), "{text}");
}

#[test]
fn numerical_failure_keeps_the_records_so_far_with_complete_0_and_the_failure() {
    let dir = tempdir("fail");
    let cfg = config("classic-step-albedo.toml");
    // The step limit is a numerical failure (exit 3) at a model time before the end.
    let out = icefold(
        &dir,
        &[
            "run",
            &cfg,
            "-o",
            "out.nc",
            "--set",
            "time.years=1000",
            "--set",
            "time.max_step_years=1",
            "--set",
            "time.max_steps=120",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{err}");
    let r = NcReader::open(&dir.join("out.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    let failure = r.attr_str("failure").unwrap().unwrap();
    assert!(failure.contains("time.max_steps"), "{failure}");
    let t = r.read_f64("time").unwrap();
    assert!(t.len() >= 2 && *t.last().unwrap() < 1000.0, "{t:?}");
    assert_eq!(r.attr_f64("model_time_reached_years").unwrap(), t.last().copied());
    // `inspect` reports the state.
    let shown = icefold(&dir, &["inspect", "out.nc"]);
    ok(&shown);
    assert!(
        String::from_utf8_lossy(&shown.stdout).contains("complete:   NO (stopped at model time"),
        "{}",
        String::from_utf8_lossy(&shown.stdout)
    );
}

#[test]
fn sigterm_mid_ensemble_keeps_the_finished_members_and_exits_143() {
    let dir = tempdir("ens");
    let cfg = config("ensemble-lhs.toml");
    // Far more members than can finish during the test; the first checkpoint shows it runs.
    let child = spawn(
        &dir,
        &[
            "ensemble",
            &cfg,
            "-o",
            "e.nc",
            "--set",
            "ensemble.members=20000",
            "--threads",
            "2",
            "--checkpoint-every-members",
            "4",
        ],
    );
    wait_for("the first checkpoint", || dir.join("e.nc.restart").exists());
    signal(&child, libc::SIGTERM);
    let out = finish(child);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(143), "{err}");
    assert!(err.contains("--resume e.nc.restart"), "{err}");
    let r = NcReader::open(&dir.join("e.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    assert_eq!(r.attr_str("interrupted_by").unwrap().as_deref(), Some("SIGTERM"));
    let done = r.attr_i64("members_done").unwrap().unwrap();
    assert!((4..20_000).contains(&done), "{done}");
    assert_eq!(r.read_f64("member").unwrap().len() as i64, done);
    assert_eq!(r.attr_i64("members_total").unwrap(), Some(20_000));
    let shown = icefold(&dir, &["inspect", "e.nc"]);
    ok(&shown);
    let text = String::from_utf8_lossy(&shown.stdout);
    assert!(
        text.contains(&format!("complete:   NO (stopped after {done} finished members)")),
        "{text}"
    );
    // An incomplete shard is not merged.
    let merged = icefold(&dir, &["merge", "e.nc", "-o", "m.nc"]);
    assert_eq!(merged.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&merged.stderr).contains("incomplete"));
    assert!(!dir.join("m.nc").exists());
}

#[test]
fn interrupted_regimes_map_writes_its_finished_rows_with_complete_0() {
    let dir = tempdir("regimes");
    let cfg = config("regimes-classic.toml");
    // 4000 rows take about a minute; the signal comes after 1.5 s, long after the handler is
    // installed (the first thing the command does) and long before the map could finish.
    let child = spawn(
        &dir,
        &[
            "regimes",
            &cfg,
            "-o",
            "map.nc",
            "--threads",
            "2",
            "--set",
            "regimes.rows=4000",
        ],
    );
    std::thread::sleep(std::time::Duration::from_millis(1500));
    signal(&child, libc::SIGINT);
    let out = finish(child);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{err}");
    assert!(err.contains("rows"), "{err}");
    let r = NcReader::open(&dir.join("map.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    assert_eq!(r.attr_i64("rows_total").unwrap(), Some(4000));
    let done = r.attr_i64("rows_done").unwrap().unwrap();
    assert!((1..4000).contains(&done), "{done}");
    let p2 = r.read_f64("p2").unwrap();
    assert_eq!(p2.len() as i64, done);
    // The rows kept are finished rows in increasing order of the row control.
    assert!(p2.windows(2).all(|w| w[0] < w[1]), "{p2:?}");
    drop(r);
    let shown = icefold(&dir, &["inspect", "map.nc"]);
    ok(&shown);
    let text = String::from_utf8_lossy(&shown.stdout);
    assert!(
        text.contains(&format!("complete:   NO (stopped after {done} of 4000 rows)")),
        "{text}"
    );
}
