//! `icefold export FILE --csv`: variables of any icefold file as a CSV table, for scripts.
//!
//! The variables of one table share their dimensions. 1-D variables become columns against
//! their dimension; a field of two (or more) dimensions becomes a long table with one row per
//! element (row-major, the last dimension fastest) and one leading column per dimension. Each
//! dimension's column holds its coordinate variable's values where the file has one
//! (`time`, `lat`, `member`, ...), otherwise the index from 0 (`step`, `point`, ...).

use crate::error::Error;
use crate::output::{NcReader, OutputError};
use std::io::Write;
use std::path::{Path, PathBuf};

/// What `icefold export` was asked for.
#[derive(Debug, clap::Args)]
pub struct ExportArgs {
    /// An icefold output file (any kind).
    pub file: PathBuf,
    /// Write CSV (the default, and for now the only format): a header line of names, then one
    /// line per row, values in the shortest form that reads back to the same f64.
    #[arg(long)]
    pub csv: bool,
    /// Export these variables (repeatable or comma-separated); they must share their
    /// dimensions. Default: every variable on the file kind's main dimensions (run: time;
    /// equilibrium: lat; sweep: step; branches: point; ensemble: member; regimes: the map's
    /// two axes).
    #[arg(long = "var", value_name = "NAME", value_delimiter = ',')]
    pub vars: Vec<String>,
    /// Export every variable on exactly these dimensions, comma-separated in the file's order
    /// (e.g. `--dim time` or `--dim time,lat`); `icefold inspect FILE` lists them.
    #[arg(
        long = "dim",
        value_name = "DIM[,DIM]",
        value_delimiter = ',',
        conflicts_with = "vars"
    )]
    pub dims: Vec<String>,
    /// Write the table to FILE instead of standard output.
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace an existing output file.
    #[arg(long)]
    pub overwrite: bool,
}

/// One column of the table: a name and its values (row-major over the table's dimensions, or
/// over one dimension for a coordinate column).
struct Column {
    name: String,
    values: Vec<f64>,
}

/// The table: its dimensions (name, length), one column per dimension, then the variables.
struct Table {
    dims: Vec<(String, usize)>,
    coords: Vec<Column>,
    vars: Vec<Column>,
}

/// Export the file as asked.
pub fn main(args: &ExportArgs) -> Result<(), Error> {
    if let Some(out) = &args.output {
        super::check_output_name(out)?;
        if out.exists() && !args.overwrite {
            return Err(Error::Usage(format!(
                "output file {} exists; pass --overwrite to replace it (it is kept as it is)",
                out.display()
            )));
        }
    }
    let r = NcReader::open(&args.file)?;
    let kind = crate::output::damage::icefold_kind(&r)?;
    // A damaged file is refused (exit 2) rather than exported as if it were whole.
    crate::output::damage::check(&r, &kind)?;
    let table = table(&r, &kind, &args.vars, &args.dims)?;
    if r.attr_i64("complete")? == Some(0) {
        eprintln!(
            "icefold: warning: {} is incomplete (complete = 0: interrupted or failed); the table holds what the job finished",
            args.file.display()
        );
    }
    match &args.output {
        None => {
            let stdout = std::io::stdout();
            let mut w = std::io::BufWriter::new(stdout.lock());
            match write_csv(&table, &mut w).and_then(|()| w.flush()) {
                // A reader that stops early (`| head`) is no failure.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
                Err(e) => Err(Error::Other(format!("cannot write to standard output: {e}"))),
                Ok(()) => Ok(()),
            }
        }
        Some(out) => write_file(&table, out, args.overwrite),
    }
}

/// The dimensions whose variables are exported when no `--var` or `--dim` is given: those of
/// the kind's main variable.
fn main_dims(r: &NcReader, kind: &str) -> Result<Vec<String>, Error> {
    let anchor = match kind {
        "run" => "global_mean_temperature",
        "equilibrium" => "surface_temperature",
        "sweep" | "branches" => "control",
        "ensemble" => "member",
        "regimes" => "stable_count",
        other => {
            return Err(Error::Usage(format!(
                "{}: no default table for a file of kind `{other}`; name the variables with --var or the dimensions with --dim",
                r.path().display()
            )))
        }
    };
    Ok(r.var_dims(anchor)?)
}

