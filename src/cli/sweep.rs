//! `icefold sweep CONFIG`: two-way quasi-static sweep with refined tipping points.

use super::{ConfigArgs, OutputArgs, ResumeArgs};
use crate::equilibrium::control::control_units;
use crate::equilibrium::sweep::hysteresis_text;
use crate::error::Error;
use crate::jobs::sweep::sweep_job;

/// Run the `[sweep]` of the config and write the file.
pub fn main(
    args: &ConfigArgs,
    out: &OutputArgs,
    checkpoint_every: Option<usize>,
    resume: &ResumeArgs,
) -> Result<(), Error> {
    let cfg = super::load(args)?;
    let path = super::output_path_resuming(out, &args.config, "sweep", resume.resume.is_some())?;
    let ck = resume.checkpointing(checkpoint_every.map(|n| n as f64));
    let r = sweep_job(
        &cfg,
        &path,
        &super::command_line(),
        &super::progress::Bar::new(),
        &ck,
    )?;
    let tips: Vec<String> = r
        .tipping
        .iter()
        .map(|t| {
            let way = if t.direction > 0 { "up" } else { "down" };
            if t.resolved {
                format!("{:.6} ({way})", t.control)
            } else {
                let (a, b) = (t.bracket.0.min(t.bracket.1), t.bracket.0.max(t.bracket.1));
                format!("unresolved between {a:.6} and {b:.6} ({way})")
            }
        })
        .collect();
    info!(
        "icefold: wrote {} ({} steps, {} time-stepped); tipping points: {}; {}",
        path.display(),
        r.steps.len(),
        r.settled_steps,
        if tips.is_empty() {
            "none".to_string()
        } else {
            tips.join(", ")
        },
        hysteresis_text(
            r.hysteresis_width,
            r.hysteresis_missing.as_deref(),
            control_units(cfg.spec.sweep.as_ref().map_or("", |s| s.control.as_str()))
        )
    );
    if r.unsettled_steps > 0 {
        eprintln!(
            "icefold: warning: {} steps reached sweep.settle_max_years before the settle criterion",
            r.unsettled_steps
        );
    }
    Ok(())
}
