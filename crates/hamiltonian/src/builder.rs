//! Couplings by neighbour shell: turns "J on shell 2 between species A and B" into bonds.

use crate::dmi::{bulk_vector, interfacial_vector};
use spindrift_lattice::shells::{neighbours_at, shell_distances, tolerance};
use spindrift_lattice::{BondList, Coupling, Supercell, Vec3};

/// Which neighbours a coupling applies to.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ShellRef {
    /// The n-th distinct neighbour distance, from 1.
    Index(usize),
    /// A neighbour distance, Å.
    Distance(f64),
}

/// The form of a DMI vector given by shell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DmiKind {
    /// `D_ij = d (n x r_ij/|r_ij|)`, `n` the interface normal.
    Interfacial {
        /// Unit interface normal.
        normal: Vec3,
    },
    /// `D_ij = d r_ij/|r_ij|`.
    Bulk,
}

/// One coupling given by shell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShellCoupling {
    /// The shell.
    pub shell: ShellRef,
    /// Isotropic exchange, meV.
    pub j: f64,
    /// DMI magnitude (meV) and form.
    pub dmi: Option<(f64, DmiKind)>,
    /// Restrict to bonds between these two species (either order).
    pub pair: Option<(usize, usize)>,
}

/// What a shell coupling found.
#[derive(Debug, Clone, PartialEq)]
pub struct ShellFound {
    /// Bond length, Å.
    pub distance: f64,
    /// Number of pairs added (each counted once).
    pub pairs: usize,
    /// Pairs of the shell left out because they land on their own site through a short
    /// periodic axis ([`Supercell::self_image`]), each counted once.
    pub self_images: usize,
}

/// A shell that the supercell does not hold.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{what} finds no neighbours in this lattice and supercell{hint}")]
pub struct NoNeighbours {
    /// The shell as asked for.
    pub what: String,
    /// A hint listing the distances that exist.
    pub hint: String,
}

/// Adds the pairs of one shell coupling to `bonds`.
pub fn add_shell(
    cell: &Supercell,
    bonds: &mut BondList,
    spec: &ShellCoupling,
) -> Result<ShellFound, NoNeighbours> {
    let species: Vec<usize> = cell.crystal().basis.iter().map(|s| s.species).collect();
    let pair = |a: usize, b: usize| match spec.pair {
        None => true,
        Some((x, y)) => (species[a] == x && species[b] == y) || (species[a] == y && species[b] == x),
    };
    let distances = shell_distances(cell, 12, &pair);
    let hint = if distances.is_empty() {
        String::new()
    } else {
        let list: Vec<String> = distances.iter().take(6).map(|d| format!("{d:.4}")).collect();
        format!(" (shell distances here: {} Å)", list.join(", "))
    };
    let (what, distance) = match spec.shell {
        ShellRef::Index(n) => {
            (format!("shell {n}"), if n >= 1 { distances.get(n - 1).copied() } else { None })
        }
        ShellRef::Distance(d) => {
            let tol = tolerance(cell).max(1e-3);
            (
                format!("distance {d} Å"),
                distances.iter().copied().find(|x| (x - d).abs() <= tol).or_else(|| {
                    // Beyond the first twelve shells: look for that exact distance directly.
                    (!neighbours_at(cell, d, &pair).is_empty()).then_some(d)
                }),
            )
        }
    };
    let Some(distance) = distance else { return Err(NoNeighbours { what, hint }) };
    let (mut pairs, mut self_images) = (0, 0);
    for n in neighbours_at(cell, distance, &pair) {
        // Each unordered pair appears once from each end; keep one of them.
        let canonical = n.from < n.to || (n.from == n.to && n.offset > [0, 0, 0]);
        if !canonical {
            continue;
        }
        if cell.self_image(n.from, n.to, n.offset) {
            self_images += 1;
            continue;
        }
        let d = match spec.dmi {
            None => [0.0; 3],
            Some((d, DmiKind::Interfacial { normal })) => interfacial_vector(d, normal, n.vector),
            Some((d, DmiKind::Bulk)) => bulk_vector(d, n.vector),
        };
        let coupling = Coupling { j: spec.j, d, tensor: None };
        bonds
            .add_pair(n.from, n.to, n.offset, n.vector, coupling)
            .map_err(|e| NoNeighbours { what: what.clone(), hint: format!(": {e}") })?;
        pairs += 1;
    }
    if pairs == 0 {
        return Err(NoNeighbours { what, hint });
    }
    Ok(ShellFound { distance, pairs, self_images })
}
