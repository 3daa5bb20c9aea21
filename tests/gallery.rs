//! The gallery (issue 7): regenerating the `.nc` files kept in outputs-demo/ with the commands
//! of scripts/make-gallery.sh gives the committed numbers exactly, and outputs-demo/ stays
//! under 5 MB with an index entry for every picture.

use icefold::output::NcReader;
use std::path::Path;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

/// `(command, config, name)` of every step the script marks `keep` (its .nc is committed).
fn kept_steps() -> Vec<(String, String, String)> {
    let script = std::fs::read_to_string("scripts/make-gallery.sh").unwrap();
    script
        .lines()
        .filter_map(|l| {
            let w: Vec<&str> = l.split_whitespace().collect();
            (w.len() == 5 && w[0] == "step" && w[4] == "keep").then(|| {
                (
                    w[1].to_string(),
                    format!("configs/{}.toml", w[2]),
                    w[3].to_string(),
                )
            })
        })
        .collect()
}

#[test]
fn regenerated_files_hold_the_committed_numbers() {
    let steps = kept_steps();
    assert!(steps.len() >= 2, "{steps:?}");
    let dir = std::env::temp_dir().join(format!("icefold-gallery-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for (cmd, config, name) in steps {
        let fresh = dir.join(format!("{name}.nc"));
        let o = Command::new(BIN)
            .args([cmd.as_str(), config.as_str(), "-o"])
            .arg(&fresh)
            .output()
            .unwrap();
        assert!(
            o.status.success(),
            "{cmd} {config}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        let old = NcReader::open(Path::new(&format!("outputs-demo/{name}.nc"))).unwrap();
        let new = NcReader::open(&fresh).unwrap();
        let names = old.var_names().unwrap();
        assert_eq!(names, new.var_names().unwrap(), "{name}");
        for v in &names {
            let (a, b) = (old.read_f64(v).unwrap(), new.read_f64(v).unwrap());
            assert_eq!(a.len(), b.len(), "{name}: {v}");
            // Identical to the bit (NaN where NaN): the jobs are deterministic.
            for (x, y) in a.iter().zip(&b) {
                assert_eq!(x.to_bits(), y.to_bits(), "{name}: {v}: {x} vs {y}");
            }
        }
        assert_eq!(
            old.attr_str("config_toml").unwrap(),
            new.attr_str("config_toml").unwrap(),
            "{name}"
        );
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn gallery_is_small_and_indexed() {
    let index = std::fs::read_to_string("outputs-demo/INDEX.md").unwrap();
    let mut total = 0;
    for e in std::fs::read_dir("outputs-demo").unwrap() {
        let e = e.unwrap();
        total += e.metadata().unwrap().len();
        let name = e.file_name().to_string_lossy().into_owned();
        if let Some(stem) = name.strip_suffix(".png") {
            // Each picture is listed by its stem, or by its family (`classic-run-*`).
            let family = format!("{}-*", stem.rsplit_once('-').unwrap().0);
            assert!(
                index.contains(stem) || index.contains(&family),
                "{name} is not in outputs-demo/INDEX.md"
            );
            assert!(Path::new(&format!("outputs-demo/{stem}.svg")).exists());
        }
    }
    assert!(total < 5_000_000, "outputs-demo holds {total} bytes");
}
