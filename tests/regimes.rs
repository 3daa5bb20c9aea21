//! The regime map (issue 7): its fold lines against separate `branches` runs, the cells with
//! several stable states against the fold lines, thread-count independence, and the file.

use icefold::config::{load_str, Loaded};
use icefold::equilibrium::regimes::Kind;
use icefold::jobs::branches::run_branches;
use icefold::jobs::regimes::{regimes_spec, regimes_to_file, run_regimes, RegimesOptions};
use icefold::jobs::run::{build_model, provenance};
use icefold::output::regimes_file::write_regimes;
use icefold::output::NcReader;
use std::path::Path;

/// Diffusivities of the rows (W m-2 K-1).
const ROWS: [f64; 4] = [0.45, 0.5, 0.55, 0.6];

/// The classic step-albedo config with a `[regimes]` map over S0 and D, and a `[branches]`
/// section over the same S0 range with a different (finer) step, for the separate runs.
fn classic() -> Loaded {
    let base = std::fs::read_to_string("configs/classic-step-albedo.toml").unwrap();
    let text = format!(
        "{base}
[regimes]
control = \"insolation.solar_constant\"
from = 1150.0
to = 1800.0
columns = 66
row_control = \"transport.diffusivity\"
row_from = {}
row_to = {}
rows = {}
step = 0.005
max_step = 0.02

[branches]
control = \"insolation.solar_constant\"
from = 1150.0
to = 1800.0
step = 0.005
max_step = 0.01
",
        ROWS[0],
        ROWS[ROWS.len() - 1],
        ROWS.len()
    );
    load_str(&text, "classic-regimes", Path::new("configs"), &[]).unwrap()
}

fn serial() -> RegimesOptions {
    RegimesOptions { threads: Some(1) }
}

#[test]
fn fold_lines_agree_with_separate_branches_runs() {
    let cfg = classic();
    let map = run_regimes(&cfg, serial()).unwrap();
    assert_eq!(map.rows.len(), ROWS.len());
    for (j, &d) in ROWS.iter().enumerate() {
        assert!((map.rows[j].row_value - d).abs() < 1e-12);
        let one = cfg.with_value("transport.diffusivity", d).unwrap();
        let set = run_branches(&one).unwrap();
        let mut separate: Vec<f64> = set
            .branches
            .iter()
            .flat_map(|b| b.folds.iter().map(|f| f.control))
            .collect();
        separate.sort_by(f64::total_cmp);
        // The map's fold-line vertices in this row.
        let mut on_lines: Vec<f64> = map
            .lines
            .iter()
            .flatten()
            .filter(|v| v.p2 == map.rows[j].row_value)
            .map(|v| v.p1)
            .collect();
        on_lines.sort_by(f64::total_cmp);
        // Classic step-albedo curve: snowball melting corner, large-cap fold, small-cap fold,
        // corner where ice appears at the pole (from memory: North 1975's S-shaped Q(x_s)).
        assert!(separate.len() >= 3, "D = {d}: folds {separate:?}");
        assert_eq!(
            on_lines.len(),
            separate.len(),
            "D = {d}: {on_lines:?} vs {separate:?}"
        );
        for (a, b) in on_lines.iter().zip(&separate) {
            // The brief's 0.1 %; both locate folds to 1e-7 relative, so the different
            // continuation steps leave far less than that.
            assert!((a - b).abs() <= 1e-3 * b.abs(), "D = {d}: fold {a} vs {b}");
        }
    }
}

#[test]
fn several_stable_states_only_between_the_fold_lines() {
    let map = run_regimes(&classic(), serial()).unwrap();
    let mut multi = 0;
    for row in &map.rows {
        let folds: Vec<f64> = map
            .lines
            .iter()
            .flatten()
            .filter(|v| v.p2 == row.row_value)
            .map(|v| v.p1)
            .collect();
        let lo = folds.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = folds.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        for (i, &p) in map.columns.iter().enumerate() {
            assert!(row.stable[i] >= 1, "S0 = {p}: no stable state");
            assert!(row.stable[i] <= row.equilibria[i]);
            if row.stable[i] >= 2 {
                multi += 1;
                assert!(
                    lo <= p && p <= hi,
                    "D = {}, S0 = {p}: {} stable states outside the folds [{lo}, {hi}]",
                    row.row_value,
                    row.stable[i]
                );
                // The snowball is one of them everywhere in this model (it melts last).
                assert!(row.kinds[i] & Kind::Snowball.bit() != 0);
            }
            // The number of kinds present never exceeds the number of stable states.
            assert!(row.kinds[i].count_ones() <= row.stable[i]);
        }
        // Far below the folds only the snowball, far above only the ice-free state.
        assert_eq!(row.kinds[0], Kind::Snowball.bit());
        assert_eq!(*row.kinds.last().unwrap(), Kind::IceFree.bit());
    }
    assert!(
        multi > map.rows.len() * 10,
        "only {multi} cells with several stable states"
    );
}

