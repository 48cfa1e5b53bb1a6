//! Bond tables: pair couplings from a whitespace-separated text file.
//!
//! One pair per line: `from to n1 n2 n3 J [Dx Dy Dz]` — basis-site indices (from 0, in the
//! order of `[[site]]` or of the preset), the cell offset of `to`, the exchange constant
//! and optionally the DMI vector, in the table's `unit`. `#` starts a comment; blank
//! lines are skipped. With `pairs = "unique"` every line is one pair (its reverse is added
//! automatically); with `pairs = "both-directions"` every pair must appear twice, as
//! `i j n` and `j i -n`, with the same `J` and opposite `D`, and a table that breaks this
//! is reported, not repaired. With `ferromagnetic = "negative"` the file's energies have
//! the opposite overall sign (`J < 0` ferromagnetic) and both `J` and `D` are negated.

use crate::error::ConfigError;
use crate::raw::{FerroSign, PairListing};
use std::collections::BTreeMap;
use std::path::Path;

/// One pair read from a table, in meV with Spindrift's sign convention.
#[derive(Debug, Clone, PartialEq)]
pub struct TablePair {
    /// Basis site of the first end.
    pub from: usize,
    /// Basis site of the second end.
    pub to: usize,
    /// Cell offset of the second end.
    pub cell: [i32; 3],
    /// Exchange, meV.
    pub j: f64,
    /// DMI vector, meV.
    pub d: [f64; 3],
    /// Line in the file, from 1.
    pub line: usize,
}

/// Reads a table; `scale` converts its energies to meV; `key` names the config entry in errors.
pub fn read_table(
    path: &Path,
    key: &str,
    scale: f64,
    pairs: PairListing,
    ferro: FerroSign,
    basis_len: usize,
) -> Result<Vec<TablePair>, ConfigError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| ConfigError::new(path, key, None, format!("cannot read the bond table: {e}")))?;
    let sign = match ferro {
        FerroSign::Positive => 1.0,
        FerroSign::Negative => -1.0,
    };
    let mut rows = Vec::new();
    for (n, raw) in text.lines().enumerate() {
        let line = n + 1;
        let content = raw.split('#').next().unwrap_or("").trim();
        if content.is_empty() {
            continue;
        }
        let fields: Vec<&str> = content.split_whitespace().collect();
        if fields.len() != 6 && fields.len() != 9 {
            return Err(ConfigError::new(
                path,
                key,
                Some(line),
                format!("expected 6 columns (from to n1 n2 n3 J) or 9 (… Dx Dy Dz), found {}", fields.len()),
            ));
        }
        let int = |k: usize, what: &str| -> Result<i64, ConfigError> {
            fields[k].parse::<i64>().map_err(|_| {
                ConfigError::new(
                    path,
                    key,
                    Some(line),
                    format!("column {} ({what}) is not an integer: `{}`", k + 1, fields[k]),
                )
            })
        };
        let real = |k: usize, what: &str| -> Result<f64, ConfigError> {
            fields[k].parse::<f64>().ok().filter(|x| x.is_finite()).ok_or_else(|| {
                ConfigError::new(
                    path,
                    key,
                    Some(line),
                    format!("column {} ({what}) is not a finite number: `{}`", k + 1, fields[k]),
                )
            })
        };
        let from = int(0, "from")?;
        let to = int(1, "to")?;
        for (v, what) in [(from, "from"), (to, "to")] {
            if v < 0 || v as usize >= basis_len {
                return Err(ConfigError::new(
                    path,
                    key,
                    Some(line),
                    format!(
                        "`{what}` = {v} is not a basis site (the crystal has sites 0..{})",
                        basis_len - 1
                    ),
                ));
            }
        }
        let cell = [int(2, "n1")? as i32, int(3, "n2")? as i32, int(4, "n3")? as i32];
        if from == to && cell == [0, 0, 0] {
            return Err(ConfigError::new(path, key, Some(line), "a site cannot be bonded to itself"));
        }
        let j = sign * scale * real(5, "J")?;
        let d = if fields.len() == 9 {
            [sign * scale * real(6, "Dx")?, sign * scale * real(7, "Dy")?, sign * scale * real(8, "Dz")?]
        } else {
            [0.0; 3]
        };
        rows.push(TablePair { from: from as usize, to: to as usize, cell, j, d, line });
    }
    if rows.is_empty() {
        return Err(ConfigError::new(path, key, None, "the bond table has no pairs"));
    }
    match pairs {
        PairListing::Unique => Ok(rows),
        PairListing::BothDirections => pair_up(rows, path, key),
    }
}

