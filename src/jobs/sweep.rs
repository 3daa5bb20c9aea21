//! The `sweep` job: the two-way quasi-static sweep of `[sweep]`, from the config's initial
//! state settled at the first value, and its file.

use super::equilibrium::{family, require_steady};
use super::run::{build_model, provenance};
use super::run::{interrupted, remove_restart, restart_error, Checkpointing};
use super::Ending;
use crate::checkpoint::{self, Restart, RestartError};
use crate::cli::progress;
use crate::config::spec::SweepSpec;
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::sweep::{
    sweep_from, Reached, SweepError, SweepProgress, SweepResult, SweepRun, SweepStep, Tipping, Tolerances,
};
use crate::error::Error;
use crate::interrupt::StopFlag;
use crate::output::sweep_file::write_sweep_with;
use crate::output::Attr;
use std::path::Path;

/// The validated `[sweep]` section, or a config error naming what is missing.
pub fn sweep_spec(cfg: &Loaded) -> Result<&SweepSpec, ConfigError> {
    super::control_section(
        cfg,
        cfg.spec.sweep.as_ref(),
        |s| [s.from, s.to],
        "sweep",
        "control (a dotted key such as \"insolation.solar_constant\"), from, to and steps",
    )
}

/// Run the sweep of a loaded config (no file).
pub fn run_sweep(cfg: &Loaded, show_progress: bool) -> Result<SweepResult, Error> {
    let run = run_sweep_from(cfg, show_progress, SweepProgress::default(), &mut |_| false)?;
    match run.error {
        Some(e) => Err(sweep_error(e)),
        None => Ok(run.result),
    }
}

fn sweep_error(e: SweepError) -> Error {
    match e {
        SweepError::Config(c) => Error::Config(c),
        SweepError::Solver(s) => Error::Solver(s),
    }
}

/// The sweep from `progress`, with `on_step` after each finished step (`true`: stop).
fn run_sweep_from(
    cfg: &Loaded,
    show_progress: bool,
    progress: SweepProgress,
    on_step: &mut dyn FnMut(&SweepProgress) -> bool,
) -> Result<SweepRun, Error> {
    require_steady(cfg)?;
    let spec = sweep_spec(cfg)?;
    let fam = family(cfg, "sweep.control", &spec.control, [spec.from, spec.to])?;
    let start = fam.model_at(spec.from)?.initial_state(&cfg.spec.initial);
    let pb = if show_progress {
        progress::bar(2 * spec.steps as u64, "sweep steps")
    } else {
        indicatif::ProgressBar::hidden()
    };
    pb.set_position(progress.steps.len() as u64);
    let mut hook = |p: &SweepProgress| {
        pb.set_position(p.steps.len() as u64);
        on_step(p)
    };
    // Settling uses the configured local error per step ([time] tolerance); Newton finishes it
    // on the exact equilibrium, so only the basin has to be right.
    let tol = Tolerances {
        newton_wm2: cfg.spec.equilibrium.tolerance_wm2,
        step_k: cfg.spec.time.tolerance,
    };
    let r = sweep_from(&fam, spec, &start, tol, progress, &mut hook);
    pb.finish_and_clear();
    Ok(r)
}

/// Run the sweep and write the file at `path`.
pub fn sweep_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
) -> Result<SweepResult, Error> {
    sweep_job(cfg, path, command_line, show_progress, &Checkpointing::default())
}

/// [`sweep_to_file`] with checkpoints every `ck.every` finished steps into `<path>.restart`
/// and/or resuming from `ck.resume`. On SIGINT/SIGTERM (after the next finished step) or a
/// numerical failure the steps so far are written with `complete = 0` and `steps_done`
/// (and `failure`).
pub fn sweep_job(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
    ck: &Checkpointing,
) -> Result<SweepResult, Error> {
    let every = match ck.every {
        Some(e) if !(e >= 1.0) || e.fract() != 0.0 => {
            return Err(Error::Usage(format!(
                "--checkpoint-every-steps {e}: give a whole number of steps, at least 1"
            )))
        }
        Some(e) => Some(e as usize),
        None => None,
    };
    let start = match ck.load("sweep", cfg)? {
        Some(r) => restore_progress(&r, build_model(cfg)?.len()).map_err(restart_error)?,
        None => SweepProgress::default(),
    };
    let restart = checkpoint::restart_path(path);
    let text = cfg.resolved_text();
    let mut saved = false;
    let mut save_error = None;
    let mut stopped_by = None;
    let mut hook = |p: &SweepProgress| {
        let sig = StopFlag.requested();
        if let Some(n) = every {
            if p.steps.len() % n == 0 || sig.is_some() {
                match save_progress(p, &text).save(&restart) {
                    Ok(()) => saved = true,
                    Err(e) => {
                        save_error = Some(e);
                        return true;
                    }
                }
            }
        }
        stopped_by = sig;
        sig.is_some()
    };
    let run = run_sweep_from(cfg, show_progress, start, &mut hook)?;
    if let Some(e) = save_error {
        return Err(Error::Other(e.to_string()));
    }
    let model = build_model(cfg)?;
    let spec = sweep_spec(cfg)?;
    let prov = provenance(cfg, command_line);
    let done = run.result.steps.len() as i64;
    let last = run.result.steps.last().map_or(f64::NAN, |s| s.control);
    let reached = vec![
        ("steps_done".to_string(), Attr::I64(done)),
        ("control_reached".to_string(), Attr::F64(last)),
    ];
    let ending = Ending::of(run.error.as_ref(), run.stopped, stopped_by);
    write_sweep_with(
        path,
        &model,
        &prov,
        spec,
        &run.result,
        &ending.completion(reached),
    )?;
    if let Some(e) = run.error {
        return Err(sweep_error(e));
    }
    if let Ending::Stopped(sig) = ending {
        return Err(interrupted(
            sig,
            format!(
                "stopped after sweep step {done} of {} (control {last})",
                2 * spec.steps
            ),
            path,
            saved.then_some(restart.as_path()),
        ));
    }
    if every.is_some() || ck.resume.is_some() {
        remove_restart(path);
    }
    Ok(run.result)
}

