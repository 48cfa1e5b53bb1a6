//! Layout probe: the six bonds of `bench/configs/sc128.toml` (exchange on every bond,
//! interfacial DMI in the plane, uniaxial anisotropy and field along z) on 128x128x8
//! simple cubic, periodic in the plane and open along z, written three ways, and a Heun
//! step (field, thermal field read from an array, predictor; field at the predictor,
//! corrector) written two ways:
//!
//! * `aos`: spins as 3-vectors (as Spindrift stores them), one pass per row;
//! * `aos3`: the same in three passes per row (in-plane pairs, out-of-plane pair, on-site
//!   terms), as the row kernel's packs go for this system;
//! * `aos3 general`: `aos3` with the row kernel's arithmetic (each pair as
//!   `j (s + t) + A (s - t)` with `e_z = 0` and coefficients read at run time, zeros
//!   included; the on-site terms on every component), which tells the cost of a general
//!   kernel's arithmetic apart from that of its structure;
//! * `soa3 general`: `aos3 general` on component arrays (the same operations in the same
//!   order, so the same bits; checked), which tells what the layout alone gains a kernel
//!   of three passes;
//! * `soa`: spins as three arrays of components, one pass per row, the arrays offset
//!   from one another within a 4 KiB page; `soa same page offset` allocates them plainly,
//!   so that they share their page offset, as separate large allocations do.
//!
//! * `aos3 packed (run-time shape)` and `soa3 packed (run-time shape)`: `aos3 general` built
//!   the way the row kernel is: a pack of the two in-plane pairs over the cells whose a1
//!   neighbours stay in the row, the row's length and the a1 offsets known only at run
//!   time and each entry's rows sliced to the pass's cells (`PackAos`, `PackSoa`,
//!   `pass_aos`, `pass_soa`), the two end cells one by one, then the out-of-plane pair and
//!   the on-site terms as passes of their own; on 3-vectors and on component arrays (the
//!   same bits as each other and as `aos3 general`, checked), which tells whether the
//!   layout's gain survives a kernel whose shape is a run-time value.
//!
//! The step adds `aos consts`: the AoS step reading the damping and gyromagnetic factor
//! per site from an array of (gamma, alpha, sigma) as `SiteConst`, instead of constants;
//! `aos3`, `aos3 general` and `soa3 general`: the step around those fields (the last two
//! give the same bits, checked), and three variants of `aos3` that look for what makes its
//! step dear: the predictor array off the spins' 4 KiB page offset, the predictor's field
//! in a row on the stack, and the on-site pass over whole vectors of numbers.
//! `layout-probe halves` times the predictor's and the corrector's pass of `aos` and
//! `aos3` apart.
//! The kernels hold their couplings as constants: a lower bound for a general kernel,
//! not a replacement for one. The rounds alternate the variants in one process, so that
//! a slow spell of a shared machine hits all of them; compare within a round.

use std::hint::black_box;
use std::time::Instant;

const N1: usize = 128;
const N2: usize = 128;
const N3: usize = 8;
const N: usize = N1 * N2 * N3;
const PLANE: usize = N1 * N2;
/// Exchange, DMI (x and y bonds), anisotropy field and applied field, T per unit spin.
const J: f64 = 43.2;
const DX: f64 = 8.6;
const DY: f64 = 8.6;
const K: f64 = 3.5;
const B: f64 = 1.0;
/// gamma / (1 + alpha^2) (rad/(ps T)), alpha, dt (ps).
const G: f64 = 174.3;
const AL: f64 = 0.1;
const DT: f64 = 1e-4;
/// Rounds of all variants, alternated.
const ROUNDS: usize = 9;

type V = [f64; 3];

/// Rows `(below, above)` along a2 (periodic) and `(down, up)` along a3 (open) of the row
/// starting at site `r`.
fn neighbour_rows(r: usize) -> (usize, usize, Option<usize>, Option<usize>) {
    let (c2, c3) = ((r / N1) % N2, r / PLANE);
    let base = c3 * PLANE;
    let below = base + (c2 + N2 - 1) % N2 * N1;
    let above = base + (c2 + 1) % N2 * N1;
    (below, above, (c3 > 0).then(|| r - PLANE), (c3 + 1 < N3).then(|| r + PLANE))
}

static ZERO_V: [V; N1] = [[0.0; 3]; N1];
static ZERO_F: [f64; N1] = [0.0; N1];

/// The field of the cells `lo .. hi` of a row, `up(c)` and `down(c)` its neighbours along a1.
#[inline(always)]
fn cells_aos(
    rows: [&[V]; 5],
    o: &mut [V],
    lo: usize,
    hi: usize,
    up: impl Fn(usize) -> usize,
    down: impl Fn(usize) -> usize,
) {
    let [own, ym, yp, zm, zp] = rows;
    for c in lo..hi {
        let (a, b, p, m) = (own[up(c)], own[down(c)], yp[c], ym[c]);
        let mut h = [0.0; 3];
        for q in 0..3 {
            h[q] = J * (a[q] + b[q]) + J * (p[q] + m[q]) + J * (zp[c][q] + zm[c][q]);
        }
        h[0] += DX * (a[2] - b[2]);
        h[2] -= DX * (a[0] - b[0]);
        h[1] += DY * (p[2] - m[2]);
        h[2] -= DY * (p[1] - m[1]);
        h[2] += K * own[c][2] + B;
        o[c] = h;
    }
}

