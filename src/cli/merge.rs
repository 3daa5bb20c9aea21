//! `icefold merge FILE... -o FILE`: join ensemble shard files into the file a single run writes.

use crate::error::Error;
use std::path::PathBuf;

/// Merge the shards.
pub fn main(inputs: &[PathBuf], output: &PathBuf, overwrite: bool) -> Result<(), Error> {
    super::check_output_name(output)?;
    if !overwrite {
        crate::output::forbid_replacing(output);
    }
    if output.exists() && !overwrite {
        return Err(Error::Usage(format!(
            "output file {} exists; pass --overwrite to replace it (it is kept as it is)",
            output.display()
        )));
    }
    if inputs.iter().any(|p| p == output) {
        return Err(Error::Usage(format!(
            "{} is both an input and the output",
            output.display()
        )));
    }
    let n = crate::jobs::ensemble::merge_files(inputs, output, &super::command_line())?;
    info!(
        "icefold: merged {} files into {} ({n} members)",
        inputs.len(),
        output.display()
    );
    Ok(())
}