#[test]
fn one_and_two_threads_give_the_same_map() {
    let cfg = classic();
    let a = run_regimes(&cfg, serial()).unwrap();
    let b = run_regimes(&cfg, RegimesOptions { threads: Some(2) }).unwrap();
    assert_eq!(a, b);
}

#[test]
fn the_file_holds_the_map_and_the_fold_lines() {
    let cfg = classic();
    let dir = std::env::temp_dir().join(format!("icefold-regimes-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("map.nc");
    let map = regimes_to_file(&cfg, &path, "test", serial()).unwrap();
    let r = NcReader::open(&path).unwrap();
    assert_eq!(r.attr_str("icefold_kind").unwrap().as_deref(), Some("regimes"));
    assert_eq!(r.attr_i64("complete").unwrap(), Some(1));
    assert_eq!(r.var_dims("stable_count").unwrap(), ["p2", "p1"]);
    assert_eq!(r.read_f64("p1").unwrap(), map.columns);
    let counts = r.read_f64("stable_count").unwrap();
    let want: Vec<f64> = map
        .rows
        .iter()
        .flat_map(|row| row.stable.iter().map(|&c| f64::from(c)))
        .collect();
    assert_eq!(counts, want);
    let snow = r.read_f64("has_snowball").unwrap();
    let kinds = r.read_f64("stable_kinds").unwrap();
    for (s, k) in snow.iter().zip(&kinds) {
        assert_eq!(*s == 1.0, (*k as u8) & Kind::Snowball.bit() != 0);
    }
    let line = r.read_f64("fold_line").unwrap();
    assert_eq!(line.len(), map.lines.iter().map(Vec::len).sum::<usize>());
    assert!(line.windows(2).all(|w| w[1] >= w[0]));
    assert!(r
        .attr_str("kind_definitions")
        .unwrap()
        .unwrap()
        .contains("60 degrees north"));
    // `icefold inspect` names both ranges, the counts and every fold line.
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_icefold"))
        .arg("inspect")
        .arg(&path)
        .output()
        .unwrap();
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("kind:       regimes"), "{text}");
    assert!(
        text.contains("p2 (y):    transport.diffusivity from 0.45 to 0.6"),
        "{text}"
    );
    assert!(
        text.contains(&format!("fold lines: {}", map.lines.len())),
        "{text}"
    );
    assert_eq!(text.matches("  line ").count(), map.lines.len(), "{text}");
    assert!(text.contains("stuck ends: none"), "{text}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn keys_must_differ_and_act() {
    let base = std::fs::read_to_string("configs/classic-step-albedo.toml").unwrap();
    let same = format!(
        "{base}\n[regimes]\ncontrol = \"insolation.solar_constant\"\nfrom = 1200.0\nto = 1400.0\nrow_control = \"insolation.solar_constant\"\nrow_from = 1.0\nrow_to = 2.0\n"
    );
    let e = load_str(&same, "same", Path::new("configs"), &[]).unwrap_err();
    assert!(e.to_string().contains("regimes.row_control"), "{e}");
    let idle = format!(
        "{base}\n[regimes]\ncontrol = \"insolation.solar_constant\"\nfrom = 1200.0\nto = 1400.0\nrow_control = \"albedo.width_k\"\nrow_from = 1.0\nrow_to = 2.0\n"
    );
    let cfg = load_str(&idle, "idle", Path::new("configs"), &[]).unwrap();
    let e = run_regimes(&cfg, serial()).unwrap_err();
    assert!(e.to_string().contains("no effect"), "{e}");
}

/// configs/regimes-classic.toml with `--set` values.
fn regimes_classic(sets: &[&str]) -> Loaded {
    let text = std::fs::read_to_string("configs/regimes-classic.toml").unwrap();
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    load_str(&text, "regimes-classic", Path::new("configs"), &sets).unwrap()
}

#[test]
fn a_finer_map_has_the_coarse_maps_fold_lines_sampled_finely() {
    // Before the fix an 81-row map of this config had 6 fold lines (the large-cap line broke
    // where a sub-band wiggle turned up) against the 21-row map's 4, and a 300-row map at 90
    // bands 90 lines, mostly of 1 or 2 vertices. Rows 0, 4, 8, ... of the 81-row map are the
    // 21-row map's rows (the same D), so their folds are the same numbers: each coarse line's
    // vertices must be vertices of one fine line, which has a vertex in every fine row.
    let coarse = run_regimes(&regimes_classic(&[]), serial()).unwrap();
    let fine = run_regimes(&regimes_classic(&["regimes.rows=81"]), serial()).unwrap();
    assert_eq!(
        coarse.lines.len(),
        4,
        "{:?}",
        coarse.lines.iter().map(|l| l.len()).collect::<Vec<_>>()
    );
    assert_eq!(
        fine.lines.len(),
        coarse.lines.len(),
        "fine lines: {:?}",
        fine.lines
            .iter()
            .map(|l| (l.len(), l[0].p1, l[0].ice_edge))
            .collect::<Vec<_>>()
    );
    for cl in &coarse.lines {
        let matches: Vec<&Vec<_>> = fine
            .lines
            .iter()
            .filter(|fl| {
                cl.iter().all(|v| {
                    fl.iter().any(|w| {
                        // Same row value up to the round-off of the two row grids.
                        (w.p2 - v.p2).abs() < 1e-12 && w.p1 == v.p1 && w.ice_edge == v.ice_edge
                    })
                })
            })
            .collect();
        assert_eq!(
            matches.len(),
            1,
            "coarse line from p1 {} at edge {}",
            cl[0].p1,
            cl[0].ice_edge
        );
        // Sampled finely: one vertex per fine row over the coarse line's rows.
        let (lo, hi) = (cl[0].p2, cl[cl.len() - 1].p2);
        let rows = fine
            .rows
            .iter()
            .filter(|r| r.row_value >= lo - 1e-12 && r.row_value <= hi + 1e-12)
            .count();
        assert_eq!(matches[0].len(), rows);
    }
}

#[test]
fn rows_with_stuck_branch_ends_are_recorded_and_inspected() {
    // Before, a row whose branch ended stuck gave only a console warning: the file and
    // `icefold inspect` showed an incomplete row as complete. No cheap config gets stuck, so
    // the count of a real map's row is set here and the writer and inspect path are checked.
    let cfg = classic();
    let mut map = run_regimes(&cfg, serial()).unwrap();
    assert!(map.rows.iter().all(|r| r.stuck_ends == 0));
    map.rows[1].stuck_ends = 2;
    let dir = std::env::temp_dir().join(format!("icefold-regimes-stuck-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("map.nc");
    write_regimes(
        &path,
        &build_model(&cfg).unwrap(),
        &provenance(&cfg, "test"),
        regimes_spec(&cfg).unwrap(),
        &map,
    )
    .unwrap();
    let r = NcReader::open(&path).unwrap();
    let want: Vec<f64> = map.rows.iter().map(|r| r.stuck_ends as f64).collect();
    assert_eq!(r.read_f64("stuck_ends").unwrap(), want);
    assert_eq!(
        r.var_attr_str("stuck_ends", "units").unwrap().as_deref(),
        Some("1")
    );
    assert!(r
        .var_attr_str("stuck_ends", "long_name")
        .unwrap()
        .unwrap()
        .contains("corrector failed"));
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_icefold"))
        .arg("inspect")
        .arg(&path)
        .output()
        .unwrap();
    let text = String::from_utf8(o.stdout).unwrap();
    let row = format!("p2 = {} (2 ends)", map.rows[1].row_value);
    assert!(
        text.contains("branches end stuck") && text.contains(&row),
        "{text}"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

/// `regimes.small_cap_min_latitude_deg` moves only the naming line between small and large
/// caps: the stable counts and which cells hold a partial cap at all stay the same, caps with
/// their edge between the new and the default split change class, and the file records the
/// split it used. Out-of-range values are refused naming the key.
#[test]
fn the_small_cap_split_latitude_is_a_key_that_only_renames_caps() {
    let rows = "regimes.rows=5";
    let default = run_regimes(&regimes_classic(&[rows]), serial()).unwrap();
    let moved_cfg = regimes_classic(&[rows, "regimes.small_cap_min_latitude_deg=40"]);
    let moved = run_regimes(&moved_cfg, serial()).unwrap();
    let caps = Kind::SmallCap.bit() | Kind::LargeCap.bit();
    let mut renamed = 0;
    for (a, b) in default.rows.iter().zip(&moved.rows) {
        assert_eq!(a.stable, b.stable);
        assert_eq!(a.equilibria, b.equilibria);
        for (ka, kb) in a.kinds.iter().zip(&b.kinds) {
            assert_eq!(ka & !caps, kb & !caps, "only the cap classes may change");
            assert_eq!(ka & caps != 0, kb & caps != 0, "a cap stays a cap");
            // Moving the split equatorward can only turn large caps into small ones.
            assert!(kb & Kind::SmallCap.bit() >= ka & Kind::SmallCap.bit());
            if ka != kb {
                renamed += 1;
            }
        }
    }
    assert!(
        renamed > 0,
        "no cap with its edge between 40 and 60 degrees north was renamed"
    );

    let dir = std::env::temp_dir().join(format!("icefold-regimes-split-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("split.nc");
    regimes_to_file(&moved_cfg, &path, "test", serial()).unwrap();
    let r = NcReader::open(&path).unwrap();
    assert_eq!(r.attr_f64("small_cap_min_latitude").unwrap(), Some(40.0));
    let defs = r.attr_str("kind_definitions").unwrap().unwrap();
    assert!(defs.contains("poleward of 40 degrees north"), "{defs}");
    std::fs::remove_dir_all(&dir).ok();

    for bad in ["0", "95", "-10"] {
        let text = std::fs::read_to_string("configs/regimes-classic.toml").unwrap();
        let set = format!("regimes.small_cap_min_latitude_deg={bad}");
        let e = load_str(&text, "regimes-classic", Path::new("configs"), &[set]).unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains("regimes.small_cap_min_latitude_deg"), "{msg}");
        assert!(msg.contains("90"), "{msg}");
    }
}
