//! Validation, part one: the crystal, species and couplings become a [`Hamiltonian`].

use crate::bond_table::read_table;
use crate::error::ConfigError;
use crate::load::Loaded;
use crate::raw::{DmiKind as RawDmiKind, FerroSign, PairListing};
use crate::units::{lookup_unit, Dimension};
use spindrift_hamiltonian::{add_shell, DmiKind, Hamiltonian, ShellCoupling, ShellFound, ShellRef, Species};
use spindrift_lattice::{preset, BasisSite, BondList, Coupling, Crystal, LatticeError, Supercell, Vec3};

/// Bytes per spin of an `evolve` run besides the integrator's scratch
/// (`Heun::scratch_bytes`): the spins (24) and observers' scratch (4); the lattice header
/// is written and dropped before the run. Peak RSS is measured with `/usr/bin/time -v`
/// by `scripts/bench` (10^7 spins); `check`'s estimate should match it to 10%.
pub const BYTES_PER_SPIN_HELD: u64 = 28;

/// Bytes per spin that any `evolve` run needs at least: [`BYTES_PER_SPIN_HELD`] and the
/// second spin array of the fused Heun step (24; small systems need 48 instead). Systems
/// that cannot fit even so are refused before anything is built; the others once the
/// exact estimate is known (`validate`).
pub const BYTES_PER_SPIN_LEAST: u64 = BYTES_PER_SPIN_HELD + 24;

/// The error for a system of `cells` cells of `basis` sites whose memory `estimate`
/// (bytes; `None` when it overflows) exceeds the `limit`.
pub(crate) fn too_large(
    loaded: &Loaded,
    cells: [usize; 3],
    basis: usize,
    estimate: Option<u64>,
    limit: u64,
) -> ConfigError {
    loaded.error_at(
        "lattice.cells",
        format!(
            "{cells:?} cells of {basis} sites need about {} of memory, more than the {} available",
            estimate.map_or("an unrepresentable amount".to_string(), human_bytes),
            human_bytes(limit)
        ),
    )
}

/// One coupling entry and what it found, for `check`.
#[derive(Debug, Clone, PartialEq)]
pub struct CouplingReport {
    /// Config entry (`exchange.0`, `dmi.1`, `bond.2`, `bond_table.0`).
    pub key: String,
    /// Bond length, Å (0 for tables with several).
    pub distance: f64,
    /// Pairs added.
    pub pairs: usize,
}

/// The system part of a validated config.
#[derive(Debug, Clone)]
pub struct SystemBuild {
    /// The Hamiltonian, with the `[field]` applied.
    pub hamiltonian: Hamiltonian,
    /// What each coupling entry found.
    pub couplings: Vec<CouplingReport>,
    /// Species names in order.
    pub species_names: Vec<String>,
    /// Couplings that the crystal has but this supercell cannot hold (e.g. interlayer
    /// exchange in a monolayer), reported rather than refused.
    pub warnings: Vec<String>,
    /// One line per bond table: its key, pairs and a digest of the couplings as read.
    pub inputs: Vec<String>,
}

fn lattice_error(loaded: &Loaded, e: LatticeError) -> ConfigError {
    let key = match e {
        LatticeError::UnknownPreset { .. } => "lattice.preset",
        LatticeError::BadConstant { .. } => "lattice.a",
        LatticeError::DegenerateVectors { .. } => "lattice.vectors",
        LatticeError::OverlappingSites { .. } => "site",
        LatticeError::EmptySupercell { .. } => "lattice.cells",
        LatticeError::BadOccupancy { .. } => "site",
        _ => "lattice",
    };
    loaded.error_at(key, e.to_string())
}

fn unit_vector(loaded: &Loaded, key: &str, v: [f64; 3]) -> Result<Vec3, ConfigError> {
    let l = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    if !(l.is_finite() && l > 0.0) {
        return Err(loaded.error_at(key, format!("must be a non-zero direction, got {v:?}")));
    }
    Ok([v[0] / l, v[1] / l, v[2] / l])
}

