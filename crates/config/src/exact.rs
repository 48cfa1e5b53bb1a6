//! Fixed-length arrays read strictly.
//!
//! serde reads a `[T; N]` from a TOML array by taking its first `N` elements, and the
//! `toml` crate does not complain about the rest: `cells = [64, 64, 8, 2]` would quietly
//! become `[64, 64, 8]` and `b = [0, 0, 1, 5]` a field of 1 T. The config's fixed-length
//! keys go through these functions instead, which read the whole array and refuse any
//! other length, with serde's own "invalid length" wording (and so the key and line, as
//! every other type error). A new fixed-length key in `raw.rs` takes the same attribute,
//! `#[serde(default, deserialize_with = "crate::exact::option")]` (or `array` when required).

use serde::de::{Deserialize, Deserializer, Error};

/// Reads an array of exactly `N` elements.
pub(crate) fn array<'de, D, T, const N: usize>(d: D) -> Result<[T; N], D::Error>
where
    D: Deserializer<'de>,
    T: Deserialize<'de>,
{
    let v: Vec<T> = Vec::deserialize(d)?;
    let n = v.len();
    v.try_into().map_err(|_| D::Error::invalid_length(n, &format!("an array of length {N}").as_str()))
}

/// As [`array`], for an optional key (use with `#[serde(default)]`).
pub(crate) fn option<'de, D, T, const N: usize>(d: D) -> Result<Option<[T; N]>, D::Error>
where
    D: Deserializer<'de>,
    T: Deserialize<'de>,
{
    array(d).map(Some)
}

#[cfg(test)]
mod tests {
    use serde::Deserialize;

    #[derive(Debug, Deserialize)]
    struct Probe {
        #[serde(default, deserialize_with = "super::option")]
        v: Option<[i64; 3]>,
    }

    #[test]
    fn only_the_exact_length_is_read() {
        let read = |t: &str| toml::from_str::<Probe>(t).map(|p| p.v).map_err(|e| e.message().to_string());
        assert_eq!(read("v = [1, 2, 3]"), Ok(Some([1, 2, 3])));
        assert_eq!(read(""), Ok(None));
        assert_eq!(read("v = [1, 2, 3, 4]"), Err("invalid length 4, expected an array of length 3".into()));
        assert_eq!(read("v = [1, 2]"), Err("invalid length 2, expected an array of length 3".into()));
    }
}
