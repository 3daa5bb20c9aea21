//! Command-line interface: clap definitions and one module per subcommand (DESIGN section 4).
//! `main.rs` only calls `cli::main` and exits with its status.

/// An informational line on stderr (`icefold: wrote ...`), left out under `--quiet`. Warnings
/// and errors use `eprintln!` directly: they are printed whatever `--quiet` says.
macro_rules! info {
    ($($arg:tt)*) => {
        if !$crate::cli::quiet() {
            eprintln!($($arg)*);
        }
    };
}

mod branches;
mod check;
mod demo;
mod ensemble;
mod equilibrium;
mod export;
mod merge;
mod regimes;
mod sweep;

mod inspect;
mod plot;
pub mod progress;
mod run;

use crate::config::{self, Loaded};
use crate::error::Error;
use clap::{CommandFactory, Parser, Subcommand};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

/// The exit statuses, shown at the end of `--help` and in the man page (see `crate::error`).
pub const EXIT_STATUS: &[(&str, &str)] = &[
    ("0", "success"),
    ("1", "other failure (e.g. a full disk while writing)"),
    ("2", "bad input: command line, config, input file, or an output path that exists or cannot be written"),
    ("3", "numerical failure (the message names the model time, latitude and value)"),
    ("130", "interrupted by SIGINT (Ctrl-C); a run, sweep, branches, ensemble or regimes job keeps a file marked complete = 0"),
    ("143", "interrupted by SIGTERM (likewise)"),
];

/// `--help`'s closing section: the exit statuses, one per line.
fn exit_status_help() -> String {
    let mut s = String::from("Exit status:\n");
    for (code, what) in EXIT_STATUS {
        s.push_str(&format!("  {code:>3}  {what}\n"));
    }
    s
}

/// icefold: an idealised latitude-resolved energy-balance climate model with ice-albedo feedback.
#[derive(Debug, Parser)]
#[command(name = "icefold", version, about, long_about = None, propagate_version = true,
    after_help = exit_status_help())]
