//! Config errors that point at a file, a key and a line, and the helpers that find them.

use std::collections::HashMap;
use std::fmt;
use std::path::PathBuf;

use thiserror::Error;

/// An input error in a config file or a `--set` override.
///
/// Displayed as `FILE:LINE: KEY: MESSAGE`, leaving out the parts that are unknown, for example
/// ``configs/demo.toml:12: stage.0.tempreature: unknown key; did you mean `temperature`?``.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
pub struct ConfigError {
    /// The config file (empty when the error is not tied to a file yet).
    pub file: PathBuf,
    /// Dotted key path, array elements by index (`stage.0.temperature`); empty for whole-file errors.
    pub key: String,
    /// 1-based line in the config file as the user wrote it, where known.
    pub line: Option<usize>,
    /// What is wrong, in words.
    pub message: String,
}

/// Writes numbers of 25 or more digits (how Rust and serde print `1e300` or `1e-300` as
/// `f64`: hundreds of digits) in scientific notation, so that a message stays one readable line.
fn compact_numbers(message: &str) -> String {
    let mut out = String::with_capacity(message.len());
    let mut rest = message;
    while let Some(start) = rest.find(|c: char| c.is_ascii_digit()) {
        out.push_str(&rest[..start]);
        let len =
            rest[start..].find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(rest.len() - start);
        let run = &rest[start..start + len];
        match run.parse::<f64>() {
            Ok(x) if len >= 25 => out.push_str(&format!("{x:e}")),
            _ => out.push_str(run),
        }
        rest = &rest[start + len..];
    }
    out.push_str(rest);
    out
}

impl ConfigError {
    /// An error at `key` of `file`, on `line` (1-based) if known.
    pub fn new(
        file: impl Into<PathBuf>,
        key: impl Into<String>,
        line: Option<usize>,
        message: impl Into<String>,
    ) -> Self {
        ConfigError { file: file.into(), key: key.into(), line, message: compact_numbers(&message.into()) }
    }

    /// The same error, attributed to `file`.
    pub fn with_file(mut self, file: impl Into<PathBuf>) -> Self {
        self.file = file.into();
        self
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let file = self.file.display().to_string();
        let mut wrote = false;
        if !file.is_empty() {
            f.write_str(&file)?;
            wrote = true;
        }
        if let Some(line) = self.line {
            if wrote {
                write!(f, ":{line}")?;
            } else {
                write!(f, "line {line}")?;
            }
            wrote = true;
        }
        if !self.key.is_empty() {
            if wrote {
                f.write_str(": ")?;
            }
            f.write_str(&self.key)?;
            wrote = true;
        }
        if wrote {
            f.write_str(": ")?;
        }
        f.write_str(&self.message)
    }
}

/// Levenshtein distance between two strings, counted in characters (insertions, deletions and
/// substitutions each cost one).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut diagonal = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let substitute = diagonal + usize::from(ca != cb);
            diagonal = row[j + 1];
            row[j + 1] = substitute.min(row[j] + 1).min(row[j + 1] + 1);
        }
    }
    row[b.len()]
}

/// The candidate closest to `word` by edit distance, if it is close enough to be a likely typo:
/// at most one edit for words of up to three characters, otherwise at most a third of the word's
/// length (but always two, which covers a swapped pair of letters). Ties go to the earlier candidate.
pub fn closest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let len = word.chars().count();
    // One letter for another is no evidence of a typo (`J` is not a misspelt `Å`).
    let limit = match len {
        0 | 1 => 0,
        2 | 3 => 1,
        _ => (len / 3).max(2),
    };
    let mut best: Option<(usize, &str)> = None;
    for c in candidates {
        let d = if c.eq_ignore_ascii_case(word) { 0 } else { edit_distance(word, c) };
        if d <= limit && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    best.map(|(_, c)| c)
}

