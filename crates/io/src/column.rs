//! An appendable dataset with rows buffered in memory.
//!
//! Rows are kept in a flat buffer and written as one block (one resize, one hyperslab
//! write), because one HDF5 call per row would cost far more than the row itself.

use std::path::Path;

use hdf5::{Dataset, Group, Hyperslab, Selection, SliceOrIndex};
use ndarray::{ArrayViewD, IxDyn};

use crate::error::{Hdf5Context, IoError};
use crate::h5util::{create_appendable, open_dataset};

/// Element type of a column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Elem {
    /// 64-bit IEEE float.
    F64,
    /// 64-bit unsigned integer (steps, sample counts).
    U64,
}

#[derive(Debug)]
enum Buf {
    F64(Vec<f64>),
    U64(Vec<u64>),
}

/// One dataset of shape `(rows, tail...)` growing along its first axis.
#[derive(Debug)]
pub(crate) struct Column {
    ds: Dataset,
    /// Full path in the file, for messages.
    name: String,
    tail: Vec<usize>,
    width: usize,
    /// Rows in the file.
    written: u64,
    buf: Buf,
}

/// Target bytes per chunk: large enough that the chunk index stays small, small enough that
/// a partly filled last chunk costs little to rewrite on every flush.
const CHUNK_BYTES: usize = 8 * 1024;

impl Column {
    /// Creates an empty column. `chunk_rows` of `None` picks about 8 KiB per chunk.
    pub(crate) fn create(
        group: &Group,
        name: &str,
        unit: &str,
        elem: Elem,
        tail: &[usize],
        chunk_rows: Option<usize>,
        deflate: Option<u8>,
        file: &Path,
    ) -> Result<Self, IoError> {
        let width: usize = tail.iter().product();
        let chunk_rows = chunk_rows.unwrap_or_else(|| (CHUNK_BYTES / 8 / width.max(1)).clamp(1, 1024));
        let full = format!("{}/{name}", group.name());
        let ds = match elem {
            Elem::F64 => create_appendable::<f64>(group, name, tail, chunk_rows, deflate, unit),
            Elem::U64 => create_appendable::<u64>(group, name, tail, chunk_rows, deflate, unit),
        }
        .ctx(file, || format!("creating dataset {full}"))?;
        Ok(Self::from_parts(ds, full, tail.to_vec(), 0, elem))
    }

    /// Opens an existing column written by [`Column::create`].
    pub(crate) fn open(group: &Group, name: &str, elem: Elem, file: &Path) -> Result<Self, IoError> {
        let ds = open_dataset(group, name, file)?;
        let full = format!("{}/{name}", group.name());
        let shape = ds.shape();
        if shape.is_empty() || !ds.is_resizable() {
            return Err(IoError::invalid(file, format!("dataset {full} is not an appendable table column")));
        }
        Ok(Self::from_parts(ds, full, shape[1..].to_vec(), shape[0] as u64, elem))
    }

    fn from_parts(ds: Dataset, name: String, tail: Vec<usize>, written: u64, elem: Elem) -> Self {
        let width = tail.iter().product();
        let buf = match elem {
            Elem::F64 => Buf::F64(Vec::new()),
            Elem::U64 => Buf::U64(Vec::new()),
        };
        Self { ds, name, tail, width, written, buf }
    }

    /// Trailing shape (after the row axis).
    pub(crate) fn tail(&self) -> &[usize] {
        &self.tail
    }

    /// Rows in the file plus rows pending.
    pub(crate) fn rows(&self) -> u64 {
        self.written + self.pending() as u64
    }

    /// Rows buffered, not yet in the file.
    pub(crate) fn pending(&self) -> usize {
        let n = match &self.buf {
            Buf::F64(v) => v.len(),
            Buf::U64(v) => v.len(),
        };
        n.checked_div(self.width).unwrap_or(0)
    }

    /// Buffers one row of floats; the caller has checked `values.len() == width`.
    pub(crate) fn push_f64(&mut self, values: &[f64]) {
        debug_assert_eq!(values.len(), self.width);
        match &mut self.buf {
            Buf::F64(v) => v.extend_from_slice(values),
            Buf::U64(v) => v.extend(values.iter().map(|&x| x as u64)),
        }
    }

    /// Buffers one row of one unsigned integer.
    pub(crate) fn push_u64(&mut self, value: u64) {
        debug_assert_eq!(self.width, 1);
        match &mut self.buf {
            Buf::U64(v) => v.push(value),
            Buf::F64(v) => v.push(value as f64),
        }
    }

    fn full_shape(&self, rows: usize) -> Vec<usize> {
        let mut s = Vec::with_capacity(1 + self.tail.len());
        s.push(rows);
        s.extend_from_slice(&self.tail);
        s
    }

    /// Writes the pending rows to the file as one block.
    pub(crate) fn write_pending(&mut self, file: &Path) -> Result<(), IoError> {
        let k = self.pending();
        if k == 0 {
            return Ok(());
        }
        let start = self.written as usize;
        let new_shape = self.full_shape(start + k);
        self.ds.resize(new_shape).ctx(file, || format!("extending dataset {}", self.name))?;
        let mut slab: Vec<SliceOrIndex> = vec![(start..start + k).into()];
        slab.extend(self.tail.iter().map(|&d| SliceOrIndex::from(0..d)));
        let sel = Selection::from(Hyperslab::from(slab));
        let block = self.full_shape(k);
        let result = match &self.buf {
            Buf::F64(v) => ArrayViewD::from_shape(IxDyn(&block), v.as_slice())
                .map_err(hdf5::Error::from)
                .and_then(|a| self.ds.write_slice(a, sel)),
            Buf::U64(v) => ArrayViewD::from_shape(IxDyn(&block), v.as_slice())
                .map_err(hdf5::Error::from)
                .and_then(|a| self.ds.write_slice(a, sel)),
        };
        result.ctx(file, || format!("writing rows {start}..{} of dataset {}", start + k, self.name))?;
        match &mut self.buf {
            Buf::F64(v) => v.clear(),
            Buf::U64(v) => v.clear(),
        }
        self.written += k as u64;
        Ok(())
    }

    /// Cuts the column back to `rows` rows (dropping anything pending).
    pub(crate) fn truncate(&mut self, rows: u64, file: &Path) -> Result<(), IoError> {
        match &mut self.buf {
            Buf::F64(v) => v.clear(),
            Buf::U64(v) => v.clear(),
        }
        if rows > self.written {
            return Err(IoError::invalid(
                file,
                format!(
                    "dataset {} has {} rows but the checkpoint expects {rows}; the run file is older than the checkpoint",
                    self.name, self.written
                ),
            ));
        }
        if rows < self.written {
            let shape = self.full_shape(rows as usize);
            self.ds
                .resize(shape)
                .ctx(file, || format!("cutting dataset {} back to {rows} rows", self.name))?;
            self.written = rows;
        }
        Ok(())
    }
}
