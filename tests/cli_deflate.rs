//! `output.deflate_level` through the binary: every kind of file holds the same values at
//! levels 0, 1 (the default) and 6, its chunked datasets carry the filters of the level asked
//! for (none at 0), and the level is recorded in the `deflate_level` global attribute.

mod common_cli;

use common_cli::*;
use hdf5::filters::Filter;
use std::path::Path;

/// `(path, chunked, filters)` of every dataset in the file, groups included.
fn datasets(path: &Path) -> Vec<(String, bool, Vec<Filter>)> {
    fn walk(g: &hdf5::Group, prefix: &str, out: &mut Vec<(String, bool, Vec<Filter>)>) {
        for d in g.datasets().unwrap() {
            let name = format!("{prefix}{}", d.name().rsplit('/').next().unwrap());
            out.push((name, d.is_chunked(), d.filters()));
        }
        for sub in g.groups().unwrap() {
            let name = sub.name().rsplit('/').next().unwrap().to_string();
            walk(&sub, &format!("{prefix}{name}/"), out);
        }
    }
    let f = hdf5::File::open(path).unwrap();
    let mut out = Vec::new();
    walk(&f, "", &mut out);
    out
}

/// Runs `args` (command, config, extra flags) at the default level and at levels 0 and 6 and
/// checks values, filters and the attribute. `chunked` says whether the default file must
/// hold at least one chunked dataset (so that the filter check is not vacuous).
fn check_levels(dir: &Path, args: &[&str], chunked: bool) {
    let name = args[0];
    let file = |tag: &str| dir.join(format!("{name}-{tag}.nc"));
    for (tag, set) in [("default", None), ("0", Some(0)), ("6", Some(6))] {
        let out = file(tag);
        let mut a: Vec<String> = args.iter().map(|s| s.to_string()).collect();
        a.extend(["-o".into(), out.to_str().unwrap().into()]);
        if let Some(level) = set {
            a.extend(["--set".into(), format!("output.deflate_level={level}")]);
        }
        let a: Vec<&str> = a.iter().map(String::as_str).collect();
        ok(&icefold(dir, &a));
    }
    // Compression is lossless and the jobs are deterministic: identical bits.
    same_values(&file("default"), &file("0"));
    same_values(&file("default"), &file("6"));
    for (tag, level) in [("default", 1u8), ("0", 0), ("6", 6)] {
        assert_eq!(
            attr_i64(&file(tag), "deflate_level"),
            Some(i64::from(level)),
            "{name} at {tag}"
        );
        let sets = datasets(&file(tag));
        assert!(!sets.is_empty(), "{name}: no datasets");
        for (ds, is_chunked, filters) in &sets {
            if level == 0 {
                assert!(filters.is_empty(), "{name} at 0: {ds} has {filters:?}");
            } else if *is_chunked {
                assert_eq!(
                    *filters,
                    [Filter::Shuffle, Filter::Deflate(level)],
                    "{name} at {tag}: {ds}"
                );
            } else {
                assert!(filters.is_empty(), "{name} at {tag}: {ds} has {filters:?}");
            }
        }
        if chunked && level > 0 {
            assert!(
                sets.iter().any(|s| s.1),
                "{name} at {tag}: no chunked dataset to check"
            );
        }
    }
    // Same chunked datasets at levels 1 and 6 (only the filter level changes).
    let chunked_names = |tag: &str| {
        datasets(&file(tag))
            .into_iter()
            .filter(|s| s.1)
            .map(|s| s.0)
            .collect::<Vec<_>>()
    };
    assert_eq!(chunked_names("default"), chunked_names("6"), "{name}");
}

#[test]
fn run_file_values_are_the_same_at_levels_0_1_and_6() {
    let dir = tempdir("deflate-run");
    let cfg = config("classic-step-albedo.toml");
    check_levels(&dir, &["run", &cfg, "--set", "time.years=50"], true);
    // At level 0 the record variables are still chunked (the file grows along `time`) and
    // the file is larger than the compressed one.
    let sets = datasets(&dir.join("run-0.nc"));
    let st = sets.iter().find(|s| s.0 == "surface_temperature").unwrap();
    assert!(st.1 && st.2.is_empty(), "{st:?}");
    let size = |t: &str| std::fs::metadata(dir.join(format!("run-{t}.nc"))).unwrap().len();
    assert!(
        size("0") > size("default"),
        "{} vs {}",
        size("0"),
        size("default")
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn every_other_kind_of_file_follows_the_level() {
    let dir = tempdir("deflate-kinds");
    let (sweep, branches, ensemble, regimes, eq) = (
        config("sweep-solar.toml"),
        config("branches-co2.toml"),
        config("ensemble-lhs.toml"),
        config("regimes-classic.toml"),
        config("classic-step-albedo.toml"),
    );
    check_levels(&dir, &["sweep", &sweep, "--set", "grid.bands=30"], true);
    check_levels(&dir, &["branches", &branches], true);
    check_levels(
        &dir,
        &["ensemble", &ensemble, "--set", "ensemble.members=24"],
        true,
    );
    // 2 x 2100 cells: the map variables reach the size at which fixed-size variables are
    // chunked and compressed (4096 values).
    check_levels(
        &dir,
        &[
            "regimes",
            &regimes,
            "--set",
            "regimes.rows=2",
            "--set",
            "regimes.columns=2100",
        ],
        true,
    );
    // An equilibrium file at a usual band count has no variable large enough to be chunked
    // (4096 bands would take the stability analysis tens of seconds); values and the
    // attribute are checked, and the writer's unit tests cover large fixed-size variables.
    check_levels(&dir, &["equilibrium", &eq], false);
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn merged_shards_keep_the_level_of_the_shards() {
    let dir = tempdir("deflate-merge");
    let cfg = config("ensemble-lhs.toml");
    // 24 members x 201 records: the member series are large enough to be chunked at level 1.
    let set = ["--set", "ensemble.members=24", "--set", "output.deflate_level=0"];
    for k in 0..2 {
        let mut a = vec!["ensemble", cfg.as_str(), "--shard"];
        let shard = format!("{k}/2");
        let out = format!("s{k}.nc");
        a.extend([shard.as_str(), "-o", out.as_str()]);
        a.extend(set);
        ok(&icefold(&dir, &a));
    }
    ok(&icefold(&dir, &["merge", "s0.nc", "s1.nc", "-o", "merged.nc"]));
    let mut a = vec!["ensemble", cfg.as_str(), "-o", "single.nc"];
    a.extend(set);
    ok(&icefold(&dir, &a));
    let merged = dir.join("merged.nc");
    assert_eq!(attr_i64(&merged, "deflate_level"), Some(0));
    same_values(&merged, &dir.join("single.nc"));
    for (ds, chunked, filters) in datasets(&merged) {
        assert!(filters.is_empty(), "merged: {ds} has {filters:?}");
        // Fixed-size variables are contiguous at level 0.
        assert!(!chunked, "merged: {ds} is chunked");
    }
    let _ = std::fs::remove_dir_all(&dir);
}
