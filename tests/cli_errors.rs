//! Bad input through the binary (issue 2): each case exits 2 with one clear message naming the
//! key, file or line and what is allowed, and leaves no output file behind.

mod common_cli;

use common_cli::{files_in, tempdir, BIN};

use std::process::Command;

const BASE: &str = "[grid]\nbands = 6\n[time]\nyears = 2\n";

struct Case {
    name: &'static str,
    config: String,
    files: Vec<(&'static str, Vec<u8>)>,
    args: Vec<String>,
    expect: Vec<&'static str>,
}

fn case(name: &'static str, config: &str, args: &[&str], expect: &[&'static str]) -> Case {
    Case {
        name,
        config: config.to_string(),
        files: vec![],
        args: args.iter().map(|s| s.to_string()).collect(),
        expect: expect.to_vec(),
    }
}

#[test]
fn bad_inputs_exit_2_with_a_clear_message_and_no_output() {
    let table_bad = "temperature_k,olr_wm2\n200,100\n250,150\n240,160\n";
    let mut cases = vec![
        case(
            "unknown key",
            "[albedo]\nicee = 0.6\n",
            &[],
            &["albedo.icee", "unknown field", "expected one of"],
        ),
        case(
            "unknown section",
            "[gird]\nbands = 3\n",
            &[],
            &["gird", "unknown field"],
        ),
        case(
            "wrong type",
            "[grid]\nbands = \"ninety\"\n",
            &[],
            &["grid.bands", "invalid type"],
        ),
        case(
            "negative bands",
            "[grid]\nbands = -3\n",
            &[],
            &["grid.bands", "-3", "from 1 to"],
        ),
        case(
            "albedo above 1",
            "[albedo]\nice = 1.3\n",
            &[],
            &["albedo.ice", "1.3", "from 0 to 1"],
        ),
        case(
            "NaN value",
            "[longwave]\nb = nan\n",
            &[],
            &["longwave.b", "NaN", "finite"],
        ),
        case(
            "infinite value",
            "[insolation]\nsolar_constant = inf\n",
            &[],
            &["insolation.solar_constant", "inf"],
        ),
        case(
            "freezing temperature as text",
            "[albedo]\nfreeze_temperature_c = \"cold\"\n",
            &[],
            &["albedo.freeze_temperature_c", "invalid type"],
        ),
        case(
            "unknown kind",
            "[albedo]\nkind = \"stepp\"\n",
            &[],
            &["albedo.kind", "\"stepp\"", "\"step\", \"smooth\", \"ramp\""],
        ),
        case(
            "TOML syntax",
            "[grid\nbands = 3\n",
            &[],
            &["TOML syntax error", "line 1"],
        ),
        case(
            "missing table file",
            "[longwave]\nkind = \"table\"\ntable = \"missing.csv\"\n",
            &[],
            &["missing.csv", "cannot read OLR table"],
        ),
        case(
            "table without path",
            "[longwave]\nkind = \"table\"\n",
            &[],
            &["longwave.table", "required"],
        ),
        case(
            "explicit with fixed step",
            "[time]\nmethod = \"dopri5\"\nstep_days = 1\n",
            &[],
            &["time.step_days", "implicit"],
        ),
        case(
            "two heat capacities",
            "[heat_capacity]\nvalue = 1e8\nmixed_layer_depth_m = 50\n",
            &[],
            &["heat_capacity", "not both"],
        ),
        case(
            "ice-free albedo above 1 at the pole",
            "[albedo]\nice_free = 0.6\nice_free_p2 = 0.5\n",
            &[],
            &["albedo.ice_free_p2", "pole"],
        ),
        case(
            "land fraction list length",
            "[grid]\nbands = 4\n[heat_capacity]\nland_fraction = [0.1, 0.2]\n",
            &[],
            &["heat_capacity.land_fraction", "grid.bands = 4"],
        ),
        case(
            "--set unknown key",
            "",
            &["--set", "transport.diffusivityy=1"],
            &["--set transport.diffusivityy=1", "unknown field"],
        ),
        case(
            "--set malformed",
            "",
            &["--set", "transport.diffusivity"],
            &["--set transport.diffusivity", "KEY=VALUE"],
        ),
        case(
            "--set out of range",
            "",
            &["--set", "grid.bands=0"],
            &["--set grid.bands=0", "grid.bands"],
        ),
        case(
            "--set NaN",
            "",
            &["--set", "transport.diffusivity=nan"],
            &["transport.diffusivity", "NaN"],
        ),
        case(
            "unwritable output path",
            "",
            &["-o", "/nonexistent-icefold-dir/out.nc"],
            &["/nonexistent-icefold-dir", "does not exist"],
        ),
        case(
            "forcing file text in a number",
            "[forcing]\nfile = \"f.csv\"\n",
            &[],
            &["f.csv:3", "not a number"],
        ),
        case(
            "forcing file not covering the run",
            "[forcing]\nfile = \"short.csv\"\n",
            &[],
            &["short.csv", "covers years 0 to 1", "hold"],
        ),
    ];
    let mut t = case(
        "non-monotonic OLR table",
        "[longwave]\nkind = \"table\"\ntable = \"olr.csv\"\n",
        &[],
        &["olr.csv:4", "increase strictly"],
    );
    t.files.push(("olr.csv", table_bad.into()));
    cases.push(t);
    // Forcing CSVs and OLR tables: (config section, file name, contents, expected fragments).
    let forcing = "[forcing]\nfile = \"f.csv\"\n";
    let table = "[longwave]\nkind = \"table\"\ntable = \"f.csv\"\n";
    let file_cases: Vec<(&'static str, &str, &[u8], Vec<&'static str>)> = vec![
        (
            "forcing empty",
            forcing,
            b"",
            vec!["f.csv:1", "empty forcing file", "year,co2_ppm"],
        ),
        (
            "forcing duplicate column",
            forcing,
            b"year,co2_ppm,greenhouse.co2_ppm\n0,1,2\n",
            vec!["f.csv:1", "appears twice"],
        ),
        (
            "forcing unknown column",
            forcing,
            b"year,carbon\n0,1\n",
            vec!["f.csv:1", "unknown column `carbon`", "allowed: co2_ppm"],
        ),
        (
            "forcing without year",
            forcing,
            b"co2_ppm\n280\n",
            vec!["f.csv:1", "first column must be `year`"],
        ),
        (
            "forcing years not increasing",
            forcing,
            b"year,co2_ppm\n0,280\n2,290\n1,300\n",
            vec!["f.csv:4", "increase strictly", "1 follows 2"],
        ),
        (
            "forcing infinite value",
            forcing,
            b"year,co2_ppm\n0,280\n2,inf\n",
            vec!["f.csv:3", "`inf` in column `co2_ppm`", "finite"],
        ),
        (
            "forcing negative CO2",
            forcing,
            b"year,co2_ppm\n0,-5\n2,280\n",
            vec!["f.csv:2", "co2_ppm", "above 0"],
        ),
        (
            "forcing extra field",
            forcing,
            b"year,co2_ppm\n0,280,1\n",
            vec!["f.csv:2", "expected 2 fields (year,co2_ppm), found 3"],
        ),
        (
            "forcing header only",
            forcing,
            b"year,co2_ppm\n",
            vec!["f.csv:1", "no data rows"],
        ),
        (
            "forcing not UTF-8",
            forcing,
            b"year,co2_ppm\n0,280\n2,2\xff0\n",
            vec!["f.csv", "not UTF-8", "line 3"],
        ),
        (
            "table empty",
            table,
            b"",
            vec!["f.csv:1", "empty OLR table", "temperature_k,olr_wm2"],
        ),
        (
            "table wrong header",
            table,
            b"temp,olr\n200,100\n300,200\n",
            vec![
                "f.csv:1",
                "header is `temp,olr`",
                "expected `temperature_k,olr_wm2`",
            ],
        ),
        (
            "table one row",
            table,
            b"temperature_k,olr_wm2\n200,100\n",
            vec!["f.csv:1", "at least two data rows"],
        ),
        (
            "table negative temperature",
            table,
            b"temperature_k,olr_wm2\n-5,100\n300,200\n",
            vec!["f.csv:2", "temperature_k", "above 0"],
        ),
        (
            "table NaN OLR",
            table,
            b"temperature_k,olr_wm2\n200,nan\n300,200\n",
            vec!["f.csv:2", "`nan` in column `olr_wm2`", "finite"],
        ),
        (
            "table huge OLR",
            table,
            b"temperature_k,olr_wm2\n200,1e9\n300,200\n",
            vec!["f.csv:2", "olr_wm2", "from -1000000 to 1000000"],
        ),
        (
            "table text",
            table,
            b"temperature_k,olr_wm2\n200,100\n3OO,200\n",
            vec!["f.csv:3", "`3OO` in column `temperature_k` is not a number"],
        ),
    ];
    for (name, section, body, expect) in file_cases {
        let mut c = case(name, section, &[], &expect);
        c.files.push(("f.csv", body.to_vec()));
        cases.push(c);
    }
    // Configs and --set.
    cases.extend([
        case(
            "--set too many bands",
            "",
            &["--set", "grid.bands=100000"],
            &["--set grid.bands=100000", "from 1 to 20000"],
        ),
        case(
            "--set wrong type",
            "",
            &["--set", "grid.bands=\"many\""],
            &["grid.bands", "expected a whole number"],
        ),
        case(
            "--set empty value",
            "",
            &["--set", "albedo.ice="],
            &["albedo.ice", "expected a number"],
        ),
        case(
            "--set empty key",
            "",
            &["--set", "=5"],
            &["--set =5", "dotted name"],
        ),
        case(
            "--set below a value",
            "",
            &["--set", "time.years.x=1"],
            &["time.years.x", "`time.years` is a value, not a table"],
        ),
        case(
            "--set unknown method",
            "",
            &["--set", "time.method=rk4"],
            &["time.method", "\"rk4\"", "\"implicit\", \"dopri5\""],
        ),
        case(
            "--set negative diffusivity",
            "",
            &["--set", "transport.diffusivity=-1"],
            &["transport.diffusivity", "-1", "from 0 to"],
        ),
        case(
            "duplicate key",
            "[albedo]\nice = 0.5\nice = 0.6\n",
            &[],
            &["duplicate key `ice`", "line"],
        ),
        case(
            "piece on a fixed key",
            "[[forcing.pieces]]\ntarget = \"albedo.ice\"\nkind = \"step\"\nstart_year = 0\nsize = 0.1\n",
            &[],
            &["forcing.pieces[0].target", "albedo.ice", "allowed: co2_ppm"],
        ),
        case(
            "piece of unknown kind",
            "[[forcing.pieces]]\ntarget = \"co2_ppm\"\nkind = \"wiggle\"\nstart_year = 0\n",
            &[],
            &["forcing.pieces[0].kind", "\"wiggle\"", "\"ramp\""],
        ),
        case(
            "obliquity out of range",
            "[insolation]\nkind = \"seasonal\"\nobliquity_deg = 200\n",
            &[],
            &["insolation.obliquity_deg", "200", "from 0 to 180"],
        ),
        case(
            "no ensemble members",
            "[ensemble]\nmembers = 0\n",
            &[],
            &["ensemble.members", "from 1 to"],
        ),
        case(
            "deflate level above 9",
            "[output]\ndeflate_level = 10\n",
            &[],
            &["output.deflate_level", "= 10", "from 0", "to 9"],
        ),
        case(
            "--set negative deflate level",
            "",
            &["--set", "output.deflate_level=-1"],
            &[
                "--set output.deflate_level=-1",
                "output.deflate_level",
                "from 0",
                "to 9",
            ],
        ),
        case(
            "fractional deflate level",
            "[output]\ndeflate_level = 1.5\n",
            &[],
            &["output.deflate_level", "expected a whole number"],
        ),
        case(
            "forcing file is a directory",
            "[forcing]\nfile = \".\"\n",
            &[],
            &["forcing.file", "is a directory"],
        ),
    ]);
    for c in cases.iter_mut() {
        if c.name.starts_with("forcing file text") {
            c.files.push(("f.csv", b"year,co2_ppm\n0,280\n1,2x0\n".to_vec()));
        }
        if c.name.starts_with("forcing file not covering") {
            c.files
                .push(("short.csv", b"year,co2_ppm\n0,280\n1,300\n".to_vec()));
        }
    }
    assert!(cases.len() >= 40, "{} cases", cases.len());
    for (k, c) in cases.iter().enumerate() {
        let dir = tempdir(&format!("{k}"));
        let cfg = dir.join("case.toml");
        let text = if c.config.is_empty() {
            BASE.to_string()
        } else {
            format!(
                "{}\n{}",
                c.config,
                if c.config.contains("[grid]") {
                    ""
                } else {
                    "[grid]\nbands = 6\n"
                }
            )
        };
        std::fs::write(&cfg, text).unwrap();
        for (name, body) in &c.files {
            std::fs::write(dir.join(name), body).unwrap();
        }
        let before = files_in(&dir);
        let out = Command::new(BIN)
            .current_dir(&dir)
            .arg("run")
            .arg(&cfg)
            .args(&c.args)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(
            out.status.code(),
            Some(2),
            "{}: exit {:?}, stderr: {stderr}",
            c.name,
            out.status.code()
        );
        for frag in &c.expect {
            assert!(
                stderr.contains(frag),
                "{}: message lacks `{frag}`: {stderr}",
                c.name
            );
        }
        assert_eq!(
            stderr.trim().lines().count(),
            1,
            "{}: one message line expected: {stderr}",
            c.name
        );
        assert_eq!(files_in(&dir), before, "{}: files left behind", c.name);
        let _ = std::fs::remove_dir_all(&dir);
    }
}