/// Builds the crystal and supercell size (without allocating per-spin data).
pub fn crystal(loaded: &Loaded) -> Result<(Crystal, [usize; 3], [bool; 3]), ConfigError> {
    let raw = &loaded.raw;
    let l = &raw.lattice;
    if raw.species.is_empty() {
        return Err(loaded.error_at("species", "at least one [[species]] is needed"));
    }
    let species_index = |name: &str, key: &str| -> Result<usize, ConfigError> {
        raw.species.iter().position(|s| s.name == name).ok_or_else(|| {
            let names: Vec<&str> = raw.species.iter().map(|s| s.name.as_str()).collect();
            loaded.error_at(key, format!("no species named `{name}` (defined: {})", names.join(", ")))
        })
    };
    let mut crystal = match (&l.preset, &l.vectors) {
        (Some(_), Some(_)) => {
            return Err(loaded.error_at("lattice.vectors", "give either `preset` or `vectors`, not both"))
        }
        (None, None) => return Err(loaded.error_at("lattice", "missing `preset` (or `vectors`)")),
        (Some(p), None) => {
            let Some(a) = &l.a else {
                return Err(loaded
                    .error_at("lattice", format!("preset `{}` needs the lattice constant `a`", p.as_str())));
            };
            let a = loaded.quantity("lattice.a", a, Dimension::Length)?;
            let c = l.c.as_ref().map(|c| loaded.quantity("lattice.c", c, Dimension::Length)).transpose()?;
            preset(p.as_str(), a, c).map_err(|e| lattice_error(loaded, e))?
        }
        (None, Some(v)) => {
            let mut vectors = [[0.0; 3]; 3];
            for (r, row) in v.iter().enumerate() {
                vectors[r] = loaded.vector(&format!("lattice.vectors.{r}"), row, Dimension::Length)?;
            }
            if raw.site.is_empty() {
                return Err(
                    loaded.error_at("site", "a lattice given by `vectors` needs its [[site]] entries")
                );
            }
            let s = BasisSite { position: [0.0; 3], species: 0, occupancy: 1.0 };
            Crystal::new(vectors, vec![s]).map_err(|e| lattice_error(loaded, e))?
        }
    };
    if raw.site.is_empty() {
        if raw.species.len() > 1 {
            return Err(loaded.error_at(
                "site",
                "with several species, say which sits where with [[site]] entries (a preset's sites take the only species otherwise)",
            ));
        }
    } else {
        let mut basis = Vec::new();
        for (k, s) in raw.site.iter().enumerate() {
            let species = species_index(&s.species, &format!("site.{k}.species"))?;
            let occupancy = s.occupancy.unwrap_or(1.0);
            if !(occupancy > 0.0 && occupancy <= 1.0) {
                return Err(loaded.error_at(
                    &format!("site.{k}.occupancy"),
                    format!("must be in (0, 1], got {occupancy}"),
                ));
            }
            basis.push(BasisSite { position: s.position, species, occupancy });
        }
        crystal = Crystal::new(crystal.vectors, basis).map_err(|e| lattice_error(loaded, e))?;
    }
    let Some(cells) = l.cells else {
        return Err(loaded.error_at("lattice", "missing `cells = [n1, n2, n3]`"));
    };
    if cells.contains(&0) {
        return Err(
            loaded.error_at("lattice.cells", format!("every entry must be at least 1, got {cells:?}"))
        );
    }
    Ok((crystal, cells, l.periodic.unwrap_or([true; 3])))
}

