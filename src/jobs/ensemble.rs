//! The `ensemble` job: sample the `[ensemble]` keys (Latin hypercube), run the members of this
//! shard in parallel (rayon), collect each member's series and diagnostics, write the file.
//! The unit of work is a member (`member.rs`); a checkpoint holds the finished members
//! (`restart.rs`).
//!
//! Determinism: the samples are drawn for all members from the seed before anything runs, each
//! member is computed independently by the same sequential code, and results are collected in
//! member order, so the file is the same value for value on any number of threads and, after
//! `merge`, for any split into shards.

mod member;
mod restart;

pub use super::merge::merge_files;

use super::executor::{Checkpointing, Executor, Progress, Quiet, Unit};
use crate::checkpoint::Restart;
use crate::config::{ConfigError, Loaded};
use crate::ensemble::{sample, shard_range};
use crate::error::Error;
use crate::model::Model;
use crate::output::ensemble_file::{self, EnsembleData};
use crate::output::Attr;
use member::{assemble, run_member, time_axis, MemberResult, Plan};
use rayon::prelude::*;
use std::path::Path;

/// Largest number of field values (members x times x bands) held for `ensemble.fields`.
pub const MAX_FIELD_VALUES: usize = 400_000_000;

/// The unit of work: a member.
const MEMBERS: Unit = Unit {
    kind: "ensemble",
    option: "--checkpoint-every-members",
    counts: Some("members"),
};

/// How an ensemble job runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct EnsembleOptions {
    /// Run only shard `K` of `N`.
    pub shard: Option<(usize, usize)>,
    /// Worker threads (`None`: rayon's default, all cores or `RAYON_NUM_THREADS`).
    pub threads: Option<usize>,
}

/// Run the ensemble (or one shard of it) and return the file content.
pub fn run_ensemble(cfg: &Loaded, opts: EnsembleOptions) -> Result<EnsembleData, Error> {
    let mut exec = Executor::in_memory(cfg, MEMBERS, &Quiet)?;
    let data = members(cfg, opts, &mut exec, None)?;
    exec.end(None, || how_far(&data))?;
    Ok(data)
}

fn how_far(data: &EnsembleData) -> String {
    format!("stopped after {} finished members", data.count())
}

/// The `[ensemble]` section, its keys checked to be numeric keys of the config.
fn plan(cfg: &Loaded, opts: EnsembleOptions) -> Result<Plan, Error> {
    let spec = cfg.spec.ensemble.clone().ok_or_else(|| {
        Error::Config(ConfigError::Key {
            path: cfg.source.clone(),
            key: "ensemble".into(),
            message: "no [ensemble] section; add one with `members` and [[ensemble.parameters]] tables"
                .into(),
        })
    })?;
    for (key, _) in &spec.parameters {
        if cfg.number(key).is_none() {
            return Err(Error::Config(ConfigError::Key {
                path: cfg.source.clone(),
                key: key.clone(),
                message: "not a numeric key of this configuration (is its section's kind using it?); [[ensemble.parameters]] keys must be numeric model keys".into(),
            }));
        }
    }
    let times = time_axis(cfg)?;
    let range = match opts.shard {
        Some((k, n)) => shard_range(spec.members, k, n),
        None => 0..spec.members,
    };
    let dists: Vec<_> = spec.parameters.iter().map(|(_, d)| d).collect();
    let mut samples = sample(&dists, spec.members, spec.seed);
    samples.truncate(range.end);
    samples.drain(..range.start);
    let grid = Model::from_spec(&cfg.spec.model).grid;
    let (n, globe) = (grid.len(), grid.domain == crate::grid::Domain::Globe);
    if spec.fields && range.len().saturating_mul(times.len()).saturating_mul(n) > MAX_FIELD_VALUES {
        return Err(Error::Usage(format!(
            "ensemble.fields = true would hold {} x {} x {} values; the limit is {MAX_FIELD_VALUES}: run shards (--shard K/N) or set ensemble.fields = false",
            range.len(),
            times.len(),
            n
        )));
    }
    Ok(Plan {
        keys: spec.parameters.iter().map(|(k, _)| k.clone()).collect(),
        width: 3 + usize::from(globe) + if spec.fields { n } else { 0 },
        spec,
        range,
        samples,
        times,
        grid,
        n,
        globe,
    })
}