#[inline(always)]
fn row_aos(s: &[V], r: usize, o: &mut [V]) {
    let (ym, yp, zm, zp) = neighbour_rows(r);
    let z = |at: Option<usize>| at.map_or(&ZERO_V[..], |at| &s[at..at + N1]);
    let rows = [&s[r..r + N1], &s[ym..ym + N1], &s[yp..yp + N1], z(zm), z(zp)];
    cells_aos(rows, o, 1, N1 - 1, |c| c + 1, |c| c - 1);
    cells_aos(rows, o, 0, 1, |_| 1, |_| N1 - 1);
    cells_aos(rows, o, N1 - 1, N1, |_| 0, |_| N1 - 2);
}

/// The first two of three passes over a row: `cell(c, up, down)`, the in-plane pairs of
/// cell `c` with neighbours `up` and `down` along a1, into `o` (the end cells wrap; the
/// interior loop keeps fixed offsets, which the compiler vectorises), then the
/// out-of-plane pair `j (zp + zm)` added.
#[inline(always)]
fn in_plane_then_z(o: &mut [V], zp: &[V], zm: &[V], j: f64, cell: impl Fn(usize, usize, usize) -> V) {
    o[0] = cell(0, 1, N1 - 1);
    for (k, oc) in o[1..N1 - 1].iter_mut().enumerate() {
        let c = k + 1;
        *oc = cell(c, c + 1, c - 1);
    }
    o[N1 - 1] = cell(N1 - 1, 0, N1 - 2);
    for c in 0..N1 {
        for q in 0..3 {
            o[c][q] += j * (zp[c][q] + zm[c][q]);
        }
    }
}

/// The first two passes of `row_aos3` (in-plane pairs, then the out-of-plane pair) into
/// `o`; returns the row's own spins.
#[inline(always)]
fn aos3_pairs<'s>(s: &'s [V], r: usize, o: &mut [V]) -> &'s [V] {
    let (ym, yp, zm, zp) = neighbour_rows(r);
    let z = |at: Option<usize>| at.map_or(&ZERO_V[..], |at| &s[at..at + N1]);
    let (own, ym, yp, zm, zp) = (&s[r..r + N1], &s[ym..ym + N1], &s[yp..yp + N1], z(zm), z(zp));
    in_plane_then_z(o, zp, zm, J, |c, up, down| {
        let (a, b, p, m) = (own[up], own[down], yp[c], ym[c]);
        let mut h = [0.0; 3];
        for q in 0..3 {
            h[q] = J * (a[q] + b[q]) + J * (p[q] + m[q]);
        }
        h[0] += DX * (a[2] - b[2]);
        h[2] -= DX * (a[0] - b[0]);
        h[1] += DY * (p[2] - m[2]);
        h[2] -= DY * (p[1] - m[1]);
        h
    });
    own
}

/// `row_aos` in three passes: in-plane pairs, then the out-of-plane pair, then on-site.
#[inline(always)]
fn row_aos3(s: &[V], r: usize, o: &mut [V]) {
    let own = aos3_pairs(s, r, o);
    for c in 0..N1 {
        o[c][2] += K * own[c][2] + B;
    }
}

/// `row_aos3` with its on-site pass over the row's numbers in groups of eight cells, with
/// constants of period three (as Spindrift's flat on-site pass goes), so that the field
/// is stored in whole vectors rather than one z component at a time.
#[inline(always)]
fn row_aos3_flat(s: &[V], r: usize, o: &mut [V]) {
    let own = aos3_pairs(s, r, o);
    let d: [f64; 24] = std::array::from_fn(|i| if i % 3 == 2 { K } else { 0.0 });
    let b: [f64; 24] = std::array::from_fn(|i| if i % 3 == 2 { B } else { 0.0 });
    let (o, own) = (o[..N1].as_flattened_mut(), own.as_flattened());
    for (o, s) in o.chunks_exact_mut(24).zip(own.chunks_exact(24)) {
        for i in 0..24 {
            o[i] = o[i] + d[i] * s[i] + b[i];
        }
    }
}

/// `row_aos3` with the row kernel's arithmetic: pairs as `j (s + t) + A (s - t)` with
/// `e_z = 0` and coefficients from `c`, the on-site terms as `(h + d s) + b` on every
/// component.
#[inline(always)]
fn row_aos3g(s: &[V], r: usize, o: &mut [V], c: &Coef) {
    let (ym, yp, zm, zp) = neighbour_rows(r);
    let z = |at: Option<usize>| at.map_or(&ZERO_V[..], |at| &s[at..at + N1]);
    let (own, ym, yp, zm, zp) = (&s[r..r + N1], &s[ym..ym + N1], &s[yp..yp + N1], z(zm), z(zp));
    in_plane_then_z(o, zp, zm, c.j, |cc, up, down| {
        let mut h = [0.0; 3];
        pair_add(&mut h, &own[up], &own[down], c.j, &c.e[0]);
        pair_add(&mut h, &yp[cc], &ym[cc], c.j, &c.e[1]);
        h
    });
    for cc in 0..N1 {
        for q in 0..3 {
            o[cc][q] = o[cc][q] + c.d[q] * own[cc][q] + c.b[q];
        }
    }
}