pub struct Cli {
    /// No progress bars and no informational lines on stderr; warnings and errors are still
    /// printed, and a command's own output (stdout) is unchanged.
    #[arg(short, long, global = true)]
    pub quiet: bool,
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Set by `--quiet` before the command runs.
static QUIET: AtomicBool = AtomicBool::new(false);

/// Whether `--quiet` was given: no progress bars, no informational lines.
pub fn quiet() -> bool {
    QUIET.load(Ordering::Relaxed)
}

/// Whether to show a progress bar (still only on a terminal; see `progress`).
pub fn show_progress() -> bool {
    !quiet()
}

/// Options shared by commands that read a config.
#[derive(Debug, clap::Args)]
pub struct ConfigArgs {
    /// The TOML configuration file.
    pub config: PathBuf,
    /// Override a config key, e.g. `--set transport.diffusivity=0.5` (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub sets: Vec<String>,
}

/// Options shared by commands that write a file.
#[derive(Debug, clap::Args)]
pub struct OutputArgs {
    /// Output file (netCDF-4/HDF5). Default: `<config name>-<command>.nc` here.
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace an existing output file.
    #[arg(long)]
    pub overwrite: bool,
}

/// Continue from a checkpoint.
#[derive(Debug, clap::Args)]
pub struct ResumeArgs {
    /// Continue from this restart file (written beside the output as `<output>.restart` by the
    /// `--checkpoint-every*` option); the resolved config must be the one it was made with. An
    /// existing incomplete output (complete = 0) is replaced without --overwrite.
    #[arg(long, value_name = "FILE")]
    pub resume: Option<PathBuf>,
}

impl ResumeArgs {
    /// The job's checkpoint settings: a checkpoint every `every` (years, steps, seeds, members
    /// or rows, by command) and this resume file.
    pub fn checkpointing(&self, every: Option<f64>) -> crate::jobs::run::Checkpointing {
        crate::jobs::run::Checkpointing {
            every,
            resume: self.resume.clone(),
        }
    }
}

/// Refuse `--threads 0` (1 or more workers, or none given for all cores).
fn check_threads(threads: Option<usize>) -> Result<(), Error> {
    if threads == Some(0) {
        return Err(Error::Usage(
            "--threads 0: give at least 1 (or leave it out for all cores)".into(),
        ));
    }
    Ok(())
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Integrate the model through time and write the trajectory.
    Run {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Write a restart file beside the output every YEARS of model time.
        #[arg(long, value_name = "YEARS")]
        checkpoint_every: Option<f64>,
        #[command(flatten)]
        resume: ResumeArgs,
    },
    /// Solve for a steady state and its stability spectrum.
    Equilibrium {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Starting climate: the config's initial state (with `initial.temperature_p1_k` an
        /// asymmetric one), or a named one (`north-cap`, `south-cap`: a globe with ice in one
        /// hemisphere only).
        #[arg(long, value_enum, default_value = "config")]
        start: equilibrium::Start,
    },
    /// Quasi-static two-way sweep of a control parameter with refined tipping points.
    Sweep {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Write a restart file beside the output every N finished sweep steps.
        #[arg(long, value_name = "N")]
        checkpoint_every_steps: Option<usize>,
        #[command(flatten)]
        resume: ResumeArgs,
    },
    /// Pseudo-arclength continuation of all equilibrium branches through folds.
    Branches {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Write a restart file beside the output every N finished seeds (each traced branch
        /// or seed found on a known branch).
        #[arg(long, value_name = "N")]
        checkpoint_every_seeds: Option<usize>,
        #[command(flatten)]
        resume: ResumeArgs,
    },
    /// Latin hypercube ensemble over the `[ensemble]` keys, members in parallel.
    Ensemble {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Run only slice K of N (K from 0 to N-1, e.g. $SLURM_ARRAY_TASK_ID/N).
        #[arg(long, value_name = "K/N")]
        shard: Option<String>,
        /// Worker threads (default: all cores, or RAYON_NUM_THREADS).
        #[arg(long, value_name = "N")]
        threads: Option<usize>,
        /// Write a restart file beside the output every N finished members.
        #[arg(long, value_name = "N")]
        checkpoint_every_members: Option<usize>,
        #[command(flatten)]
        resume: ResumeArgs,
    },
    /// Map of which climates exist over two control keys (`[regimes]`), rows in parallel.
    Regimes {
        #[command(flatten)]
        config: ConfigArgs,
        #[command(flatten)]
        output: OutputArgs,
        /// Worker threads (default: all cores, or RAYON_NUM_THREADS).
        #[arg(long, value_name = "N")]
        threads: Option<usize>,
        /// Write a restart file beside the output every N finished rows (rows run N at a time).
        #[arg(long, value_name = "N")]
        checkpoint_every_rows: Option<usize>,
        #[command(flatten)]
        resume: ResumeArgs,
    },
    /// Join ensemble shard files into the file a single run writes.
    Merge {
        /// The shard files (any order).
        #[arg(required = true)]
        files: Vec<PathBuf>,
        /// The merged file.
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: PathBuf,
        /// Replace an existing output file.
        #[arg(long)]
        overwrite: bool,
    },
    /// Validate a config and print it with every default filled in.
    Check {
        #[command(flatten)]
        config: ConfigArgs,
    },
    /// Print a short summary of any icefold output file.
    Inspect {
        /// The file.
        file: PathBuf,
        /// Print the summary as JSON (the same facts, typed).
        #[arg(long)]
        json: bool,
    },
    /// Draw the pictures of an output file (SVG and PNG).
    Plot {
        /// The file.
        file: PathBuf,
        /// Where to write the pictures (default: beside the file).
        #[arg(long)]
        out_dir: Option<PathBuf>,
    },
    /// Run the built-in demonstration scenario and draw its pictures.
    Demo {
        /// Where to write the files.
        #[arg(long, default_value = "icefold-demo")]
        out_dir: PathBuf,
    },
    /// Write variables of any icefold file as a CSV table (to stdout, or -o FILE).
    Export(export::ExportArgs),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell) to stdout.
    Completions {
        /// The shell.
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print the man page (roff) to stdout, or write one page per command into a directory.
    Manpage {
        /// Write icefold.1 and icefold-COMMAND.1 for every command into this directory.
        #[arg(long, value_name = "DIR")]
        out_dir: Option<PathBuf>,
    },
}

/// Parse the command line, run the command, print any error; returns the exit status.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return code;
        }
    };
    QUIET.store(cli.quiet, Ordering::Relaxed);
    match dispatch(cli) {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("icefold: {e}");
            e.exit_code()
        }
    }
}

/// The command line as one string, for provenance.
pub fn command_line() -> String {
    std::env::args()
        .map(|a| if a.contains(' ') { format!("'{a}'") } else { a })
        .collect::<Vec<_>>()
        .join(" ")
}

