//! `--set KEY=VALUE` overrides applied to the parsed TOML document before it is read.
//!
//! KEY is a dotted path into the document; an integer segment indexes an array (`stage.0.temperature`,
//! `field.b.2`). VALUE is read as a TOML value (`50`, `[0,0,1.5]`, `"1 fs"`, `{ from = [0,0,1], ... }`);
//! a bare word that is not a TOML value (`skyrmion`, `1 fs`) is taken as a string, so that shells'
//! quoting does not have to survive. Missing intermediate tables are created; arrays never grow.

use toml::Value;

use crate::error::ConfigError;

/// A parsed `KEY=VALUE`.
struct SetSpec {
    segments: Vec<String>,
    value: Value,
}

impl SetSpec {
    fn key(&self) -> String {
        self.segments.join(".")
    }
}

fn set_error(key: &str, message: impl Into<String>) -> ConfigError {
    ConfigError::new("", key, None, format!("--set: {}", message.into()))
}

fn parse_spec(spec: &str) -> Result<SetSpec, ConfigError> {
    let Some((key, raw)) = spec.split_once('=') else {
        return Err(set_error(
            spec.trim(),
            format!("`{spec}` has no `=`; write KEY=VALUE, as in stage.0.temperature=50"),
        ));
    };
    let key = key.trim();
    let segments: Vec<String> = key.split('.').map(|s| s.trim().to_string()).collect();
    if key.is_empty() || segments.iter().any(String::is_empty) {
        return Err(set_error(key, format!("`{key}` is not a dotted key path such as `field.b`")));
    }
    let value = parse_value(raw).map_err(|m| set_error(key, m))?;
    Ok(SetSpec { segments, value })
}

fn parse_value(raw: &str) -> Result<Value, String> {
    let text = raw.trim();
    if text.is_empty() {
        return Err("no value after `=`; write KEY=\"\" for an empty string".into());
    }
    if text.contains(['\n', '\r']) {
        return Err("the value spans several lines".into());
    }
    match format!("v = {text}").parse::<toml::Table>() {
        Ok(mut table) if table.len() == 1 => {
            table.remove("v").ok_or_else(|| format!("cannot read `{text}` as a TOML value"))
        }
        Ok(_) => Err(format!("cannot read `{text}` as one TOML value")),
        Err(e) => {
            // Text that starts like a structured value was meant as one, so its syntax error is
            // reported instead of silently becoming a string.
            if text.starts_with(['[', '{', '"', '\'']) {
                Err(format!("cannot read `{text}` as a TOML value: {}", e.message().trim()))
            } else if let Some(n) = integer_toml_refuses(text) {
                n
            } else if let Some(x) = number_toml_refuses(text) {
                // `1e400` overflows and `.5` lacks the digit TOML wants before its point: both were
                // meant as numbers, not as the string the key's type would then complain of.
                if x.is_finite() {
                    Ok(Value::Float(x))
                } else {
                    Err(format!("`{text}` is not a finite number"))
                }
            } else {
                Ok(Value::String(text.to_string()))
            }
        }
    }
}

/// Digits alone (after an optional sign) that TOML refused: `007` (leading zeros) is read as
/// 7, and an integer beyond TOML's 64-bit signed range is refused as such.
fn integer_toml_refuses(text: &str) -> Option<Result<Value, String>> {
    let digits = text.strip_prefix(['+', '-']).unwrap_or(text);
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    Some(match text.parse::<i64>() {
        Ok(n) => Ok(Value::Integer(n)),
        Err(_) => Err(format!("`{text}` is beyond the integers TOML holds (at most {})", i64::MAX)),
    })
}

/// A number as Rust reads it (`.5`, `5.`, `1e400`) that TOML did not: text starting with a digit, a
/// sign or a point. Words Rust also reads as numbers (`inf`, `NaN`) stay strings unless TOML took them.
fn number_toml_refuses(text: &str) -> Option<f64> {
    if !text.starts_with(|c: char| c.is_ascii_digit() || matches!(c, '+' | '-' | '.')) {
        return None;
    }
    text.parse::<f64>().ok()
}

/// The normalised dotted key path of a `KEY=VALUE` override (`" stage.0.dt = 2"` gives `stage.0.dt`).
pub fn set_key_path(spec: &str) -> Result<String, ConfigError> {
    parse_spec(spec).map(|s| s.key())
}

