//! `icefold demo`: the built-in scenario (the invented planet Kessra), its file and pictures.

use crate::config;
use crate::error::Error;
use crate::jobs;
use std::path::Path;

/// The demo's config and forcing history, compiled in so the demo needs no files.
pub const CONFIG: &str = include_str!("../../configs/demo-kessra.toml");
/// The forcing CSV the config names.
pub const FORCING: &str = include_str!("../../configs/demo-kessra-forcing.csv");

/// Run the demo into `out_dir`.
pub fn main(out_dir: &Path) -> Result<(), Error> {
    std::fs::create_dir_all(out_dir)
        .map_err(|e| Error::Usage(format!("cannot create demo directory {}: {e}", out_dir.display())))?;
    let write = |name: &str, text: &str| {
        std::fs::write(out_dir.join(name), text)
            .map_err(|e| Error::Usage(format!("cannot write {}: {e}", out_dir.join(name).display())))
    };
    write("demo-kessra.toml", CONFIG)?;
    write("demo-kessra-forcing.csv", FORCING)?;
    let cfg = config::load(&out_dir.join("demo-kessra.toml"), &[])?;
    let file = out_dir.join("kessra-run.nc");
    let _ = std::fs::remove_file(&file);
    let report = jobs::run::run_job(
        &cfg,
        &file,
        &super::command_line(),
        &super::progress::Bar::new(),
        &Default::default(),
    )?;
    info!(
        "icefold demo: {} model years in {} steps; final global mean {:.1} K, ice edge {:.1} degrees N",
        report.summary.t_end,
        report.summary.stats.steps,
        report.final_global_mean,
        report.final_ice_edge_north
    );
    for p in jobs::pictures::pictures(&file, out_dir)? {
        info!("icefold demo: wrote {}", p.display());
    }
    info!(
        "icefold demo: wrote {} (open with xarray: xr.open_dataset(path, engine=\"h5netcdf\"))",
        file.display()
    );
    Ok(())
}
