//! Systems and reference formulas shared by the tests.

use spindrift_hamiltonian::{add_shell, DmiKind, Hamiltonian, ShellCoupling, ShellRef, Species};
use spindrift_lattice::{preset, BondList, Supercell, Vec3};

/// One species with the given moment (μB), damping, anisotropy (meV) and axis.
pub fn species(moment: f64, damping: f64, anisotropy: f64, axis: Vec3) -> Species {
    Species { name: "A".into(), moment, damping, anisotropy, axis }
}

/// Exchange `j` (meV) and optional DMI on shell `n`.
pub fn shell(n: usize, j: f64, dmi: Option<(f64, DmiKind)>) -> ShellCoupling {
    ShellCoupling { shell: ShellRef::Index(n), j, dmi, pair: None }
}

/// Interfacial DMI with the normal along `+z`.
pub fn interfacial(d: f64) -> Option<(f64, DmiKind)> {
    Some((d, DmiKind::Interfacial { normal: [0.0, 0.0, 1.0] }))
}

/// A preset lattice with one species on every site.
pub fn build(
    name: &str,
    a: f64,
    cells: [usize; 3],
    periodic: [bool; 3],
    shells: &[ShellCoupling],
    sp: Species,
    field: Vec3,
) -> Hamiltonian {
    let cell = Supercell::new(preset(name, a, None).unwrap(), cells, periodic, 1).unwrap();
    let mut bonds = BondList::new(cell.basis_len());
    for s in shells {
        add_shell(&cell, &mut bonds, s).unwrap();
    }
    Hamiltonian::new(cell, vec![sp], bonds, field).unwrap()
}

/// The Langevin function `L(x) = coth x - 1/x`: the mean projection of a classical moment
/// on a field at `x = mu muB B / kB T` (P. Langevin, Ann. Chim. Phys. 5, 70 (1905); any
/// statistical-mechanics textbook).
pub fn langevin(x: f64) -> f64 {
    1.0 / x.tanh() - 1.0 / x
}

/// Composite Simpson rule on `[a, b]` with `n` (even) intervals.
pub fn simpson(f: impl Fn(f64) -> f64, a: f64, b: f64, n: usize) -> f64 {
    let h = (b - a) / n as f64;
    let mut s = f(a) + f(b);
    for k in 1..n {
        s += if k % 2 == 1 { 4.0 } else { 2.0 } * f(a + k as f64 * h);
    }
    s * h / 3.0
}

/// Largest torque `max_i |S_i x B_i|`, T.
pub fn max_torque(h: &Hamiltonian, spins: &[Vec3]) -> f64 {
    let mut field = vec![[0.0; 3]; h.len()];
    h.fields(spins, &mut field);
    Hamiltonian::max_torque(spins, &field)
}

/// Bit patterns of a spin array, for exact comparisons.
pub fn bits(spins: &[Vec3]) -> Vec<[u64; 3]> {
    spins.iter().map(|s| [s[0].to_bits(), s[1].to_bits(), s[2].to_bits()]).collect()
}

/// Runs `f` in a rayon pool of `threads` threads.
pub fn with_threads<R: Send>(threads: usize, f: impl FnOnce() -> R + Send) -> R {
    rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap().install(f)
}
