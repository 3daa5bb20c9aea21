//! Faults through the binary (issue 5): unwritable places, an existing output, a full disk,
//! and numerical blow-ups. Each gives one clear message and the documented exit status,
//! leaves no temporary file behind and keeps a previous file at the target byte for byte.

mod common_cli;

use common_cli::{files_in, tempdir, BIN};

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn icefold(dir: &Path, args: &[&str]) -> (Option<i32>, String) {
    let out: Output = Command::new(BIN).current_dir(dir).args(args).output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn is_root() -> bool {
    // Effective user id from /proc (Linux); root ignores directory permissions.
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("Uid:"))
                .and_then(|l| l.split_whitespace().nth(2).map(|u| u == "0"))
        })
        .unwrap_or(false)
}

const SMALL: &str = "[grid]\nbands = 6\n[time]\nyears = 2\n";

#[test]
fn unwritable_places_exit_2_and_leave_nothing() {
    let dir = tempdir("unwritable");
    std::fs::write(dir.join("c.toml"), SMALL).unwrap();
    std::fs::write(dir.join("plainfile"), b"not a directory").unwrap();
    // A path under a regular file cannot be created, even by root.
    let (code, err) = icefold(&dir, &["run", "c.toml", "-o", "plainfile/out.nc"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("plainfile/out.nc") && err.contains("is a file, not a directory"),
        "{err}"
    );
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    // /proc takes no new files, even from root.
    let (code, err) = icefold(&dir, &["equilibrium", "c.toml", "-o", "/proc/icefold-out.nc"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("/proc/icefold-out.nc") && err.contains("cannot create"),
        "{err}"
    );
    // A read-only directory stops everyone but root.
    if !is_root() {
        let ro = dir.join("ro");
        std::fs::create_dir(&ro).unwrap();
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&ro, std::fs::Permissions::from_mode(0o500)).unwrap();
        let (code, err) = icefold(&dir, &["run", "c.toml", "-o", "ro/out.nc"]);
        assert_eq!(code, Some(2), "{err}");
        assert!(
            err.contains("ro/out.nc") && err.contains("Permission denied"),
            "{err}"
        );
        assert!(files_in(&ro).is_empty());
        std::fs::set_permissions(&ro, std::fs::Permissions::from_mode(0o700)).unwrap();
    } else {
        eprintln!("running as root: read-only directory case skipped (root ignores permissions)");
    }
    assert_eq!(files_in(&dir), ["c.toml", "plainfile"].map(String::from));
    assert_eq!(std::fs::read(dir.join("plainfile")).unwrap(), b"not a directory");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn existing_output_is_kept_without_overwrite_for_every_command() {
    let dir = tempdir("existing");
    std::fs::write(dir.join("c.toml"), SMALL).unwrap();
    let precious: Vec<u8> = (0..=255u8).cycle().take(5000).collect();
    for cmd in ["run", "equilibrium"] {
        std::fs::write(dir.join("o.nc"), &precious).unwrap();
        let (code, err) = icefold(&dir, &[cmd, "c.toml", "-o", "o.nc"]);
        assert_eq!(code, Some(2), "{cmd}: {err}");
        assert!(
            err.contains("o.nc") && err.contains("--overwrite"),
            "{cmd}: {err}"
        );
        assert_eq!(std::fs::read(dir.join("o.nc")).unwrap(), precious, "{cmd}");
        assert_eq!(files_in(&dir), ["c.toml", "o.nc"].map(String::from), "{cmd}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// Unmounts the tmpfs when dropped, also when an assertion fails.
struct Mount(PathBuf);

impl Drop for Mount {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

#[test]
fn full_disk_gives_a_clear_error_and_keeps_the_previous_file() {
    if !is_root() {
        eprintln!("skipped: the full-disk test mounts a tmpfs and needs root");
        return;
    }
    let dir = tempdir("fulldisk");
    let mnt = dir.join("small");
    std::fs::create_dir(&mnt).unwrap();
    let mounted = Command::new("mount")
        .args(["-t", "tmpfs", "-o", "size=256k", "tmpfs"])
        .arg(&mnt)
        .status()
        .map(|s| s.success())
        .unwrap_or(false);
    if !mounted {
        eprintln!("skipped: cannot mount a tmpfs here (no privilege in this container?)");
        let _ = std::fs::remove_dir_all(&dir);
        return;
    }
    let guard = Mount(mnt.clone());
    // 4000 bands for 50 years: megabytes of output, far more than the 256 KiB disk.
    std::fs::write(dir.join("c.toml"), "[grid]\nbands = 4000\n[time]\nyears = 50\n").unwrap();
    std::fs::write(mnt.join("out.nc"), b"previous result").unwrap();
    let (code, err) = icefold(&dir, &["run", "c.toml", "-o", "small/out.nc", "--overwrite"]);
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("no space left on device"), "{err}");
    assert!(err.contains("small/out.nc"), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "one message line: {err}");
    assert_eq!(
        files_in(&mnt),
        ["out.nc".to_string()],
        "temporary file left behind"
    );
    assert_eq!(std::fs::read(mnt.join("out.nc")).unwrap(), b"previous result");
    drop(guard);
    let _ = std::fs::remove_dir_all(&dir);
}

/// A numerical failure: exit 3, one message naming the model year, a latitude and a value.
fn assert_blow_up(code: Option<i32>, err: &str, what: &str) {
    assert_eq!(code, Some(3), "{what}: {err}");
    assert!(err.contains("numerical failure"), "{what}: {err}");
    assert!(err.contains("model year"), "{what}: {err}");
    assert!(
        err.contains("latitude") && err.contains("degrees"),
        "{what}: {err}"
    );
    assert!(err.contains(" K"), "{what}: value missing: {err}");
    assert_eq!(err.trim().lines().count(), 1, "{what}: {err}");
}

#[test]
fn blow_ups_exit_3_naming_time_latitude_and_value() {
    let dir = tempdir("blowup");
    // OLR falling steeply with temperature (-1e4 W m-2 K-1): a runaway far faster than any
    // transport; every scheme must stop with the band that left the table's range.
    std::fs::write(
        dir.join("steep.csv"),
        "temperature_k,olr_wm2\n150,1000000\n350,-1000000\n",
    )
    .unwrap();
    std::fs::write(dir.join("mild.csv"), "temperature_k,olr_wm2\n150,400\n350,100\n").unwrap();
    for method in ["dopri5", "dop853", "implicit"] {
        for table in ["steep.csv", "mild.csv"] {
            std::fs::write(
                dir.join("c.toml"),
                format!(
                    "[grid]\nbands = 18\n[time]\nyears = 50\nmethod = \"{method}\"\n[longwave]\nkind = \"table\"\ntable = \"{table}\"\n"
                ),
            )
            .unwrap();
            let (code, err) = icefold(&dir, &["run", "c.toml", "-o", "b.nc", "--overwrite"]);
            assert_blow_up(code, &err, &format!("{method} {table}"));
            assert!(err.contains("outside the valid range 150 K to 350 K"), "{err}");
        }
    }
    // Absurd diffusivity with an explicit scheme: the fastest transport mode decays in
    // seconds, the scheme detects stiffness and names the band changing fastest.
    std::fs::write(
        dir.join("d.toml"),
        "[grid]\nbands = 18\n[time]\nyears = 10\nmethod = \"dopri5\"\n[transport]\ndiffusivity = 1e6\n",
    )
    .unwrap();
    let (code, err) = icefold(&dir, &["run", "d.toml", "-o", "d.nc"]);
    assert_blow_up(code, &err, "diffusivity 1e6");
    assert!(err.contains("stiffness") && err.contains("implicit"), "{err}");
    // The equilibrium solver on the runaway: no steady state inside the table's range.
    std::fs::write(
        dir.join("e.toml"),
        "[grid]\nbands = 18\n[longwave]\nkind = \"table\"\ntable = \"mild.csv\"\n",
    )
    .unwrap();
    let (code, err) = icefold(&dir, &["equilibrium", "e.toml", "-o", "e.nc"]);
    assert_eq!(code, Some(3), "{err}");
    assert!(err.contains("latitude") && err.contains("model year"), "{err}");
    let left: Vec<String> = files_in(&dir)
        .into_iter()
        .filter(|f| f.contains(".partial"))
        .collect();
    assert!(left.is_empty(), "temporary files left: {left:?}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// Two writers of one target without --overwrite (issue 20): started together, exactly one
/// writes the target; the other exits 2 naming it (its finished result kept under the name it
/// reports, or refused at the start if the first had already finished), and the target holds
/// one complete result. Each run takes far longer (hundreds of ms) than starting both, so the
/// final renames race in nearly every round; at least one round must take that path.
#[test]
fn concurrent_writers_of_one_target_never_replace_each_other() {
    let dir = tempdir("concurrent");
    std::fs::write(
        dir.join("c.toml"),
        "[grid]\nbands = 45\n[time]\nyears = 1500\noutput_every_years = 0.5\n",
    )
    .unwrap();
    let args = ["run", "c.toml", "-o", "same.nc"];
    let mut raced = 0;
    for round in 0..4 {
        let a = common_cli::spawn(&dir, &args);
        let b = common_cli::spawn(&dir, &args);
        let outs = [a.wait_with_output().unwrap(), b.wait_with_output().unwrap()];
        let codes: Vec<_> = outs.iter().map(|o| o.status.code()).collect();
        let winners = codes.iter().filter(|c| **c == Some(0)).count();
        let loser = outs
            .iter()
            .find(|o| o.status.code() != Some(0))
            .unwrap_or_else(|| panic!("round {round}: both exited 0 (one silently replaced the other)"));
        let err = String::from_utf8_lossy(&loser.stderr).into_owned();
        assert_eq!(winners, 1, "round {round}: exits {codes:?}: {err}");
        assert_eq!(loser.status.code(), Some(2), "round {round}: {err}");
        assert!(err.contains("same.nc") && err.contains("--overwrite"), "{err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        let r = icefold::output::NcReader::open(&dir.join("same.nc")).unwrap();
        assert_eq!(r.attr_i64("complete").unwrap(), Some(1));
        assert_eq!(r.dim_len("time").unwrap(), 3001);
        let mut want = vec!["c.toml".to_string(), "same.nc".to_string()];
        if err.contains("appeared while this job ran") {
            raced += 1;
            // The loser's finished file is kept under the name it reports.
            let kept = files_in(&dir)
                .into_iter()
                .find(|f| f.starts_with("same.kept-") && f.ends_with(".nc"))
                .unwrap_or_else(|| panic!("no kept file: {:?}", files_in(&dir)));
            assert!(err.contains(&kept), "{err}");
            let k = icefold::output::NcReader::open(&dir.join(&kept)).unwrap();
            assert_eq!(k.attr_i64("complete").unwrap(), Some(1));
            assert_eq!(
                k.read_f64("surface_temperature").unwrap(),
                r.read_f64("surface_temperature").unwrap()
            );
            want.insert(1, kept.clone());
            want.sort();
            assert_eq!(files_in(&dir), want);
            std::fs::remove_file(dir.join(kept)).unwrap();
        } else {
            assert!(err.contains("exists"), "{err}");
            assert_eq!(files_in(&dir), want);
        }
        std::fs::remove_file(dir.join("same.nc")).unwrap();
    }
    assert!(raced > 0, "the two writers never overlapped in 4 rounds");
    let _ = std::fs::remove_dir_all(&dir);
}
