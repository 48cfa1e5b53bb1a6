//! Reading a config file: TOML syntax, `--set` overrides, serde into [`RawConfig`], unit checks,
//! and errors located by key path and line.

use std::ops::Range;
use std::path::{Path, PathBuf};

use crate::error::{closest, line_of_key, ConfigError};
use crate::overrides::{apply_set, set_key_path};
use crate::raw::RawConfig;
use crate::units::{unit_factor, Dimension, QVec3, Quantity};

/// A config that has been read and whose units all fit their keys.
#[derive(Debug, Clone)]
pub struct Loaded {
    /// The config as written, after overrides.
    pub raw: RawConfig,
    /// The resolved TOML after overrides (the file's own text when there were none), for the run record.
    pub text: String,
    /// The config file's folder, against which relative paths inside the config are resolved.
    pub dir: PathBuf,
    /// The config file as named by the caller.
    pub file: PathBuf,
    /// The file's text as the user wrote it, before overrides; lines in errors refer to it.
    pub original: String,
    /// Key paths given by `--set`, normalised (`stage.0.temperature`), in command-line order.
    pub set_keys: Vec<String>,
}

/// Reads the config at `path`, applies the `--set KEY=VALUE` overrides in order, and deserialises it.
///
/// Every error names the file; key errors name the dotted key path and the line in the file as the
/// user wrote it, or say "(set on the command line)" when the offending key came from `--set`.
/// Besides TOML syntax and types, this checks that every unit suits its key
/// ([`RawConfig::quantities`]) and that `bond_table.unit` is an energy unit; wall-clock durations
/// such as `run.checkpoint_every` are checked while deserialising.
pub fn load(path: &Path, sets: &[String]) -> Result<Loaded, ConfigError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        let why = match e.kind() {
            std::io::ErrorKind::NotFound => "cannot read the config file: no such file".to_string(),
            std::io::ErrorKind::InvalidData => {
                "cannot read the config file: it is not UTF-8 text".to_string()
            }
            _ => format!("cannot read the config file: {e}"),
        };
        ConfigError::new(path, "", None, why)
    })?;
    load_str(&text, path, sets)
}

/// As [`load`], for config text already in memory; `file` names it in errors and gives the folder for
/// relative paths.
pub fn load_str(original: &str, file: &Path, sets: &[String]) -> Result<Loaded, ConfigError> {
    let mut set_keys = Vec::with_capacity(sets.len());
    for spec in sets {
        set_keys.push(set_key_path(spec).map_err(|e| e.with_file(file))?);
    }
    let locate = Locator { file, original, set_keys: &set_keys, spans_are_original: sets.is_empty() };

    let text = if sets.is_empty() {
        original.to_string()
    } else {
        let table: toml::Table = original.parse().map_err(|e: toml::de::Error| {
            ConfigError::new(file, "", span_line(original, e.span()), one_line(e.message()))
        })?;
        let mut doc = toml::Value::Table(table);
        for spec in sets {
            apply_set(&mut doc, spec).map_err(|e| e.with_file(file))?;
        }
        toml::to_string(&doc).map_err(|e| {
            ConfigError::new(file, "", None, format!("cannot write the config after --set: {e}"))
        })?
    };

    let raw: RawConfig = serde_path_to_error::deserialize(toml::Deserializer::new(&text)).map_err(|e| {
        let key = path_string(e.path());
        let inner = e.into_inner();
        locate.error(&key, rewrite_message(&one_line(inner.message())), inner.span())
    })?;

    check_units(&raw, &locate)?;

    let dir = match file.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    Ok(Loaded { raw, text, dir, file: file.to_path_buf(), original: original.to_string(), set_keys })
}

impl Loaded {
    /// An error at `key` (dotted path), with the file and line filled in as [`load`] does.
    /// For the validator's semantic errors.
    pub fn error_at(&self, key: &str, message: impl Into<String>) -> ConfigError {
        self.locator().error(key, message.into(), None)
    }

    /// Whether the value at `key` (or one of its ancestors) was given by `--set`.
    pub fn is_set_on_command_line(&self, key: &str) -> bool {
        self.locator().came_from_set(key)
    }

    /// `q`, read at `key`, in the canonical unit of `dim`.
    pub fn quantity(&self, key: &str, q: &Quantity, dim: Dimension) -> Result<f64, ConfigError> {
        q.to(dim).map_err(|e| self.error_at(key, e.message_for(leaf(key))))
    }

    /// `v`, read at `key`, in the canonical unit of `dim`; an error names the element (`field.b.2`).
    pub fn vector(&self, key: &str, v: &QVec3, dim: Dimension) -> Result<[f64; 3], ConfigError> {
        let mut out = [0.0; 3];
        for (k, q) in v.0.iter().enumerate() {
            out[k] = self.quantity(&format!("{key}.{k}"), q, dim)?;
        }
        Ok(out)
    }

    /// A path written in the config, resolved against the config file's folder (absolute paths stay).
    pub fn resolve_path(&self, written: &str) -> PathBuf {
        self.dir.join(written)
    }

    fn locator(&self) -> Locator<'_> {
        Locator {
            file: &self.file,
            original: &self.original,
            set_keys: &self.set_keys,
            spans_are_original: false,
        }
    }
}

/// Finds where a key is, for errors.
struct Locator<'a> {
    file: &'a Path,
    original: &'a str,
    set_keys: &'a [String],
    /// Whether byte spans reported by the deserialiser index the original text (no overrides).
    spans_are_original: bool,
}