/// The 1-based line of a dotted key in TOML text, array-of-tables elements counted by their
/// `[[name]]` headers (`stage.1.dt` is the `dt` under the second `[[stage]]`).
///
/// When the key itself is not written in the text (an element of an inline array, a key inside an
/// inline table, a key that is missing), the line of its nearest written ancestor is given, so that
/// an error still points somewhere useful. Returns `None` when no ancestor is written either.
pub fn line_of_key(text: &str, key_path: &str) -> Option<usize> {
    let entries = key_lines(text);
    let mut path: Vec<&str> = key_path.split('.').filter(|s| !s.is_empty()).collect();
    while !path.is_empty() {
        let p = path.join(".");
        if let Some((_, line)) = entries.iter().find(|(k, _)| *k == p) {
            return Some(*line);
        }
        let prefix = format!("{p}.");
        if let Some((_, line)) = entries.iter().find(|(k, _)| k.starts_with(&prefix)) {
            return Some(*line);
        }
        path.pop();
    }
    None
}

/// Every key and table header written in the text, with its resolved dotted path and 1-based line,
/// in file order. This is a tolerant scanner, not a validating parser: the file has already been
/// (or will be) parsed by `toml`, and here we only need to know where things are.
fn key_lines(text: &str) -> Vec<(String, usize)> {
    let mut out: Vec<(String, usize)> = Vec::new();
    let mut header: Vec<String> = Vec::new();
    // Number of elements seen so far of each array of tables, keyed by its resolved path.
    let mut counts: HashMap<String, usize> = HashMap::new();
    let mut scan = ValueScan::default();
    for (n, line) in text.lines().enumerate() {
        let lineno = n + 1;
        if scan.continues() {
            scan.feed(line);
            continue;
        }
        let t = line.trim_start();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        if let Some(rest) = t.strip_prefix("[[") {
            let Some((segments, _)) = parse_key(rest) else { continue };
            let mut path = resolve(&segments, &counts);
            let count = counts.entry(path.join(".")).or_insert(0);
            path.push(count.to_string());
            *count += 1;
            out.push((path.join("."), lineno));
            header = path;
        } else if let Some(rest) = t.strip_prefix('[') {
            let Some((segments, _)) = parse_key(rest) else { continue };
            header = resolve(&segments, &counts);
            out.push((header.join("."), lineno));
        } else if let Some((segments, used)) = parse_key(t) {
            let mut full = header.clone();
            for s in segments {
                full.push(s);
                let p = full.join(".");
                if !out.iter().any(|(k, _)| *k == p) {
                    out.push((p, lineno));
                }
            }
            // Skip the `=` and scan the value, so that multi-line arrays and strings are not
            // mistaken for keys.
            let value = t[used..].trim_start().strip_prefix('=').unwrap_or("");
            scan.feed(value);
        }
    }
    out
}

/// Resolves a header's key segments: a segment before the last that names an array of tables stands
/// for that array's last element.
fn resolve(segments: &[String], counts: &HashMap<String, usize>) -> Vec<String> {
    let mut path: Vec<String> = Vec::new();
    let Some((last, parents)) = segments.split_last() else { return path };
    for s in parents {
        path.push(s.clone());
        if let Some(&c) = counts.get(&path.join(".")) {
            path.push(c.saturating_sub(1).to_string());
        }
    }
    path.push(last.clone());
    path
}

