//! The key registry: one key has one unit in every file kind, keys of another kind are
//! refused, and the README's configuration table agrees with the registry.

mod common_cli;

use common_cli::{icefold, tempdir};
use icefold::config::keys::{self, Default, Value};
use icefold::output::NcReader;
use std::path::Path;

/// A value of `key` inside its range, and a second one just above it (for a sweep's `to`).
fn two_values(key: &str) -> (f64, f64) {
    let v = match keys::default_number(key) {
        d if d.is_finite() => d,
        // insolation.s2: the default comes from the obliquity.
        _ => -0.48,
    };
    (v, v + 0.01 * v.abs().max(1.0))
}

/// A small config in which `key` is used (its section's kind chosen to use it).
fn config_for(key: &str, extra: &str) -> String {
    let k = keys::get(key).unwrap();
    // Keys resolved for every kind of their section but used only by some.
    let used_by = match key {
        "insolation.obliquity_deg" | "insolation.eccentricity" => Some(&"annual_mean"),
        "albedo.width_k" => Some(&"smooth"),
        _ => k.kinds.first(),
    };
    let kind = match used_by {
        Some(kind) => format!("[{}]\nkind = \"{kind}\"\n", k.section()),
        None => String::new(),
    };
    // CO2 off its reference, so the log coefficient and the reference have an effect.
    format!("[grid]\nbands = 4\n[time]\nyears = 0.05\n[greenhouse]\nco2_ppm = 400.0\n{kind}{extra}")
}

/// `var:units` of `path`.
fn units_in(path: &Path, var: &str) -> String {
    let r = NcReader::open(path).unwrap();
    r.var_attr_str(var, "units")
        .unwrap()
        .unwrap_or_else(|| panic!("{}: {var} has no units", path.display()))
}