impl Locator<'_> {
    fn came_from_set(&self, key: &str) -> bool {
        self.set_keys
            .iter()
            .any(|s| key == s || key.strip_prefix(s.as_str()).is_some_and(|r| r.starts_with('.')))
    }

    fn error(&self, key: &str, message: String, span: Option<Range<usize>>) -> ConfigError {
        if self.came_from_set(key) {
            return ConfigError::new(self.file, key, None, format!("{message} (set on the command line)"));
        }
        let line = span
            .filter(|_| self.spans_are_original)
            .and_then(|s| span_line(self.original, Some(s)))
            .or_else(|| if key.is_empty() { None } else { line_of_key(self.original, key) });
        ConfigError::new(self.file, key, line, message)
    }
}

fn span_line(text: &str, span: Option<Range<usize>>) -> Option<usize> {
    let start = span?.start;
    let before = text.as_bytes().get(..start)?;
    Some(before.iter().filter(|&&b| b == b'\n').count() + 1)
}

fn path_string(path: &serde_path_to_error::Path) -> String {
    use serde_path_to_error::Segment;
    let parts: Vec<String> = path
        .iter()
        .map(|s| match s {
            Segment::Seq { index } => index.to_string(),
            Segment::Map { key } => key.clone(),
            Segment::Enum { variant } => variant.clone(),
            Segment::Unknown => "?".to_string(),
        })
        .collect();
    parts.join(".")
}

/// toml's syntax messages span lines; an error is one line here so that it reads well after `FILE:LINE:`.
fn one_line(message: &str) -> String {
    message.trim().lines().map(str::trim).filter(|l| !l.is_empty()).collect::<Vec<_>>().join("; ")
}

/// The names between backticks in a serde message, in order.
fn backticked(s: &str) -> Vec<&str> {
    s.split('`').skip(1).step_by(2).collect()
}

/// Turns serde's wording into the config's: keys rather than fields, values rather than variants,
/// with a suggestion when a name is close to an allowed one.
fn rewrite_message(message: &str) -> String {
    let unknown = |what: &str, rest: &str| {
        let names = backticked(rest);
        let Some((given, allowed)) = names.split_first() else { return message.to_string() };
        let shown = if what == "key" { String::new() } else { format!(" `{given}`") };
        match closest(given, allowed.iter().copied()) {
            Some(best) => format!("unknown {what}{shown}; did you mean `{best}`?"),
            None if allowed.is_empty() => format!("unknown {what}{shown}; nothing is allowed here"),
            None => {
                let list: Vec<String> = allowed.iter().map(|a| format!("`{a}`")).collect();
                format!("unknown {what}{shown}; expected one of {}", list.join(", "))
            }
        }
    };
    if let Some(rest) = message.strip_prefix("unknown field ") {
        unknown("key", rest)
    } else if let Some(rest) = message.strip_prefix("unknown variant ") {
        unknown("value", rest)
    } else if let Some(rest) = message.strip_prefix("missing field ") {
        format!("missing key {rest}")
    } else if let Some(at) = message.find("expected struct Raw") {
        // serde names the Rust type a table deserialises into (`RawStage`), which is no
        // name of the config's.
        format!("{}expected a table", &message[..at])
    } else if let Some(head) = message.strip_suffix("expected f64") {
        format!("{head}expected a number")
    } else if let Some(head) =
        ["expected u64", "expected usize", "expected u32"].iter().find_map(|t| message.strip_suffix(t))
    {
        // The Rust integer type says "a whole number, not negative", which is what the user needs.
        format!("{head}expected a whole number of at least 0")
    } else {
        message.to_string()
    }
}

/// The last key name in a path, skipping element indices: `b` for `field.b.2`.
fn leaf(key: &str) -> &str {
    key.rsplit('.').find(|s| s.parse::<usize>().is_err()).unwrap_or(key)
}

fn check_units(raw: &RawConfig, locate: &Locator<'_>) -> Result<(), ConfigError> {
    for (key, dim, q) in raw.quantities() {
        q.to(dim).map_err(|e| locate.error(&key, e.message_for(leaf(&key)), None))?;
    }
    for (i, table) in raw.bond_table.iter().enumerate() {
        if let Some(unit) = &table.unit {
            let key = format!("bond_table.{i}.unit");
            unit_factor(unit, Dimension::Energy)
                .map_err(|e| locate.error(&key, e.message_for("unit"), None))?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_are_reworded_with_suggestions() {
        assert_eq!(
            rewrite_message("unknown field `tempreature`, expected one of `kind`, `temperature`"),
            "unknown key; did you mean `temperature`?"
        );
        assert_eq!(
            rewrite_message("unknown field `zzz`, expected `kind`"),
            "unknown key; expected one of `kind`"
        );
        assert_eq!(
            rewrite_message("unknown variant `diamnd`, expected one of `bcc`, `diamond`"),
            "unknown value `diamnd`; did you mean `diamond`?"
        );
        assert_eq!(rewrite_message("missing field `j`"), "missing key `j`");
        assert_eq!(rewrite_message("invalid type: string \"x\""), "invalid type: string \"x\"");
    }

    #[test]
    fn leaf_skips_indices() {
        assert_eq!(leaf("field.b.2"), "b");
        assert_eq!(leaf("stage.0.dt"), "dt");
        assert_eq!(leaf("seed"), "seed");
    }

    #[test]
    fn span_lines_are_one_based() {
        assert_eq!(span_line("a\nb\nc", Some(4..5)), Some(3));
        assert_eq!(span_line("a", Some(0..1)), Some(1));
        assert_eq!(span_line("a", Some(9..10)), None);
    }
}
