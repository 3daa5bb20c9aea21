//! `icefold run`, `demo`, `plot` and `inspect` through the binary (issue 2): the run file has
//! the fixed names and units of DESIGN section 4, the demo writes its file and pictures.

use icefold::output::NcReader;
use std::path::PathBuf;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("icefold-cli-run-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn config(name: &str) -> String {
    format!("{}/configs/{name}", env!("CARGO_MANIFEST_DIR"))
}

#[test]
fn run_file_has_the_fixed_names_units_and_provenance() {
    let dir = tempdir("names");
    for (cfg, globe) in [
        ("classic-step-albedo.toml", false),
        ("globe-with-land.toml", true),
    ] {
        let out = dir.join(format!("{cfg}.nc"));
        let st = Command::new(BIN)
            .args(["run", &config(cfg), "-o"])
            .arg(&out)
            .args(["--set", "time.years=20"])
            .output()
            .unwrap();
        assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
        let r = NcReader::open(&out).unwrap();
        assert_eq!(r.attr_str("icefold_kind").unwrap().as_deref(), Some("run"));
        assert_eq!(r.attr_i64("complete").unwrap(), Some(1));
        assert_eq!(r.attr_str("Conventions").unwrap().as_deref(), Some("CF-1.8"));
        let text = r.attr_str("config_toml").unwrap().unwrap();
        let table: toml::Table = text.parse().unwrap();
        assert_eq!(table["time"]["years"].as_float(), Some(20.0));
        assert!(r
            .attr_str("command_line")
            .unwrap()
            .unwrap()
            .contains("--set time.years=20"));
        assert_eq!(r.var_dims("surface_temperature").unwrap(), vec!["time", "lat"]);
        assert_eq!(
            r.var_attr_str("surface_temperature", "units").unwrap().as_deref(),
            Some("K")
        );
        assert_eq!(
            r.var_attr_str("surface_temperature", "standard_name")
                .unwrap()
                .as_deref(),
            Some("surface_temperature")
        );
        assert_eq!(
            r.var_attr_str("lat", "units").unwrap().as_deref(),
            Some("degrees_north")
        );
        assert_eq!(r.var_attr_str("time", "units").unwrap().as_deref(), Some("year"));
        assert!(r.dim_unlimited("time").unwrap());
        assert_eq!(r.dim_len("time").unwrap(), 21);
        for v in [
            "global_mean_temperature",
            "ice_edge_latitude_north",
            "toa_imbalance",
            "lat_bnds",
        ] {
            assert!(
                r.var_names().unwrap().iter().any(|n| n == v),
                "{cfg}: missing {v}"
            );
        }
        assert_eq!(
            r.var_names()
                .unwrap()
                .iter()
                .any(|n| n == "ice_edge_latitude_south"),
            globe
        );
        // The energy budget closes: net heating = absorbed - OLR + forcing (+ zero transport).
        let a = r.read_f64("global_mean_absorbed_sunlight").unwrap();
        let o = r.read_f64("global_mean_outgoing_longwave").unwrap();
        let tr = r.read_f64("global_mean_transport_convergence").unwrap();
        let net = r.read_f64("toa_imbalance").unwrap();
        for k in 0..a.len() {
            assert!(tr[k].abs() < 1e-10, "transport must conserve energy: {}", tr[k]);
            assert!((a[k] - o[k] - net[k]).abs() < 1e-9);
        }
        let out2 = Command::new(BIN).arg("inspect").arg(&out).output().unwrap();
        let s = String::from_utf8_lossy(&out2.stdout);
        assert!(
            s.contains("kind:       run") && s.contains("complete:   yes"),
            "{s}"
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn demo_writes_its_file_and_pictures() {
    let dir = tempdir("demo");
    let st = Command::new(BIN)
        .args(["demo", "--out-dir"])
        .arg(&dir)
        .output()
        .unwrap();
    assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
    let r = NcReader::open(&dir.join("kessra-run.nc")).unwrap();
    let edge = r.read_f64("ice_edge_latitude_north").unwrap();
    // The scenario passes through a snowball (edge 0) and ends ice free (edge 90).
    assert!(edge.contains(&0.0));
    assert_eq!(*edge.last().unwrap(), 90.0);
    for pic in ["timeseries", "map", "profile"] {
        let svg = std::fs::read_to_string(dir.join(format!("kessra-run-{pic}.svg"))).unwrap();
        assert!(
            roxmltree::Document::parse(&svg).is_ok(),
            "{pic}: SVG does not parse"
        );
        let png = std::fs::read(dir.join(format!("kessra-run-{pic}.png"))).unwrap();
        assert_eq!(&png[1..4], b"PNG");
    }
    // `plot` redraws them from the file.
    let pics = dir.join("again");
    let st = Command::new(BIN)
        .arg("plot")
        .arg(dir.join("kessra-run.nc"))
        .arg("--out-dir")
        .arg(&pics)
        .output()
        .unwrap();
    assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
    assert!(pics.join("kessra-run-map.png").exists());
    let _ = std::fs::remove_dir_all(&dir);
}
