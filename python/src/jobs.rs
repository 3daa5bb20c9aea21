//! The one place the package calls icefold's library: loading a config, the jobs behind the
//! commands, and the model. When a job's signature changes, only this file changes.
//!
//! Each job writes its file at an in-memory target (`icefold::output::memory_target`): HDF5's
//! core driver with no backing store, so no file is created; the finished file's bytes are
//! taken back with `take_memory_image`.

use icefold::config::{ConfigError, Loaded};
use icefold::error::Error;
use icefold::jobs;
use icefold::jobs::ensemble::EnsembleOptions;
use icefold::jobs::equilibrium::StartClimate;
use icefold::jobs::regimes::RegimesOptions;
use icefold::model::{Model, Workspace};
use icefold::output::{memory_target, take_memory_image};
use std::path::Path;

/// Where a config comes from.
pub enum Source<'a> {
    /// A TOML file (relative paths in it are resolved against its directory).
    Path(&'a Path),
    /// TOML text named `name` in messages (relative paths against the working directory).
    Text { text: &'a str, name: &'a str },
}

/// Loads a config with `--set KEY=VALUE` overrides, as the command line does.
pub fn load(source: &Source<'_>, sets: &[String]) -> Result<Loaded, ConfigError> {
    match source {
        Source::Path(p) => icefold::config::load(p, sets),
        Source::Text { text, name } => icefold::config::load_str(text, name, Path::new(""), sets),
    }
}

/// A job, as one of the commands that write a file.
#[derive(Debug, Clone)]
pub enum Job {
    /// `icefold run`.
    Run,
    /// `icefold equilibrium --start NAME`.
    Equilibrium { start: String },
    /// `icefold sweep`.
    Sweep,
    /// `icefold branches`.
    Branches,
    /// `icefold regimes --threads N`.
    Regimes { threads: Option<usize> },
    /// `icefold ensemble --threads N --shard K/N`.
    Ensemble {
        threads: Option<usize>,
        shard: Option<String>,
    },
}

impl Job {
    /// The command's name (as in the default output file name `<config>-<command>.nc`).
    pub fn command(&self) -> &'static str {
        match self {
            Job::Run => "run",
            Job::Equilibrium { .. } => "equilibrium",
            Job::Sweep => "sweep",
            Job::Branches => "branches",
            Job::Regimes { .. } => "regimes",
            Job::Ensemble { .. } => "ensemble",
        }
    }
}

/// What a job left: the file's bytes (also after a numerical failure, when the job keeps a
/// partial file marked `complete = 0`) and the error, if any.
pub struct Outcome {
    /// The netCDF-4/HDF5 file the command would have written.
    pub image: Option<Vec<u8>>,
    /// The error the command would have reported.
    pub error: Option<Error>,
    /// The in-memory target the job wrote to (messages name it as the output path).
    pub target: std::path::PathBuf,
}

/// The starting climate named as on the command line (`--start`).
fn start_climate(name: &str) -> Result<StartClimate, Error> {
    Ok(match name {
        "config" => StartClimate::Config,
        "warm" => StartClimate::Warm,
        "cold" => StartClimate::Cold,
        "ice-free" => StartClimate::IceFree,
        "snowball" => StartClimate::Snowball,
        "north-cap" => StartClimate::NorthCap,
        "south-cap" => StartClimate::SouthCap,
        other => {
            return Err(Error::Usage(format!(
                "start {other:?}: give one of config, warm, cold, ice-free, snowball, north-cap, south-cap"
            )))
        }
    })
}

/// Runs `job` on `cfg` in memory; `command_line` goes into the file's provenance.
pub fn compute(cfg: &Loaded, job: &Job, command_line: &str) -> Outcome {
    let target = memory_target(&format!("{}.nc", job.command()));
    let result = run_job(cfg, job, &target, command_line);
    Outcome {
        image: take_memory_image(&target),
        error: result.err(),
        target,
    }
}

fn run_job(cfg: &Loaded, job: &Job, target: &Path, command_line: &str) -> Result<(), Error> {
    match job {
        Job::Run => jobs::run::run_to_file(cfg, target, command_line).map(drop),
        Job::Equilibrium { start } => {
            jobs::equilibrium::equilibrium_to_file(cfg, target, command_line, start_climate(start)?).map(drop)
        }
        Job::Sweep => jobs::sweep::sweep_to_file(cfg, target, command_line).map(drop),
        Job::Branches => jobs::branches::branches_to_file(cfg, target, command_line).map(drop),
        Job::Regimes { threads } => {
            check_threads(*threads)?;
            let opts = RegimesOptions { threads: *threads };
            jobs::regimes::regimes_to_file(cfg, target, command_line, opts).map(drop)
        }
        Job::Ensemble { threads, shard } => {
            check_threads(*threads)?;
            let shard = shard
                .as_deref()
                .map(icefold::ensemble::parse_shard)
                .transpose()
                .map_err(Error::Usage)?;
            let opts = EnsembleOptions {
                shard,
                threads: *threads,
            };
            jobs::ensemble::ensemble_to_file(cfg, target, command_line, opts).map(drop)
        }
    }
}

/// `threads = 0` is refused as the command line refuses `--threads 0`.
fn check_threads(threads: Option<usize>) -> Result<(), Error> {
    match threads {
        Some(0) => Err(Error::Usage("threads 0: give at least 1 worker thread".into())),
        _ => Ok(()),
    }
}

/// Asks running jobs to stop at their next step boundary as on SIGINT (Ctrl-C in Python), or
/// forgets that request.
pub fn request_stop(stop: bool) {
    let flag = icefold::interrupt::StopFlag;
    if stop {
        flag.request(libc::SIGINT);
    } else {
        flag.clear();
    }
}

/// The model a config describes.
pub fn model(cfg: &Loaded) -> Result<Model, Error> {
    jobs::run::build_model(cfg)
}

/// The config's initial temperatures, K.
pub fn initial_state(model: &Model, cfg: &Loaded) -> Vec<f64> {
    model.initial_state(&cfg.spec.initial)
}

/// Net heating `G(t, T)`, W m-2, at model time `t_years`.
pub fn heating(model: &Model, t_years: f64, temps: &[f64]) -> Vec<f64> {
    let mut ws = Workspace::new(model.len());
    let mut out = vec![0.0; model.len()];
    model.heating(t_years, temps, &mut ws, &mut out);
    out
}

/// The Jacobian `dG_i/dT_j`, W m-2 K-1, dense and row-major.
pub fn jacobian(model: &Model, t_years: f64, temps: &[f64]) -> Vec<f64> {
    let mut ws = Workspace::new(model.len());
    let mut jac = icefold::linalg::Tridiag::zeros(model.len());
    model.heating_jacobian(t_years, temps, &mut ws, &mut jac);
    jac.to_dense(&model.grid.weights)
}
