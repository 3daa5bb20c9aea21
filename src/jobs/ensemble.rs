//! The `ensemble` job: sample the `[ensemble]` keys (Latin hypercube), run the members of this
//! shard in parallel (rayon), collect each member's series and diagnostics, write the file.
//!
//! Determinism: the samples are drawn for all members from the seed before anything runs, each
//! member is computed independently by the same sequential code, and results are collected in
//! member order, so the file is the same value for value on any number of threads and, after
//! `merge`, for any split into shards.

use super::run::Checkpointing;
use crate::checkpoint::{self, Restart, RestartError};
use crate::cli::progress;
use crate::config::spec::{EnsembleSpec, OutputMode};
use crate::config::{ConfigError, Loaded};
use crate::ensemble::{sample, shard_range};
use crate::equilibrium::NewtonOptions;
use crate::error::Error;
use crate::integrate::driver::{self, Observer, ObserverError, RunError};
use crate::interrupt::StopFlag;
use crate::model::{Model, Workspace};
use crate::output::ensemble_file::{self, EnsembleData, SensitivityColumns};
use crate::output::Attr;
use rayon::prelude::*;
use std::path::Path;

/// Largest number of field values (members x times x bands) held for `ensemble.fields`.
pub const MAX_FIELD_VALUES: usize = 400_000_000;

/// How an ensemble job runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct EnsembleOptions {
    /// Run only shard `K` of `N`.
    pub shard: Option<(usize, usize)>,
    /// Worker threads (`None`: rayon's default, all cores or `RAYON_NUM_THREADS`).
    pub threads: Option<usize>,
    /// Show a progress bar across members.
    pub progress: bool,
}

/// What one member produced.
struct MemberResult {
    /// `[time][gmt, toa, north, south?, field...]` flattened, NaN-filled after a failure.
    records: Vec<f64>,
    failure: Option<String>,
    fit: Option<crate::ensemble::stats::Fit>,
    sensitivity: Option<[f64; 4]>,
}

/// Collects a member's records (through annual means if asked).
struct Collector<'m> {
    model: &'m Model,
    ws: Workspace,
    heat: Vec<f64>,
    rec: Vec<f64>,
    width: usize,
    fields: bool,
    /// Time integral of each record value since the last annual mean (annual means only).
    mean_sum: Vec<f64>,
    out: Vec<f64>,
    ols: crate::ensemble::stats::Ols,
}

impl Collector<'_> {
    fn push(&mut self, rec: &[f64]) {
        self.ols.add(rec[0], rec[1]);
        self.out.extend_from_slice(rec);
    }
}

impl Collector<'_> {
    /// The record values at the state `temps` (K) at time `t` (years) into `self.rec`.
    fn fill(&mut self, t: f64, temps: &[f64]) {
        let m = self.model;
        // The global mean of the net heating is the top-of-atmosphere imbalance (absorbed -
        // outgoing + transport convergence + additive forcing), without allocating a budget.
        m.heating(t, temps, &mut self.ws, &mut self.heat);
        let g = &m.grid;
        let (north, south) = m.ice_edges_at(t, temps);
        self.rec.clear();
        self.rec.push(g.mean(temps));
        self.rec.push(g.mean(&self.heat));
        self.rec.push(north);
        if let Some(s) = south {
            self.rec.push(s);
        }
        if self.fields {
            self.rec.extend_from_slice(temps);
        }
    }
}

impl Observer for Collector<'_> {
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.fill(t, temps);
        let rec = std::mem::take(&mut self.rec);
        self.push(&rec);
        self.rec = rec;
        debug_assert!(self.out.len() % self.width == 0);
        Ok(())
    }

    fn accumulate(&mut self, t: f64, weight: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.fill(t, temps);
        self.mean_sum.resize(self.rec.len(), 0.0);
        for (s, v) in self.mean_sum.iter_mut().zip(&self.rec) {
            *s += weight * v;
        }
        Ok(())
    }

    fn record_mean(&mut self, a: f64, b: f64, _end: &[f64]) -> Result<(), ObserverError> {
        self.mean_sum.resize(self.width, 0.0);
        let mut rec = std::mem::take(&mut self.rec);
        rec.clear();
        rec.extend(self.mean_sum.iter().map(|s| s / (b - a)));
        self.mean_sum.iter_mut().for_each(|s| *s = 0.0);
        self.push(&rec);
        self.rec = rec;
        Ok(())
    }
}