fn dispatch(cli: Cli) -> Result<(), Error> {
    refuse_dash(&cli.command)?;
    if matches!(
        cli.command,
        Command::Run { .. }
            | Command::Equilibrium { .. }
            | Command::Sweep { .. }
            | Command::Branches { .. }
            | Command::Ensemble { .. }
            | Command::Regimes { .. }
            | Command::Merge { .. }
            | Command::Demo { .. }
    ) {
        // Commands that write files stop cleanly on SIGINT/SIGTERM (see `interrupt`).
        crate::interrupt::install();
    }
    match cli.command {
        Command::Run {
            config,
            output,
            checkpoint_every,
            resume,
        } => run::main(&config, &output, checkpoint_every, &resume),
        Command::Equilibrium {
            config,
            output,
            start,
        } => equilibrium::main(&config, &output, start),
        Command::Sweep {
            config,
            output,
            checkpoint_every_steps,
            resume,
        } => sweep::main(&config, &output, checkpoint_every_steps, &resume),
        Command::Branches {
            config,
            output,
            checkpoint_every_seeds,
            resume,
        } => branches::main(&config, &output, checkpoint_every_seeds, &resume),
        Command::Ensemble {
            config,
            output,
            shard,
            threads,
            checkpoint_every_members,
            resume,
        } => ensemble::main(
            &config,
            &output,
            shard.as_deref(),
            threads,
            checkpoint_every_members,
            &resume,
        ),
        Command::Regimes {
            config,
            output,
            threads,
            checkpoint_every_rows,
            resume,
        } => regimes::main(&config, &output, threads, checkpoint_every_rows, &resume),
        Command::Merge {
            files,
            output,
            overwrite,
        } => merge::main(&files, &output, overwrite),
        Command::Check { config } => check::main(&config),
        Command::Inspect { file, json } => inspect::main(&file, json),
        Command::Demo { out_dir } => demo::main(&out_dir),
        Command::Plot { file, out_dir } => plot::main(&file, out_dir.as_deref()),
        Command::Export(args) => export::main(&args),
        Command::Completions { shell } => {
            clap_complete::generate(shell, &mut Cli::command(), "icefold", &mut std::io::stdout());
            Ok(())
        }
        Command::Manpage { out_dir } => manpage(out_dir.as_deref()),
    }
}

/// Refuse `-` as an output file or directory (it would create a file named `-`): only
/// `export` writes to standard output, when `-o` is left out.
fn refuse_dash(command: &Command) -> Result<(), Error> {
    const NC: &str = "it writes a netCDF-4/HDF5 file, never to standard output";
    let (option, path, allowed, noun) = match command {
        Command::Run { output, .. }
        | Command::Equilibrium { output, .. }
        | Command::Sweep { output, .. }
        | Command::Branches { output, .. }
        | Command::Ensemble { output, .. }
        | Command::Regimes { output, .. } => (
            "-o/--output",
            output.output.as_deref(),
            format!(
                "{NC}; give a file name (e.g. -o out.nc), or leave -o out for <config name>-<command>.nc"
            ),
            "file",
        ),
        Command::Merge { output, .. } => (
            "-o/--output",
            Some(output.as_path()),
            format!("{NC}; give a file name (e.g. -o merged.nc)"),
            "file",
        ),
        Command::Export(args) => (
            "-o/--output",
            args.output.as_deref(),
            "leave -o out to write the table to standard output, or give a file name (e.g. -o table.csv)"
                .to_string(),
            "file",
        ),
        Command::Plot { out_dir, .. } | Command::Manpage { out_dir } => (
            "--out-dir",
            out_dir.as_deref(),
            "give a directory name (e.g. --out-dir pictures)".to_string(),
            "directory",
        ),
        Command::Demo { out_dir } => (
            "--out-dir",
            Some(out_dir.as_path()),
            "give a directory name (e.g. --out-dir icefold-demo)".to_string(),
            "directory",
        ),
        Command::Check { .. } | Command::Inspect { .. } | Command::Completions { .. } => return Ok(()),
    };
    if path.is_some_and(|p| p.as_os_str() == "-") {
        return Err(Error::Usage(format!(
            "{option} -: `-` does not stand for standard output here: {allowed} (./- names a {noun} called -)"
        )));
    }
    Ok(())
}

