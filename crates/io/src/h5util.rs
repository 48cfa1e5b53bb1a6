//! Small HDF5 helpers shared by the run file, the checkpoint and the reader.
//!
//! Strings are stored as variable-length UTF-8, the type h5py and the HDF5 tools read as
//! plain strings.

use std::path::Path;

use hdf5::types::{VarLenAscii, VarLenUnicode};
use hdf5::{Dataset, Extent, Group, H5Type, Location, SimpleExtents};
use ndarray::{ArrayViewD, IxDyn};

use crate::error::{Hdf5Context, IoError};

/// Name of the unit attribute on every dataset.
pub(crate) const UNIT_ATTR: &str = "unit";

/// Options for every file this crate opens or creates.
///
/// HDF5's own file locking is off. Its `flock` lives on a descriptor that HDF5 opens without
/// close-on-exec, so any process spawned while a file is open (by any thread) inherits the
/// lock and keeps it after the file is closed, and later opens of that file fail. It also
/// refuses a second open of a file inside one process with other locking flags. Keeping a
/// run folder to one writer is therefore the caller's job.
pub(crate) fn file_options() -> hdf5::FileBuilder {
    let mut b = hdf5::File::with_options();
    // The 1.8 object-header format stores attributes of any size (the resolved config can
    // exceed the 64 KiB limit of the oldest format); every reader of the last 15 years reads it.
    b.with_fapl(|p| p.file_locking(false).libver_v18());
    b
}

fn vlu(value: &str) -> hdf5::Result<VarLenUnicode> {
    value.parse::<VarLenUnicode>().map_err(|e| hdf5::Error::from(format!("string {value:?}: {e}")))
}

/// Writes a scalar string attribute, replacing one of the same name.
pub(crate) fn set_str_attr(loc: &Location, name: &str, value: &str) -> hdf5::Result<()> {
    let v = vlu(value)?;
    delete_attr_if_present(loc, name)?;
    loc.new_attr::<VarLenUnicode>().shape(()).create(name)?.write_scalar(&v)
}

/// Writes a 1-D string-array attribute, replacing one of the same name.
pub(crate) fn set_str_array_attr(loc: &Location, name: &str, values: &[String]) -> hdf5::Result<()> {
    let v = values.iter().map(|s| vlu(s)).collect::<hdf5::Result<Vec<_>>>()?;
    delete_attr_if_present(loc, name)?;
    loc.new_attr::<VarLenUnicode>().shape(v.len()).create(name)?.write_raw(&v)
}

/// Writes a scalar numeric attribute, replacing one of the same name.
pub(crate) fn set_attr<T: H5Type>(loc: &Location, name: &str, value: &T) -> hdf5::Result<()> {
    delete_attr_if_present(loc, name)?;
    loc.new_attr::<T>().shape(()).create(name)?.write_scalar(value)
}

fn delete_attr_if_present(loc: &Location, name: &str) -> hdf5::Result<()> {
    if loc.attr_names()?.iter().any(|n| n == name) {
        loc.delete_attr(name)?;
    }
    Ok(())
}

/// Whether the object has an attribute of this name.
pub(crate) fn has_attr(loc: &Location, name: &str) -> bool {
    loc.attr_names().map(|names| names.iter().any(|n| n == name)).unwrap_or(false)
}

/// Reads a scalar string attribute written as UTF-8 or ASCII variable-length string.
pub(crate) fn read_str_attr(loc: &Location, name: &str) -> hdf5::Result<String> {
    let attr = loc.attr(name)?;
    match attr.read_scalar::<VarLenUnicode>() {
        Ok(v) => Ok(v.as_str().to_owned()),
        Err(_) => attr.read_scalar::<VarLenAscii>().map(|v| v.as_str().to_owned()),
    }
}

/// Reads a 1-D string-array attribute.
pub(crate) fn read_str_array_attr(loc: &Location, name: &str) -> hdf5::Result<Vec<String>> {
    let attr = loc.attr(name)?;
    match attr.read_raw::<VarLenUnicode>() {
        Ok(v) => Ok(v.iter().map(|s| s.as_str().to_owned()).collect()),
        Err(_) => Ok(attr.read_raw::<VarLenAscii>()?.iter().map(|s| s.as_str().to_owned()).collect()),
    }
}

/// Reads a scalar numeric attribute.
pub(crate) fn read_attr<T: H5Type>(loc: &Location, name: &str) -> hdf5::Result<T> {
    loc.attr(name)?.read_scalar::<T>()
}

