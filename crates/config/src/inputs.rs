//! What a run read besides its config, and how two configs differ: the two checks that let
//! a resumed run refuse inputs that changed since it began, while comments and layout may.

use crate::bond_table::TablePair;

/// FNV-1a, 64 bits (Fowler, Noll and Vo; the IETF draft draft-eastlake-fnv): a fixed,
/// documented hash, so that a digest written by one build is read the same by any other
/// (std's hasher may change between Rust releases).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Fnv1a(u64);

impl Fnv1a {
    pub(crate) fn new() -> Self {
        Fnv1a(0xcbf2_9ce4_8422_2325)
    }

    pub(crate) fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 ^= u64::from(b);
            self.0 = self.0.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }

    pub(crate) fn finish(self) -> u64 {
        self.0
    }
}

/// One line describing a bond table's couplings as read (in meV, after unit and sign): its
/// key, pair count and a digest of every pair's sites, cell and bits, so that a table whose
/// numbers change gives another line and one whose comments or spacing change does not.
pub(crate) fn table_line(key: &str, rows: &[TablePair]) -> String {
    let mut h = Fnv1a::new();
    for r in rows {
        h.write(&(r.from as u64).to_le_bytes());
        h.write(&(r.to as u64).to_le_bytes());
        for c in r.cell {
            h.write(&c.to_le_bytes());
        }
        for x in [r.j, r.d[0], r.d[1], r.d[2]] {
            h.write(&x.to_bits().to_le_bytes());
        }
    }
    format!("{key}: {} pairs, fnv1a64 {:016x}", rows.len(), h.finish())
}

/// The first place where two config texts differ as TOML (a dotted key path and the two
/// values), or `None` when they hold the same keys and values, whatever their comments,
/// order and layout.
pub fn config_difference(before: &str, now: &str) -> Option<String> {
    let parse = |t: &str| t.parse::<toml::Table>().map(toml::Value::Table);
    match (parse(before), parse(now)) {
        (Ok(a), Ok(b)) => first_difference("", &a, &b),
        (Err(_), _) => Some("the recorded config does not read as TOML".into()),
        (_, Err(e)) => Some(format!("the config does not read as TOML: {}", e.message())),
    }
}

fn first_difference(path: &str, a: &toml::Value, b: &toml::Value) -> Option<String> {
    let join = |k: &str| if path.is_empty() { k.to_string() } else { format!("{path}.{k}") };
    let show = |v: Option<&toml::Value>| v.map_or("absent".to_string(), |v| format!("`{v}`"));
    match (a, b) {
        (toml::Value::Table(x), toml::Value::Table(y)) => {
            let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            keys.into_iter().find_map(|k| match (x.get(k), y.get(k)) {
                (Some(u), Some(v)) => first_difference(&join(k), u, v),
                (u, v) => Some(format!("`{}`: {} before, {} now", join(k), show(u), show(v))),
            })
        }
        (toml::Value::Array(x), toml::Value::Array(y)) if x.len() == y.len() => {
            x.iter().zip(y).enumerate().find_map(|(i, (u, v))| first_difference(&join(&i.to_string()), u, v))
        }
        _ if a == b => None,
        _ => Some(format!("`{path}`: {} before, {} now", show(Some(a)), show(Some(b)))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// FNV-1a 64 test vectors (Fowler, Noll and Vo; draft-eastlake-fnv, appendix):
    /// the empty string, "a" and "foobar".
    #[test]
    fn fnv1a_matches_its_published_values() {
        let digest = |s: &str| {
            let mut h = Fnv1a::new();
            h.write(s.as_bytes());
            h.finish()
        };
        assert_eq!(digest(""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(digest("a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(digest("foobar"), 0x8594_4171_f739_67e8);
    }

    /// Our own behaviour: comments, order and spacing are no difference; a value, a key
    /// added or removed, and an array's length are, named by their path.
    #[test]
    fn config_differences_are_named_by_path() {
        let a = "seed = 1\n[lattice]\ncells = [8, 8, 1]\n[[exchange]]\nshell = 1\nj = 5.0\n";
        let b =
            "# a comment\nseed   = 1\n[[exchange]]\nj = 5.0 # meV\nshell = 1\n[lattice]\ncells = [8,8,1]\n";
        assert_eq!(config_difference(a, b), None);
        let c = a.replace("j = 5.0", "j = 6.0");
        assert_eq!(config_difference(a, &c).unwrap(), "`exchange.0.j`: `5.0` before, `6.0` now");
        let d = a.replace("seed = 1\n", "");
        assert_eq!(config_difference(a, &d).unwrap(), "`seed`: `1` before, absent now");
        let e = a.replace("[8, 8, 1]", "[8, 8, 1, 1]");
        assert!(config_difference(a, &e).unwrap().starts_with("`lattice.cells`: `[8, 8, 1]` before"));
    }
}