/// Coefficients of `row_aos3g`, T per unit spin: exchange, the pairs' DMI vectors
/// `e = (A_yz, A_zx, A_xy)` along a1 and a2, the on-site `d` and `b`.
struct Coef {
    j: f64,
    e: [V; 2],
    d: V,
    b: V,
}

/// Spins as three component arrays.
struct Soa {
    c: [Vec<f64>; 3],
    at: [usize; 3],
}

impl Soa {
    /// Component `q` starts `at[q]` numbers into its allocation: `spread` moves the three
    /// (and each `Soa` by `k`) to different offsets within a 4 KiB page.
    fn new(v: &[V], k: usize, spread: bool) -> Self {
        let at = if spread { [8 * k + 1, 8 * k + 37, 8 * k + 75] } else { [0; 3] };
        let c = std::array::from_fn(|q| {
            let mut a = vec![0.0; N + 256];
            for (i, s) in v.iter().enumerate() {
                a[at[q] + i] = s[q];
            }
            a
        });
        Self { c, at }
    }
    fn get(&self) -> [&[f64]; 3] {
        std::array::from_fn(|q| &self.c[q][self.at[q]..self.at[q] + N])
    }
    fn get_mut(&mut self) -> [&mut [f64]; 3] {
        let at = self.at;
        let [x, y, z] = &mut self.c;
        [&mut x[at[0]..at[0] + N], &mut y[at[1]..at[1] + N], &mut z[at[2]..at[2] + N]]
    }
}

#[inline(always)]
fn row_soa(s: [&[f64]; 3], r: usize, o: [&mut [f64]; 3]) {
    let (ym, yp, zm, zp) = neighbour_rows(r);
    let row = |at: usize| -> [&[f64]; 3] { std::array::from_fn(|q| &s[q][at..at + N1]) };
    let zrow = |at: Option<usize>| -> [&[f64]; 3] {
        std::array::from_fn(|q| at.map_or(&ZERO_F[..], |at| &s[q][at..at + N1]))
    };
    let ([x, y, z], [xm, ymm, zym], [xp, yyp, zyp]) = (row(r), row(ym), row(yp));
    let ([xd, yd, zd], [xu, yu, zu]) = (zrow(zm), zrow(zp));
    let [ox, oy, oz] = o;
    let (ox, oy, oz) = (&mut ox[..N1], &mut oy[..N1], &mut oz[..N1]);
    // One body for the interior (a loop the compiler vectorises, the neighbours at fixed
    // offsets) and the two end cells, whose neighbours wrap around the row.
    macro_rules! cell {
        ($c:expr, $up:expr, $dn:expr) => {{
            let (c, up, dn) = ($c, $up, $dn);
            ox[c] = J * (x[up] + x[dn]) + J * (xp[c] + xm[c]) + J * (xu[c] + xd[c]) + DX * (z[up] - z[dn]);
            oy[c] =
                J * (y[up] + y[dn]) + J * (yyp[c] + ymm[c]) + J * (yu[c] + yd[c]) + DY * (zyp[c] - zym[c]);
            oz[c] = J * (z[up] + z[dn]) + J * (zyp[c] + zym[c]) + J * (zu[c] + zd[c])
                - DX * (x[up] - x[dn])
                - DY * (yyp[c] - ymm[c])
                + K * z[c]
                + B;
        }};
    }
    cell!(0, 1, N1 - 1);
    cell!(N1 - 1, 0, N1 - 2);
    for c in 1..N1 - 1 {
        cell!(c, c + 1, c - 1);
    }
}

/// `row_aos3g` on component arrays: the same three passes and arithmetic (each pair as
/// `j (s + t) + A (s - t)` with coefficients from `c`, then `j (zp + zm)`, then
/// `(h + d s) + b` on every component), so that the layout is the only difference.
#[inline(always)]
fn row_soa3g(s: [&[f64]; 3], r: usize, o: [&mut [f64]; 3], c: &Coef) {
    let (ym, yp, zm, zp) = neighbour_rows(r);
    let row = |at: usize| -> [&[f64]; 3] { std::array::from_fn(|q| &s[q][at..at + N1]) };
    let zrow = |at: Option<usize>| -> [&[f64]; 3] {
        std::array::from_fn(|q| at.map_or(&ZERO_F[..], |at| &s[q][at..at + N1]))
    };
    let (own, ymr, ypr, zmr, zpr) = (row(r), row(ym), row(yp), zrow(zm), zrow(zp));
    let [ox, oy, oz] = o;
    let (ox, oy, oz) = (&mut ox[..N1], &mut oy[..N1], &mut oz[..N1]);
    let at = |r: [&[f64]; 3], k: usize| -> V { [r[0][k], r[1][k], r[2][k]] };
    macro_rules! cell {
        ($c:expr, $up:expr, $dn:expr) => {{
            let (cc, up, dn) = ($c, $up, $dn);
            let mut h = [0.0; 3];
            pair_add(&mut h, &at(own, up), &at(own, dn), c.j, &c.e[0]);
            pair_add(&mut h, &at(ypr, cc), &at(ymr, cc), c.j, &c.e[1]);
            (ox[cc], oy[cc], oz[cc]) = (h[0], h[1], h[2]);
        }};
    }
    cell!(0, 1, N1 - 1);
    cell!(N1 - 1, 0, N1 - 2);
    for cc in 1..N1 - 1 {
        cell!(cc, cc + 1, cc - 1);
    }
    for (q, o) in [&mut *ox, &mut *oy, &mut *oz].into_iter().enumerate() {
        for (k, o) in o.iter_mut().enumerate() {
            *o += c.j * (zpr[q][k] + zmr[q][k]);
        }
    }
    for (q, o) in [ox, oy, oz].into_iter().enumerate() {
        for (k, o) in o.iter_mut().enumerate() {
            *o = *o + c.d[q] * own[q][k] + c.b[q];
        }
    }
}