/// Each member's config: the base config with its sampled values (a bad sample is bad input,
/// exit 2, before any member runs).
fn member_configs(cfg: &Loaded, plan: &Plan) -> Result<Vec<Loaded>, Error> {
    plan.samples
        .par_iter()
        .enumerate()
        .map(|(i, values)| {
            let pairs: Vec<(&str, f64)> = plan
                .keys
                .iter()
                .map(String::as_str)
                .zip(values.iter().copied())
                .collect();
            cfg.with_values(&pairs).map_err(|e| {
                let sampled: Vec<String> = pairs.iter().map(|(k, v)| format!("{k} = {v}")).collect();
                Error::Usage(format!(
                    "ensemble member {} (sampled {}): {e}",
                    plan.range.start + i,
                    sampled.join(", ")
                ))
            })
        })
        .collect()
}

/// The members of this shard in chunks of the checkpoint cadence (all at once without
/// checkpoints), members in parallel within a chunk; a member not yet started when a stop is
/// requested is skipped, and only the members before the first skipped one are kept (member
/// order).
fn members(
    cfg: &Loaded,
    opts: EnsembleOptions,
    exec: &mut Executor<'_>,
    resume: Option<Restart>,
) -> Result<EnsembleData, Error> {
    let plan = plan(cfg, opts)?;
    let pool = super::worker_pool(opts.threads)?;
    let in_pool = |f: &mut (dyn FnMut() + Send)| match &pool {
        Some(p) => p.install(f),
        None => f(),
    };
    let mut results: Vec<MemberResult> = match &resume {
        Some(r) => restart::restore(
            r,
            plan.range.clone(),
            plan.width * plan.times.len(),
            plan.spec.sensitivity,
            &plan.samples,
        )
        .map_err(Error::Restart)?,
        None => Vec::new(),
    };
    exec.begin(plan.range.len() as u64, "members", results.len() as f64);
    let mut configs = Ok(Vec::new());
    in_pool(&mut || configs = member_configs(cfg, &plan));
    let configs = configs?;
    let chunk = exec.chunk(configs.len());
    let bar = exec.progress();
    while results.len() < configs.len() {
        let from = results.len();
        let mut got: Vec<Option<MemberResult>> = Vec::new();
        in_pool(&mut || {
            got = configs[from..(from + chunk).min(configs.len())]
                .par_iter()
                .map(|c| {
                    if Executor::stop_requested() {
                        return None;
                    }
                    let r = run_member(c, &plan.spec, plan.times.len());
                    bar.add(1);
                    Some(r)
                })
                .collect()
        });
        results.extend(got.into_iter().map_while(|r| r));
        let done = results.len();
        if exec.after(done as f64, done == configs.len(), |r| {
            restart::save(r, &results, plan.range.clone(), &plan.samples[..done])
        }) {
            break;
        }
    }
    bar.finish();
    Ok(assemble(cfg, &plan, results))
}

/// What an ensemble job reports.
#[derive(Debug, Clone, PartialEq)]
pub struct EnsembleReport {
    /// Members run.
    pub members: usize,
    /// Members that failed numerically.
    pub failed: usize,
    /// Index of the first member.
    pub first_member: usize,
}

/// Run and write the file at `path`.
pub fn ensemble_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: EnsembleOptions,
) -> Result<EnsembleReport, Error> {
    ensemble_job(cfg, path, command_line, opts, &Quiet, &Checkpointing::default())
}

/// [`ensemble_to_file`] with progress, checkpoints every `ck.every` members into
/// `<path>.restart` and/or resuming from `ck.resume`; on SIGINT/SIGTERM the members finished
/// so far are written with `complete = 0` and `members_done`.
pub fn ensemble_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: EnsembleOptions,
    progress: &dyn Progress,
    ck: &Checkpointing,
) -> Result<EnsembleReport, Error> {
    let (mut exec, resume) = Executor::new(cfg, MEMBERS, ck, Some(path), progress)?;
    let data = members(cfg, opts, &mut exec, resume)?;
    let reached = vec![("members_done".into(), Attr::I64(data.count() as i64))];
    exec.finish(
        None,
        reached,
        || how_far(&data),
        |c| {
            Ok(ensemble_file::write_with(
                path,
                &data,
                command_line,
                opts.shard,
                c,
            )?)
        },
    )?;
    Ok(EnsembleReport {
        members: data.count(),
        failed: data.failures.len(),
        first_member: data.first_member,
    })
}
