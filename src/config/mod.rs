//! Configuration: TOML text plus `--set` overrides, parsed into raw serde structs (unknown keys
//! rejected) and validated into typed specs.
//!
//! Two stages (see DEVELOPERS.md): `raw` holds values as written; `validate` checks ranges and
//! builds `spec`. Every error names the file and the dotted key (or line) and what is allowed.

pub mod keys;
pub mod raw;
mod sections;
pub mod spec;
pub mod table;
mod validate;
mod validate_jobs;

use serde::Deserialize;
use std::path::{Path, PathBuf};

pub use raw::RawConfig;
pub use spec::Spec;

/// A configuration error; all are "bad input" (exit status 2).
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    /// The file could not be read.
    #[error("cannot read config file {path}: {source}")]
    Read {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// TOML syntax error (the message carries line and column).
    #[error("{}: TOML syntax error: {}", one_line(.path), one_line(.message))]
    Syntax {
        /// The file.
        path: String,
        /// Parser message with line and column.
        message: String,
    },
    /// Unknown key or wrong type.
    #[error("{}: key `{}`: {}", one_line(.path), one_line(.key), one_line(.message))]
    Key {
        /// The file.
        path: String,
        /// Dotted key.
        key: String,
        /// What is wrong.
        message: String,
    },
    /// A value out of its allowed range.
    #[error("{}: key `{}` = {}: {}", one_line(.path), one_line(.key), one_line(.value), one_line(.allowed))]
    Range {
        /// The file.
        path: String,
        /// Dotted key.
        key: String,
        /// The value as written.
        value: String,
        /// The allowed values.
        allowed: String,
    },
    /// A malformed `--set` argument.
    #[error("--set {}: {}", one_line(.arg), one_line(.message))]
    Set {
        /// The argument.
        arg: String,
        /// What is wrong.
        message: String,
    },
    /// A data file referenced by the config (OLR table) is bad.
    #[error("{}: {}", one_line(.path), one_line(.message))]
    DataFile {
        /// The file (with `:line` when known).
        path: String,
        /// What is wrong.
        message: String,
    },
}

/// `s` with control characters escaped, so every message is one line (see [`crate::text`]).
pub use crate::text::one_line;

/// A loaded configuration: the resolved raw values (every default filled in), the typed spec,
/// and the resolved TOML text.
#[derive(Debug, Clone)]
pub struct Loaded {
    /// Where it came from (for messages).
    pub source: String,
    /// Directory relative paths in the config are resolved against.
    pub base_dir: PathBuf,
    /// The resolved TOML tree (defaults filled), the base for `with_value`.
    pub resolved: toml::Value,
    /// Typed spec.
    pub spec: Spec,
    /// Likely mistakes in valid input, one line each naming the key (see
    /// `validate::warnings`); the command line prints them.
    pub warnings: Vec<String>,
}

impl Loaded {
    /// The resolved configuration as TOML text.
    pub fn resolved_text(&self) -> String {
        toml::to_string_pretty(&self.resolved).unwrap_or_default()
    }

    /// A copy with one control key set to `value` (used by regime maps for each row): the
    /// model spec is rebuilt through the key's registry setter and checked as validation checks
    /// it (a typed rebuild, no TOML); the resolved tree records the value.
    pub fn with_value(&self, key: &str, value: f64) -> Result<Loaded, ConfigError> {
        let model = self.model_with(key, value)?;
        let mut out = self.clone();
        out.spec.model = model;
        set_dotted(&mut out.resolved, key, toml::Value::Float(value)).map_err(|m| ConfigError::Key {
            path: self.source.clone(),
            key: key.to_string(),
            message: m,
        })?;
        Ok(out)
    }

    /// The model spec with control key `key` set to `value` (see [`keys::set_model_value`]);
    /// the key must be used by this configuration's kinds.
    pub fn model_with(&self, key: &str, value: f64) -> Result<spec::ModelSpec, ConfigError> {
        if self.number(key).is_none() {
            return Err(ConfigError::Key {
                path: self.source.clone(),
                key: key.to_string(),
                message: "not a numeric key of this configuration (is its section's kind using it?)".into(),
            });
        }
        keys::set_model_value(&self.spec.model, key, value, self.spec.time.years).map_err(|allowed| {
            ConfigError::Range {
                path: self.source.clone(),
                key: key.to_string(),
                value: value.to_string(),
                allowed,
            }
        })
    }