/// Keeps one of each pair listed twice, after checking the two listings agree.
fn pair_up(rows: Vec<TablePair>, path: &Path, key: &str) -> Result<Vec<TablePair>, ConfigError> {
    let mut by_key: BTreeMap<(usize, usize, [i32; 3]), &TablePair> = BTreeMap::new();
    for r in &rows {
        if let Some(first) = by_key.insert((r.from, r.to, r.cell), r) {
            return Err(ConfigError::new(
                path,
                key,
                Some(r.line),
                format!(
                    "pair {} {} {:?} is listed twice (first on line {})",
                    r.from, r.to, r.cell, first.line
                ),
            ));
        }
    }
    let mut out = Vec::new();
    for r in &rows {
        let back = [-r.cell[0], -r.cell[1], -r.cell[2]];
        let Some(rev) = by_key.get(&(r.to, r.from, back)) else {
            return Err(ConfigError::new(
                path,
                key,
                Some(r.line),
                format!(
                    "table is not symmetric: pair {} {} {:?} has no reverse line `{} {} {} {} {} …` (pairs = \"both-directions\")",
                    r.from, r.to, r.cell, r.to, r.from, back[0], back[1], back[2]
                ),
            ));
        };
        let tol = 1e-6 * (1.0 + r.j.abs());
        let d_ok = (0..3).all(|a| (r.d[a] + rev.d[a]).abs() <= 1e-6 * (1.0 + r.d[a].abs()));
        if (r.j - rev.j).abs() > tol || !d_ok {
            return Err(ConfigError::new(
                path,
                key,
                Some(r.line),
                format!(
                    "table is not symmetric: line {} has J = {}, D = {:?} but its reverse on line {} has J = {}, D = {:?} (expected the same J and D_ji = -D_ij)",
                    r.line, r.j, r.d, rev.line, rev.j, rev.d
                ),
            ));
        }
        let canonical = r.from < r.to || (r.from == r.to && r.cell > back);
        if canonical {
            out.push(r.clone());
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn write(name: &str, text: &str) -> std::path::PathBuf {
        let p = std::env::temp_dir().join(format!("spindrift-bt-{}-{name}", std::process::id()));
        std::fs::write(&p, text).unwrap();
        p
    }

    #[test]
    fn reads_units_signs_and_both_directions() {
        let p = write("ok", "# from to n1 n2 n3 J Dx Dy Dz\n0 1 0 0 0 1.0 0.1 0 0\n1 0 0 0 0 1.0 -0.1 0 0\n\n0 0 1 0 0 -2.0 0 0 0.5  # comment\n0 0 -1 0 0 -2.0 0 0 -0.5\n");
        let t = read_table(
            &p,
            "bond_table.0",
            13.605693122994,
            PairListing::BothDirections,
            FerroSign::Negative,
            2,
        )
        .unwrap();
        assert_eq!(t.len(), 2);
        let a = t.iter().find(|r| r.from == 0 && r.to == 1).unwrap();
        assert!((a.j + 13.605693122994).abs() < 1e-9);
        assert!((a.d[0] + 1.3605693122994).abs() < 1e-9);
    }

    #[test]
    fn asymmetric_and_malformed_tables_name_the_line() {
        let p = write("asym", "0 1 0 0 0 1.0\n1 0 0 0 0 1.5\n");
        let e = read_table(&p, "bond_table.0", 1.0, PairListing::BothDirections, FerroSign::Positive, 2)
            .unwrap_err();
        assert_eq!(e.line, Some(1));
        assert!(e.message.contains("not symmetric"), "{e}");
        let p = write("bad", "0 1 0 0 0 1.0\n0 1 1 0 x 2.0\n");
        let e = read_table(&p, "bond_table.0", 1.0, PairListing::Unique, FerroSign::Positive, 2).unwrap_err();
        assert_eq!(e.line, Some(2));
        assert!(e.message.contains("column 5"), "{e}");
        let p = write("range", "0 3 0 0 0 1.0\n");
        let e = read_table(&p, "bond_table.0", 1.0, PairListing::Unique, FerroSign::Positive, 2).unwrap_err();
        assert!(e.message.contains("not a basis site"), "{e}");
    }
}
