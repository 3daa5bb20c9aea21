//! The scriptable command line: `export` against the crate's reader for every file kind,
//! `-o -` refused, `--quiet`, exit statuses in `--help`, shell completions and man pages.

mod common_cli;

use clap::CommandFactory;
use common_cli::{config, icefold, ok, tempdir, BIN};
use icefold::output::NcReader;
use std::path::Path;

/// A CSV table as written by `export`: header names and rows of numbers.
struct Csv {
    names: Vec<String>,
    rows: Vec<Vec<f64>>,
}

fn parse_csv(text: &str) -> Csv {
    let mut lines = text.lines();
    let names = lines
        .next()
        .expect("a header line")
        .split(',')
        .map(str::to_owned)
        .collect::<Vec<_>>();
    let rows = lines
        .map(|l| {
            l.split(',')
                .map(|v| v.parse::<f64>().unwrap_or_else(|e| panic!("{v:?} in {l:?}: {e}")))
                .collect::<Vec<_>>()
        })
        .collect::<Vec<_>>();
    for r in &rows {
        assert_eq!(r.len(), names.len(), "every row has one value per column");
    }
    Csv { names, rows }
}

fn column(csv: &Csv, name: &str) -> Vec<f64> {
    let k = csv
        .names
        .iter()
        .position(|n| n == name)
        .unwrap_or_else(|| panic!("no column {name} in {:?}", csv.names));
    csv.rows.iter().map(|r| r[k]).collect()
}

/// Equal as f64 bit patterns (NaN equal to NaN): the CSV holds the shortest text that reads back
/// to the same f64, so nothing is lost.
fn same(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len()
        && a.iter()
            .zip(b)
            .all(|(x, y)| x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan()))
}

fn export(dir: &Path, args: &[&str]) -> Csv {
    let mut all = vec!["export"];
    all.extend_from_slice(args);
    let out = icefold(dir, &all);
    ok(&out);
    parse_csv(&String::from_utf8(out.stdout).unwrap())
}

/// Make one file of each kind in `dir`, small and quick; returns (kind, file, main dimensions).
fn files_of_every_kind(dir: &Path) -> Vec<(&'static str, String, Vec<&'static str>)> {
    let jobs: [(&str, &str, &[&str], Vec<&str>); 6] = [
        ("run", "classic-step-albedo.toml", &[], vec!["time"]),
        ("equilibrium", "classic-step-albedo.toml", &[], vec!["lat"]),
        ("sweep", "sweep-solar.toml", &[], vec!["step"]),
        ("branches", "branches-solar.toml", &[], vec!["point"]),
        (
            "ensemble",
            "ensemble-lhs.toml",
            &["--set", "ensemble.members=6", "--set", "time.years=20"],
            vec!["member"],
        ),
        (
            "regimes",
            "regimes-classic.toml",
            &["--set", "regimes.rows=3", "--set", "regimes.columns=11"],
            vec!["p2", "p1"],
        ),
    ];
    let mut made = Vec::new();
    for (kind, cfg, extra, dims) in jobs {
        let file = format!("{kind}.nc");
        let cfg = config(cfg);
        let mut args = vec![kind, cfg.as_str(), "-o", file.as_str(), "--quiet"];
        args.extend_from_slice(extra);
        ok(&icefold(dir, &args));
        made.push((kind, file, dims));
    }
    made
}