fn type_name(v: &Value) -> &'static str {
    match v {
        Value::String(_) => "a string",
        Value::Integer(_) => "an integer",
        Value::Float(_) => "a float",
        Value::Boolean(_) => "a boolean",
        Value::Datetime(_) => "a date",
        Value::Array(_) => "an array",
        Value::Table(_) => "a table",
    }
}

fn index_in(seg: &str, parent: &str, len: usize, key: &str) -> Result<usize, ConfigError> {
    let idx: usize = seg.parse().map_err(|_| {
        set_error(key, format!("`{parent}` is an array, so `{seg}` must be an element index (0, 1, ...)"))
    })?;
    if idx >= len {
        return Err(set_error(
            key,
            format!("index {idx} is past the end of `{parent}`, which has {len} element(s)"),
        ));
    }
    Ok(idx)
}

/// Applies one `--set KEY=VALUE` to a parsed TOML document.
///
/// Errors (returned with an empty file, which [`crate::load`] fills in) name the key: a spec without
/// `=`, an empty key segment, a value that starts like a TOML array, table or string but is not one,
/// an index past the end of an array, a non-index segment under an array, or a path through a value
/// that is neither a table nor an array.
pub fn apply_set(doc: &mut Value, spec: &str) -> Result<(), ConfigError> {
    let spec = parse_spec(spec)?;
    // Work on a copy so that a failed set leaves no half-created tables behind.
    let mut work = doc.clone();
    set_in(&mut work, spec)?;
    *doc = work;
    Ok(())
}

