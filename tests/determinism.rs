//! Determinism (issue 5): the same config gives the same file contents, apart from the
//! creation time and command line, on every run and with any number of threads.

mod common_cli;

use common_cli::*;
use std::process::Command;

#[test]
fn ensemble_file_is_identical_on_one_and_two_threads() {
    let dir = tempdir("det-ensemble");
    let cfg = config("ensemble-lhs.toml");
    for (threads, out) in [("1", "one.nc"), ("2", "two.nc"), ("2", "again.nc")] {
        let st = Command::new(BIN)
            .args(["ensemble", &cfg, "-o", out, "--set", "ensemble.members=40"])
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(&dir)
            .output()
            .unwrap();
        ok(&st);
    }
    same_values(&dir.join("one.nc"), &dir.join("two.nc"));
    same_values(&dir.join("two.nc"), &dir.join("again.nc"));
    // The --threads option and chunked, checkpointed members give the same file too.
    ok(&icefold(
        &dir,
        &[
            "ensemble",
            &cfg,
            "-o",
            "chunked.nc",
            "--set",
            "ensemble.members=40",
            "--threads",
            "2",
            "--checkpoint-every-members",
            "7",
        ],
    ));
    same_values(&dir.join("one.nc"), &dir.join("chunked.nc"));
}

#[test]
fn run_sweep_and_branches_files_are_identical_run_to_run() {
    let dir = tempdir("det-seq");
    for (cmd, cfg, extra) in [
        ("run", "classic-step-albedo.toml", vec!["--set", "time.years=50"]),
        ("sweep", "sweep-solar.toml", vec!["--set", "grid.bands=30"]),
        ("branches", "branches-co2.toml", vec![]),
    ] {
        let cfg = config(cfg);
        for (threads, out) in [("1", "a.nc"), ("2", "b.nc")] {
            let mut args = vec![cmd, cfg.as_str(), "-o", out, "--overwrite"];
            args.extend_from_slice(&extra);
            let st = Command::new(BIN)
                .args(&args)
                .env("RAYON_NUM_THREADS", threads)
                .current_dir(&dir)
                .output()
                .unwrap();
            ok(&st);
        }
        same_values(&dir.join("a.nc"), &dir.join("b.nc"));
    }
}

#[test]
fn baseline_and_wide_cpu_kernels_give_the_same_files() {
    // The time-stepping kernels are compiled twice (baseline x86-64, and AVX2 with FMA; see
    // src/cpu.rs) and must compute the same bits: ICEFOLD_BASELINE_CPU forces the baseline copy.
    // On a CPU without AVX2 and FMA both runs take the baseline copy and the check is trivial.
    let dir = tempdir("det-cpu");
    for (cmd, cfg, extra) in [
        ("run", "classic-step-albedo.toml", vec!["--set", "time.years=50"]),
        ("run", "seasonal-globe.toml", vec!["--set", "time.years=3"]),
        ("run", "forcing-orvane.toml", vec![]),
        ("sweep", "sweep-solar.toml", vec!["--set", "grid.bands=30"]),
    ] {
        let cfg = config(cfg);
        for (baseline, out) in [(false, "wide.nc"), (true, "base.nc")] {
            let mut args = vec![cmd, cfg.as_str(), "-o", out, "--overwrite"];
            args.extend_from_slice(&extra);
            let mut c = Command::new(BIN);
            c.args(&args).current_dir(&dir);
            if baseline {
                c.env("ICEFOLD_BASELINE_CPU", "1");
            } else {
                c.env_remove("ICEFOLD_BASELINE_CPU");
            }
            ok(&c.output().unwrap());
        }
        same_values(&dir.join("wide.nc"), &dir.join("base.nc"));
    }
}