/// Builds the whole system.
pub fn build(loaded: &Loaded, memory_limit: Option<u64>) -> Result<SystemBuild, ConfigError> {
    let raw = &loaded.raw;
    let (crystal, cells, periodic) = crystal(loaded)?;
    let sites = cells.iter().try_fold(crystal.basis.len() as u64, |acc, &n| acc.checked_mul(n as u64));
    let least = sites.and_then(|s| s.checked_mul(BYTES_PER_SPIN_LEAST));
    if let (Some(limit), least) = (memory_limit, least) {
        if least.is_none_or(|e| e > limit) {
            return Err(too_large(loaded, cells, crystal.basis.len(), least, limit));
        }
    }
    let seed = raw.seed.unwrap_or(0);
    let cell = Supercell::new(crystal, cells, periodic, seed).map_err(|e| lattice_error(loaded, e))?;
    let nb = cell.basis_len();

    let mut species = Vec::new();
    for (k, s) in raw.species.iter().enumerate() {
        let key = format!("species.{k}");
        if raw.species[..k].iter().any(|o| o.name == s.name) {
            return Err(
                loaded.error_at(&format!("{key}.name"), format!("species `{}` is defined twice", s.name))
            );
        }
        let Some(moment) = &s.moment else {
            return Err(loaded.error_at(&key, format!("species `{}` needs its `moment` (μB)", s.name)));
        };
        let moment = loaded.quantity(&format!("{key}.moment"), moment, Dimension::Moment)?;
        if !(moment.is_finite() && moment > 0.0) {
            return Err(loaded.error_at(&format!("{key}.moment"), format!("must be positive, got {moment}")));
        }
        let damping = s.damping.unwrap_or(0.1);
        if !(damping.is_finite() && damping >= 0.0) {
            return Err(loaded.error_at(&format!("{key}.damping"), format!("must be >= 0, got {damping}")));
        }
        let anisotropy = s
            .anisotropy
            .as_ref()
            .map(|q| loaded.quantity(&format!("{key}.anisotropy"), q, Dimension::Energy))
            .transpose()?
            .unwrap_or(0.0);
        let axis = unit_vector(loaded, &format!("{key}.axis"), s.axis.unwrap_or([0.0, 0.0, 1.0]))?;
        species.push(Species { name: s.name.clone(), moment, damping, anisotropy, axis });
    }
    let species_index = |name: &str, key: &str| -> Result<usize, ConfigError> {
        species.iter().position(|s| s.name == name).ok_or_else(|| {
            let names: Vec<&str> = species.iter().map(|s| s.name.as_str()).collect();
            loaded.error_at(key, format!("no species named `{name}` (defined: {})", names.join(", ")))
        })
    };

    let mut bonds = BondList::new(nb);
    let mut couplings = Vec::new();
    let mut warnings = Vec::new();
    let shell_ref = |key: &str,
                     shell: Option<usize>,
                     distance: Option<&crate::Quantity>|
     -> Result<ShellRef, ConfigError> {
        match (shell, distance) {
            (Some(_), Some(_)) => Err(loaded.error_at(key, "give either `shell` or `distance`, not both")),
            (None, None) => Err(loaded.error_at(key, "missing `shell` (or `distance`)")),
            (Some(0), None) => {
                Err(loaded.error_at(&format!("{key}.shell"), "shells count from 1 (nearest neighbours)"))
            }
            (Some(n), None) => Ok(ShellRef::Index(n)),
            (None, Some(d)) => {
                Ok(ShellRef::Distance(loaded.quantity(&format!("{key}.distance"), d, Dimension::Length)?))
            }
        }
    };
    let pair_of = |key: &str, pair: &Option<[String; 2]>| -> Result<Option<(usize, usize)>, ConfigError> {
        pair.as_ref()
            .map(|[a, b]| {
                Ok((species_index(a, &format!("{key}.pair"))?, species_index(b, &format!("{key}.pair"))?))
            })
            .transpose()
    };
    // Exchange entries met so far: (key, distance in Å, species pair). Two entries on the
    // same pairs add their couplings, which is allowed (a J split into parts) but more
    // often a slip (a shell given twice): said as a warning.
    type Pair = Option<(usize, usize)>;
    let mut seen: Vec<(String, f64, Pair)> = Vec::new();
    // Pairs that a short periodic axis folds onto their own site are left out (see
    // `Supercell::self_image`): said once per shell coupling.
    let lands_on_itself = |o: [i32; 3]| {
        format!(
            "lands on its own site at cell offset {o:?} through the periodic axes of this supercell \
             (cells {cells:?}), and a spin is not coupled to itself (more cells along that axis keep \
             couplings this long)"
        )
    };
    let self_image_warning = |key: &str, found: &ShellFound, warnings: &mut Vec<String>| {
        let n = found.self_images;
        if n > 0 {
            let (pairs, land, its) =
                if n == 1 { ("pair", "lands", "its") } else { ("pairs", "land", "their") };
            warnings.push(format!(
                "{key}: {n} {pairs} per cell at {:.4} Å {land} on {its} own site through the periodic axes \
                 of this supercell (cells {cells:?}) and {} left out, since a spin is not coupled to \
                 itself (more cells along those axes keep couplings this long)",
                found.distance,
                if n == 1 { "is" } else { "are" }
            ));
        }
    };

    for (k, e) in raw.exchange.iter().enumerate() {
        let key = format!("exchange.{k}");
        let spec = ShellCoupling {
            shell: shell_ref(&key, e.shell, e.distance.as_ref())?,
            j: loaded.quantity(&format!("{key}.j"), &e.j, Dimension::Energy)?,
            dmi: None,
            pair: pair_of(&key, &e.pair)?,
        };
        match add_shell(&cell, &mut bonds, &spec) {
            Ok(found) => {
                let same_pairs = |p: Pair, q: Pair| match (p, q) {
                    (Some((a, b)), Some((c, d))) => (a, b) == (c, d) || (a, b) == (d, c),
                    _ => true,
                };
                if let Some((other, ..)) = seen
                    .iter()
                    .find(|(_, d, p)| (d - found.distance).abs() < 1e-6 && same_pairs(*p, spec.pair))
                {
                    warnings.push(format!(
                        "{key}: the pairs at {:.4} Å are also coupled by {other}; the two couplings add",
                        found.distance
                    ));
                }
                seen.push((key.clone(), found.distance, spec.pair));
                self_image_warning(&key, &found, &mut warnings);
                couplings.push(CouplingReport { key, distance: found.distance, pairs: found.pairs })
            }
            Err(err) => absent(loaded, &cell, &spec, &key, err, &mut warnings)?,
        }
    }
    let layer_normal = cell.crystal().layer_normal();
    for (k, d) in raw.dmi.iter().enumerate() {
        let key = format!("dmi.{k}");
        let kind = match d.kind.unwrap_or(RawDmiKind::Interfacial) {
            RawDmiKind::Interfacial => DmiKind::Interfacial {
                normal: unit_vector(loaded, &format!("{key}.normal"), d.normal.unwrap_or(layer_normal))?,
            },
            RawDmiKind::Bulk => {
                if d.normal.is_some() {
                    return Err(
                        loaded.error_at(&format!("{key}.normal"), "`normal` applies to interfacial DMI only")
                    );
                }
                DmiKind::Bulk
            }
        };
        let spec = ShellCoupling {
            shell: shell_ref(&key, d.shell, d.distance.as_ref())?,
            j: 0.0,
            dmi: Some((loaded.quantity(&format!("{key}.d"), &d.d, Dimension::Energy)?, kind)),
            pair: pair_of(&key, &d.pair)?,
        };
        match add_shell(&cell, &mut bonds, &spec) {
            Ok(found) => {
                self_image_warning(&key, &found, &mut warnings);
                couplings.push(CouplingReport { key, distance: found.distance, pairs: found.pairs })
            }
            Err(err) => absent(loaded, &cell, &spec, &key, err, &mut warnings)?,
        }
    }
    let bond_vector = |from: usize, to: usize, o: [i32; 3]| -> Vec3 {
        let c = cell.crystal();
        let (pf, pt) = (c.basis[from].position, c.basis[to].position);
        c.to_cartesian([
            o[0] as f64 + pt[0] - pf[0],
            o[1] as f64 + pt[1] - pf[1],
            o[2] as f64 + pt[2] - pf[2],
        ])
    };
    // A bond that cannot exist in this supercell (longer than an open axis's box, as a bulk
    // table's interlayer bonds in a monolayer, or off the only cell of a periodic axis) is
    // left out with a warning, as the shells' cut bonds are: the same table serves the bulk
    // and films of any thickness.
    let beyond = |o: [i32; 3]| {
        format!("reaches beyond the supercell (cells {cells:?}, periodic {periodic:?}) at cell offset {o:?}")
    };
    // Why a bond of explicit cell offset cannot be kept, if it cannot.
    let unfit = |from: usize, to: usize, o: [i32; 3]| {
        if !cell.offset_allowed(o) {
            Some(beyond(o))
        } else if cell.self_image(from, to, o) {
            Some(lands_on_itself(o))
        } else {
            None
        }
    };
    for (k, b) in raw.bond.iter().enumerate() {
        let key = format!("bond.{k}");
        for (v, what) in [(b.from, "from"), (b.to, "to")] {
            if v >= nb {
                return Err(loaded.error_at(
                    &format!("{key}.{what}"),
                    format!("{v} is not a basis site (sites 0..{})", nb - 1),
                ));
            }
        }
        let o = b.cell.unwrap_or([0, 0, 0]);
        if b.from == b.to && o == [0, 0, 0] {
            return Err(loaded.error_at(&key, "a site cannot be bonded to itself"));
        }
        let mut c = Coupling::default();
        if let Some(t) = &b.tensor {
            if b.j.is_some() || b.dmi.is_some() {
                return Err(loaded.error_at(
                    &format!("{key}.tensor"),
                    "`tensor` replaces `j` and `dmi`; give one or the others",
                ));
            }
            let mut m = [[0.0; 3]; 3];
            for (r, row) in t.iter().enumerate() {
                m[r] = loaded.vector(&format!("{key}.tensor.{r}"), row, Dimension::Energy)?;
            }
            // Split into isotropic J, antisymmetric part as a DMI vector, and the
            // remaining symmetric traceless tensor: -S_i.A.S_j = -D.(S_i x S_j) with
            // D = (A_yz, A_zx, A_xy) for A = (M - M^T)/2.
            let j = (m[0][0] + m[1][1] + m[2][2]) / 3.0;
            let a = |p: usize, q: usize| 0.5 * (m[p][q] - m[q][p]);
            c.j = j;
            c.d = [a(1, 2), a(2, 0), a(0, 1)];
            let mut s = [[0.0; 3]; 3];
            for p in 0..3 {
                for q in 0..3 {
                    s[p][q] = 0.5 * (m[p][q] + m[q][p]) - if p == q { j } else { 0.0 };
                }
            }
            if s.iter().flatten().any(|x| x.abs() > 0.0) {
                c.tensor = Some(s);
            }
        } else {
            c.j =
                b.j.as_ref()
                    .map(|q| loaded.quantity(&format!("{key}.j"), q, Dimension::Energy))
                    .transpose()?
                    .unwrap_or(0.0);
            c.d = b
                .dmi
                .as_ref()
                .map(|v| loaded.vector(&format!("{key}.dmi"), v, Dimension::Energy))
                .transpose()?
                .unwrap_or([0.0; 3]);
        }
        let v = bond_vector(b.from, b.to, o);
        if let Some(why) = unfit(b.from, b.to, o) {
            warnings.push(format!("{key}: the bond {why}; it is left out"));
            couplings.push(CouplingReport { key, distance: spindrift_lattice::norm(v), pairs: 0 });
            continue;
        }
        bonds.add_pair(b.from, b.to, o, v, c).map_err(|e| loaded.error_at(&key, e.to_string()))?;
        couplings.push(CouplingReport { key, distance: spindrift_lattice::norm(v), pairs: 1 });
    }
    let mut inputs = Vec::new();
    for (k, t) in raw.bond_table.iter().enumerate() {
        let key = format!("bond_table.{k}");
        let unit = t.unit.as_deref().unwrap_or("meV");
        let scale = match lookup_unit(unit) {
            Some((Dimension::Energy, f)) => f,
            _ => {
                return Err(loaded.error_at(&format!("{key}.unit"), format!("`{unit}` is not an energy unit")))
            }
        };
        let path = loaded.resolve_path(&t.path);
        let rows = read_table(
            &path,
            &key,
            scale,
            t.pairs.unwrap_or(PairListing::Unique),
            t.ferromagnetic.unwrap_or(FerroSign::Positive),
            nb,
        )?;
        inputs.push(crate::inputs::table_line(&key, &rows));
        let mut left_out = Vec::new();
        for r in &rows {
            if let Some(why) = unfit(r.from, r.to, r.cell) {
                left_out.push((r, why));
                continue;
            }
            let v = bond_vector(r.from, r.to, r.cell);
            bonds
                .add_pair(r.from, r.to, r.cell, v, Coupling { j: r.j, d: r.d, tensor: None })
                .map_err(|e| loaded.error_at(&key, e.to_string()))?;
        }
        if let Some((first, why)) = left_out.first() {
            warnings.push(format!(
                "{key}: {} of the {} rows of {} are left out: the first, line {}, {why}",
                left_out.len(),
                rows.len(),
                path.display(),
                first.line,
            ));
        }
        couplings.push(CouplingReport { key, distance: 0.0, pairs: rows.len() - left_out.len() });
    }
    bonds.prune();
    let field = match raw.field.as_ref().and_then(|f| f.b.as_ref()) {
        Some(b) => loaded.vector("field.b", b, Dimension::Field)?,
        None => [0.0; 3],
    };
    let species_names = species.iter().map(|s| s.name.clone()).collect();
    let hamiltonian = Hamiltonian::new(cell, species, bonds, field)
        .map_err(|e| loaded.error_at("species", e.to_string()))?;
    Ok(SystemBuild { hamiltonian, couplings, species_names, warnings, inputs })
}

