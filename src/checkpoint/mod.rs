//! Restart files: what a job needs to continue exactly where a checkpoint left it, with a
//! hash of the resolved config so a resume with another config is refused.
//!
//! # Format (version 1)
//!
//! A small self-describing little-endian binary file, written atomically (temporary name in
//! the same directory, `fsync`, rename):
//!
//! ```text
//! magic        8 bytes  "ICEFRST1"
//! kind         str      "run", "sweep", "branches" or "ensemble"
//! config_hash  u64      FNV-1a 64 of the resolved config TOML text (see `fnv1a64`)
//! config_text  str      the resolved config TOML text itself (to name what differs)
//! entries      u64      number of named entries, then each entry:
//!   tag        u8       1 = f64 array, 2 = u64 array, 3 = string
//!   name       str
//!   value      f64 / u64 array: u64 count then count x 8 bytes; string: str
//! checksum     u64      FNV-1a 64 of every byte before it (detects truncation)
//! str = u64 byte length, then UTF-8 bytes
//! ```
//!
//! Floating-point values are stored as their IEEE 754 bit patterns, so a restored state is bit
//! for bit the saved one (the basis of value-for-value identical resumes).

use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

const MAGIC: &[u8; 8] = b"ICEFRST1";

/// FNV-1a 64-bit hash (Fowler-Noll-Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3,
/// from memory / common practice): stable across platforms and versions, for config identity
/// and file checksums (not for security).
pub fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// Why a restart file cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum RestartError {
    /// Reading or writing failed.
    #[error("restart file {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The system error.
        source: std::io::Error,
    },
    /// Not a restart file, truncated, or missing an entry.
    #[error("restart file {path} is not usable: {detail}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        detail: String,
    },
    /// Made by another command.
    #[error("restart file {path} was written by `icefold {found}`, not `icefold {wanted}`")]
    Kind {
        /// The file.
        path: PathBuf,
        /// Its kind.
        found: String,
        /// The kind asked for.
        wanted: String,
    },
    /// The config differs from the one the checkpoint was made with.
    #[error("cannot resume from {path}: the resolved config differs from the one it was made with (config hash {saved:016x} in the file, {current:016x} now){detail}")]
    ConfigDiffers {
        /// The file.
        path: PathBuf,
        /// Hash in the file.
        saved: u64,
        /// Hash of the current config.
        current: u64,
        /// The differing lines, when cheap to tell.
        detail: String,
    },
}

/// One restart file's content: a kind, the config identity and named arrays.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Restart {
    /// Which command wrote it.
    pub kind: String,
    /// FNV-1a 64 of `config_text`.
    pub config_hash: u64,
    /// The resolved config TOML text.
    pub config_text: String,
    f64s: BTreeMap<String, Vec<f64>>,
    u64s: BTreeMap<String, Vec<u64>>,
    texts: BTreeMap<String, String>,
    /// Where it was read from (for messages).
    source: PathBuf,
}

impl Restart {
    /// An empty restart of `kind` for the resolved config `config_text`.
    pub fn new(kind: &str, config_text: &str) -> Restart {
        Restart {
            kind: kind.into(),
            config_hash: fnv1a64(config_text.as_bytes()),
            config_text: config_text.into(),
            ..Restart::default()
        }
    }

    /// Store an f64 array.
    pub fn put_f64(&mut self, name: &str, v: &[f64]) {
        self.f64s.insert(name.into(), v.to_vec());
    }

    /// Store a u64 array.
    pub fn put_u64(&mut self, name: &str, v: &[u64]) {
        self.u64s.insert(name.into(), v.to_vec());
    }

    /// Store a string.
    pub fn put_str(&mut self, name: &str, v: &str) {
        self.texts.insert(name.into(), v.into());
    }

    fn missing(&self, name: &str) -> RestartError {
        RestartError::Format {
            path: self.source.clone(),
            detail: format!("entry `{name}` is missing"),
        }
    }

    /// An f64 array.
    pub fn f64s(&self, name: &str) -> Result<&[f64], RestartError> {
        self.f64s
            .get(name)
            .map(Vec::as_slice)
            .ok_or_else(|| self.missing(name))
    }

    /// A u64 array.
    pub fn u64s(&self, name: &str) -> Result<&[u64], RestartError> {
        self.u64s
            .get(name)
            .map(Vec::as_slice)
            .ok_or_else(|| self.missing(name))
    }

    /// One f64.
    pub fn f64(&self, name: &str) -> Result<f64, RestartError> {
        self.f64s(name)?
            .first()
            .copied()
            .ok_or_else(|| self.missing(name))
    }

