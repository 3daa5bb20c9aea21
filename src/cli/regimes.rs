//! `icefold regimes CONFIG`: the map of which climates exist over two control keys.

use super::{ConfigArgs, OutputArgs, ResumeArgs};
use crate::error::Error;
use crate::jobs::regimes::{regimes_job, RegimesOptions};

/// Compute the `[regimes]` map of the config and write the file.
pub fn main(
    args: &ConfigArgs,
    out: &OutputArgs,
    threads: Option<usize>,
    checkpoint_every: Option<usize>,
    resume: &ResumeArgs,
) -> Result<(), Error> {
    super::check_threads(threads)?;
    let cfg = super::load(args)?;
    let path = super::output_path_resuming(out, &args.config, "regimes", resume.resume.is_some())?;
    let opts = RegimesOptions { threads };
    let ck = resume.checkpointing(checkpoint_every.map(|n| n as f64));
    let map = regimes_job(
        &cfg,
        &path,
        &super::command_line(),
        opts,
        &super::progress::Bar::new(),
        &ck,
    )?;
    let folds: usize = map.rows.iter().map(|r| r.folds.len()).sum();
    let most = map
        .rows
        .iter()
        .flat_map(|r| r.stable.iter().copied())
        .max()
        .unwrap_or(0);
    info!(
        "icefold: wrote {} ({} rows x {} columns, {} folds on {} fold lines, up to {} stable states)",
        path.display(),
        map.rows.len(),
        map.columns.len(),
        folds,
        map.lines.len(),
        most
    );
    Ok(())
}
