//! `icefold plot FILE [--out-dir DIR]`: pictures of any icefold file, as SVG and PNG.

use crate::error::Error;
use crate::jobs::pictures::pictures;
use std::path::Path;

/// Draw the pictures that fit the file's kind.
pub fn main(file: &Path, out_dir: Option<&Path>) -> Result<(), Error> {
    let dir = out_dir.map(Path::to_path_buf).unwrap_or_else(|| {
        file.parent()
            .map(Path::to_path_buf)
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or_else(|| ".".into())
    });
    for p in pictures(file, &dir)? {
        info!("icefold: wrote {}", p.display());
    }
    Ok(())
}