/// `f(S, B)` of the Landau-Lifshitz equation.
#[inline(always)]
fn rhs(s: V, b: V, g: f64, al: f64) -> V {
    let t = [s[1] * b[2] - s[2] * b[1], s[2] * b[0] - s[0] * b[2], s[0] * b[1] - s[1] * b[0]];
    let d = [s[1] * t[2] - s[2] * t[1], s[2] * t[0] - s[0] * t[2], s[0] * t[1] - s[1] * t[0]];
    [-g * (t[0] + al * d[0]), -g * (t[1] + al * d[1]), -g * (t[2] + al * d[2])]
}

/// `(S + P + dt f(P, B)) / 2`, normalised.
#[inline(always)]
fn corrected(s: V, p: V, b: V, g: f64, al: f64) -> V {
    let f = rhs(p, b, g, al);
    let v = std::array::from_fn::<f64, 3, _>(|q| 0.5 * (s[q] + p[q] + DT * f[q]));
    let inv = 1.0 / (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    [v[0] * inv, v[1] * inv, v[2] * inv]
}

/// Per-site constants as the integrator keeps them.
#[derive(Clone, Copy)]
struct SiteConst {
    gamma: f64,
    alpha: f64,
    _sigma: f64,
}

/// A Heun step on 3-vectors, the constants from `consts` (one per cell of a row) or, when
/// `None`, the compiled-in ones.
#[inline(always)]
fn step_aos(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V], consts: Option<&[SiteConst]>) {
    step_aos_in::<false>(row_aos, s, pred, noise, next, consts)
}

/// [`step_aos`] with the field of a row from `row`, the predictor's field into a row on
/// the stack when `STACK` (as the
/// corrector's always goes), else into the predictor's row, which the predictor then
/// overwrites.
#[inline(always)]
fn step_aos_in<const STACK: bool>(
    row: impl Fn(&[V], usize, &mut [V]),
    s: &[V],
    pred: &mut [V],
    noise: &[V],
    next: &mut [V],
    consts: Option<&[SiteConst]>,
) {
    let c = |k: usize| consts.map_or((G, AL), |c| (c[k].gamma, c[k].alpha));
    predictor_aos::<STACK>(&row, s, pred, noise, c);
    corrector_aos(&row, s, pred, noise, next, c);
}

/// The predictor's pass of [`step_aos_in`], site `k` of a row taking its constants from
/// `c(k)`.
#[inline(always)]
fn predictor_aos<const STACK: bool>(
    row: &impl Fn(&[V], usize, &mut [V]),
    s: &[V],
    pred: &mut [V],
    noise: &[V],
    c: impl Fn(usize) -> (f64, f64),
) {
    let mut stack = [[0.0; 3]; N1];
    for r in (0..N).step_by(N1) {
        let p = &mut pred[r..r + N1];
        if STACK {
            row(s, r, &mut stack);
        } else {
            row(s, r, p);
        }
        let (nz, here) = (&noise[r..r + N1], &s[r..r + N1]);
        for k in 0..N1 {
            let h = if STACK { stack[k] } else { p[k] };
            let b = std::array::from_fn(|q| h[q] + nz[k][q]);
            let (g, al) = c(k);
            let f = rhs(here[k], b, g, al);
            p[k] = std::array::from_fn(|q| here[k][q] + DT * f[q]);
        }
    }
}

/// The corrector's pass of [`step_aos_in`].
#[inline(always)]
fn corrector_aos(
    row: &impl Fn(&[V], usize, &mut [V]),
    s: &[V],
    pred: &[V],
    noise: &[V],
    next: &mut [V],
    c: impl Fn(usize) -> (f64, f64),
) {
    let mut field = [[0.0; 3]; N1];
    for r in (0..N).step_by(N1) {
        row(pred, r, &mut field);
        let (nz, here, p, out) = (&noise[r..r + N1], &s[r..r + N1], &pred[r..r + N1], &mut next[r..r + N1]);
        for k in 0..N1 {
            let b = std::array::from_fn(|q| field[k][q] + nz[k][q]);
            let (g, al) = c(k);
            out[k] = corrected(here[k], p[k], b, g, al);
        }
    }
}

#[inline(never)]
fn step_aos_const(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V]) {
    step_aos(s, pred, noise, next, None)
}

#[inline(never)]
fn step_aos_array(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V], consts: &[SiteConst]) {
    step_aos(s, pred, noise, next, Some(consts))
}