/// Parses a dotted key (bare, "basic" or 'literal' segments) up to `=`, `]` or the end; returns the
/// segments and the byte length consumed.
fn parse_key(s: &str) -> Option<(Vec<String>, usize)> {
    let mut segments = Vec::new();
    let mut chars = s.char_indices().peekable();
    loop {
        while chars.peek().is_some_and(|(_, c)| *c == ' ' || *c == '\t') {
            chars.next();
        }
        let (start, c) = *chars.peek()?;
        let segment = if c == '"' || c == '\'' {
            chars.next();
            let mut seg = String::new();
            let mut escaped = false;
            loop {
                let (_, ch) = chars.next()?;
                if c == '"' && !escaped && ch == '\\' {
                    escaped = true;
                    continue;
                }
                if ch == c && !escaped {
                    break;
                }
                escaped = false;
                seg.push(ch);
            }
            seg
        } else {
            let mut end = start;
            while let Some(&(i, ch)) = chars.peek() {
                if ch.is_ascii_alphanumeric() || ch == '_' || ch == '-' {
                    end = i + ch.len_utf8();
                    chars.next();
                } else {
                    break;
                }
            }
            if end == start {
                return None;
            }
            s[start..end].to_string()
        };
        segments.push(segment);
        while chars.peek().is_some_and(|(_, c)| *c == ' ' || *c == '\t') {
            chars.next();
        }
        match chars.peek() {
            Some(&(_, '.')) => {
                chars.next();
            }
            Some(&(i, '=')) | Some(&(i, ']')) => return Some((segments, i)),
            _ => return None,
        }
    }
}

/// Tracks whether a value continues past the end of its line: open brackets or braces, or an
/// unfinished multi-line string.
#[derive(Default)]
struct ValueScan {
    depth: usize,
    multiline: Option<char>,
}

impl ValueScan {
    fn continues(&self) -> bool {
        self.depth > 0 || self.multiline.is_some()
    }

    fn feed(&mut self, line: &str) {
        let b = line.as_bytes();
        let mut i = 0;
        while i < b.len() {
            if let Some(q) = self.multiline {
                let close = [q as u8; 3];
                if b[i] == b'\\' && q == '"' {
                    i += 2;
                    continue;
                }
                if b[i..].starts_with(&close) {
                    self.multiline = None;
                    i += 3;
                    // A closing delimiter may be followed by up to two more quotes that belong to the string.
                    while i < b.len() && b[i] == q as u8 {
                        i += 1;
                    }
                } else {
                    i += 1;
                }
                continue;
            }
            match b[i] {
                b'#' => return,
                b'[' | b'{' => self.depth += 1,
                b']' | b'}' => self.depth = self.depth.saturating_sub(1),
                q @ (b'"' | b'\'') => {
                    if b[i..].starts_with(&[q; 3]) {
                        self.multiline = Some(q as char);
                        i += 3;
                        continue;
                    }
                    i += 1;
                    while i < b.len() && b[i] != q {
                        if q == b'"' && b[i] == b'\\' {
                            i += 1;
                        }
                        i += 1;
                    }
                }
                _ => {}
            }
            i += 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Our own behaviour: hundreds of digits become one number in scientific notation;
    /// ordinary numbers, and 19-digit integers a user typed, stay as written.
    #[test]
    fn long_numbers_are_compacted() {
        let big = format!("must be >= 0, got {}", -1e300);
        assert_eq!(compact_numbers(&big), "must be >= 0, got -1e300");
        let tiny = format!("got {} fs, line 12", 1e-300);
        assert_eq!(compact_numbers(&tiny), "got 1e-300 fs, line 12");
        let plain = "`18446744073709551615` is beyond 9223372036854775807; dt 0.0005 ps at 2.5e-9";
        assert_eq!(compact_numbers(plain), plain);
    }

    #[test]
    fn edit_distance_textbook_cases() {
        // Classic examples (Levenshtein, Sov. Phys. Dokl. 10, 707 (1966); "kitten"/"sitting" is the
        // common textbook illustration with distance 3).
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("flaw", "lawn"), 2);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("abc", ""), 3);
        assert_eq!(edit_distance("same", "same"), 0);
        assert_eq!(edit_distance("tempreature", "temperature"), 2);
        assert_eq!(edit_distance("μB", "muB"), 2);
    }

    #[test]
    fn closest_picks_near_words_only() {
        let keys = ["kind", "temperature", "temperatures", "dt", "duration"];
        assert_eq!(closest("tempreature", keys), Some("temperature"));
        assert_eq!(closest("dtt", keys), Some("dt"));
        assert_eq!(closest("Kind", keys), Some("kind"));
        assert_eq!(closest("colour", keys), None);
        // A single letter matches only itself, in either case.
        assert_eq!(closest("J", ["Å", "T", "K"]), None);
        assert_eq!(closest("t", ["Å", "T", "K"]), Some("T"));
    }