    /// One u64.
    pub fn u64(&self, name: &str) -> Result<u64, RestartError> {
        self.u64s(name)?
            .first()
            .copied()
            .ok_or_else(|| self.missing(name))
    }

    /// A string.
    pub fn str(&self, name: &str) -> Result<&str, RestartError> {
        self.texts
            .get(name)
            .map(String::as_str)
            .ok_or_else(|| self.missing(name))
    }

    /// Whether an entry of any type exists.
    pub fn has(&self, name: &str) -> bool {
        self.f64s.contains_key(name) || self.u64s.contains_key(name) || self.texts.contains_key(name)
    }

    /// A format error naming this file.
    pub fn bad(&self, detail: impl Into<String>) -> RestartError {
        RestartError::Format {
            path: self.source.clone(),
            detail: detail.into(),
        }
    }

    /// Serialise (format above).
    pub fn to_bytes(&self) -> Vec<u8> {
        fn s(out: &mut Vec<u8>, t: &str) {
            out.extend_from_slice(&(t.len() as u64).to_le_bytes());
            out.extend_from_slice(t.as_bytes());
        }
        let mut out = Vec::new();
        out.extend_from_slice(MAGIC);
        s(&mut out, &self.kind);
        out.extend_from_slice(&self.config_hash.to_le_bytes());
        s(&mut out, &self.config_text);
        let count = self.f64s.len() + self.u64s.len() + self.texts.len();
        out.extend_from_slice(&(count as u64).to_le_bytes());
        for (name, v) in &self.f64s {
            out.push(1);
            s(&mut out, name);
            out.extend_from_slice(&(v.len() as u64).to_le_bytes());
            v.iter()
                .for_each(|x| out.extend_from_slice(&x.to_bits().to_le_bytes()));
        }
        for (name, v) in &self.u64s {
            out.push(2);
            s(&mut out, name);
            out.extend_from_slice(&(v.len() as u64).to_le_bytes());
            v.iter().for_each(|x| out.extend_from_slice(&x.to_le_bytes()));
        }
        for (name, v) in &self.texts {
            out.push(3);
            s(&mut out, name);
            s(&mut out, v);
        }
        let sum = fnv1a64(&out);
        out.extend_from_slice(&sum.to_le_bytes());
        out
    }

    /// Parse bytes read from `path` (named in errors).
    pub fn from_bytes(bytes: &[u8], path: &Path) -> Result<Restart, RestartError> {
        let bad = |d: &str| RestartError::Format {
            path: path.to_path_buf(),
            detail: d.to_string(),
        };
        if bytes.len() < MAGIC.len() + 8 || &bytes[..8] != MAGIC {
            return Err(bad("not an icefold restart file (wrong magic bytes)"));
        }
        let (body, tail) = bytes.split_at(bytes.len() - 8);
        let sum = u64::from_le_bytes(tail.try_into().expect("8 bytes"));
        if fnv1a64(body) != sum {
            return Err(bad("checksum mismatch (truncated or damaged)"));
        }
        let mut r = Reader { b: body, at: 8 };
        let trunc = || bad("truncated entry");
        let mut out = Restart {
            source: path.to_path_buf(),
            ..Restart::default()
        };
        out.kind = r.str().ok_or_else(trunc)?;
        out.config_hash = r.u64().ok_or_else(trunc)?;
        out.config_text = r.str().ok_or_else(trunc)?;
        let count = r.u64().ok_or_else(trunc)?;
        for _ in 0..count {
            let tag = r.byte().ok_or_else(trunc)?;
            let name = r.str().ok_or_else(trunc)?;
            match tag {
                1 | 2 => {
                    let n = r.u64().ok_or_else(trunc)? as usize;
                    if n > (r.b.len() - r.at) / 8 {
                        return Err(trunc());
                    }
                    let vals: Vec<u64> = (0..n).map(|_| r.u64().expect("length checked")).collect();
                    if tag == 1 {
                        out.f64s
                            .insert(name, vals.into_iter().map(f64::from_bits).collect());
                    } else {
                        out.u64s.insert(name, vals);
                    }
                }
                3 => {
                    let v = r.str().ok_or_else(trunc)?;
                    out.texts.insert(name, v);
                }
                _ => return Err(bad(&format!("unknown entry tag {tag}"))),
            }
        }
        Ok(out)
    }