/// The output times every member shares.
fn time_axis(cfg: &Loaded) -> Result<Vec<f64>, Error> {
    let t = &cfg.spec.time;
    match t.output {
        OutputMode::Instant => Ok(driver::output_times(t.years, t.output_every).collect()),
        OutputMode::AnnualMean => Ok((0..driver::whole_years(t.years))
            .map(|y| y as f64 + 0.5)
            .collect()),
        OutputMode::EveryStep => Err(Error::Config(ConfigError::Range {
            path: cfg.source.clone(),
            key: "time.output".into(),
            value: "\"every_step\"".into(),
            allowed: "allowed in an ensemble: \"instant\" or \"annual_mean\" (members need one time axis)"
                .into(),
        })),
    }
}

fn run_member(cfg: &Loaded, spec: &EnsembleSpec, times: usize) -> MemberResult {
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let globe = model.grid.domain == crate::grid::Domain::Globe;
    let width = 3 + usize::from(globe) + if spec.fields { model.len() } else { 0 };
    let mut c = Collector {
        model: &model,
        ws: Workspace::new(model.len()),
        heat: vec![0.0; model.len()],
        rec: Vec::with_capacity(width),
        width,
        fields: spec.fields,
        mean_sum: Vec::with_capacity(width),
        out: Vec::with_capacity(width * times),
        ols: Default::default(),
    };
    let result = driver::run(&model, &cfg.spec.time, &y0, &mut c, &mut |_| {});
    let failure = match result {
        Ok(_) => None,
        Err(RunError::Solver(e)) => Some(e.to_string()),
        Err(e) => Some(e.to_string()),
    };
    let mut records = c.out;
    records.resize(width * times, f64::NAN);
    let fit = crate::jobs::diagnostics::gregory(&c.ols);
    let sensitivity = spec.sensitivity.then(|| {
        let eq = &cfg.spec.equilibrium;
        let opts = NewtonOptions {
            tolerance_wm2: eq.tolerance_wm2,
            max_iterations: eq.max_iterations,
            ..NewtonOptions::default()
        };
        match crate::jobs::diagnostics::co2_doubling(&model, &y0, cfg.spec.model.co2.2, opts) {
            Ok(s) => [
                s.ecs_k,
                s.ice_edge_base_deg,
                s.ice_edge_doubled_deg,
                s.ice_edge_per_wm2,
            ],
            Err(_) => [f64::NAN; 4],
        }
    });
    MemberResult {
        records,
        failure,
        fit,
        sensitivity,
    }
}

/// Run the ensemble (or one shard of it) and return the file content.
pub fn run_ensemble(cfg: &Loaded, opts: EnsembleOptions) -> Result<EnsembleData, Error> {
    Ok(run_ensemble_ck(cfg, opts, &Checkpointing::default(), None)?.data)
}

/// An ensemble run that may have stopped early.
struct EnsembleRun {
    data: EnsembleData,
    /// The signal that stopped it.
    stopped: Option<i32>,
    /// Whether a checkpoint was written.
    saved: bool,
}