    /// A copy with several dotted numeric keys set, validated once (used by ensembles).
    pub fn with_values(&self, values: &[(&str, f64)]) -> Result<Loaded, ConfigError> {
        let mut tree = self.resolved.clone();
        for (key, value) in values {
            set_dotted(&mut tree, key, toml::Value::Float(*value)).map_err(|m| ConfigError::Key {
                path: self.source.clone(),
                key: key.to_string(),
                message: m,
            })?;
        }
        from_tree(tree, &self.source, &self.base_dir)
    }

    /// The value of a numeric dotted key in the resolved configuration.
    pub fn number(&self, key: &str) -> Option<f64> {
        let mut v = &self.resolved;
        for part in key.split('.') {
            v = v.get(part)?;
        }
        v.as_float().or_else(|| v.as_integer().map(|i| i as f64))
    }
}

/// Load a config file and apply `--set KEY=VALUE` overrides.
pub fn load(path: &Path, sets: &[String]) -> Result<Loaded, ConfigError> {
    let text = read_config_text(path).map_err(|source| ConfigError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    load_str(&text, &path.display().to_string(), &base, sets)
}

/// Largest config file accepted, bytes (a longer one, or a device such as /dev/zero, is
/// refused after reading one byte past this).
pub const MAX_CONFIG_BYTES: u64 = 16 * 1024 * 1024;

/// The config file's text, refusing more than [`MAX_CONFIG_BYTES`] and non-UTF-8 text.
fn read_config_text(path: &Path) -> std::io::Result<String> {
    use std::io::Read;
    if std::fs::metadata(path)?.is_dir() {
        return Err(std::io::Error::other("it is a directory"));
    }
    let mut bytes = Vec::new();
    std::fs::File::open(path)?
        .take(MAX_CONFIG_BYTES + 1)
        .read_to_end(&mut bytes)?;
    if bytes.len() as u64 > MAX_CONFIG_BYTES {
        return Err(std::io::Error::other(format!(
            "longer than the limit of {} MiB",
            MAX_CONFIG_BYTES >> 20
        )));
    }
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let line = e.as_bytes()[..at].iter().filter(|&&b| b == b'\n').count() + 1;
        std::io::Error::other(format!("not UTF-8 text (invalid byte at line {line})"))
    })
}

/// Load from TOML text (`source` names it in messages).
pub fn load_str(text: &str, source: &str, base_dir: &Path, sets: &[String]) -> Result<Loaded, ConfigError> {
    let mut tree: toml::Value = toml::from_str(text).map_err(|e| ConfigError::Syntax {
        path: source.to_string(),
        message: e.message().trim().replace('\n', "; ")
            + &e.span()
                .map(|s| format!(" (at line {})", line_of(text, s.start)))
                .unwrap_or_default(),
    })?;
    let mut set_keys = Vec::new();
    for arg in sets {
        let (key, value) = parse_set(arg)?;
        set_dotted(&mut tree, &key, value).map_err(|message| ConfigError::Set {
            arg: arg.clone(),
            message,
        })?;
        set_keys.push((key, arg.clone()));
    }
    drop_replaced_kind_keys(&mut tree, &set_keys);
    from_tree(tree, source, base_dir).map_err(|e| {
        // Blame the --set argument when the failing key came from it.
        let key = match &e {
            ConfigError::Key { key, .. } | ConfigError::Range { key, .. } => Some(key.clone()),
            _ => None,
        };
        match key.and_then(|k| {
            set_keys
                .iter()
                .find(|(s, _)| *s == k || k.starts_with(&format!("{s}.")) || s.starts_with(&format!("{k}.")))
        }) {
            Some((_, arg)) => ConfigError::Set {
                arg: arg.clone(),
                message: e.to_string(),
            },
            None => e,
        }
    })
}

/// A `--set <section>.kind=NAME` switches the section's kind: the file's keys of that section
/// the new kind does not use are dropped (keys given by `--set` itself are kept, and refused
/// by validation if they belong to another kind).
fn drop_replaced_kind_keys(tree: &mut toml::Value, set_keys: &[(String, String)]) {
    for (key, _) in set_keys {
        let Some(section) = key.strip_suffix(".kind") else {
            continue;
        };
        let Some(kind) = tree
            .get(section)
            .and_then(|s| s.get("kind"))
            .and_then(|k| k.as_str())
        else {
            continue;
        };
        let kind = kind.to_string();
        let Some(table) = tree.get_mut(section).and_then(toml::Value::as_table_mut) else {
            continue;
        };
        table.retain(|name, _| {
            let full = format!("{section}.{name}");
            set_keys.iter().any(|(k, _)| *k == full) || keys::get(&full).is_none_or(|k| k.used_by(&kind))
        });
    }
}

fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())].matches('\n').count() + 1
}

/// Deserialise a TOML tree into raw structs and validate.
fn from_tree(mut tree: toml::Value, source: &str, base_dir: &Path) -> Result<Loaded, ConfigError> {
    floats_except_integer_keys(&mut tree, "");
    let raw: RawConfig = serde_path_to_error::deserialize(tree).map_err(|e| {
        let key = e.path().to_string();
        ConfigError::Key {
            path: source.to_string(),
            key: if key == "." { "(top level)".into() } else { key },
            message: plain_types(e.into_inner().message()),
        }
    })?;
    let (resolved_raw, spec) = validate::validate(raw, source, base_dir)?;
    let warnings = validate::warnings(&resolved_raw, source);
    let resolved = toml::Value::try_from(&resolved_raw).map_err(|e| ConfigError::Key {
        path: source.to_string(),
        key: "(resolved)".into(),
        message: e.to_string(),
    })?;
    Ok(Loaded {
        source: source.to_string(),
        base_dir: base_dir.to_path_buf(),
        resolved,
        spec,
        warnings,
    })
}

/// The raw values of a config text without validating them (e.g. the resolved config stored
/// in an output file, whose data files may not be at hand); `None` if it does not parse.
pub fn raw_from_text(text: &str) -> Option<RawConfig> {
    let mut tree: toml::Value = toml::from_str(text).ok()?;
    floats_except_integer_keys(&mut tree, "");
    RawConfig::deserialize(tree).ok()
}

/// Serde's type names in plain words: "expected f64" reads "expected a number".
fn plain_types(message: &str) -> String {
    message
        .replace("expected f64", "expected a number")
        .replace("expected i64", "expected a whole number")
        .replace("expected a boolean", "expected true or false")
}

/// Integers become floats except at integer keys, so `solar_constant = 1361` reads as written.
fn floats_except_integer_keys(v: &mut toml::Value, prefix: &str) {
    match v {
        toml::Value::Table(t) => {
            for (k, child) in t.iter_mut() {
                let key = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                if let toml::Value::Integer(i) = child {
                    if !keys::is_whole_key(&key) {
                        *child = toml::Value::Float(*i as f64);
                    }
                } else {
                    floats_except_integer_keys(child, &key);
                }
            }
        }
        toml::Value::Array(a) => {
            for child in a.iter_mut() {
                if let toml::Value::Integer(i) = child {
                    *child = toml::Value::Float(*i as f64);
                } else {
                    floats_except_integer_keys(child, prefix);
                }
            }
        }
        _ => {}
    }
}

/// Split `KEY=VALUE`; the value is read as a TOML value (number, boolean, quoted string, array)
/// and otherwise taken as a bare string.
fn parse_set(arg: &str) -> Result<(String, toml::Value), ConfigError> {
    let err = |m: &str| ConfigError::Set {
        arg: arg.to_string(),
        message: m.to_string(),
    };
    let (key, value) = arg
        .split_once('=')
        .ok_or_else(|| err("expected KEY=VALUE, e.g. transport.diffusivity=0.5"))?;
    let key = key.trim();
    if key.is_empty()
        || key
            .split('.')
            .any(|p| p.is_empty() || !p.chars().all(|c| c.is_ascii_alphanumeric() || c == '_'))
    {
        return Err(err("the key must be a dotted name like albedo.ice"));
    }
    let value = value.trim();
    let parsed = toml::from_str::<toml::Table>(&format!("v = {value}"))
        .ok()
        .and_then(|mut t| t.remove("v"))
        .unwrap_or_else(|| toml::Value::String(value.to_string()));
    Ok((key.to_string(), parsed))
}

/// Set a dotted key in a TOML tree, creating tables on the way; unknown keys are caught later
/// by the raw structs (which reject them by name).
fn set_dotted(tree: &mut toml::Value, key: &str, value: toml::Value) -> Result<(), String> {
    let mut cur = tree;
    let parts: Vec<&str> = key.split('.').collect();
    for (k, part) in parts.iter().enumerate() {
        let table = cur.as_table_mut().ok_or_else(|| {
            format!(
                "`{}` is a value, not a table, so `{key}` cannot be set; set `{}` itself",
                parts[..k].join("."),
                parts[..k].join(".")
            )
        })?;
        if k + 1 == parts.len() {
            table.insert(part.to_string(), value);
            return Ok(());
        }
        cur = table
            .entry(part.to_string())
            .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    }
    Ok(())
}
