//! Reading an OLR table: a CSV (the dialect of [`crate::csv`]) with the header
//! `temperature_k,olr_wm2` and at least two rows of strictly increasing temperatures. Every
//! problem names the file and line.

use super::ConfigError;
use crate::csv::{read_text, Reader};
use crate::physics::longwave::OlrTable;
use std::path::Path;

/// Largest table accepted (rows); larger tables are refused.
pub const MAX_TABLE_ROWS: usize = 1_000_000;

/// Largest table file accepted, bytes (refused before it is read).
pub const MAX_TABLE_BYTES: u64 = 64 * 1024 * 1024;

/// Highest table temperature accepted, K (the model's valid range ends at 2000 K).
pub const MAX_TABLE_KELVIN: f64 = 10_000.0;

/// Largest |OLR| accepted, W m-2 (a black body at 2000 K emits about 9.1e5 W m-2), so
/// interpolation slopes cannot overflow.
pub const MAX_TABLE_WM2: f64 = 1e6;

/// Read and check an OLR table.
pub fn read_olr_table(path: &Path) -> Result<OlrTable, ConfigError> {
    let shown = path.display().to_string();
    let text = read_text(path, MAX_TABLE_BYTES, "OLR table (longwave.table)").map_err(|message| {
        ConfigError::DataFile {
            path: shown.clone(),
            message,
        }
    })?;
    parse_olr_table(&text, &shown)
}

/// Parse OLR-table CSV text (`shown` names it in messages).
pub fn parse_olr_table(text: &str, shown: &str) -> Result<OlrTable, ConfigError> {
    let err = |line: usize, m: String| ConfigError::DataFile {
        path: format!("{shown}:{line}"),
        message: m,
    };
    let mut reader = Reader::new(
        text,
        "empty OLR table; expected the header `temperature_k,olr_wm2`",
    )
    .map_err(|e| err(e.line, e.message))?;
    let hl = reader.header_line;
    if reader.names != ["temperature_k", "olr_wm2"] {
        return Err(err(
            hl,
            format!(
                "header is `{}`; expected `temperature_k,olr_wm2`",
                crate::csv::shorten(reader.header)
            ),
        ));
    }
    let (mut temps, mut olr) = (Vec::new(), Vec::new());
    let mut row = Vec::with_capacity(2);
    while let Some(ln) = reader.next_row(&mut row).map_err(|e| err(e.line, e.message))? {
        if temps.len() >= MAX_TABLE_ROWS {
            return Err(err(
                ln,
                format!("more than {MAX_TABLE_ROWS} data rows; that is the limit of an OLR table"),
            ));
        }
        let (t, o) = (row[0], row[1]);
        if !(t > 0.0 && t <= MAX_TABLE_KELVIN) {
            return Err(err(
                ln,
                format!("temperature {t} K is out of range (column `temperature_k`; allowed: above 0 and at most {MAX_TABLE_KELVIN} K)"),
            ));
        }
        if !(o.abs() <= MAX_TABLE_WM2) {
            return Err(err(
                ln,
                format!("OLR {o} W m-2 is out of range (column `olr_wm2`; allowed: from -{MAX_TABLE_WM2} to {MAX_TABLE_WM2} W m-2)"),
            ));
        }
        if let Some(&prev) = temps.last() {
            if t <= prev {
                return Err(err(
                    ln,
                    format!("temperatures must increase strictly: {t} K follows {prev} K"),
                ));
            }
        }
        temps.push(t);
        olr.push(o);
    }
    if temps.len() < 2 {
        return Err(err(
            hl,
            format!("an OLR table needs at least two data rows, found {}", temps.len()),
        ));
    }
    Ok(OlrTable::new(temps, olr))
}