#[test]
fn export_writes_every_kinds_main_table_value_for_value() {
    let dir = tempdir("export-kinds");
    for (kind, file, dims) in files_of_every_kind(&dir) {
        let csv = export(&dir, &[&file, "--csv"]);
        let r = NcReader::open(&dir.join(&file)).unwrap();
        // The leading columns are the dimensions, then every variable on exactly them.
        let dims: Vec<String> = dims.iter().map(|d| d.to_string()).collect();
        assert_eq!(csv.names[..dims.len()], dims[..], "{kind}: {:?}", csv.names);
        let expected: Vec<String> = r
            .var_names()
            .unwrap()
            .into_iter()
            .filter(|v| r.var_dims(v).unwrap() == dims && !dims.contains(v))
            .collect();
        assert!(!expected.is_empty(), "{kind}");
        assert_eq!(csv.names[dims.len()..], expected[..], "{kind}");
        let rows: usize = dims.iter().map(|d| r.dim_len(d).unwrap()).product();
        assert_eq!(csv.rows.len(), rows, "{kind}: one row per element");
        for v in &expected {
            assert!(same(&column(&csv, v), &r.read_f64(v).unwrap()), "{kind}: {v}");
        }
        // A dimension's column: its coordinate where the file has one, else the index.
        if dims.len() == 1 {
            let d = &dims[0];
            let want = if r.var_names().unwrap().contains(d) {
                r.read_f64(d).unwrap()
            } else {
                (0..rows).map(|i| i as f64).collect()
            };
            assert!(same(&column(&csv, d), &want), "{kind}: {d}");
        }
    }
}

#[test]
fn export_writes_a_field_as_a_long_table_with_its_coordinates() {
    let dir = tempdir("export-field");
    ok(&icefold(
        &dir,
        &[
            "run",
            &config("classic-step-albedo.toml"),
            "-o",
            "run.nc",
            "--set",
            "time.years=10",
        ],
    ));
    let csv = export(&dir, &["run.nc", "--var", "surface_temperature"]);
    assert_eq!(csv.names, ["time", "lat", "surface_temperature"]);
    let r = NcReader::open(&dir.join("run.nc")).unwrap();
    let (time, lat) = (r.read_f64("time").unwrap(), r.read_f64("lat").unwrap());
    let field = r.read_f64("surface_temperature").unwrap();
    assert_eq!(csv.rows.len(), time.len() * lat.len());
    for (k, row) in csv.rows.iter().enumerate() {
        // Row-major as stored: latitude fastest.
        let (i, j) = (k / lat.len(), k % lat.len());
        assert!(same(row, &[time[i], lat[j], field[k]]), "row {k}: {row:?}");
    }
    // --dim takes every variable on exactly those dimensions.
    let all = export(&dir, &["run.nc", "--dim", "time,lat"]);
    assert_eq!(all.names[..3], ["time", "lat", "surface_temperature"]);
    assert!(all.names.contains(&"outgoing_longwave".to_string()));
    assert!(same(
        &column(&all, "outgoing_longwave"),
        &r.read_f64("outgoing_longwave").unwrap()
    ));
}

#[test]
fn export_to_a_file_matches_stdout_and_refuses_to_replace_it() {
    let dir = tempdir("export-file");
    ok(&icefold(
        &dir,
        &["equilibrium", &config("classic-step-albedo.toml"), "-o", "eq.nc"],
    ));
    let out = icefold(&dir, &["export", "eq.nc"]);
    ok(&out);
    ok(&icefold(&dir, &["export", "eq.nc", "-o", "eq.csv"]));
    assert_eq!(std::fs::read(dir.join("eq.csv")).unwrap(), out.stdout);
    let again = icefold(&dir, &["export", "eq.nc", "-o", "eq.csv"]);
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--overwrite"));
    ok(&icefold(
        &dir,
        &["export", "eq.nc", "-o", "eq.csv", "--overwrite"],
    ));
    // No temporary file left beside it.
    assert_eq!(common_cli::files_in(&dir), ["eq.csv", "eq.nc"]);
}

