//! Hostile input (issue 5): property-based fuzzing of the config parser (TOML text and
//! `--set KEY=VALUE`), the forcing-CSV reader and the OLR-table reader. None may panic, and
//! every rejection must be one clear line of message.
//!
//! Inputs: arbitrary strings, mutations of the shipped configs and CSVs (byte flips,
//! truncation, deletions, inserted hostile tokens: huge numbers, NaN/inf, quotes, brackets,
//! NUL, a byte-order mark), and structured CSVs from random headers (duplicate and unknown
//! columns) and random fields. Each property runs `ICEFOLD_FUZZ_CASES` cases (default 256, a
//! few seconds in all in `cargo test --release`); raise it for a longer run, e.g.
//! `ICEFOLD_FUZZ_CASES=20000 cargo test --release --test fuzz_inputs`.
//! Inputs that found bugs are kept as explicit regression tests at the end.

use icefold::config::{load_str, table::parse_olr_table};
use icefold::forcing::{ForcingSeries, Interpolation};
use proptest::prelude::*;
use std::path::{Path, PathBuf};

const ENSEMBLE: &str = include_str!("../configs/ensemble-lhs.toml");
const FORCED: &str = include_str!("../configs/forcing-orvane.toml");
const SWEEP: &str = include_str!("../configs/sweep-solar.toml");
const FORCING_CSV: &str = include_str!("../configs/forcing-orvane.csv");
const TABLE_CSV: &str = "temperature_k,olr_wm2\n# a comment\n180,120.5\n250,200\n300,250.25\n350,330\n";

/// Tokens that break parsers: numbers at the edge of f64, non-finite spellings, syntax.
const HOSTILE: &[&str] = &[
    "nan",
    "NaN",
    "inf",
    "-inf",
    "+inf",
    "infinity",
    "1e309",
    "-1e309",
    "1e308",
    "4.9e-324",
    "-0",
    "0",
    "99999999999999999999999",
    "-9223372036854775809",
    "9223372036854775807",
    "0x10",
    "1_000",
    "\"",
    "'",
    "[",
    "]",
    "[[",
    "]]",
    "=",
    ",",
    ",,",
    "\n",
    "\r\n",
    "#",
    "{",
    "}",
    "\u{feff}",
    "\0",
    "\u{ff}",
    "é",
    "\t",
    "year",
    "co2_ppm",
    "temperature_k",
    "olr_wm2",
    "[[forcing.pieces]]",
    "[ensemble]",
    "bands = 20001",
    "bands = 0",
    "years = 1e12",
];

/// Cases per property (env `ICEFOLD_FUZZ_CASES`, default 256).
fn cases() -> u32 {
    std::env::var("ICEFOLD_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(256)
}

fn config() -> ProptestConfig {
    ProptestConfig {
        cases: cases(),
        // Failing inputs become explicit regression tests below instead of files.
        failure_persistence: None,
        ..ProptestConfig::default()
    }
}

fn configs_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("configs")
}

