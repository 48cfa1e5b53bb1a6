//! Where the field kernel reads the spins it sums: one row of cells at a time.
//!
//! The kernel of [`Hamiltonian::field_range`] works row by row (`n1 * nb` consecutive
//! sites along `a1`) and resolves every bond to the neighbour's row once per row. Most
//! callers keep every spin in one array in site order ([`FlatRows`]); an integrator that
//! holds only a window of rows (the fused Heun step of large systems keeps its predictor
//! for a few bands of rows) hands the kernel its own [`SpinRows`] instead. The sums are the
//! same either way: only where the numbers come from changes.

use crate::Hamiltonian;
use spindrift_lattice::Vec3;

/// The spins of whole rows of cells.
pub trait SpinRows {
    /// The `n1 * nb` spins of the row of cells `(*, c2, c3)`, in site order. The kernel
    /// asks only for rows that its bonds reach from the rows it evaluates.
    fn row(&self, c2: usize, c3: usize) -> &[Vec3];

    /// The spins of the `count` rows from `(*, c2, c3)` on within their plane as one slice,
    /// where the rows are held so (the kernel asks only for rows within the plane), else
    /// `None`; one row is always [`SpinRows::row`].
    #[inline(always)]
    fn run(&self, c2: usize, c3: usize, count: usize) -> Option<&[Vec3]> {
        (count == 1).then(|| self.row(c2, c3))
    }
}

/// Every site's spin in one array, in site order.
#[derive(Debug, Clone, Copy)]
pub struct FlatRows<'a> {
    spins: &'a [Vec3],
    /// Sites per row, `n1 * nb`.
    row_len: usize,
    /// Rows per plane, `n2`.
    n2: usize,
}

impl<'a> FlatRows<'a> {
    /// The rows of `spins`, one spin per site of `h`'s supercell.
    pub fn new(h: &Hamiltonian, spins: &'a [Vec3]) -> Self {
        let [n1, n2, _] = h.cell().cells();
        Self { spins, row_len: n1 * h.cell().basis_len(), n2 }
    }
}

impl SpinRows for FlatRows<'_> {
    #[inline(always)]
    fn row(&self, c2: usize, c3: usize) -> &[Vec3] {
        let start = (c3 * self.n2 + c2) * self.row_len;
        &self.spins[start..start + self.row_len]
    }

    #[inline(always)]
    fn run(&self, c2: usize, c3: usize, count: usize) -> Option<&[Vec3]> {
        let start = (c3 * self.n2 + c2) * self.row_len;
        Some(&self.spins[start..start + count * self.row_len])
    }
}