#[test]
fn export_names_what_is_wrong_with_a_bad_selection() {
    let dir = tempdir("export-bad");
    ok(&icefold(
        &dir,
        &[
            "run",
            &config("classic-step-albedo.toml"),
            "-o",
            "run.nc",
            "--set",
            "time.years=2",
        ],
    ));
    let cases: [(&[&str], &str); 3] = [
        (&["--var", "nothing"], "has no variable `nothing`"),
        (&["--var", "time,surface_temperature"], "share their dimensions"),
        (
            &["--dim", "lat,time"],
            "no variable of run.nc is on exactly these dimensions",
        ),
    ];
    for (args, says) in cases {
        let mut all = vec!["export", "run.nc"];
        all.extend_from_slice(args);
        let out = icefold(&dir, &all);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(says), "{args:?}: {err}");
        assert!(out.stdout.is_empty(), "{args:?}: no half table");
    }
    // A file that is not there: bad input too.
    let out = icefold(&dir, &["export", "missing.nc"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn output_dash_is_refused_by_every_command_that_writes() {
    // Before, `-o -` created a file named `-`.
    let dir = tempdir("dash");
    ok(&icefold(
        &dir,
        &[
            "run",
            &config("classic-step-albedo.toml"),
            "-o",
            "run.nc",
            "--set",
            "time.years=2",
        ],
    ));
    let classic = config("classic-step-albedo.toml");
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["run", &classic, "-o", "-"], "-o/--output -"),
        (vec!["equilibrium", &classic, "-o", "-"], "-o/--output -"),
        (vec!["sweep", &classic, "--output", "-"], "-o/--output -"),
        (vec!["branches", &classic, "-o", "-"], "-o/--output -"),
        (vec!["ensemble", &classic, "-o", "-"], "-o/--output -"),
        (vec!["regimes", &classic, "-o", "-"], "-o/--output -"),
        (vec!["merge", "run.nc", "-o", "-"], "-o/--output -"),
        (vec!["export", "run.nc", "-o", "-"], "leave -o out"),
        (vec!["plot", "run.nc", "--out-dir", "-"], "--out-dir -"),
        (vec!["demo", "--out-dir", "-"], "--out-dir -"),
        (vec!["manpage", "--out-dir", "-"], "--out-dir -"),
    ];
    for (args, says) in cases {
        let out = icefold(&dir, &args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(
            err.contains(says) && err.contains("standard output"),
            "{args:?}: {err}"
        );
        assert_eq!(err.lines().count(), 1, "{args:?}: one line: {err}");
        assert!(!dir.join("-").exists(), "{args:?} created `-`");
    }
}

#[test]
fn quiet_leaves_out_informational_lines_but_not_warnings() {
    let dir = tempdir("quiet");
    let classic = config("classic-step-albedo.toml");
    let loud = icefold(&dir, &["run", &classic, "-o", "a.nc", "--set", "time.years=2"]);
    ok(&loud);
    assert!(String::from_utf8_lossy(&loud.stderr).contains("icefold: wrote a.nc"));
    let quiet = icefold(
        &dir,
        &["--quiet", "run", &classic, "-o", "b.nc", "--set", "time.years=2"],
    );
    ok(&quiet);
    assert!(
        quiet.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&quiet.stderr)
    );
    assert!(dir.join("b.nc").exists());
    // After the subcommand too (a global flag), and for every writing command's summary.
    let q = icefold(&dir, &["plot", "b.nc", "--out-dir", "pics", "-q"]);
    ok(&q);
    assert!(q.stderr.is_empty(), "{}", String::from_utf8_lossy(&q.stderr));
    assert!(dir.join("pics").read_dir().unwrap().count() > 0);
    // A likely mistake in the config is still said.
    let warn = icefold(&dir, &["check", &classic, "--quiet", "--set", "albedo.ice=0.2"]);
    ok(&warn);
    let err = String::from_utf8_lossy(&warn.stderr);
    assert!(
        err.contains("icefold: warning:") && err.contains("albedo.ice"),
        "{err}"
    );
    assert!(!warn.stdout.is_empty(), "check's own output is kept");
    // Errors too.
    let bad = icefold(&dir, &["-q", "run", "no-such.toml"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("no-such.toml"));
}

#[test]
fn help_lists_the_exit_statuses_the_code_uses() {
    let out = icefold(Path::new("."), &["--help"]);
    ok(&out);
    let help = String::from_utf8_lossy(&out.stdout);
    let tail = &help[help.find("Exit status:").expect("an exit status section")..];
    // The statuses of icefold::error::Error::exit_code (130/143: 128 + SIGINT/SIGTERM).
    for code in ["0", "1", "2", "3", "130", "143"] {
        assert!(
            tail.lines()
                .any(|l| l.trim_start().starts_with(&format!("{code} "))),
            "{code} missing: {tail}"
        );
    }
    // The same list is what the statuses of real failures are: a bad config gives 2.
    let bad = icefold(Path::new("."), &["check", "no-such.toml"]);
    assert_eq!(bad.status.code(), Some(2));
}

fn subcommands() -> Vec<String> {
    icefold::cli::Cli::command()
        .get_subcommands()
        .map(|s| s.get_name().to_string())
        .collect()
}

#[test]
fn completions_mention_every_subcommand() {
    let subs = subcommands();
    assert!(subs.len() >= 14, "{subs:?}");
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let out = icefold(Path::new("."), &["completions", shell]);
        ok(&out);
        let script = String::from_utf8_lossy(&out.stdout);
        for s in &subs {
            assert!(script.contains(s.as_str()), "{shell}: no {s}");
        }
        assert!(script.contains("quiet"), "{shell}: the global flag");
    }
    let bad = icefold(Path::new("."), &["completions", "cmd.exe"]);
    assert_eq!(bad.status.code(), Some(2));
}

