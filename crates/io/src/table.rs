//! Merged sweep tables: one row per sweep point, as an HDF5 file.
//!
//! `merged.h5` holds, at its root, the attribute `format = "spindrift-merged"`, a string
//! dataset per swept key (the values as written on the command line, TOML syntax) and a
//! real dataset per scalar column (NaN where a point has no value), each with a `unit`
//! attribute; the column units are those of `summary.json` (meV per spin, T, K, s, or 1).

use crate::error::{Hdf5Context, IoError};
use crate::h5util::{file_options, set_str_attr, write_fixed};
use hdf5::types::VarLenUnicode;
use std::path::Path;

/// Unit of a merged scalar column, by its name.
fn unit_of(column: &str) -> &'static str {
    match column {
        "energy" => "meV/spin",
        c if c.starts_with("curie") => "K",
        c if c.starts_with("coercive") => "T",
        "wall_seconds" => "s",
        _ => "1",
    }
}

/// Writes `path` (replacing it): swept `keys` with one value text per row in `values`,
/// and the scalar `columns` with one row each in `scalars`.
pub fn write_table(
    path: &Path,
    keys: &[String],
    values: &[Vec<String>],
    columns: &[&str],
    scalars: &[Vec<f64>],
) -> Result<(), IoError> {
    let tmp = path.with_extension("h5.tmp");
    {
        let file = file_options().create(&tmp).ctx(&tmp, || "creating the merged table")?;
        set_str_attr(&file, "format", "spindrift-merged").ctx(&tmp, || "writing the format attribute")?;
        let n = values.len();
        for (k, key) in keys.iter().enumerate() {
            let col: Vec<VarLenUnicode> = values
                .iter()
                .map(|row| row.get(k).cloned().unwrap_or_default().parse().unwrap_or_default())
                .collect();
            let name = format!("swept/{key}");
            let ds = file
                .new_dataset_builder()
                .with_data(&col)
                .create(name.as_str())
                .ctx(&tmp, || format!("writing {name}"))?;
            set_str_attr(&ds, "unit", "as written").ctx(&tmp, || format!("writing {name}"))?;
        }
        for (c, column) in columns.iter().enumerate() {
            let data: Vec<f64> = scalars.iter().map(|row| row.get(c).copied().unwrap_or(f64::NAN)).collect();
            write_fixed(&file, column, &data, &[n], unit_of(column))
                .ctx(&tmp, || format!("writing {column}"))?;
        }
    }
    std::fs::rename(&tmp, path).map_err(|e| IoError::os(path, "renaming the merged table into place", e))
}
