//! `icefold ensemble CONFIG [--shard K/N]`: Latin hypercube ensemble over the `[ensemble]` keys,
//! members in parallel, one file with a `member` dimension.

use super::{ConfigArgs, OutputArgs, ResumeArgs};
use crate::error::Error;
use crate::jobs::ensemble::{ensemble_job, EnsembleOptions};

/// Run the configured ensemble (or one shard of it).
pub fn main(
    args: &ConfigArgs,
    out: &OutputArgs,
    shard: Option<&str>,
    threads: Option<usize>,
    checkpoint_every: Option<usize>,
    resume: &ResumeArgs,
) -> Result<(), Error> {
    let shard = shard
        .map(crate::ensemble::parse_shard)
        .transpose()
        .map_err(Error::Usage)?;
    super::check_threads(threads)?;
    let cfg = super::load(args)?;
    let command = match shard {
        Some((k, n)) => format!("ensemble-{k}of{n}"),
        None => "ensemble".to_string(),
    };
    let path = super::output_path_resuming(out, &args.config, &command, resume.resume.is_some())?;
    let ck = resume.checkpointing(checkpoint_every.map(|n| n as f64));
    let start = std::time::Instant::now();
    let report = ensemble_job(
        &cfg,
        &path,
        &super::command_line(),
        EnsembleOptions { shard, threads },
        &super::progress::Bar::new(),
        &ck,
    )?;
    info!(
        "icefold: wrote {} (members {} to {}{}, {} failed) in {:.2} s",
        path.display(),
        report.first_member,
        report.first_member + report.members.max(1) - 1,
        shard.map(|(k, n)| format!(", shard {k}/{n}")).unwrap_or_default(),
        report.failed,
        start.elapsed().as_secs_f64()
    );
    Ok(())
}
