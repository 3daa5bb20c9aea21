//! `icefold run CONFIG`: integrate through time and stream the trajectory to a file.

use super::{ConfigArgs, OutputArgs, ResumeArgs};
use crate::error::Error;
use crate::jobs;

/// Run the configured scenario.
pub fn main(
    args: &ConfigArgs,
    out: &OutputArgs,
    checkpoint_every: Option<f64>,
    resume: &ResumeArgs,
) -> Result<(), Error> {
    let started = std::time::Instant::now();
    let cfg = super::load(args)?;
    let path = super::output_path_resuming(out, &args.config, "run", resume.resume.is_some())?;
    let ck = resume.checkpointing(checkpoint_every);
    let report = jobs::run::run_job(
        &cfg,
        &path,
        &super::command_line(),
        &super::progress::Bar::new(),
        &ck,
    )?;
    info!(
        "icefold: wrote {} ({} records, {} steps, {} right-hand-side evaluations); final global mean {:.3} K, ice edge {:.2} degrees N; {:.2} ms stepping of {:.2} ms in all",
        path.display(),
        report.summary.outputs,
        report.summary.stats.steps,
        report.summary.stats.rhs_evals,
        report.final_global_mean,
        report.final_ice_edge_north,
        1e3 * report.summary.stepping_seconds,
        1e3 * started.elapsed().as_secs_f64()
    );
    Ok(())
}