#[inline(never)]
fn step_soa(s: &Soa, pred: &mut Soa, noise: &Soa, next: &mut Soa) {
    step_soa_with(row_soa, s, pred, noise, next)
}

/// The step of `aos3 general`: its three passes and arithmetic, on 3-vectors.
#[inline(never)]
fn step_aos3g(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V], c: &Coef) {
    step_aos_in::<false>(|s, r, o| row_aos3g(s, r, o, c), s, pred, noise, next, None)
}

/// The step of `aos3`: three passes with the couplings as constants, on 3-vectors.
#[inline(never)]
fn step_aos3(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V]) {
    step_aos_in::<false>(row_aos3, s, pred, noise, next, None)
}

/// [`step_aos3`] with [`row_aos3_flat`].
#[inline(never)]
fn step_aos3_flat(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V]) {
    step_aos_in::<false>(row_aos3_flat, s, pred, noise, next, None)
}

/// [`step_aos3`] with the predictor's field in a row on the stack.
#[inline(never)]
fn step_aos3_stack(s: &[V], pred: &mut [V], noise: &[V], next: &mut [V]) {
    step_aos_in::<true>(row_aos3, s, pred, noise, next, None)
}

/// The step of `soa3 general`: the same on component arrays.
#[inline(never)]
fn step_soa3g(s: &Soa, pred: &mut Soa, noise: &Soa, next: &mut Soa, c: &Coef) {
    step_soa_with(|s, r, o| row_soa3g(s, r, o, c), s, pred, noise, next)
}

/// [`step_soa`] with the field of a row from `row`.
#[inline(always)]
fn step_soa_with(
    row: impl Fn([&[f64]; 3], usize, [&mut [f64]; 3]),
    s: &Soa,
    pred: &mut Soa,
    noise: &Soa,
    next: &mut Soa,
) {
    let ([sx, sy, sz], [nx, ny, nz]) = (s.get(), noise.get());
    {
        let [px, py, pz] = pred.get_mut();
        for r in (0..N).step_by(N1) {
            let (px, py, pz) = (&mut px[r..r + N1], &mut py[r..r + N1], &mut pz[r..r + N1]);
            row([sx, sy, sz], r, [&mut *px, &mut *py, &mut *pz]);
            for k in r..r + N1 {
                let i = k - r;
                let f = rhs([sx[k], sy[k], sz[k]], [px[i] + nx[k], py[i] + ny[k], pz[i] + nz[k]], G, AL);
                (px[i], py[i], pz[i]) = (sx[k] + DT * f[0], sy[k] + DT * f[1], sz[k] + DT * f[2]);
            }
        }
    }
    let [px, py, pz] = pred.get();
    let [ox, oy, oz] = next.get_mut();
    let (mut fx, mut fy, mut fz) = ([0.0; N1], [0.0; N1], [0.0; N1]);
    for r in (0..N).step_by(N1) {
        row([px, py, pz], r, [&mut fx, &mut fy, &mut fz]);
        for k in r..r + N1 {
            let i = k - r;
            let b = [fx[i] + nx[k], fy[i] + ny[k], fz[i] + nz[k]];
            let v = corrected([sx[k], sy[k], sz[k]], [px[k], py[k], pz[k]], b, G, AL);
            (ox[k], oy[k], oz[k]) = (v[0], v[1], v[2]);
        }
    }
}

fn field_all(row: impl Fn(usize, &mut [V]), out: &mut [V]) {
    for r in (0..N).step_by(N1) {
        row(r, &mut out[r..r + N1]);
    }
}

#[inline(never)]
fn field_aos(s: &[V], out: &mut [V]) {
    field_all(|r, o| row_aos(s, r, o), out)
}

#[inline(never)]
fn field_aos3(s: &[V], out: &mut [V]) {
    field_all(|r, o| row_aos3(s, r, o), out)
}

#[inline(never)]
fn field_aos3g(s: &[V], out: &mut [V], c: &Coef) {
    field_all(|r, o| row_aos3g(s, r, o, c), out)
}

#[inline(never)]
fn field_soa(s: &Soa, out: &mut Soa) {
    let s = s.get();
    let [ox, oy, oz] = out.get_mut();
    for r in (0..N).step_by(N1) {
        row_soa(s, r, [&mut ox[r..r + N1], &mut oy[r..r + N1], &mut oz[r..r + N1]]);
    }
}

#[inline(never)]
fn field_soa3g(s: &Soa, out: &mut Soa, c: &Coef) {
    let s = s.get();
    let [ox, oy, oz] = out.get_mut();
    for r in (0..N).step_by(N1) {
        row_soa3g(s, r, [&mut ox[r..r + N1], &mut oy[r..r + N1], &mut oz[r..r + N1]], c);
    }
}

/// `j (s + t) + A (s - t)` added to `h`, the row kernel's pair with `e_z = 0`.
#[inline(always)]
fn pair_add(h: &mut V, s: &V, t: &V, j: f64, e: &V) {
    let g = [s[0] + t[0], s[1] + t[1], s[2] + t[2]];
    let d = [s[0] - t[0], s[1] - t[1], s[2] - t[2]];
    h[0] += j * g[0] - e[1] * d[2];
    h[1] += j * g[1] + e[0] * d[2];
    h[2] += j * g[2] + (e[1] * d[0] - e[0] * d[1]);
}