    /// Write atomically to `path` (temporary file beside it, synced, renamed).
    pub fn save(&self, path: &Path) -> Result<(), RestartError> {
        let io = |source| RestartError::Io {
            path: path.to_path_buf(),
            source,
        };
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "restart".into());
        let temp = dir.join(format!(".{name}.partial-{}", std::process::id()));
        let result = (|| {
            let mut f = std::fs::File::create(&temp)?;
            f.write_all(&self.to_bytes())?;
            f.sync_all()?;
            std::fs::rename(&temp, path)
        })();
        if result.is_err() {
            let _ = std::fs::remove_file(&temp);
        } else {
            crate::interrupt::checkpoint_written();
        }
        result.map_err(io)
    }

    /// Read `path`, checking that it is of `kind` and made with the config `config_text`.
    pub fn load(path: &Path, kind: &str, config_text: &str) -> Result<Restart, RestartError> {
        let bytes = std::fs::read(path).map_err(|source| RestartError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        let r = Restart::from_bytes(&bytes, path)?;
        if r.kind != kind {
            return Err(RestartError::Kind {
                path: path.to_path_buf(),
                found: r.kind,
                wanted: kind.into(),
            });
        }
        let current = fnv1a64(config_text.as_bytes());
        if r.config_hash != current || r.config_text != config_text {
            return Err(RestartError::ConfigDiffers {
                path: path.to_path_buf(),
                saved: r.config_hash,
                current,
                detail: differing_lines(&r.config_text, config_text),
            });
        }
        Ok(r)
    }
}

/// Lines of the resolved config that differ (at most 6 shown), as `; was: ...; now: ...`.
fn differing_lines(saved: &str, now: &str) -> String {
    let a: Vec<&str> = saved.lines().filter(|l| !now.lines().any(|m| m == *l)).collect();
    let b: Vec<&str> = now.lines().filter(|l| !saved.lines().any(|m| m == *l)).collect();
    if a.is_empty() && b.is_empty() {
        return String::new();
    }
    let show = |v: &[&str]| {
        let mut s: Vec<String> = v.iter().take(6).map(|l| format!("`{}`", l.trim())).collect();
        if v.len() > 6 {
            s.push(format!("and {} more", v.len() - 6));
        }
        if s.is_empty() {
            "(nothing)".to_string()
        } else {
            s.join(", ")
        }
    };
    format!("; in the checkpoint: {}; now: {}", show(&a), show(&b))
}

struct Reader<'a> {
    b: &'a [u8],
    at: usize,
}

impl Reader<'_> {
    fn byte(&mut self) -> Option<u8> {
        let v = *self.b.get(self.at)?;
        self.at += 1;
        Some(v)
    }

    fn u64(&mut self) -> Option<u64> {
        let s = self.b.get(self.at..self.at + 8)?;
        self.at += 8;
        Some(u64::from_le_bytes(s.try_into().ok()?))
    }

    fn str(&mut self) -> Option<String> {
        let n = usize::try_from(self.u64()?).ok()?;
        let end = self.at.checked_add(n)?;
        let s = self.b.get(self.at..end)?;
        self.at = end;
        String::from_utf8(s.to_vec()).ok()
    }
}

/// The restart file that belongs to an output file: `<output>.restart` beside it.
pub fn restart_path(output: &Path) -> PathBuf {
    let mut s = output.as_os_str().to_owned();
    s.push(".restart");
    PathBuf::from(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv1a64_matches_the_published_test_vectors() {
        // Test vectors of the FNV reference (from memory): "" is the offset basis.
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }

    #[test]
    fn round_trip_is_bit_exact_and_damage_is_detected() {
        let mut r = Restart::new("run", "[time]\nyears = 10.0\n");
        r.put_f64("y", &[1.0, -0.0, f64::NAN, f64::MIN_POSITIVE / 3.0, 1e300]);
        r.put_u64("n", &[7, u64::MAX]);
        r.put_str("note", "déjà");
        let bytes = r.to_bytes();
        let p = Path::new("x.restart");
        let back = Restart::from_bytes(&bytes, p).unwrap();
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(back.f64s("y").unwrap()), bits(r.f64s("y").unwrap()));
        assert_eq!(back.u64s("n").unwrap(), [7, u64::MAX]);
        assert_eq!(back.str("note").unwrap(), "déjà");
        assert_eq!(back.config_hash, fnv1a64(b"[time]\nyears = 10.0\n"));
        for cut in [0, 8, 20, bytes.len() - 9, bytes.len() - 1] {
            assert!(Restart::from_bytes(&bytes[..cut], p).is_err(), "cut at {cut}");
        }
        let mut flipped = bytes.clone();
        flipped[30] ^= 1;
        assert!(Restart::from_bytes(&flipped, p).is_err());
        assert!(back.f64s("absent").is_err());
    }

    #[test]
    fn differing_lines_name_the_changed_keys() {
        let d = differing_lines("a = 1\nb = 2\n", "a = 1\nb = 3\n");
        assert!(d.contains("`b = 2`") && d.contains("`b = 3`"), "{d}");
        assert!(!d.contains("a = 1"));
    }
}