/// Creates a fixed-size dataset holding `data` with the given shape and a `unit` attribute.
pub(crate) fn write_fixed<T: H5Type>(
    group: &Group,
    name: &str,
    data: &[T],
    shape: &[usize],
    unit: &str,
) -> hdf5::Result<Dataset> {
    let view = ArrayViewD::from_shape(IxDyn(shape), data)?;
    let ds = group.new_dataset_builder().with_data(view).create(name)?;
    set_str_attr(&ds, UNIT_ATTR, unit)?;
    Ok(ds)
}

/// Creates an empty dataset whose first axis is unlimited, chunked `chunk_rows` rows at a
/// time, with the given trailing shape and a `unit` attribute.
pub(crate) fn create_appendable<T: H5Type>(
    group: &Group,
    name: &str,
    tail: &[usize],
    chunk_rows: usize,
    deflate: Option<u8>,
    unit: &str,
) -> hdf5::Result<Dataset> {
    let mut extents = vec![Extent::resizable(0)];
    extents.extend(tail.iter().map(|&d| Extent::fixed(d)));
    let mut chunk = vec![chunk_rows.max(1)];
    chunk.extend(tail.iter().map(|&d| d.max(1)));
    let mut builder = group.new_dataset::<T>().chunk(chunk).shape(SimpleExtents::from_vec(extents));
    if let Some(level) = deflate {
        // Shuffling the bytes of doubles before deflate groups their exponents together,
        // which is where spin components compress.
        builder = builder.shuffle().deflate(level);
    }
    let ds = builder.create(name)?;
    set_str_attr(&ds, UNIT_ATTR, unit)?;
    Ok(ds)
}

/// Opens a group, mapping failure to an error naming it.
pub(crate) fn open_group(parent: &Group, name: &str, file: &Path) -> Result<Group, IoError> {
    if !parent.link_exists(name) {
        return Err(IoError::invalid(file, format!("missing group {}/{name}", group_name(parent))));
    }
    parent.group(name).ctx(file, || format!("opening group {}/{name}", group_name(parent)))
}

/// Opens a dataset, mapping failure to an error naming it.
pub(crate) fn open_dataset(parent: &Group, name: &str, file: &Path) -> Result<Dataset, IoError> {
    if !parent.link_exists(name) {
        return Err(IoError::invalid(file, format!("missing dataset {}/{name}", group_name(parent))));
    }
    parent.dataset(name).ctx(file, || format!("opening dataset {}/{name}", group_name(parent)))
}

/// The group's path without a trailing slash (the root is the empty string), for messages.
pub(crate) fn group_name(g: &Group) -> String {
    let n = g.name();
    if n == "/" {
        String::new()
    } else {
        n
    }
}

/// Checks that a file exists and is HDF5, giving a clear error for a missing file or for a
/// file of another kind, before the HDF5 library is asked to open it.
pub(crate) fn check_hdf5_file(path: &Path, expected: &'static str) -> Result<(), IoError> {
    use std::io::Read;
    let mut f = std::fs::File::open(path).map_err(|e| IoError::os(path, "opening", e))?;
    let mut sig = [0u8; 8];
    // The HDF5 signature sits at offset 0 unless a user block precedes it; Spindrift files
    // never have one, so anything else is not ours.
    let n = f.read(&mut sig).map_err(|e| IoError::os(path, "reading the file signature", e))?;
    if n < 8 || sig != *b"\x89HDF\r\n\x1a\n" {
        return Err(IoError::Foreign {
            path: path.to_path_buf(),
            expected,
            found: "not an HDF5 file".to_owned(),
        });
    }
    Ok(())
}

/// Checks the root `format` and `format_version` attributes of an open file.
pub(crate) fn check_format(
    root: &Group,
    path: &Path,
    expected: &'static str,
    supported: u64,
) -> Result<(), IoError> {
    let format = if has_attr(root, "format") { read_str_attr(root, "format").ok() } else { None };
    match format.as_deref() {
        Some(f) if f == expected => {}
        Some(f) => {
            return Err(IoError::Foreign {
                path: path.to_path_buf(),
                expected,
                found: format!("an HDF5 file with format {f:?}"),
            })
        }
        None => {
            return Err(IoError::Foreign {
                path: path.to_path_buf(),
                expected,
                found: "an HDF5 file without a format attribute".to_owned(),
            })
        }
    }
    let version: u64 = read_attr(root, "format_version").ctx(path, || "reading attribute format_version")?;
    if version > supported {
        return Err(IoError::Version { path: path.to_path_buf(), found: version, supported });
    }
    Ok(())
}