fn set_in(doc: &mut Value, spec: SetSpec) -> Result<(), ConfigError> {
    let SetSpec { segments, value } = spec;
    let key = segments.join(".");
    let last = segments.len() - 1;
    let mut cur = doc;
    for i in 0..=last {
        let seg = &segments[i];
        let parent = if i == 0 { "the top level".to_string() } else { segments[..i].join(".") };
        let here = segments[..=i].join(".");
        cur = match cur {
            Value::Table(table) => {
                if i == last {
                    table.insert(seg.clone(), value);
                    return Ok(());
                }
                if !table.contains_key(seg.as_str()) {
                    let next = &segments[i + 1];
                    if next.parse::<usize>().is_ok() {
                        return Err(set_error(
                            &key,
                            format!("`{here}` does not exist, so it has no element {next}"),
                        ));
                    }
                }
                table.entry(seg.clone()).or_insert_with(|| Value::Table(toml::Table::new()))
            }
            Value::Array(array) => {
                let idx = index_in(seg, &parent, array.len(), &key)?;
                if i == last {
                    array[idx] = value;
                    return Ok(());
                }
                &mut array[idx]
            }
            other => {
                return Err(set_error(
                    &key,
                    format!("`{parent}` is {}, so it has no `{seg}`", type_name(other)),
                ))
            }
        };
    }
    // The loop returns at its last segment; segments is never empty.
    Err(set_error(&key, "empty key path"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn doc() -> Value {
        Value::Table(
            r#"
title = "x"
[lattice]
cells = [8, 8, 1]
[field]
b = [0, 0, 1]
[[stage]]
kind = "relax"
[[stage]]
kind = "evolve"
temperature = 10
"#
            .parse::<toml::Table>()
            .unwrap(),
        )
    }

    fn get<'a>(v: &'a Value, path: &str) -> &'a Value {
        path.split('.').fold(v, |v, s| match v {
            Value::Array(a) => &a[s.parse::<usize>().unwrap()],
            other => &other[s],
        })
    }

    #[test]
    fn sets_interface_examples() {
        let mut d = doc();
        apply_set(&mut d, "stage.0.temperature=50").unwrap();
        assert_eq!(get(&d, "stage.0.temperature"), &Value::Integer(50));
        apply_set(&mut d, "field.b=[0,0,1.5]").unwrap();
        assert_eq!(
            get(&d, "field.b"),
            &Value::Array(vec![Value::Integer(0), Value::Integer(0), Value::Float(1.5)])
        );
        apply_set(&mut d, "lattice.cells=[32,32,4]").unwrap();
        assert_eq!(get(&d, "lattice.cells.2"), &Value::Integer(4));
        apply_set(&mut d, "initial.state=skyrmion").unwrap();
        assert_eq!(get(&d, "initial.state"), &Value::String("skyrmion".into()));
    }

    #[test]
    fn sets_elements_strings_and_inline_tables() {
        let mut d = doc();
        apply_set(&mut d, "field.b.2=-2.5").unwrap();
        assert_eq!(get(&d, "field.b.2"), &Value::Float(-2.5));
        apply_set(&mut d, "stage.1.dt=1 fs").unwrap();
        assert_eq!(get(&d, "stage.1.dt"), &Value::String("1 fs".into()));
        apply_set(&mut d, "stage.1.dt=\"2 fs\"").unwrap();
        assert_eq!(get(&d, "stage.1.dt"), &Value::String("2 fs".into()));
        apply_set(&mut d, "stage.1.field_ramp={ from = [0,0,1], to = [0,0,-1] }").unwrap();
        assert_eq!(get(&d, "stage.1.field_ramp.to.2"), &Value::Integer(-1));
        apply_set(&mut d, " output.snapshot_compression = true ").unwrap();
        assert_eq!(get(&d, "output.snapshot_compression"), &Value::Boolean(true));
        apply_set(&mut d, "run.deep.er.key=3").unwrap();
        assert_eq!(get(&d, "run.deep.er.key"), &Value::Integer(3));
    }

    #[test]
    fn bad_specs_name_the_key() {
        let mut d = doc();
        let e = apply_set(&mut d, "stage.2.temperature=5").unwrap_err();
        assert_eq!(e.key, "stage.2.temperature");
        assert!(e.message.contains("index 2 is past the end of `stage`"), "{e}");
        let e = apply_set(&mut d, "field.b.3=1").unwrap_err();
        assert!(e.message.contains("past the end of `field.b`"), "{e}");
        let e = apply_set(&mut d, "stage.first.kind=relax").unwrap_err();
        assert!(e.message.contains("must be an element index"), "{e}");
        let e = apply_set(&mut d, "title.x=1").unwrap_err();
        assert!(e.message.contains("`title` is a string"), "{e}");
        let e = apply_set(&mut d, "species.0.moment=2").unwrap_err();
        assert!(e.message.contains("`species` does not exist"), "{e}");
        let e = apply_set(&mut d, "stage.0.temperature").unwrap_err();
        assert!(e.message.contains("has no `=`"), "{e}");
        assert_eq!(e.key, "stage.0.temperature");
        assert!(apply_set(&mut d, "field..b=1").is_err());
        assert!(apply_set(&mut d, "=1").is_err());
        assert!(apply_set(&mut d, "field.b=").is_err());
        let e = apply_set(&mut d, "field.b=[0,0").unwrap_err();
        assert!(e.message.contains("cannot read `[0,0`"), "{e}");
        let e = apply_set(&mut d, "newtable.x.0=1").unwrap_err();
        assert!(e.message.contains("`newtable.x` does not exist"), "{e}");
        // The document is unchanged by failed sets, even those that got part of the way.
        assert_eq!(d, doc());
    }

    /// Our own behaviour: numbers TOML refuses (a missing digit by the point, an overflow) are read
    /// as numbers, or refused as such, rather than passed on as strings; words stay strings.
    #[test]
    fn numbers_toml_refuses_are_numbers() {
        let mut d = doc();
        apply_set(&mut d, "stage.1.temperature=.5").unwrap();
        assert_eq!(get(&d, "stage.1.temperature"), &Value::Float(0.5));
        apply_set(&mut d, "stage.1.temperature=-5.").unwrap();
        assert_eq!(get(&d, "stage.1.temperature"), &Value::Float(-5.0));
        apply_set(&mut d, "stage.1.measure=007").unwrap();
        assert_eq!(get(&d, "stage.1.measure"), &Value::Integer(7));
        let e = apply_set(&mut d, "stage.1.measure=18446744073709551615").unwrap_err();
        assert!(e.message.contains("beyond the integers TOML holds"), "{e}");
        let e = apply_set(&mut d, "stage.1.temperature=1e400").unwrap_err();
        assert!(e.message.contains("`1e400` is not a finite number"), "{e}");
        apply_set(&mut d, "title=infinity").unwrap();
        assert_eq!(get(&d, "title"), &Value::String("infinity".into()));
        apply_set(&mut d, "stage.1.dt=1.5fs").unwrap();
        assert_eq!(get(&d, "stage.1.dt"), &Value::String("1.5fs".into()));
    }

    #[test]
    fn key_paths_are_normalised() {
        assert_eq!(set_key_path(" stage.0.dt = 2").unwrap(), "stage.0.dt");
    }
}