/// Choose the variables and read them with their coordinates.
fn table(r: &NcReader, kind: &str, vars: &[String], dims: &[String]) -> Result<Table, Error> {
    let names = r.var_names()?;
    let path = r.path().display().to_string();
    let (dims, chosen): (Vec<String>, Vec<String>) = if !vars.is_empty() {
        for v in vars {
            if !names.contains(v) {
                return Err(Error::Usage(format!(
                    "--var {v}: {path} has no variable `{v}`; it has {}",
                    names.join(", ")
                )));
            }
        }
        let first = r.var_dims(&vars[0])?;
        for v in &vars[1..] {
            let d = r.var_dims(v)?;
            if d != first {
                return Err(Error::Usage(format!(
                    "--var {v} is on ({}) but --var {} on ({}): the variables of one table share their dimensions; export them separately",
                    d.join(", "),
                    vars[0],
                    first.join(", ")
                )));
            }
        }
        (first, vars.to_vec())
    } else {
        let dims = if dims.is_empty() {
            main_dims(r, kind)?
        } else {
            dims.to_vec()
        };
        let mut chosen = Vec::new();
        for v in &names {
            if r.var_dims(v)? == dims && !dims.contains(v) {
                chosen.push(v.clone());
            }
        }
        if chosen.is_empty() && !(dims.len() == 1 && names.contains(&dims[0])) {
            let mut seen: Vec<String> = Vec::new();
            for v in &names {
                let d = r.var_dims(v)?.join(",");
                if !d.is_empty() && !seen.contains(&d) {
                    seen.push(d);
                }
            }
            return Err(Error::Usage(format!(
                "--dim {}: no variable of {path} is on exactly these dimensions; its variables are on {}",
                dims.join(","),
                seen.join("; ")
            )));
        }
        (dims, chosen)
    };
    let mut lens = Vec::with_capacity(dims.len());
    let mut coords = Vec::with_capacity(dims.len());
    for d in &dims {
        let n = r.dim_len(d)?;
        let values = if names.contains(d) && r.var_dims(d)? == [d.clone()] {
            r.read_f64(d)?
        } else {
            (0..n).map(|i| i as f64).collect()
        };
        lens.push((d.clone(), n));
        coords.push(Column {
            name: d.clone(),
            values,
        });
    }
    let rows: usize = lens.iter().map(|(_, n)| n).product();
    let mut columns = Vec::new();
    for v in chosen.iter().filter(|v| !dims.contains(v)) {
        let values = r.read_f64(v)?;
        if values.len() != rows {
            return Err(Error::BadFile(OutputError::Damaged {
                path: r.path().to_path_buf(),
                problem: format!(
                    "variable `{v}` holds {} values, not the {rows} of its dimensions",
                    values.len()
                ),
            }));
        }
        columns.push(Column {
            name: v.clone(),
            values,
        });
    }
    Ok(Table {
        dims: lens,
        coords,
        vars: columns,
    })
}

/// Write the table as CSV: a header, then one line per element of the dimensions.
fn write_csv(t: &Table, w: &mut dyn Write) -> std::io::Result<()> {
    let header: Vec<&str> = t.coords.iter().chain(&t.vars).map(|c| c.name.as_str()).collect();
    writeln!(w, "{}", header.join(","))?;
    let rows: usize = t.dims.iter().map(|(_, n)| n).product();
    let mut index = vec![0usize; t.dims.len()];
    let mut line = String::new();
    for row in 0..rows {
        line.clear();
        for (c, &i) in t.coords.iter().zip(&index) {
            push_value(&mut line, c.values[i]);
        }
        for c in &t.vars {
            push_value(&mut line, c.values[row]);
        }
        line.pop(); // the last separator
        writeln!(w, "{line}")?;
        // Advance the multi-index, last dimension fastest (row-major, as stored).
        for (k, (_, n)) in t.dims.iter().enumerate().rev() {
            index[k] += 1;
            if index[k] < *n {
                break;
            }
            index[k] = 0;
        }
    }
    Ok(())
}

/// One value and a separator: the shortest digits that read back to the same f64, plain
/// from 1e-5 to 1e16 in magnitude (integers without a decimal point) and with an exponent
/// otherwise (`3.3306690738754696e-16`); `NaN`, `inf` or `-inf`.
fn push_value(line: &mut String, v: f64) {
    use std::fmt::Write as _;
    let a = v.abs();
    if v.is_nan() {
        line.push_str("NaN");
    } else if v == 0.0 || !v.is_finite() || (1e-5..1e16).contains(&a) {
        let _ = write!(line, "{v}");
    } else {
        let _ = write!(line, "{v:e}");
    }
    line.push(',');
}

/// Write the table to `out` under a temporary name beside it, then move it there (refusing a
/// file that appeared meanwhile unless `overwrite`), so no half-written table is left.
fn write_file(t: &Table, out: &Path, overwrite: bool) -> Result<(), Error> {
    let dir = out
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or_else(|| Path::new("."));
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let temp = dir.join(format!(".{name}.partial-{}", std::process::id()));
    let fail = |what: &str, e: std::io::Error| {
        let _ = std::fs::remove_file(&temp);
        let err = format!("cannot {what} {}: {e}", out.display());
        if e.kind() == std::io::ErrorKind::NotFound || e.kind() == std::io::ErrorKind::PermissionDenied {
            Error::Usage(err)
        } else {
            Error::Other(err)
        }
    };
    let file = std::fs::File::create(&temp).map_err(|e| fail("create", e))?;
    let mut w = std::io::BufWriter::new(file);
    write_csv(t, &mut w)
        .and_then(|()| w.flush())
        .map_err(|e| fail("write", e))?;
    drop(w);
    if overwrite {
        std::fs::rename(&temp, out).map_err(|e| fail("move the table onto", e))?;
    } else {
        // A hard link refuses an existing target; then the temporary name goes.
        match std::fs::hard_link(&temp, out) {
            Ok(()) => {
                let _ = std::fs::remove_file(&temp);
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                let _ = std::fs::remove_file(&temp);
                return Err(Error::Usage(format!(
                    "output file {} appeared while exporting and is kept as it is; pass --overwrite to replace it",
                    out.display()
                )));
            }
            Err(e) => return Err(fail("move the table onto", e)),
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_long_table_runs_the_last_dimension_fastest() {
        let t = Table {
            dims: vec![("time".into(), 2), ("lat".into(), 3)],
            coords: vec![
                Column {
                    name: "time".into(),
                    values: vec![0.0, 0.5],
                },
                Column {
                    name: "lat".into(),
                    values: vec![-30.0, 0.0, 30.0],
                },
            ],
            vars: vec![Column {
                name: "t".into(),
                values: vec![1.0, 2.0, 3.0, 4.0, f64::NAN, 3.3306690738754696e-16],
            }],
        };
        let mut out = Vec::new();
        write_csv(&t, &mut out).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "time,lat,t\n0,-30,1\n0,0,2\n0,30,3\n0.5,-30,4\n0.5,0,NaN\n0.5,30,3.3306690738754696e-16\n"
        );
    }
}