/// Run `args` in `dir` on config text `cfg` and return the output file.
fn write_file(dir: &Path, cfg: &str, command: &str, out: &str) -> std::path::PathBuf {
    std::fs::write(dir.join("c.toml"), cfg).unwrap();
    let _ = std::fs::remove_file(dir.join(out));
    let o = icefold(dir, &[command, "c.toml", "-o", out]);
    assert!(
        o.status.success(),
        "{command} failed on\n{cfg}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    dir.join(out)
}

/// Regression (issue 13): a sweep of `longwave.emission_height_km` wrote `control:units =
/// "km"` while an ensemble over it wrote `sampled_longwave_emission_height_km:units = "1"`.
/// Every key that can be a control, an ensemble parameter or a forcing channel now writes the
/// same units (its registry units) into sweep, branches, ensemble and run files.
#[test]
fn every_control_ensemble_and_forcing_key_writes_the_same_units_in_every_file_kind() {
    let dir = tempdir("keys-units");
    let mut checked = 0;
    for k in keys::all().filter(|k| k.set.is_some() || k.time_varying) {
        let (a, b) = two_values(k.name);
        let mut seen: Vec<(String, String)> = Vec::new();
        if k.set.is_some() {
            let sweep = format!(
                "[sweep]\ncontrol = \"{}\"\nfrom = {a:?}\nto = {b:?}\nsteps = 2\n",
                k.name
            );
            let f = write_file(&dir, &config_for(k.name, &sweep), "sweep", "s.nc");
            seen.push(("sweep control".into(), units_in(&f, "control")));
            let ens = format!(
                "[ensemble]\nmembers = 1\n[[ensemble.parameters]]\nkey = \"{}\"\ndistribution = \"values\"\nvalues = [{a:?}]\n",
                k.name
            );
            let f = write_file(&dir, &config_for(k.name, &ens), "ensemble", "e.nc");
            let var = icefold::output::ensemble_file::sampled_name(k.name);
            seen.push(("ensemble sample".into(), units_in(&f, &var)));
        }
        if k.time_varying {
            let piece = format!(
                "[[forcing.pieces]]\ntarget = \"{}\"\nkind = \"step\"\nsize = 0.0\n",
                k.name
            );
            let f = write_file(&dir, &config_for(k.name, &piece), "run", "r.nc");
            let var = icefold::output::run_file::applied_name(k.name);
            seen.push(("run applied value".into(), units_in(&f, &var)));
        }
        assert!(!k.units.is_empty(), "{} has no units", k.name);
        for (file, units) in &seen {
            assert_eq!(
                units, k.units,
                "{}: {file} units differ from the registry's",
                k.name
            );
        }
        checked += 1;
    }
    // Every control key (the numeric model keys) and every forcing channel was written.
    assert!(checked >= 20, "only {checked} keys checked");
    let _ = std::fs::remove_dir_all(&dir);
}

/// Regression (issue 13): `[longwave] kind = "linear"` with `emissivity = 0.5` passed
/// `icefold check`. A key of another kind is refused, exit 2, naming the key, the kind and the
/// kind's keys; the same through `--set`.
#[test]
fn a_key_of_another_kind_is_refused_naming_the_kind_and_its_keys() {
    let dir = tempdir("keys-kind");
    std::fs::write(
        dir.join("c.toml"),
        "[longwave]\nkind = \"linear\"\nemissivity = 0.5\n",
    )
    .unwrap();
    let o = icefold(&dir, &["check", "c.toml"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    for part in ["longwave.emissivity", "longwave.kind = \"linear\"", "kind, a, b"] {
        assert!(err.contains(part), "`{part}` missing from: {err}");
    }
    assert_eq!(err.trim().lines().count(), 1, "one message: {err}");
    std::fs::write(dir.join("t.toml"), "[transport]\nkind = \"relaxation\"\n").unwrap();
    let o = icefold(&dir, &["check", "t.toml", "--set", "transport.diffusivity=0.4"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    for part in ["transport.diffusivity", "relaxation", "kind, relaxation_rate"] {
        assert!(err.contains(part), "`{part}` missing from: {err}");
    }
    // Switching the kind by `--set` drops the file's keys of the old kind.
    std::fs::write(dir.join("d.toml"), "[transport]\ndiffusivity = 0.4\n").unwrap();
    let o = icefold(
        &dir,
        &["check", "d.toml", "--set", "transport.kind=\"relaxation\""],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(!String::from_utf8_lossy(&o.stdout).contains("diffusivity"));
    // The resolved config of every kind is accepted again as input (keys such as
    // `albedo.width_k` are resolved for every albedo kind).
    for kind in ["step", "smooth", "ramp"] {
        std::fs::write(dir.join("a.toml"), format!("[albedo]\nkind = \"{kind}\"\n")).unwrap();
        let o = icefold(&dir, &["check", "a.toml"]);
        assert!(o.status.success());
        std::fs::write(dir.join("r.toml"), &o.stdout).unwrap();
        let o = icefold(&dir, &["check", "r.toml"]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// The README's configuration table names every registry key (a `section.*` row covers a
/// section), names no key the registry lacks, and gives each fixed default the registry's.
#[test]
fn readme_config_table_agrees_with_the_registry() {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap();
    let start = readme.find("| key | default | allowed | meaning |").unwrap();
    let rows: Vec<Vec<&str>> = readme[start..]
        .lines()
        .skip(2)
        .take_while(|l| l.starts_with('|'))
        .map(|l| l.trim_matches('|').split(" | ").map(str::trim).collect())
        .collect();
    let mut documented: Vec<String> = Vec::new();
    for row in &rows {
        let names: Vec<String> = row[0]
            .split(", ")
            .map(|n| n.trim_matches('`').trim_matches(['[', ']']).to_string())
            .collect();
        let defaults: Vec<&str> = row[1].split(", ").collect();
        for (i, name) in names.iter().enumerate() {
            if let Some(section) = name.strip_suffix(".*") {
                documented.extend(
                    keys::all()
                        .filter(|k| k.section() == section)
                        .map(|k| k.name.to_string()),
                );
                continue;
            }
            let Some(k) = keys::get(name) else {
                // A whole section documented in one row (`[ensemble]`).
                let section: Vec<_> = keys::all().filter(|k| k.section() == name.as_str()).collect();
                assert!(
                    !section.is_empty(),
                    "README names `{name}`, which the registry lacks"
                );
                documented.extend(section.iter().map(|k| k.name.to_string()));
                continue;
            };
            documented.push(name.clone());
            let default = if defaults.len() == names.len() {
                defaults[i]
            } else {
                row[1]
            };
            if let Value::Number {
                default: Default::Number(d),
                ..
            } = k.value
            {
                let written: f64 = default
                    .parse()
                    .unwrap_or_else(|_| panic!("README default of `{name}` is `{default}`, not a number"));
                assert_eq!(written, d, "README default of `{name}`");
            }
            if let Value::Choice { default: d, .. } = k.value {
                assert_eq!(default, format!("\"{d}\""), "README default of `{name}`");
            }
        }
    }
    for k in keys::all() {
        assert!(
            documented.iter().any(|d| d == k.name),
            "README's config table lacks `{}`",
            k.name
        );
    }
}

/// Each declared kind of a section is one the `kind` key allows, and every kind key belongs
/// to a declared kind.
#[test]
fn kind_keys_name_kinds_their_section_allows() {
    for k in keys::all() {
        if k.kinds.is_empty() {
            continue;
        }
        let kind = keys::get(&format!("{}.kind", k.section())).unwrap();
        let Value::Choice { allowed, .. } = kind.value else {
            panic!("{}.kind is not a choice", k.section())
        };
        for name in k.kinds {
            assert!(allowed.contains(name), "{}: kind {name} not allowed", k.name);
        }
    }
    let names: Vec<&str> = icefold::physics::longwave::KINDS.iter().map(|k| k.name).collect();
    assert_eq!(names, icefold::physics::longwave::NAMES);
}

/// The keys a forcing history may vary (forcing::KEYS, each with its role in the drivers) are
/// exactly the keys the registry declares time-varying: forcing keeps its own list so that it
/// does not import config (no import cycle), and this keeps the two in step.
#[test]
fn forcing_keys_are_the_registrys_time_varying_keys() {
    let mut registry: Vec<&str> = icefold::config::keys::time_varying_keys()
        .map(|k| k.name)
        .collect();
    let mut forcing: Vec<&str> = icefold::forcing::KEYS.to_vec();
    registry.sort_unstable();
    forcing.sort_unstable();
    assert_eq!(registry, forcing);
}
