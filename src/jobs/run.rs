//! The `run` job: build the model, integrate, stream the trajectory to a file.

use crate::cli::progress;
use crate::config::Loaded;
use crate::error::Error;
use crate::integrate::driver::{self, RunError, RunSummary};
use crate::model::Model;
use crate::output::common::Provenance;
use crate::output::run_file::RunWriter;
use crate::output::Attr;
use std::path::Path;

/// What a finished run reports.
#[derive(Debug, Clone)]
pub struct RunReport {
    /// Driver summary.
    pub summary: RunSummary,
    /// Final global-mean temperature, K.
    pub final_global_mean: f64,
    /// Final northern ice-edge latitude, degrees.
    pub final_ice_edge_north: f64,
}

/// Provenance for a loaded config and command line.
pub fn provenance(cfg: &Loaded, command_line: &str) -> Provenance {
    Provenance {
        config_toml: cfg.resolved_text(),
        command_line: command_line.to_string(),
        title: cfg.spec.title.clone(),
    }
}

/// Build the model a loaded config describes.
pub fn build_model(cfg: &Loaded) -> Result<Model, Error> {
    Ok(Model::from_spec(&cfg.spec.model))
}

/// Run and write the file at `path`. On a numerical failure the records computed so far are
/// kept in a complete, readable file marked `complete = 0` with the failure message, and the
/// error is returned (exit 3).
pub fn run_to_file(
    cfg: &Loaded,
    path: &Path,
    command_line: &str,
    show_progress: bool,
) -> Result<RunReport, Error> {
    let model = build_model(cfg)?;
    let y0 = model.initial_state(&cfg.spec.initial);
    let mut writer = RunWriter::create(path, &model, &provenance(cfg, command_line))?;
    let time = &cfg.spec.time;
    if let crate::config::spec::OutputMode::AnnualMean { samples_per_year } = time.output {
        writer.annual_means(samples_per_year)?;
    }
    let total = driver::output_count(time.years, time.output_every);
    let pb = if show_progress {
        progress::bar(total, "model years")
    } else {
        indicatif::ProgressBar::hidden()
    };
    pb.set_length((time.years.ceil() as u64).max(1));
    let mut on_progress = |t: f64| pb.set_position(t as u64);
    let result = driver::run(&model, time, &y0, &mut writer, &mut on_progress);
    pb.finish_and_clear();
    match result {
        Ok(summary) => {
            writer.set_attr("steps", Attr::I64(summary.stats.steps as i64))?;
            writer.set_attr("rhs_evaluations", Attr::I64(summary.stats.rhs_evals as i64))?;
            for (name, value) in super::diagnostics::run_attrs(cfg, &model, &y0, &writer.regression()) {
                writer.set_attr(name, value)?;
            }
            writer.finish(true)?;
            let final_global_mean = model.global_mean(&summary.final_state);
            let final_ice_edge_north = model.ice_edges(&summary.final_state).0;
            Ok(RunReport {
                summary,
                final_global_mean,
                final_ice_edge_north,
            })
        }
        Err(RunError::Solver(e)) => {
            writer.set_attr("failure", Attr::Str(e.to_string()))?;
            let kept = writer.records();
            writer.finish(false)?;
            let _ = kept;
            Err(Error::Solver(e))
        }
        Err(e) => Err(Error::from(e)),
    }
}
