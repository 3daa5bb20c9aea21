//! Reading an OLR table: a CSV with the header `temperature_k,olr_wm2` and at least two rows of
//! strictly increasing temperatures. Every problem names the file and line.

use super::ConfigError;
use crate::longwave::OlrTable;
use std::path::Path;

/// Largest table accepted (rows); larger tables are refused up front.
pub const MAX_TABLE_ROWS: usize = 1_000_000;

/// Read and check an OLR table.
pub fn read_olr_table(path: &Path) -> Result<OlrTable, ConfigError> {
    let shown = path.display().to_string();
    let meta = std::fs::metadata(path).map_err(|e| ConfigError::DataFile {
        path: shown.clone(),
        message: format!("cannot read OLR table (longwave.table): {e}"),
    })?;
    if meta.len() > 64 * 1024 * 1024 {
        return Err(ConfigError::DataFile {
            path: shown,
            message: format!("OLR table is {} bytes; the limit is 64 MiB", meta.len()),
        });
    }
    let text = std::fs::read_to_string(path).map_err(|e| ConfigError::DataFile {
        path: shown.clone(),
        message: format!("cannot read OLR table (longwave.table): {e}"),
    })?;
    parse_olr_table(&text, &shown)
}

/// Parse OLR-table CSV text (`shown` names it in messages).
pub fn parse_olr_table(text: &str, shown: &str) -> Result<OlrTable, ConfigError> {
    let err = |line: usize, m: String| ConfigError::DataFile {
        path: format!("{shown}:{line}"),
        message: m,
    };
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let (hl, header) = lines.next().ok_or_else(|| {
        err(
            1,
            "empty OLR table; expected the header `temperature_k,olr_wm2`".into(),
        )
    })?;
    let cols: Vec<&str> = header.split(',').map(str::trim).collect();
    if cols != ["temperature_k", "olr_wm2"] {
        return Err(err(
            hl,
            format!("header is `{header}`; expected `temperature_k,olr_wm2`"),
        ));
    }
    let (mut temps, mut olr) = (Vec::new(), Vec::new());
    for (ln, line) in lines {
        if temps.len() >= MAX_TABLE_ROWS {
            return Err(err(
                ln,
                format!("more than {MAX_TABLE_ROWS} rows; that is the limit"),
            ));
        }
        let fields: Vec<&str> = line.split(',').map(str::trim).collect();
        if fields.len() != 2 {
            return Err(err(ln, format!("expected 2 fields, found {}", fields.len())));
        }
        let mut vals = [0.0; 2];
        for (k, f) in fields.iter().enumerate() {
            let v: f64 = f
                .parse()
                .map_err(|_| err(ln, format!("`{f}` is not a number (column {})", cols[k])))?;
            if !v.is_finite() {
                return Err(err(ln, format!("`{f}` is not finite (column {})", cols[k])));
            }
            vals[k] = v;
        }
        if vals[0] <= 0.0 {
            return Err(err(ln, format!("temperature {} K must be positive", vals[0])));
        }
        if let Some(&prev) = temps.last() {
            if vals[0] <= prev {
                return Err(err(
                    ln,
                    format!(
                        "temperatures must increase strictly: {} K follows {prev} K",
                        vals[0]
                    ),
                ));
            }
        }
        temps.push(vals[0]);
        olr.push(vals[1]);
    }
    if temps.len() < 2 {
        return Err(err(hl, "an OLR table needs at least two rows".into()));
    }
    Ok(OlrTable::new(temps, olr))
}