/// The restart content of a sweep's progress.
fn save_progress(p: &SweepProgress, config_text: &str) -> Restart {
    let mut r = Restart::new("sweep", config_text);
    let f: Vec<f64> = p
        .steps
        .iter()
        .flat_map(|s| {
            [
                s.control,
                s.global_mean,
                s.ice_edge,
                s.ice_edge_south.unwrap_or(f64::NAN),
                s.leading,
                s.settle_years,
                s.max_rate,
            ]
        })
        .collect();
    let i: Vec<u64> = p
        .steps
        .iter()
        .flat_map(|s| {
            [
                (s.direction + 1) as u64,
                u64::from(s.ice_edge_south.is_some()),
                u64::from(s.settled),
                u64::from(s.reached == Reached::Settled),
            ]
        })
        .collect();
    r.put_f64("sweep.steps.f", &f);
    r.put_u64("sweep.steps.i", &i);
    r.put_f64(
        "sweep.steps.state",
        &p.steps.iter().flat_map(|s| s.state.clone()).collect::<Vec<_>>(),
    );
    let tf: Vec<f64> = p
        .tipping
        .iter()
        .flat_map(|t| {
            [
                t.control,
                t.bracket.0,
                t.bracket.1,
                t.ice_edge_before,
                t.ice_edge_after,
                t.global_mean_before,
                t.global_mean_after,
                t.after_control,
            ]
        })
        .collect();
    let ti: Vec<u64> = p
        .tipping
        .iter()
        .flat_map(|t| [(t.direction + 1) as u64, t.step as u64, u64::from(t.resolved)])
        .collect();
    r.put_f64("sweep.tipping.f", &tf);
    r.put_u64("sweep.tipping.i", &ti);
    r.put_f64(
        "sweep.tipping.after_state",
        &p.tipping
            .iter()
            .flat_map(|t| t.after_state.clone())
            .collect::<Vec<_>>(),
    );
    r.put_u64(
        "sweep.counts",
        &[p.settled_steps as u64, p.unsettled_steps as u64],
    );
    r.put_u64("sweep.has_carry", &[u64::from(p.carry.is_some())]);
    r.put_f64("sweep.carry", p.carry.as_deref().unwrap_or(&[]));
    r.put_f64("sweep.eigen_guess", &[p.eigen_guess]);
    r
}

/// The progress `save_progress` stored, for a grid of `n` bands.
fn restore_progress(r: &Restart, n: usize) -> Result<SweepProgress, RestartError> {
    let (f, i, st) = (
        r.f64s("sweep.steps.f")?,
        r.u64s("sweep.steps.i")?,
        r.f64s("sweep.steps.state")?,
    );
    let k = f.len() / 7;
    if f.len() != 7 * k || i.len() != 4 * k || st.len() != n * k {
        return Err(r.bad("sweep step arrays do not match the step count and the grid"));
    }
    let steps = (0..k)
        .map(|j| {
            let (f, i) = (&f[7 * j..7 * j + 7], &i[4 * j..4 * j + 4]);
            SweepStep {
                control: f[0],
                direction: i[0] as i32 - 1,
                state: st[n * j..n * (j + 1)].to_vec(),
                global_mean: f[1],
                ice_edge: f[2],
                ice_edge_south: (i[1] != 0).then_some(f[3]),
                leading: f[4],
                settle_years: f[5],
                max_rate: f[6],
                settled: i[2] != 0,
                reached: if i[3] != 0 {
                    Reached::Settled
                } else {
                    Reached::Followed
                },
            }
        })
        .collect();
    let (tf, ti, ta) = (
        r.f64s("sweep.tipping.f")?,
        r.u64s("sweep.tipping.i")?,
        r.f64s("sweep.tipping.after_state")?,
    );
    let m = tf.len() / 8;
    if tf.len() != 8 * m || ti.len() != 3 * m || ta.len() != n * m {
        return Err(r.bad("sweep tipping arrays do not match"));
    }
    let tipping = (0..m)
        .map(|j| {
            let (f, i) = (&tf[8 * j..8 * j + 8], &ti[3 * j..3 * j + 3]);
            Tipping {
                control: f[0],
                resolved: i[2] != 0,
                bracket: (f[1], f[2]),
                direction: i[0] as i32 - 1,
                step: i[1] as usize,
                ice_edge_before: f[3],
                ice_edge_after: f[4],
                global_mean_before: f[5],
                global_mean_after: f[6],
                after_control: f[7],
                after_state: ta[n * j..n * (j + 1)].to_vec(),
            }
        })
        .collect();
    let counts = r.u64s("sweep.counts")?;
    if counts.len() != 2 {
        return Err(r.bad("sweep.counts needs 2 values"));
    }
    let carry = r.f64s("sweep.carry")?;
    Ok(SweepProgress {
        steps,
        tipping,
        settled_steps: counts[0] as usize,
        unsettled_steps: counts[1] as usize,
        carry: (r.u64("sweep.has_carry")? != 0).then(|| carry.to_vec()),
        eigen_guess: r.f64("sweep.eigen_guess")?,
    })
}