#[test]
fn missing_config_and_existing_output() {
    let dir = tempdir("misc");
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["run", "nope.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot read config file nope.toml"));
    // An existing output is kept unless --overwrite is given.
    std::fs::write(dir.join("c.toml"), BASE).unwrap();
    std::fs::write(dir.join("o.nc"), b"precious").unwrap();
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["run", "c.toml", "-o", "o.nc"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--overwrite"));
    assert_eq!(std::fs::read(dir.join("o.nc")).unwrap(), b"precious");
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["run", "c.toml", "-o", "o.nc", "--overwrite"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_ne!(std::fs::read(dir.join("o.nc")).unwrap(), b"precious");
    assert_eq!(files_in(&dir), vec!["c.toml".to_string(), "o.nc".to_string()]);
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn blow_up_exits_3_naming_time_and_latitude() {
    // A table OLR that decreases with temperature is a runaway: the state leaves the table's
    // range and the run stops with exit 3, naming the model time and latitude, keeping a
    // readable file marked incomplete.
    let dir = tempdir("blowup");
    std::fs::write(dir.join("olr.csv"), "temperature_k,olr_wm2\n150,400\n350,100\n").unwrap();
    std::fs::write(
        dir.join("c.toml"),
        "[grid]\nbands = 6\n[longwave]\nkind = \"table\"\ntable = \"olr.csv\"\n[time]\nyears = 200\n",
    )
    .unwrap();
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["run", "c.toml", "-o", "b.nc"])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{stderr}");
    assert!(
        stderr.contains("model year") && stderr.contains("latitude"),
        "{stderr}"
    );
    let r = icefold::output::NcReader::open(&dir.join("b.nc")).unwrap();
    assert_eq!(r.attr_i64("complete").unwrap(), Some(0));
    assert!(r.attr_str("failure").unwrap().unwrap().contains("latitude"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Run icefold in `dir`: exit code and stderr.
fn run_in(dir: &std::path::Path, args: &[&str]) -> (Option<i32>, String) {
    let out = Command::new(BIN).current_dir(dir).args(args).output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Issue 20: a missing file, a directory or a device given to inspect, plot or merge is bad
/// input (exit 2) with a message saying what the path is; so is an HDF5 file that icefold did
/// not write (issue 12), and a text file.
#[test]
fn input_paths_that_are_no_icefold_file_exit_2_saying_what_they_are() {
    let dir = tempdir("inpaths");
    std::fs::write(dir.join("text.nc"), "not hdf5\n").unwrap();
    // A foreign HDF5 file: valid netCDF-4, no icefold attributes.
    {
        let f = hdf5::File::create(dir.join("foreign.nc")).unwrap();
        f.new_dataset::<f64>().shape(3).create("x").unwrap();
    }
    for (path, what) in [
        ("missing.nc", "no such file"),
        (".", "it is a directory"),
        ("/dev/zero", "not a regular file"),
        ("text.nc", "not an HDF5 file"),
        // merge says "not an icefold ensemble file".
        ("foreign.nc", "not an icefold"),
    ] {
        for args in [
            vec!["inspect", path],
            vec!["plot", path],
            vec!["merge", path, "-o", "m.nc"],
        ] {
            let (code, err) = run_in(&dir, &args);
            assert_eq!(code, Some(2), "{args:?}: {err}");
            assert!(err.contains(path) && err.contains(what), "{args:?}: {err}");
            assert_eq!(err.trim().lines().count(), 1, "{args:?}: {err}");
        }
    }
    assert_eq!(files_in(&dir), ["foreign.nc", "text.nc"].map(String::from));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Issue 20: an output path that cannot be a file is refused before any work (exit 2).
#[test]
fn output_paths_naming_a_directory_or_device_are_refused_before_work() {
    let dir = tempdir("outpaths");
    std::fs::write(dir.join("c.toml"), BASE).unwrap();
    std::fs::create_dir(dir.join("sub")).unwrap();
    for (out, what) in [
        ("out.nc/", "names a directory"),
        ("sub/", "names a directory"),
        ("sub", "is a directory"),
        ("..", "names a directory"),
        ("/dev/null", "not a regular file"),
    ] {
        for args in [
            vec!["run", "c.toml", "-o", out],
            vec!["equilibrium", "c.toml", "-o", out, "--overwrite"],
            vec!["merge", "c.toml", "-o", out],
        ] {
            let (code, err) = run_in(&dir, &args);
            assert_eq!(code, Some(2), "{args:?}: {err}");
            assert!(err.contains(out) && err.contains(what), "{args:?}: {err}");
            // Refused before any work: no "wrote", no files.
            assert_eq!(err.trim().lines().count(), 1, "{args:?}: {err}");
        }
    }
    assert_eq!(files_in(&dir), ["c.toml", "sub"].map(String::from));
    assert!(files_in(&dir.join("sub")).is_empty());
    let _ = std::fs::remove_dir_all(&dir);
}

/// Issue 20: a forcing CSV written with a UTF-8 byte-order mark (as spreadsheets save it) is
/// read as without it.
#[test]
fn forcing_csv_with_a_byte_order_mark_is_read_like_one_without() {
    let dir = tempdir("bom");
    let csv = "year,forcing_wm2\n0,0\n1,-2\n2,-4\n";
    std::fs::write(dir.join("plain.csv"), csv).unwrap();
    std::fs::write(dir.join("bom.csv"), format!("\u{feff}{csv}")).unwrap();
    for name in ["plain", "bom"] {
        std::fs::write(
            dir.join(format!("{name}.toml")),
            format!("{BASE}[forcing]\nfile = \"{name}.csv\"\n"),
        )
        .unwrap();
        let (code, err) = run_in(
            &dir,
            &["run", &format!("{name}.toml"), "-o", &format!("{name}.nc")],
        );
        assert_eq!(code, Some(0), "{name}: {err}");
    }
    let read = |n: &str| {
        icefold::output::NcReader::open(&dir.join(n))
            .unwrap()
            .read_f64("additive_forcing")
            .unwrap()
    };
    assert_eq!(read("bom.nc"), read("plain.nc"));
    assert_eq!(read("bom.nc").last(), Some(&-4.0));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Copy of a real run file with `edit` applied through HDF5 directly (a damaged file).
fn damaged_copy(dir: &std::path::Path, name: &str, edit: impl FnOnce(&hdf5::File)) {
    std::fs::copy(dir.join("good.nc"), dir.join(name)).unwrap();
    let f = hdf5::File::open_rw(dir.join(name)).unwrap();
    edit(&f);
}

/// Issue 20: plot of a damaged icefold file names the file and what is wrong (exit 2), not
/// plotting internals; inspect says DAMAGED with the same reason.
#[test]
fn plot_of_a_damaged_file_names_the_file_and_what_is_wrong() {
    let dir = tempdir("damaged");
    std::fs::write(dir.join("c.toml"), BASE).unwrap();
    let (code, err) = run_in(&dir, &["run", "c.toml", "-o", "good.nc"]);
    assert_eq!(code, Some(0), "{err}");
    // NaN in the latitude coordinate.
    damaged_copy(&dir, "nanlat.nc", |f| {
        f.dataset("lat").unwrap().write_raw(&[f64::NAN; 6]).unwrap();
    });
    // Zero records: every record variable cut to length 0.
    damaged_copy(&dir, "empty.nc", |f| {
        for name in f.member_names().unwrap() {
            if let Ok(ds) = f.dataset(&name) {
                let shape = ds.shape();
                let unlimited = ds.space().unwrap().maxdims().first().is_some_and(Option::is_none);
                if unlimited {
                    let mut s = shape.clone();
                    s[0] = 0;
                    ds.resize(s).unwrap();
                }
            }
        }
    });
    // A field whose latitude axis does not match `lat`: the field replaced by one of 5 bands.
    damaged_copy(&dir, "badlat.nc", |f| {
        let n = f.dataset("time").unwrap().shape()[0];
        f.unlink("surface_temperature").unwrap();
        f.new_dataset::<f64>()
            .shape((n, 5))
            .create("surface_temperature")
            .unwrap();
    });
    for (file, what) in [
        ("nanlat.nc", "coordinate `lat` holds NaN"),
        ("empty.nc", "no time records"),
        (
            "badlat.nc",
            "`surface_temperature` has 5 values along axis 1, but coordinate `lat` has 6",
        ),
    ] {
        let (code, err) = run_in(&dir, &["plot", file]);
        assert_eq!(code, Some(2), "{file}: {err}");
        assert!(
            err.contains(file) && err.contains("is damaged") && err.contains(what),
            "{file}: {err}"
        );
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        let out = Command::new(BIN)
            .current_dir(&dir)
            .args(["inspect", file])
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("DAMAGED") && text.contains(what), "{file}: {text}");
    }
    // The good file still plots, with no DAMAGED line.
    let (code, err) = run_in(&dir, &["plot", "good.nc"]);
    assert_eq!(code, Some(0), "{err}");
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["inspect", "good.nc"])
        .output()
        .unwrap();
    assert!(!String::from_utf8_lossy(&out.stdout).contains("DAMAGED"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Issue 12: inspect prints times rounded to 12 significant digits ("0 to 200 years", not
/// "0 to 199.9999999999997 years"): an output interval of 1/24 year written to 16 digits
/// ends 3e-13 years short of 200.
#[test]
fn inspect_prints_times_rounded() {
    let dir = tempdir("inspect-times");
    std::fs::write(
        dir.join("c.toml"),
        "[grid]\nbands = 6\n[time]\nyears = 200\noutput_every_years = 0.0416666666666666\n",
    )
    .unwrap();
    let (code, err) = run_in(&dir, &["run", "c.toml", "-o", "t.nc"]);
    assert_eq!(code, Some(0), "{err}");
    let out = Command::new(BIN)
        .current_dir(&dir)
        .args(["inspect", "t.nc"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("time:       0 to 200 years, 4801 records"),
        "{text}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// Issue 12: a Kelvin value for a degrees-C key and an ice albedo below the ice-free albedo
/// are accepted with one warning line each, naming the key, from check and from run.
#[test]
fn likely_unit_and_albedo_mistakes_are_warned_not_refused() {
    let dir = tempdir("warnings");
    std::fs::write(dir.join("c.toml"), BASE).unwrap();
    for cmd in [vec!["check", "c.toml"], vec!["run", "c.toml", "-o", "w.nc"]] {
        let mut args = cmd.clone();
        args.extend([
            "--set",
            "albedo.freeze_temperature_c=263",
            "--set",
            "albedo.ice=0.25",
            "--set",
            "initial.temperature_c=288",
        ]);
        let (code, err) = run_in(&dir, &args);
        assert_eq!(code, Some(0), "{args:?}: {err}");
        let warnings: Vec<&str> = err.lines().filter(|l| l.contains("warning")).collect();
        assert_eq!(warnings.len(), 3, "{err}");
        assert!(
            warnings[0].contains("`albedo.freeze_temperature_c` = 263") && warnings[0].contains("-10.15"),
            "{err}"
        );
        assert!(warnings[1].contains("`initial.temperature_c` = 288"), "{err}");
        assert!(
            warnings[2].contains("`albedo.ice` = 0.25") && warnings[2].contains("`albedo.ice_free` = 0.3"),
            "{err}"
        );
    }
    // The shipped defaults give no warning.
    let (code, err) = run_in(&dir, &["check", "c.toml"]);
    assert_eq!(code, Some(0));
    assert!(!err.contains("warning"), "{err}");
    let _ = std::fs::remove_dir_all(&dir);
}
