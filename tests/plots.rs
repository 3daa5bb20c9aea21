//! `icefold plot` for every kind of file (issue 7): each picture renders from a real output
//! file, its SVG parses as XML (roxmltree, a general-purpose parser), and its PNG has the
//! size the SVG declares.

use icefold::jobs::pictures::pictures;
use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

/// Run `icefold CMD CONFIG -o DIR/NAME.nc --set ...` and return the file.
fn make(dir: &Path, cmd: &str, config: &str, name: &str, sets: &[&str]) -> PathBuf {
    let out = dir.join(format!("{name}.nc"));
    let mut c = Command::new(BIN);
    c.args([cmd, config, "-o"]).arg(&out).arg("--overwrite");
    for s in sets {
        c.args(["--set", s]);
    }
    let o = c.output().unwrap();
    assert!(
        o.status.success(),
        "{cmd} {config}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    out
}

/// Width and height from a PNG's IHDR chunk (PNG specification, from memory: bytes 16-23).
fn png_size(bytes: &[u8]) -> (u32, u32) {
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    let be = |i: usize| u32::from_be_bytes([bytes[i], bytes[i + 1], bytes[i + 2], bytes[i + 3]]);
    (be(16), be(20))
}

/// Check every picture of `file`; returns (suffix, width, height) per picture.
fn check(file: &Path, dir: &Path) -> Vec<(String, u32, u32)> {
    let written = pictures(file, dir).unwrap();
    assert!(!written.is_empty() && written.len() % 2 == 0);
    let mut out = Vec::new();
    for pair in written.chunks(2) {
        let (svg, png) = (&pair[0], &pair[1]);
        assert_eq!(svg.extension().unwrap(), "svg");
        let text = std::fs::read_to_string(svg).unwrap();
        let doc = roxmltree::Document::parse(&text).unwrap();
        let root = doc.root_element();
        assert_eq!(root.tag_name().name(), "svg");
        let w: u32 = root
            .attribute("width")
            .unwrap()
            .trim_end_matches("px")
            .parse()
            .unwrap();
        let h: u32 = root
            .attribute("height")
            .unwrap()
            .trim_end_matches("px")
            .parse()
            .unwrap();
        // Axis names are text: a picture without any <text> would be unreadable.
        assert!(doc.descendants().filter(|n| n.has_tag_name("text")).count() > 5);
        let bytes = std::fs::read(png).unwrap();
        assert_eq!(png_size(&bytes), (w, h), "{}", png.display());
        let stem = svg.file_stem().unwrap().to_string_lossy().into_owned();
        out.push((stem, w, h));
    }
    out
}

#[test]
fn every_kind_of_file_gets_its_pictures() {
    let dir = std::env::temp_dir().join(format!("icefold-plots-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let cases: Vec<(PathBuf, &[&str])> = vec![
        (
            make(
                &dir,
                "run",
                "configs/classic-step-albedo.toml",
                "run",
                &["time.years=20"],
            ),
            &["run-timeseries", "run-map", "run-profile"],
        ),
        (
            make(&dir, "equilibrium", "configs/classic-step-albedo.toml", "eq", &[]),
            &["eq-profile", "eq-spectrum"],
        ),
        (
            make(
                &dir,
                "sweep",
                "configs/sweep-solar.toml",
                "sweep",
                &["sweep.steps=31"],
            ),
            &["sweep-hysteresis"],
        ),
        (
            make(
                &dir,
                "branches",
                "configs/branches-solar.toml",
                "branches",
                &["grid.bands=30"],
            ),
            &["branches-hysteresis"],
        ),
        (
            make(
                &dir,
                "ensemble",
                "configs/ensemble-lhs.toml",
                "ens",
                &[
                    "ensemble.members=8",
                    "time.years=20",
                    "ensemble.sensitivity=false",
                ],
            ),
            &["ens-spread", "ens-outcomes"],
        ),
        (
            make(
                &dir,
                "regimes",
                "configs/regimes-classic.toml",
                "reg",
                &["regimes.rows=3", "regimes.columns=30", "grid.bands=30"],
            ),
            &["reg-map"],
        ),
    ];
    for (file, want) in cases {
        let got = check(&file, &dir);
        let names: Vec<&str> = got.iter().map(|(s, _, _)| s.as_str()).collect();
        assert_eq!(names, want);
        for (stem, w, h) in &got {
            // Sizes chosen in jobs::pictures for each kind.
            let expected = match stem.rsplit('-').next().unwrap() {
                "map" if stem.starts_with("reg") => (1300, 800),
                "map" => (1200, 800),
                "spectrum" => (1200, 800),
                // A histogram and one scatter per sampled parameter (two here).
                "outcomes" => (1200, 1110),
                "profile" => (1200, 900),
                "hysteresis" => (1200, 1100),
                "spread" => (1200, 1000),
                "timeseries" => (1200, 1050),
                other => panic!("unexpected picture {other}"),
            };
            assert_eq!((*w, *h), expected, "{stem}");
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn unknown_kinds_are_refused_with_the_known_list() {
    let dir = std::env::temp_dir().join(format!("icefold-plots-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("odd.nc");
    let mut w = icefold::output::NcWriter::create(&path).unwrap();
    w.set_attr_str("icefold_kind", "mystery").unwrap();
    w.finish().unwrap();
    let e = pictures(&path, &dir).unwrap_err().to_string();
    assert!(e.contains("mystery") && e.contains("regimes"), "{e}");
    std::fs::remove_dir_all(&dir).unwrap();
}
