//! `icefold regimes CONFIG`: the map of which climates exist over two control keys.

use super::{ConfigArgs, OutputArgs};
use crate::error::Error;
use crate::jobs::regimes::{regimes_to_file, RegimesOptions};

/// Compute the `[regimes]` map of the config and write the file.
pub fn main(args: &ConfigArgs, out: &OutputArgs, threads: Option<usize>) -> Result<(), Error> {
    let cfg = super::load(args)?;
    let path = super::output_path(out, &args.config, "regimes")?;
    let opts = RegimesOptions {
        threads,
        progress: true,
    };
    let map = regimes_to_file(&cfg, &path, &super::command_line(), opts)?;
    let folds: usize = map.rows.iter().map(|r| r.folds.len()).sum();
    let most = map
        .rows
        .iter()
        .flat_map(|r| r.stable.iter().copied())
        .max()
        .unwrap_or(0);
    eprintln!(
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