    #[test]
    fn display_leaves_out_unknown_parts() {
        let e = ConfigError::new("configs/demo.toml", "stage.0.tempreature", Some(12), "unknown key");
        assert_eq!(e.to_string(), "configs/demo.toml:12: stage.0.tempreature: unknown key");
        let e = ConfigError::new("a.toml", "", None, "cannot read");
        assert_eq!(e.to_string(), "a.toml: cannot read");
        let e = ConfigError::new("", "x.y", None, "bad");
        assert_eq!(e.to_string(), "x.y: bad");
    }

    const DOC: &str = r#"title = "t"  # [not a header]
[lattice]
preset = "bcc"
cells = [
  4,
  4, # ]]]
  4,
]

[[stage]]
kind = "relax"
notes = """
[[stage]]
kind = "fake"
"""

[[stage]]
kind = "evolve"
dt = "1 fs"
field_ramp = { from = [0, 0, 1], to = [0, 0, -1] }
"quoted.key" = 1
a.b = 2

[stage.extra]
x = 1
[[stage.sub]]
y = 1
[[stage.sub]]
y = 2
"#;

    #[test]
    fn finds_lines_of_keys_and_array_elements() {
        assert_eq!(line_of_key(DOC, "title"), Some(1));
        assert_eq!(line_of_key(DOC, "lattice"), Some(2));
        assert_eq!(line_of_key(DOC, "lattice.cells"), Some(4));
        assert_eq!(line_of_key(DOC, "lattice.cells.2"), Some(4));
        assert_eq!(line_of_key(DOC, "stage.0"), Some(10));
        assert_eq!(line_of_key(DOC, "stage.0.kind"), Some(11));
        assert_eq!(line_of_key(DOC, "stage.1.kind"), Some(18));
        assert_eq!(line_of_key(DOC, "stage.1.dt"), Some(19));
        assert_eq!(line_of_key(DOC, "stage.1.field_ramp.from.2"), Some(20));
        assert_eq!(line_of_key(DOC, "stage.1.quoted.key"), Some(21));
        assert_eq!(line_of_key(DOC, "stage.1.a.b"), Some(22));
        assert_eq!(line_of_key(DOC, "stage.1.extra.x"), Some(25));
        assert_eq!(line_of_key(DOC, "stage.1.sub.0.y"), Some(27));
        assert_eq!(line_of_key(DOC, "stage.1.sub.1.y"), Some(29));
        // A missing key points at its table.
        assert_eq!(line_of_key(DOC, "stage.1.temperature"), Some(17));
        assert_eq!(line_of_key(DOC, "stage.2.kind"), Some(10));
        assert_eq!(line_of_key(DOC, "field.b"), None);
    }

    #[test]
    fn scanner_tolerates_malformed_text() {
        let nasty = [
            "[",
            "[[",
            "[[]]",
            "[a.]\nx = 1",
            "a = \"unterminated",
            "a = '''\nno end",
            "a = \"\\",
            "= 1",
            "\"k",
            "a.\"b = 1",
            "x = [\n[\n",
            "é = 1\n[ü]\nß = 2",
        ];
        for text in nasty {
            let lines = text.lines().count().max(1);
            for key in ["a", "x", "a.b", "ü.ß", "b", "", "0"] {
                if let Some(line) = line_of_key(text, key) {
                    assert!((1..=lines).contains(&line), "{text:?} {key}: line {line}");
                }
            }
        }
        // A multi-line string may end in up to two extra quotes; the key after it is still found.
        assert_eq!(line_of_key("a = \"\"\"x\"\"\"\"\"\nb = 1", "b"), Some(2));
        assert_eq!(line_of_key("a = '''\n[[b]]\n'''\nb = 1", "b"), Some(4));
    }
}