/// A shell coupling found no pairs. If the bulk crystal has them, only the supercell's
/// open boundaries cut them (a monolayer has no interlayer bonds): a warning. Otherwise
/// the entry is wrong: an error.
fn absent(
    loaded: &Loaded,
    cell: &Supercell,
    spec: &ShellCoupling,
    key: &str,
    err: spindrift_hamiltonian::NoNeighbours,
    warnings: &mut Vec<String>,
) -> Result<(), ConfigError> {
    let bulk = Supercell::new(cell.crystal().clone(), [4, 4, 4], [true; 3], 0)
        .map_err(|e| lattice_error(loaded, e))?;
    let mut probe = BondList::new(cell.basis_len());
    match add_shell(&bulk, &mut probe, spec) {
        Ok(found) => {
            warnings.push(format!(
                "{key}: no pairs at {:.4} Å fit in this supercell (cells {:?}, periodic {:?}); the coupling is left out",
                found.distance,
                cell.cells(),
                cell.periodic()
            ));
            Ok(())
        }
        Err(_) => Err(loaded.error_at(key, err.to_string())),
    }
}

/// `1.5 GiB`-style rendering.
pub fn human_bytes(b: u64) -> String {
    let units = ["B", "KiB", "MiB", "GiB", "TiB", "PiB"];
    let mut x = b as f64;
    let mut k = 0;
    while x >= 1024.0 && k + 1 < units.len() {
        x /= 1024.0;
        k += 1;
    }
    format!("{x:.1} {}", units[k])
}