#[test]
fn man_pages_mention_every_subcommand_and_the_exit_statuses() {
    let out = icefold(Path::new("."), &["manpage"]);
    ok(&out);
    let page = String::from_utf8_lossy(&out.stdout);
    assert!(
        page.contains("\n.TH icefold 1 "),
        "{}",
        &page[..200.min(page.len())]
    );
    for s in subcommands() {
        assert!(page.contains(&s), "no {s}");
    }
    assert!(page.contains("EXIT STATUS") && page.contains("143"));
    let dir = tempdir("manpages");
    ok(&icefold(&dir, &["manpage", "--out-dir", "man", "-q"]));
    for s in subcommands() {
        let p = dir.join("man").join(format!("icefold-{s}.1"));
        let text = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        assert!(text.contains(".SH SYNOPSIS"), "{s}");
    }
    assert!(dir.join("man/icefold.1").exists());
}

#[test]
fn a_progress_bar_shows_on_a_terminal_unless_quiet() {
    // `script` (util-linux) runs the command on a pseudo-terminal; without it, nothing to check.
    let has_script = std::process::Command::new("script")
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !has_script {
        eprintln!("skipped: no `script` to give the command a terminal");
        return;
    }
    let dir = tempdir("tty");
    let run = |quiet: &str, out: &str| {
        let line = format!(
            "{BIN} {quiet} run {} -o {out} --set time.years=50",
            config("classic-step-albedo.toml")
        );
        let o = std::process::Command::new("script")
            .args(["-qec", &line, "/dev/null"])
            .current_dir(&dir)
            .output()
            .unwrap();
        ok(&o);
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let shown = run("", "a.nc");
    assert!(shown.contains("model years ["), "{shown}");
    assert!(shown.contains("icefold: wrote a.nc"), "{shown}");
    let quiet = run("--quiet", "b.nc");
    assert!(quiet.trim().is_empty(), "{quiet}");
    assert!(dir.join("b.nc").exists());
    // Piped (not a terminal): no bar, the summary only.
    let piped = icefold(&dir, &["run", &config("classic-step-albedo.toml"), "-o", "c.nc"]);
    ok(&piped);
    assert!(!String::from_utf8_lossy(&piped.stderr).contains('['));
}

#[test]
fn export_of_an_incomplete_file_warns_even_when_quiet() {
    let dir = tempdir("export-incomplete");
    // Interrupted through the real signal path right after the first checkpoint.
    let out = std::process::Command::new(BIN)
        .args([
            "run",
            &config("classic-step-albedo.toml"),
            "-o",
            "cut.nc",
            "--checkpoint-every",
            "10",
        ])
        .env(icefold::interrupt::FAULT_ENV, "1")
        .current_dir(&dir)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(130),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let r = NcReader::open(&dir.join("cut.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    let records = r.dim_len("time").unwrap();
    let e = icefold(&dir, &["--quiet", "export", "cut.nc"]);
    ok(&e);
    let err = String::from_utf8_lossy(&e.stderr);
    assert!(err.contains("warning") && err.contains("incomplete"), "{err}");
    let csv = parse_csv(&String::from_utf8(e.stdout).unwrap());
    assert_eq!(csv.rows.len(), records);
    assert!(same(&column(&csv, "time"), &r.read_f64("time").unwrap()));
}