/// One entry of a pack as the row kernel holds it: the two sides' rows already sliced to
/// the pass's cells (3-vectors), and the coefficients read at run time.
struct PackAos<'a> {
    s: &'a [V],
    t: &'a [V],
    j: f64,
    e: V,
}

/// The same on component arrays.
struct PackSoa<'a> {
    s: [&'a [f64]; 3],
    t: [&'a [f64]; 3],
    j: f64,
    e: V,
}

/// One pass of a pack of `K` entries over cells whose count and offsets are run-time
/// values, as the row kernel's `RowPass::pack` goes for one basis site.
#[inline(always)]
fn pass_aos<const K: usize>(o: &mut [V], pack: &[PackAos; K], fresh: bool) {
    for (k, oc) in o.iter_mut().enumerate() {
        let mut h = if fresh { [0.0; 3] } else { *oc };
        for e in pack {
            pair_add(&mut h, &e.s[k], &e.t[k], e.j, &e.e);
        }
        *oc = h;
    }
}

#[inline(always)]
fn pass_soa<const K: usize>(o: [&mut [f64]; 3], pack: &[PackSoa; K], fresh: bool) {
    let [ox, oy, oz] = o;
    let len = ox.len();
    let (oy, oz) = (&mut oy[..len], &mut oz[..len]);
    for k in 0..len {
        let mut h = if fresh { [0.0; 3] } else { [ox[k], oy[k], oz[k]] };
        for e in pack {
            let s = [e.s[0][k], e.s[1][k], e.s[2][k]];
            let t = [e.t[0][k], e.t[1][k], e.t[2][k]];
            pair_add(&mut h, &s, &t, e.j, &e.e);
        }
        ox[k] = h[0];
        oy[k] = h[1];
        oz[k] = h[2];
    }
}

/// Run-time shape of the packed variants: cells per row and the a1 offsets of the
/// in-plane pair along a1 (`black_box`ed, so the compiler knows none of them).
#[derive(Clone, Copy)]
struct Shape {
    n1: usize,
    up: usize,
    dn: usize,
}

/// `aos3 general` as the row kernel is built: a pack of the two in-plane pairs over the
/// cells whose a1 neighbours stay in the row (slices cut at run time), the two end cells
/// one by one, then the out-of-plane pair and the on-site terms as passes of their own.
#[inline(never)]
fn field_aos3p(s: &[V], out: &mut [V], c: &Coef, sh: Shape) {
    let n1 = sh.n1;
    for r in (0..N).step_by(n1) {
        let (ym, yp, zm, zp) = neighbour_rows(r);
        let z = |at: Option<usize>| at.map_or(&ZERO_V[..], |at| &s[at..at + n1]);
        let (own, ymr, ypr, zmr, zpr) = (&s[r..r + n1], &s[ym..ym + n1], &s[yp..yp + n1], z(zm), z(zp));
        let o = &mut out[r..r + n1];
        let (lo, hi) = (sh.dn, n1 - sh.up);
        let len = hi - lo;
        let pack = [
            PackAos {
                s: &own[lo + sh.up..lo + sh.up + len],
                t: &own[lo - sh.dn..lo - sh.dn + len],
                j: c.j,
                e: c.e[0],
            },
            PackAos { s: &ypr[lo..lo + len], t: &ymr[lo..lo + len], j: c.j, e: c.e[1] },
        ];
        pass_aos(&mut o[lo..hi], &pack, true);
        for (cc, up, dn) in [(0, 1, n1 - 1), (n1 - 1, 0, n1 - 2)] {
            let mut h = [0.0; 3];
            pair_add(&mut h, &own[up], &own[dn], c.j, &c.e[0]);
            pair_add(&mut h, &ypr[cc], &ymr[cc], c.j, &c.e[1]);
            o[cc] = h;
        }
        let zpack = [PackAos { s: zpr, t: zmr, j: c.j, e: [0.0; 3] }];
        pass_aos(o, &zpack, false);
        for (oc, sc) in o.iter_mut().zip(own) {
            for q in 0..3 {
                oc[q] = oc[q] + c.d[q] * sc[q] + c.b[q];
            }
        }
    }
}

/// `field_aos3p` on component arrays: the same passes, slices and arithmetic.
#[inline(never)]
fn field_soa3p(s: &Soa, out: &mut Soa, c: &Coef, sh: Shape) {
    let n1 = sh.n1;
    let s = s.get();
    let [ox, oy, oz] = out.get_mut();
    for r in (0..N).step_by(n1) {
        let (ym, yp, zm, zp) = neighbour_rows(r);
        let row = |at: usize| -> [&[f64]; 3] { std::array::from_fn(|q| &s[q][at..at + n1]) };
        let zrow = |at: Option<usize>| -> [&[f64]; 3] {
            std::array::from_fn(|q| at.map_or(&ZERO_F[..], |at| &s[q][at..at + n1]))
        };
        let (own, ymr, ypr, zmr, zpr) = (row(r), row(ym), row(yp), zrow(zm), zrow(zp));
        let (ox, oy, oz) = (&mut ox[r..r + n1], &mut oy[r..r + n1], &mut oz[r..r + n1]);
        let (lo, hi) = (sh.dn, n1 - sh.up);
        let len = hi - lo;
        fn cut(a: [&[f64]; 3], from: usize, len: usize) -> [&[f64]; 3] {
            a.map(|x| &x[from..from + len])
        }
        let pack = [
            PackSoa { s: cut(own, lo + sh.up, len), t: cut(own, lo - sh.dn, len), j: c.j, e: c.e[0] },
            PackSoa { s: cut(ypr, lo, len), t: cut(ymr, lo, len), j: c.j, e: c.e[1] },
        ];
        pass_soa([&mut ox[lo..hi], &mut oy[lo..hi], &mut oz[lo..hi]], &pack, true);
        let at = |a: [&[f64]; 3], k: usize| -> V { [a[0][k], a[1][k], a[2][k]] };
        for (cc, up, dn) in [(0, 1, n1 - 1), (n1 - 1, 0, n1 - 2)] {
            let mut h = [0.0; 3];
            pair_add(&mut h, &at(own, up), &at(own, dn), c.j, &c.e[0]);
            pair_add(&mut h, &at(ypr, cc), &at(ymr, cc), c.j, &c.e[1]);
            (ox[cc], oy[cc], oz[cc]) = (h[0], h[1], h[2]);
        }
        let zpack = [PackSoa { s: zpr, t: zmr, j: c.j, e: [0.0; 3] }];
        pass_soa([&mut *ox, &mut *oy, &mut *oz], &zpack, false);
        for (q, o) in [ox, oy, oz].into_iter().enumerate() {
            for (o, sc) in o.iter_mut().zip(own[q]) {
                *o = *o + c.d[q] * sc + c.b[q];
            }
        }
    }
}

/// Nanoseconds per site of `f`, the best of `reps` calls.
fn ns(reps: usize, mut f: impl FnMut()) -> f64 {
    (0..reps)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
        / N as f64
        * 1e9
}

fn main() {
    let mut state = 0x9e37_79b9_7f4a_7c15_u64;
    let mut uniform = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    let mut unit = || {
        let v = [uniform(), uniform(), uniform()];
        let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
        [v[0] / n, v[1] / n, v[2] / n]
    };
    let spins: Vec<V> = (0..N).map(|_| unit()).collect();
    let noise: Vec<V> = (0..N).map(|_| unit().map(|x| 0.5 * x)).collect();
    let consts = vec![SiteConst { gamma: G, alpha: AL, _sigma: 0.0 }; N1];

    let mut out = vec![[0.0; 3]; N];
    let mut out3 = vec![[0.0; 3]; N];
    let mut out3g = vec![[0.0; 3]; N];
    let mut soa3g_out = Soa::new(&spins, 5, true);
    let (soa, mut soa_out) = (Soa::new(&spins, 0, true), Soa::new(&spins, 1, true));
    let (flat, mut flat_out) = (Soa::new(&spins, 0, false), Soa::new(&spins, 0, false));
    let (mut pred, mut next) = (vec![[0.0; 3]; N], vec![[0.0; 3]; N]);
    let (mut spred, sn, mut snext) =
        (Soa::new(&spins, 2, true), Soa::new(&noise, 3, true), Soa::new(&spins, 4, true));
    let (mut pred_g, mut next_g) = (vec![[0.0; 3]; N + 128], vec![[0.0; 3]; N + 128]);
    let mut pred_s = vec![[0.0; 3]; N + 128];
    // 4 KiB page offsets other than the spins' and the noise's.
    let (pred_g, next_g) = (&mut pred_g[37..37 + N], &mut next_g[75..75 + N]);
    let pred_s = &mut pred_s[37..37 + N];
    let (mut spred_g, mut snext_g) = (Soa::new(&spins, 6, true), Soa::new(&spins, 7, true));

    let coef = Coef { j: J, e: [[0.0, -DX, 0.0], [DY, 0.0, 0.0]], d: [0.0, 0.0, K], b: [0.0, 0.0, B] };
    if std::env::args().nth(1).as_deref() == Some("halves") {
        for _ in 0..3 {
            let c = |_| (G, AL);
            let a = ns(50, || predictor_aos::<false>(&row_aos, black_box(&spins), &mut pred, &noise, c));
            let b = ns(50, || corrector_aos(&row_aos, black_box(&spins), &pred, &noise, &mut next, c));
            let c3 = ns(50, || predictor_aos::<false>(&row_aos3, black_box(&spins), &mut pred, &noise, c));
            let d = ns(50, || corrector_aos(&row_aos3, black_box(&spins), &pred, &noise, &mut next, c));
            println!("aos predictor {a:.2} corrector {b:.2}; aos3 predictor {c3:.2} corrector {d:.2}");
        }
        return;
    }
    const FIELDS: [&str; 8] = [
        "aos",
        "aos3",
        "aos3 general",
        "soa",
        "soa same page offset",
        "soa3 general",
        "aos3 packed (run-time shape)",
        "soa3 packed (run-time shape)",
    ];
    let shape = black_box(Shape { n1: N1, up: 1, dn: 1 });
    let mut out3p = vec![[0.0; 3]; N];
    let mut soa3p_out = Soa::new(&spins, 6, true);
    const STEPS: [&str; 9] = [
        "aos",
        "aos consts",
        "soa",
        "aos3 general",
        "aos3",
        "aos3 predictor off the spins' page offset",
        "soa3 general",
        "aos3, predictor's field on the stack",
        "aos3, flat on-site pass",
    ];
    println!("ns per site, best of the calls in a round; 128x128x8, one thread; {ROUNDS} rounds");
    let mut rounds = Vec::new();
    for _ in 0..ROUNDS {
        let f = [
            ns(50, || field_aos(black_box(&spins), &mut out)),
            ns(50, || field_aos3(black_box(&spins), &mut out3)),
            ns(50, || field_aos3g(black_box(&spins), &mut out3g, black_box(&coef))),
            ns(50, || field_soa(black_box(&soa), &mut soa_out)),
            ns(50, || field_soa(black_box(&flat), &mut flat_out)),
            ns(50, || field_soa3g(black_box(&soa), &mut soa3g_out, black_box(&coef))),
            ns(50, || field_aos3p(black_box(&spins), &mut out3p, black_box(&coef), shape)),
            ns(50, || field_soa3p(black_box(&soa), &mut soa3p_out, black_box(&coef), shape)),
        ];
        let s = [
            ns(20, || step_aos_const(black_box(&spins), &mut pred, &noise, &mut next)),
            ns(20, || step_aos_array(black_box(&spins), &mut pred, &noise, &mut next, &consts)),
            ns(20, || step_soa(black_box(&soa), &mut spred, &sn, &mut snext)),
            ns(20, || step_aos3g(black_box(&spins), pred_g, &noise, next_g, black_box(&coef))),
            ns(20, || step_aos3(black_box(&spins), &mut pred, &noise, &mut next)),
            ns(20, || step_aos3(black_box(&spins), pred_s, &noise, &mut next)),
            ns(20, || step_soa3g(black_box(&soa), &mut spred_g, &sn, &mut snext_g, black_box(&coef))),
            ns(20, || step_aos3_stack(black_box(&spins), &mut pred, &noise, &mut next)),
            ns(20, || step_aos3_flat(black_box(&spins), &mut pred, &noise, &mut next)),
        ];
        rounds.push((f, s));
    }
    // On a shared machine the fastest round of each variant is the least disturbed.
    let show = |kind: &str, names: &[&str], column: &dyn Fn(usize) -> Vec<f64>| {
        for (k, name) in names.iter().enumerate() {
            let mut t = column(k);
            t.sort_by(f64::total_cmp);
            println!("{kind} {name:42} fastest {:6.2}  median {:6.2}", t[0], t[t.len() / 2]);
        }
    };
    show("field", &FIELDS, &|k| rounds.iter().map(|r| r.0[k]).collect());
    show("step ", &STEPS, &|k| rounds.iter().map(|r| r.1[k]).collect());
    // The layouts compute the same numbers (up to the order of the sums).
    let [x, y, z] = soa_out.get();
    let field_diff =
        (0..N).map(|i| (out[i][0] - x[i]).abs().max((out[i][2] - z[i]).abs())).fold(0.0, f64::max);
    let three_diff =
        (0..N).map(|i| (out[i][1] - out3[i][1]).abs().max((out[i][1] - y[i]).abs())).fold(0.0, f64::max);
    let [gx, gy, gz] = soa3g_out.get();
    let general_diff = (0..N)
        .map(|i| (0..3).map(|q| (out[i][q] - out3g[i][q]).abs()).fold(0.0, f64::max))
        .fold(0.0, f64::max);
    // The same operations in the same order on either layout: the same bits.
    let [ux, uy, uz] = snext_g.get();
    let steps_agree = (0..N).all(|i| {
        next_g[i][0].to_bits() == ux[i].to_bits()
            && next_g[i][1].to_bits() == uy[i].to_bits()
            && next_g[i][2].to_bits() == uz[i].to_bits()
    });
    let layouts_agree = (0..N).all(|i| {
        out3g[i][0].to_bits() == gx[i].to_bits()
            && out3g[i][1].to_bits() == gy[i].to_bits()
            && out3g[i][2].to_bits() == gz[i].to_bits()
    });
    let [px, py, pz] = soa3p_out.get();
    let packed_agree = (0..N).all(|i| {
        out3p[i][0].to_bits() == px[i].to_bits()
            && out3p[i][1].to_bits() == py[i].to_bits()
            && out3p[i][2].to_bits() == pz[i].to_bits()
    });
    let packed_diff = (0..N)
        .map(|i| (0..3).map(|q| (out3g[i][q] - out3p[i][q]).abs()).fold(0.0, f64::max))
        .fold(0.0, f64::max);
    println!("packed: aos3 and soa3 bitwise equal {packed_agree}; largest difference from aos3 general {packed_diff:.1e} T");
    let [x, y, z] = snext.get();
    let step_diff = (0..N)
        .map(|i| (next[i][0] - x[i]).abs().max((next[i][1] - y[i]).abs()).max((next[i][2] - z[i]).abs()))
        .fold(0.0, f64::max);
    println!(
        "largest difference between layouts: field {field_diff:.1e} T, {three_diff:.1e} T, general \
         {general_diff:.1e} T; step {step_diff:.1e}; aos3 general and soa3 general bitwise equal: field \
         {layouts_agree}, step {steps_agree}"
    );
}