/// One edit of a text.
#[derive(Debug, Clone)]
enum Edit {
    Flip(usize, u8),
    Delete(usize, usize),
    Insert(usize, &'static str),
    Truncate(usize),
}

fn edit() -> impl Strategy<Value = Edit> {
    prop_oneof![
        (any::<usize>(), any::<u8>()).prop_map(|(p, b)| Edit::Flip(p, b)),
        (any::<usize>(), 1usize..40).prop_map(|(p, n)| Edit::Delete(p, n)),
        (any::<usize>(), proptest::sample::select(HOSTILE)).prop_map(|(p, t)| Edit::Insert(p, t)),
        any::<usize>().prop_map(Edit::Truncate),
    ]
}

/// Apply edits to the bytes of `seed`; the result may not be UTF-8.
fn mutate(seed: &str, edits: &[Edit]) -> Vec<u8> {
    let mut b = seed.as_bytes().to_vec();
    for e in edits {
        let n = b.len().max(1);
        match *e {
            Edit::Flip(p, x) if !b.is_empty() => b[p % n] ^= x | 1,
            Edit::Flip(..) => {}
            Edit::Delete(p, k) => {
                let p = p % n;
                let end = (p + k).min(b.len());
                if p < end {
                    b.drain(p..end);
                }
            }
            Edit::Insert(p, t) => {
                let p = p % (b.len() + 1);
                b.splice(p..p, t.bytes());
            }
            Edit::Truncate(p) => b.truncate(p % n),
        }
    }
    b
}

/// A rejection must be one clear, non-empty line.
fn check_message(what: &str, input: &dyn std::fmt::Debug, msg: String) -> Result<(), TestCaseError> {
    prop_assert!(!msg.trim().is_empty(), "{what}: empty message for {input:?}");
    prop_assert!(
        !msg.contains('\n'),
        "{what}: multi-line message for {input:?}: {msg}"
    );
    Ok(())
}

fn load_config(text: &str, sets: &[String]) -> Result<(), TestCaseError> {
    if let Err(e) = load_str(text, "fuzz.toml", &configs_dir(), sets) {
        check_message("config", &(text, sets), e.to_string())?;
    }
    Ok(())
}

fn parse_forcing(text: &str) -> Result<(), TestCaseError> {
    for interp in [Interpolation::Linear, Interpolation::Step] {
        match ForcingSeries::parse(text, interp, false) {
            Ok(s) => {
                // Accepted series are usable: strictly increasing years, finite values.
                prop_assert!(s.years.windows(2).all(|w| w[0] < w[1]));
                prop_assert!(s
                    .columns
                    .iter()
                    .all(|(_, v)| v.len() == s.years.len() && v.iter().all(|x| x.is_finite())));
                let _ = s.check_covers(10.0);
                let _ = s.value(0, 0.5 * (s.years[0] + s.years[s.years.len() - 1]));
            }
            Err(e) => {
                prop_assert!(e.line <= text.lines().count().max(1), "{e} for {text:?}");
                check_message("forcing", &text, e.to_string())?;
            }
        }
    }
    Ok(())
}

fn parse_table(text: &str) -> Result<(), TestCaseError> {
    match parse_olr_table(text, "fuzz.csv") {
        Ok(t) => {
            let (lo, hi) = t.range();
            prop_assert!(lo < hi);
            let (v, d) = t.eval(0.5 * (lo + hi));
            prop_assert!(v.is_finite() && d.is_finite(), "{v} {d} for {text:?}");
        }
        Err(e) => check_message("table", &text, e.to_string())?,
    }
    Ok(())
}

/// A CSV field: a number, a hostile token or short junk.
fn field() -> impl Strategy<Value = String> {
    prop_oneof![
        any::<f64>().prop_map(|v| v.to_string()),
        (-1000i64..3000).prop_map(|v| v.to_string()),
        proptest::sample::select(HOSTILE).prop_map(str::to_string),
        "[ -~]{0,8}",
    ]
}

/// A forcing header: `year` (usually) and known, unknown or repeated column names.
fn forcing_header() -> impl Strategy<Value = Vec<String>> {
    let names = proptest::sample::select(vec![
        "year",
        "co2_ppm",
        "greenhouse.co2_ppm",
        "solar_scale",
        "forcing_wm2",
        "longwave.a",
        "longwave.emissivity",
        "transport.diffusivity",
        "albedo.ice",
        "",
        " co2_ppm ",
        "YEAR",
    ]);
    (any::<bool>(), proptest::collection::vec(names, 0..5)).prop_map(|(year, rest)| {
        let mut h = if year { vec!["year".to_string()] } else { vec![] };
        h.extend(rest.into_iter().map(str::to_string));
        h
    })
}

fn csv_text(header: Vec<String>, rows: Vec<Vec<String>>) -> String {
    let mut s = header.join(",");
    for r in rows {
        s.push('\n');
        s.push_str(&r.join(","));
    }
    s
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn config_text_arbitrary(text in "\\PC{0,200}") {
        load_config(&text, &[])?;
    }

    #[test]
    fn config_text_mutated(
        seed in proptest::sample::select(vec![ENSEMBLE, FORCED, SWEEP]),
        edits in proptest::collection::vec(edit(), 1..6),
    ) {
        let bytes = mutate(seed, &edits);
        load_config(&String::from_utf8_lossy(&bytes), &[])?;
    }

    #[test]
    fn set_arguments(
        keys in proptest::collection::vec(prop_oneof![
            proptest::sample::select(vec![
                "grid.bands", "transport.diffusivity", "albedo.ice", "time.years",
                "time.method", "longwave.kind", "longwave.table", "forcing.file",
                "forcing.pieces", "ensemble.members", "grid", "time.years.x", "", ".", "a..b",
            ]).prop_map(str::to_string),
            "[a-z_.]{0,20}",
        ], 1..4),
        values in proptest::collection::vec(prop_oneof![
            proptest::sample::select(HOSTILE).prop_map(str::to_string),
            any::<f64>().prop_map(|v| v.to_string()),
            any::<i64>().prop_map(|v| v.to_string()),
            "\\PC{0,12}",
        ], 4),
        equals in proptest::collection::vec(any::<bool>(), 4),
    ) {
        let sets: Vec<String> = keys
            .iter()
            .enumerate()
            .map(|(i, k)| if equals[i] { format!("{k}={}", values[i]) } else { format!("{k}{}", values[i]) })
            .collect();
        load_config("[grid]\nbands = 6\n[time]\nyears = 2\n", &sets)?;
        load_config(FORCED, &sets)?;
    }

    #[test]
    fn forcing_csv_arbitrary(text in "\\PC{0,200}") {
        parse_forcing(&text)?;
    }

    #[test]
    fn forcing_csv_mutated(edits in proptest::collection::vec(edit(), 1..6)) {
        parse_forcing(&String::from_utf8_lossy(&mutate(FORCING_CSV, &edits)))?;
    }

    #[test]
    fn forcing_csv_structured(
        header in forcing_header(),
        rows in proptest::collection::vec(proptest::collection::vec(field(), 0..5), 0..8),
    ) {
        parse_forcing(&csv_text(header, rows))?;
    }

    #[test]
    fn table_csv_arbitrary(text in "\\PC{0,200}") {
        parse_table(&text)?;
    }

    #[test]
    fn table_csv_mutated(edits in proptest::collection::vec(edit(), 1..6)) {
        parse_table(&String::from_utf8_lossy(&mutate(TABLE_CSV, &edits)))?;
    }

    #[test]
    fn table_csv_structured(
        rows in proptest::collection::vec(proptest::collection::vec(field(), 0..4), 0..8),
    ) {
        parse_table(&csv_text(vec!["temperature_k".into(), "olr_wm2".into()], rows))?;
    }
}

/// The same mutations written to files and read through the config, so the readers' file
/// handling (non-UTF-8 bytes, size checks) is fuzzed too.
#[test]
fn data_files_mutated_on_disk() {
    let dir = std::env::temp_dir().join(format!("icefold-fuzz-files-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut runner = proptest::test_runner::TestRunner::new(config());
    runner
        .run(
            &(proptest::collection::vec(edit(), 1..6), any::<bool>()),
            |(edits, table)| {
                let (name, cfg, seed) = if table {
                    (
                        "t.csv",
                        "[grid]\nbands = 6\n[longwave]\nkind = \"table\"\ntable = \"t.csv\"\n",
                        TABLE_CSV,
                    )
                } else {
                    (
                        "f.csv",
                        "[grid]\nbands = 6\n[time]\nyears = 2\n[forcing]\nfile = \"f.csv\"\noutside = \"hold\"\n",
                        FORCING_CSV,
                    )
                };
                std::fs::write(dir.join(name), mutate(seed, &edits)).unwrap();
                if let Err(e) = load_str(cfg, "fuzz.toml", &dir, &[]) {
                    check_message("file", &edits, e.to_string())?;
                }
                Ok(())
            },
        )
        .unwrap();
    let _ = std::fs::remove_dir_all(&dir);
}

// Regression inputs: each once made a reader misbehave (found by the properties above or
// by hand while writing them).

/// A data file that never ends (a device reporting length 0) was read without bound.
#[test]
fn endless_data_file_is_refused() {
    for key in ["[forcing]\nfile", "[longwave]\nkind = \"table\"\ntable"] {
        let cfg = format!("[grid]\nbands = 6\n{key} = \"/dev/zero\"\n");
        let e = load_str(&cfg, "c.toml", Path::new("/"), &[])
            .unwrap_err()
            .to_string();
        assert!(e.contains("/dev/zero") && e.contains("limit"), "{e}");
    }
}

/// Non-UTF-8 bytes in a data file name the line of the first bad byte.
#[test]
fn non_utf8_data_file_names_the_line() {
    let dir = std::env::temp_dir().join(format!("icefold-fuzz-utf8-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("f.csv"), b"year,co2_ppm\n0,280\n1,2\xff0\n").unwrap();
    let cfg = "[grid]\nbands = 6\n[time]\nyears = 1\n[forcing]\nfile = \"f.csv\"\n";
    let e = load_str(cfg, "c.toml", &dir, &[]).unwrap_err().to_string();
    assert!(e.contains("not UTF-8") && e.contains("line 3"), "{e}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// OLR values so large that interpolation slopes overflow are refused with the limit.
#[test]
fn huge_table_values_are_refused() {
    let e = parse_olr_table("temperature_k,olr_wm2\n200,1e308\n300,-1e308\n", "t.csv")
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("t.csv:2") && e.contains("olr_wm2") && e.contains("1000000"),
        "{e}"
    );
    let e = parse_olr_table("temperature_k,olr_wm2\n200,100\n1e300,200\n", "t.csv")
        .unwrap_err()
        .to_string();
    assert!(e.contains("t.csv:3") && e.contains("temperature_k"), "{e}");
}

/// An empty column name in a header is named by position.
#[test]
fn empty_header_name_is_named() {
    let e = ForcingSeries::parse("year,,co2_ppm\n0,1,2\n", Interpolation::Linear, false).unwrap_err();
    assert_eq!(e.line, 1);
    assert!(e.message.contains("column 2"), "{e}");
}
