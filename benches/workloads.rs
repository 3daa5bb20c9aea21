//! The workloads that take minutes in a numpy/scipy script (issue 18), each run once: timed as a
//! whole `icefold` process (start-up and file included) and counted for its arithmetic lower
//! bound (the kernel rows of src/tally.rs, from one in-process run of the same job). Run with
//! `cargo bench --bench workloads`; `make bench` prints the figures beside their bounds
//! (benches/summary.py), `make bench-compare` against the numpy/scipy reference.
//!
//! - `regimes_201x201_90`: configs/regimes-classic.toml at 90 bands, 201 rows x 201 columns.
//! - `ensemble_100000x200_45`: configs/ensemble-lhs.toml, 100,000 members x 200 years at 45
//!   bands, without the per-member sensitivity.
//! - `seasonal_30yr_globe_90`: configs/seasonal-globe.toml (30 years, globe, 90 bands).
//! - `forced_1000yr_csv_90`: configs/forcing-orvane.toml (CO2 and insolation from a CSV file, a
//!   volcanic pulse) run for 1000 years, the file's last row held after its end.
//!
//! One run per workload keeps the measurement time short; the machine should be otherwise idle.
//! `ICEFOLD_BENCH_ONLY=<name>` runs one workload; `ICEFOLD_BENCH_SCALE=small` shrinks the two
//! largest (21 rows, 1000 members) for a quick check of the set-up.

use icefold::config;
use icefold::jobs::ensemble::{run_ensemble, EnsembleOptions};
use icefold::jobs::regimes::{run_regimes, RegimesOptions};
use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

/// Worker threads of the parallel workloads (the two cores of the reference machine).
const THREADS: usize = 2;

struct Workload {
    /// Key in the counts file and in benches/summary.py.
    key: &'static str,
    /// The icefold sub-command.
    command: &'static str,
    config: &'static str,
    sets: Vec<String>,
    /// Whether the job spreads over `THREADS` workers (its bound is divided by them).
    parallel: bool,
}

fn config_path(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("configs").join(name)
}

fn load(w: &Workload) -> config::Loaded {
    config::load(&config_path(w.config), &w.sets).unwrap()
}

/// Runs the job in this process once, inside a tally of the kernel rows.
fn count(w: &Workload) -> icefold::tally::Tally {
    let cfg = load(w);
    let before = icefold::tally::snapshot();
    match w.command {
        "regimes" => {
            let opts = RegimesOptions {
                threads: Some(THREADS),
            };
            black_box(run_regimes(&cfg, opts).unwrap());
        }
        "ensemble" => {
            let opts = EnsembleOptions {
                threads: Some(THREADS),
                ..EnsembleOptions::default()
            };
            black_box(run_ensemble(&cfg, opts).unwrap().count());
        }
        _ => {
            let out = std::env::temp_dir().join(format!("icefold-bench-count-{}.nc", std::process::id()));
            black_box(icefold::jobs::run::run_to_file(&cfg, &out, "bench").unwrap());
            let _ = std::fs::remove_file(&out);
        }
    }
    icefold::tally::snapshot().since(&before)
}

/// Seconds of one whole `icefold` process writing its file.
fn process_seconds(w: &Workload) -> f64 {
    let out = std::env::temp_dir().join(format!("icefold-bench-{}-{}.nc", w.key, std::process::id()));
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_icefold"));
    cmd.arg(w.command).arg(config_path(w.config));
    cmd.arg("-o").arg(&out).arg("--overwrite");
    if w.parallel {
        cmd.args(["--threads", &THREADS.to_string()]);
    }
    for s in &w.sets {
        cmd.args(["--set", s]);
    }
    let t0 = Instant::now();
    let status = cmd.stderr(std::process::Stdio::null()).status().unwrap();
    let secs = t0.elapsed().as_secs_f64();
    assert!(status.success(), "{} failed: {status}", w.key);
    let _ = std::fs::remove_file(&out);
    secs
}

fn main() {
    // `cargo bench` passes `--bench`; a filter argument is not used (see ICEFOLD_BENCH_ONLY).
    let small = std::env::var("ICEFOLD_BENCH_SCALE").is_ok_and(|v| v == "small");
    let only = std::env::var("ICEFOLD_BENCH_ONLY").ok();
    let s = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
    let rows = if small { "21" } else { "201" };
    let members = if small { "1000" } else { "100000" };
    let workloads = [
        Workload {
            key: "regimes_201x201_90",
            command: "regimes",
            config: "regimes-classic.toml",
            sets: s(&[
                "grid.bands=90",
                &format!("regimes.rows={rows}"),
                "regimes.columns=201",
            ]),
            parallel: true,
        },
        Workload {
            key: "ensemble_100000x200_45",
            command: "ensemble",
            config: "ensemble-lhs.toml",
            sets: s(&[
                &format!("ensemble.members={members}"),
                "ensemble.sensitivity=false",
            ]),
            parallel: true,
        },
        Workload {
            key: "seasonal_30yr_globe_90",
            command: "run",
            config: "seasonal-globe.toml",
            sets: Vec::new(),
            parallel: false,
        },
        Workload {
            key: "forced_1000yr_csv_90",
            command: "run",
            config: "forcing-orvane.toml",
            sets: s(&["time.years=1000", "forcing.outside=hold"]),
            parallel: false,
        },
    ];
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("target")
        .join("criterion");
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("icefold-counts-workloads.json");
    // Keep the figures of workloads not run this time.
    let mut body: Vec<String> = std::fs::read_to_string(&file)
        .unwrap_or_default()
        .lines()
        .filter(|l| l.trim_start().starts_with('"'))
        .map(|l| l.trim().trim_end_matches(',').to_owned())
        .collect();
    for w in &workloads {
        if only.as_deref().is_some_and(|o| o != w.key) {
            continue;
        }
        body.retain(|l| !l.starts_with(&format!("\"{}.", w.key)) && !l.starts_with(&format!("\"{}_", w.key)));
        let t0 = Instant::now();
        let tally = count(w);
        let compute = t0.elapsed().as_secs_f64();
        let process = process_seconds(w);
        println!(
            "{:<26} whole process {process:>9.3} s   in-process job {compute:>9.3} s{}",
            w.key,
            if small { "   (small scale)" } else { "" }
        );
        for (name, n) in tally.named() {
            body.push(format!("\"{}.{name}\": {n}", w.key));
        }
        body.push(format!("\"{}_process_s\": {process}", w.key));
        body.push(format!("\"{}_job_s\": {compute}", w.key));
        body.push(format!(
            "\"{}_threads\": {}",
            w.key,
            if w.parallel { THREADS } else { 1 }
        ));
        body.push(format!("\"{}_small\": {}", w.key, u8::from(small)));
    }
    let text = format!(
        "{{\n{}\n}}\n",
        body.iter()
            .map(|l| format!("  {l}"))
            .collect::<Vec<_>>()
            .join(",\n")
    );
    std::fs::write(&file, text).unwrap();
}