/// The man page of `icefold` (with the exit statuses) on stdout, or every command's page in `dir`.
fn manpage(dir: Option<&Path>) -> Result<(), Error> {
    let mut cmd = Cli::command().disable_help_subcommand(true);
    cmd.build();
    let io = |what: String| move |e: std::io::Error| Error::Other(format!("{what}: {e}"));
    let page = |c: clap::Command, w: &mut dyn std::io::Write| -> std::io::Result<()> {
        let man = clap_mangen::Man::new(c.clone()).date(env!("CARGO_PKG_VERSION"));
        man.render_title(w)?;
        man.render_name_section(w)?;
        man.render_synopsis_section(w)?;
        man.render_description_section(w)?;
        if c.get_arguments().any(|a| !a.is_hide_set()) {
            man.render_options_section(w)?;
        }
        if c.has_subcommands() {
            man.render_subcommands_section(w)?;
        }
        writeln!(w, ".SH \"EXIT STATUS\"")?;
        for (code, what) in EXIT_STATUS {
            writeln!(w, ".TP\n{code}\n{what}")?;
        }
        man.render_version_section(w)
    };
    match dir {
        None => {
            let mut out = std::io::stdout().lock();
            match page(cmd, &mut out) {
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
                r => r.map_err(io("cannot write the man page".into())),
            }
        }
        Some(dir) => {
            std::fs::create_dir_all(dir)
                .map_err(|e| Error::Usage(format!("--out-dir {}: {e}", dir.display())))?;
            let mut pages = vec![cmd.clone()];
            pages.extend(cmd.get_subcommands().filter(|s| !s.is_hide_set()).cloned());
            for c in pages {
                let name = clap_mangen::Man::new(c.clone()).get_filename();
                let path = dir.join(&name);
                let mut f =
                    std::fs::File::create(&path).map_err(io(format!("cannot write {}", path.display())))?;
                page(c, &mut f).map_err(io(format!("cannot write {}", path.display())))?;
                info!("icefold: wrote {}", path.display());
            }
            Ok(())
        }
    }
}

/// Load the config named by the arguments. Likely mistakes in it are printed on stderr, one line each.
pub fn load(args: &ConfigArgs) -> Result<Loaded, Error> {
    let cfg = config::load(&args.config, &args.sets)?;
    for w in &cfg.warnings {
        eprintln!("icefold: warning: {w}");
    }
    Ok(cfg)
}

/// Decide the output path and refuse to replace an existing file without `--overwrite`.
pub fn output_path(args: &OutputArgs, config: &Path, command: &str) -> Result<PathBuf, Error> {
    output_path_resuming(args, config, command, false)
}

/// As [`output_path`]; when `resuming`, an existing output marked `complete = 0` (the partial
/// file of the interrupted job) may be replaced without `--overwrite`.
pub fn output_path_resuming(
    args: &OutputArgs,
    config: &Path,
    command: &str,
    resuming: bool,
) -> Result<PathBuf, Error> {
    let path = args.output.clone().unwrap_or_else(|| {
        let stem = config
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "icefold".into());
        PathBuf::from(format!("{stem}-{command}.nc"))
    });
    let incomplete = || {
        crate::output::NcReader::open(&path)
            .ok()
            .and_then(|r| r.attr_i64("complete").ok().flatten())
            == Some(0)
    };
    check_output_name(&path)?;
    let replace = args.overwrite || (resuming && incomplete());
    if path.exists() && !replace {
        return Err(Error::Usage(format!(
            "output file {} exists; pass --overwrite to replace it (it is kept as it is)",
            path.display()
        )));
    }
    if !replace {
        // The final rename also refuses a file that appears while the job runs.
        crate::output::forbid_replacing(&path);
    }
    Ok(path)
}

/// Refuse, before any work, an output path that cannot name a file: one ending in `/` (or
/// `/.`, `..`), a directory, or anything else that is not a regular file (a device, a pipe).
pub fn check_output_name(path: &Path) -> Result<(), Error> {
    let text = path.as_os_str().to_string_lossy();
    if text.ends_with('/') || path.file_name().is_none() || text.ends_with("/.") || text == "." {
        return Err(Error::Usage(format!(
            "output path {} names a directory (it ends in `/`, `.` or `..`); give a file name with -o, e.g. {}",
            path.display(),
            {
                let trimmed = Path::new(text.trim_end_matches('/'));
                if trimmed.is_dir() || trimmed.file_name().is_none() {
                    trimmed.join("out.nc")
                } else {
                    trimmed.to_path_buf()
                }
            }
            .display()
        )));
    }
    match std::fs::metadata(path) {
        Ok(m) if m.is_dir() => Err(Error::Usage(format!(
            "output path {} is a directory; give a file name with -o",
            path.display()
        ))),
        Ok(m) if !m.is_file() => Err(Error::Usage(format!(
            "output path {} is not a regular file (a device, pipe or socket); give a file name with -o",
            path.display()
        ))),
        _ => Ok(()),
    }
}
