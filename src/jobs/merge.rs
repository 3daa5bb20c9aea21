//! The `merge` job: shard files of one ensemble joined into the file a single run writes.

use crate::error::Error;
use crate::interrupt::StopFlag;
use crate::output::ensemble_file;
use std::path::Path;

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