/// The members of `range` in chunks of `ck.every` members (all at once without checkpoints),
/// members in parallel within a chunk; a member not yet started when a stop is requested is
/// skipped, and only the members before the first skipped one are kept (member order).
fn run_ensemble_ck(
    cfg: &Loaded,
    opts: EnsembleOptions,
    ck: &Checkpointing,
    restart_to: Option<&Path>,
) -> Result<EnsembleRun, Error> {
    if let Some(e) = ck.every {
        if !(e >= 1.0) || e.fract() != 0.0 {
            return Err(Error::Usage(format!(
                "--checkpoint-every-members {e}: give a whole number of members, at least 1"
            )));
        }
    }
    let resume = ck.load("ensemble", cfg)?;
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
    let total = spec.members;
    let range = match opts.shard {
        Some((k, n)) => shard_range(total, k, n),
        None => 0..total,
    };
    let dists: Vec<_> = spec.parameters.iter().map(|(_, d)| d).collect();
    let keys: Vec<String> = spec.parameters.iter().map(|(k, _)| k.clone()).collect();
    let all = sample(&dists, total, spec.seed);
    let mine = &all[range.clone()];
    let model0 = Model::from_spec(&cfg.spec.model);
    let n = model0.len();
    let globe = model0.grid.domain == crate::grid::Domain::Globe;
    if spec.fields && range.len().saturating_mul(times.len()).saturating_mul(n) > MAX_FIELD_VALUES {
        return Err(Error::Usage(format!(
            "ensemble.fields = true would hold {} x {} x {} values; the limit is {MAX_FIELD_VALUES}: run shards (--shard K/N) or set ensemble.fields = false",
            range.len(),
            times.len(),
            n
        )));
    }
    let pool = super::worker_pool(opts.threads)?;
    let pb = if opts.progress {
        progress::bar(range.len() as u64, "members")
    } else {
        indicatif::ProgressBar::hidden()
    };
    let globe_w = 3 + usize::from(globe) + if spec.fields { n } else { 0 };
    let mut results: Vec<MemberResult> = match &resume {
        Some(r) => {
            let got = restore_members(r, range.clone(), globe_w * times.len(), spec.sensitivity)
                .map_err(super::run::restart_error)?;
            let want: Vec<u64> = mine[..got.len()].iter().flatten().map(|v| v.to_bits()).collect();
            let have: Vec<u64> = r
                .f64s("members.samples")
                .map_err(super::run::restart_error)?
                .iter()
                .map(|v| v.to_bits())
                .collect();
            if want != have {
                return Err(super::run::restart_error(
                    r.bad("the saved samples differ from those drawn from ensemble.seed"),
                ));
            }
            got
        }
        None => Vec::new(),
    };
    pb.set_position(results.len() as u64);
    let chunk = ck.every.map_or(range.len().max(1), |e| e as usize);
    let stop = StopFlag;
    let mut stopped = None;
    let mut saved = false;
    let work = || -> Result<Vec<Loaded>, Error> {
        // Validate every member first (a bad sample is bad input, exit 2, before any run).
        let configs: Vec<Loaded> = mine
            .par_iter()
            .enumerate()
            .map(|(i, values)| {
                let pairs: Vec<(&str, f64)> = keys
                    .iter()
                    .map(String::as_str)
                    .zip(values.iter().copied())
                    .collect();
                cfg.with_values(&pairs).map_err(|e| {
                    Error::Usage(format!(
                        "ensemble member {} (sampled {}): {e}",
                        range.start + i,
                        pairs
                            .iter()
                            .map(|(k, v)| format!("{k} = {v}"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ))
                })
            })
            .collect::<Result<_, _>>()?;
        Ok(configs)
    };
    let in_pool = |f: &mut (dyn FnMut() -> Result<(), Error> + Send)| match &pool {
        Some(p) => p.install(f),
        None => f(),
    };
    let mut configs = Vec::new();
    in_pool(&mut || {
        configs = work()?;
        Ok(())
    })?;
    while results.len() < configs.len() && stopped.is_none() {
        let from = results.len();
        let to = (from + chunk).min(configs.len());
        let mut got: Vec<Option<MemberResult>> = Vec::new();
        in_pool(&mut || {
            got = configs[from..to]
                .par_iter()
                .map(|c| {
                    if stop.requested().is_some() {
                        return None;
                    }
                    let r = run_member(c, &spec, times.len());
                    pb.inc(1);
                    Some(r)
                })
                .collect();
            Ok(())
        })?;
        let complete_chunk = got.iter().all(Option::is_some);
        results.extend(got.into_iter().map_while(|r| r));
        if !complete_chunk {
            stopped = stop.requested();
        }
        if let Some(path) = restart_to {
            if ck.every.is_some() && (stopped.is_some() || results.len() < configs.len()) {
                save_members(path, cfg, &results, range.clone(), &mine[..results.len()])
                    .map_err(super::run::restart_error)?;
                saved = true;
            }
        }
        if stopped.is_none() {
            stopped = stop.requested().filter(|_| results.len() < configs.len());
        }
    }
    pb.finish_and_clear();
    let count = results.len();
    let width = 3 + usize::from(globe) + if spec.fields { n } else { 0 };
    let nt = times.len();
    let mut data = EnsembleData {
        config_toml: cfg.resolved_text(),
        title: cfg.spec.title.clone(),
        deflate_level: cfg.spec.output.deflate_level,
        members_total: total,
        first_member: range.start,
        seed: spec.seed,
        keys,
        distributions: spec.parameters.iter().map(|(_, d)| d.describe()).collect(),
        samples: mine.iter().flatten().copied().collect(),
        time: times,
        annual_means: matches!(cfg.spec.time.output, OutputMode::AnnualMean),
        lat: model0.grid.lat_centres_deg(),
        lat_bnds: {
            let f = model0.grid.lat_faces_deg();
            (0..n).flat_map(|i| [f[i], f[i + 1]]).collect()
        },
        area_weight: model0.grid.weights.clone(),
        global_mean_temperature: Vec::with_capacity(count * nt),
        toa_imbalance: Vec::with_capacity(count * nt),
        ice_edge_latitude_north: Vec::with_capacity(count * nt),
        ice_edge_latitude_south: globe.then(|| Vec::with_capacity(count * nt)),
        status: Vec::with_capacity(count),
        feedback: Vec::with_capacity(count),
        effective_forcing: Vec::with_capacity(count),
        gregory_r2: Vec::with_capacity(count),
        sensitivity: spec.sensitivity.then(SensitivityColumns::default),
        fields: spec.fields.then(|| Vec::with_capacity(count * nt * n)),
        failures: Vec::new(),
    };
    for (i, r) in results.into_iter().enumerate() {
        for rec in r.records.chunks_exact(width) {
            data.global_mean_temperature.push(rec[0]);
            data.toa_imbalance.push(rec[1]);
            data.ice_edge_latitude_north.push(rec[2]);
            if let Some(s) = data.ice_edge_latitude_south.as_mut() {
                s.push(rec[3]);
            }
            if let Some(f) = data.fields.as_mut() {
                f.extend_from_slice(&rec[width - n..]);
            }
        }
        data.status.push(i32::from(r.failure.is_some()));
        if let Some(msg) = r.failure {
            data.failures.push((range.start + i, msg));
        }
        data.feedback.push(r.fit.map_or(f64::NAN, |f| f.slope));
        data.effective_forcing
            .push(r.fit.map_or(f64::NAN, |f| f.intercept_at_first));
        data.gregory_r2.push(r.fit.map_or(f64::NAN, |f| f.r2));
        if let (Some(cols), Some(s)) = (data.sensitivity.as_mut(), r.sensitivity) {
            cols.ecs_k.push(s[0]);
            cols.ice_edge_base_deg.push(s[1]);
            cols.ice_edge_doubled_deg.push(s[2]);
            cols.ice_edge_per_wm2.push(s[3]);
        }
    }
    data.samples.truncate(count * data.keys.len());
    Ok(EnsembleRun { data, stopped, saved })
}

/// Save the finished members' results (and their samples, to check on resume).
fn save_members(
    path: &Path,
    cfg: &Loaded,
    results: &[MemberResult],
    range: std::ops::Range<usize>,
    samples: &[Vec<f64>],
) -> Result<(), RestartError> {
    let mut r = Restart::new("ensemble", &cfg.resolved_text());
    r.put_u64("members.range", &[range.start as u64, range.end as u64]);
    r.put_u64("members.done", &[results.len() as u64]);
    let flat = |f: &dyn Fn(&MemberResult) -> Vec<f64>| -> Vec<f64> { results.iter().flat_map(f).collect() };
    r.put_f64("members.records", &flat(&|m| m.records.clone()));
    r.put_f64(
        "members.samples",
        &samples.iter().flatten().copied().collect::<Vec<_>>(),
    );
    r.put_u64(
        "members.failed",
        &results
            .iter()
            .map(|m| u64::from(m.failure.is_some()))
            .collect::<Vec<_>>(),
    );
    let texts: Vec<&str> = results
        .iter()
        .map(|m| m.failure.as_deref().unwrap_or(""))
        .collect();
    r.put_str("members.failure_text", &texts.join("\u{1e}"));
    r.put_u64(
        "members.has_fit",
        &results
            .iter()
            .map(|m| u64::from(m.fit.is_some()))
            .collect::<Vec<_>>(),
    );
    r.put_f64(
        "members.fit",
        &flat(&|m| {
            m.fit.map_or(vec![f64::NAN; 4], |f| {
                vec![f.slope, f.intercept_at_first, f.r2, f.x_sd]
            })
        }),
    );
    r.put_u64(
        "members.fit_n",
        &results
            .iter()
            .map(|m| m.fit.map_or(0, |f| f.n))
            .collect::<Vec<_>>(),
    );
    r.put_f64(
        "members.sensitivity",
        &flat(&|m| m.sensitivity.map_or(vec![f64::NAN; 4], |s| s.to_vec())),
    );
    r.save(&checkpoint::restart_path(path))
}

/// The members saved by `save_members`, checked against this shard and record width.
fn restore_members(
    r: &Restart,
    range: std::ops::Range<usize>,
    per_member: usize,
    sensitivity: bool,
) -> Result<Vec<MemberResult>, RestartError> {
    let saved = r.u64s("members.range")?;
    if saved != [range.start as u64, range.end as u64] {
        return Err(r.bad(format!(
            "it holds members {} to {}, this run is members {} to {} (use the same --shard)",
            saved.first().copied().unwrap_or(0),
            saved.get(1).copied().unwrap_or(0),
            range.start,
            range.end
        )));
    }
    let done = r.u64("members.done")? as usize;
    let records = r.f64s("members.records")?;
    let (failed, has_fit, fit, fit_n, sens) = (
        r.u64s("members.failed")?,
        r.u64s("members.has_fit")?,
        r.f64s("members.fit")?,
        r.u64s("members.fit_n")?,
        r.f64s("members.sensitivity")?,
    );
    let texts: Vec<&str> = r.str("members.failure_text")?.split('\u{1e}').collect();
    if done > range.len()
        || records.len() != done * per_member
        || failed.len() != done
        || has_fit.len() != done
        || fit.len() != 4 * done
        || fit_n.len() != done
        || sens.len() != 4 * done
        || (done > 0 && texts.len() != done)
    {
        return Err(r.bad("member arrays do not match the member count and the record width"));
    }
    Ok((0..done)
        .map(|i| MemberResult {
            records: records[i * per_member..(i + 1) * per_member].to_vec(),
            failure: (failed[i] != 0).then(|| texts[i].to_string()),
            fit: (has_fit[i] != 0).then(|| crate::ensemble::stats::Fit {
                slope: fit[4 * i],
                intercept_at_first: fit[4 * i + 1],
                r2: fit[4 * i + 2],
                n: fit_n[i],
                x_sd: fit[4 * i + 3],
            }),
            sensitivity: sensitivity
                .then(|| [sens[4 * i], sens[4 * i + 1], sens[4 * i + 2], sens[4 * i + 3]]),
        })
        .collect())
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
    ensemble_job(cfg, path, command_line, opts, &Checkpointing::default())
}

/// [`ensemble_to_file`] with checkpoints every `ck.every` members into `<path>.restart` and/or
/// resuming from `ck.resume`; on SIGINT/SIGTERM the members finished so far are written with
/// `complete = 0` and `members_done`.
pub fn ensemble_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    opts: EnsembleOptions,
    ck: &Checkpointing,
) -> Result<EnsembleReport, Error> {
    let EnsembleRun { data, stopped, saved } = run_ensemble_ck(cfg, opts, ck, Some(path))?;
    if let Some(sig) = stopped {
        let done = data.count();
        let c = super::Ending::Stopped(sig).completion(vec![("members_done".into(), Attr::I64(done as i64))]);
        ensemble_file::write_with(path, &data, command_line, opts.shard, &c)?;
        let restart = checkpoint::restart_path(path);
        return Err(super::run::interrupted(
            sig,
            format!("stopped after {done} finished members"),
            path,
            saved.then_some(restart.as_path()),
        ));
    }
    ensemble_file::write(path, &data, command_line, opts.shard)?;
    if ck.every.is_some() || ck.resume.is_some() {
        super::run::remove_restart(path);
    }
    Ok(EnsembleReport {
        members: data.count(),
        failed: data.failures.len(),
        first_member: data.first_member,
    })
}

/// Merge shard files into the file a single run writes.
pub fn merge_files(inputs: &[std::path::PathBuf], output: &Path, command_line: &str) -> Result<usize, Error> {
    let mut parts = Vec::new();
    for p in inputs {
        let complete = crate::output::NcReader::open(p)
            .ok()
            .and_then(|r| r.attr_i64("complete").ok().flatten());
        if complete == Some(0) {
            return Err(Error::Usage(format!(
                "cannot merge {}: it is an incomplete file (complete = 0); finish it first (--resume)",
                p.display()
            )));
        }
        let (d, _) =
            ensemble_file::read(p).map_err(|e| Error::Usage(format!("cannot merge {}: {e}", p.display())))?;
        parts.push((p.display().to_string(), d));
    }
    let data = ensemble_file::join(parts).map_err(|e| Error::Usage(format!("cannot merge: {e}")))?;
    if let Some(signal) = StopFlag.requested() {
        return Err(Error::Interrupted {
            signal,
            reached: format!(
                "stopped while reading the shards ({}); no file written",
                crate::interrupt::signal_name(signal)
            ),
        });
    }
    ensemble_file::write(output, &data, command_line, None)?;
    Ok(data.count())
}
