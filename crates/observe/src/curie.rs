//! The Curie temperature from a temperature scan.
//!
//! Two estimates, from the [`ThermoAverages`](crate::ThermoAverages) of the scanned points:
//!
//! - [`susceptibility_peak`] (method `"susceptibility-peak"`): the temperature where the
//!   susceptibility of one system is largest. The vertex of the parabola through the largest
//!   point and its two neighbours locates the peak between grid points. Its error combines,
//!   in quadrature, (a) the grid: the peak is located only within the scan's resolution, and
//!   we take the standard deviation of a uniform distribution over one grid spacing,
//!   `h / sqrt(12)`, `h` the mean of the two spacings around the largest point (a
//!   convention, since the shape of the peak between points is unknown); and (b) the noise:
//!   the standard deviation of the vertex over [`RESAMPLES`] copies of the scan whose
//!   susceptibilities are redrawn from normal distributions of their means and errors, the
//!   whole procedure (largest point, parabola) being repeated on each copy. Copies whose
//!   largest point falls on the edge of the scan are left out.
//! - [`binder_crossing`] (method `"binder-crossing"`): where the Binder cumulants of
//!   different system sizes cross. By finite-size scaling `U4(T, L)` is a function of
//!   `(T - Tc) L^(1/nu)` alone near `Tc` (K. Binder, Z. Phys. B 43, 119 (1981)), so the curves
//!   of all sizes meet at `Tc`; below it the larger system has the larger cumulant (closer
//!   to the ordered 2/3), above it the smaller. Each curve is interpolated linearly between
//!   its temperatures, and for each pair of sizes the crossing with that orientation is
//!   found by linear interpolation between neighbouring temperatures of the merged grid.
//!   When noise makes a pair cross several times, the crossing with the most significant
//!   change of the difference (in units of its combined error bars) is taken. The estimate
//!   is the mean over the pairs that cross; its error (and each crossing's) is the standard
//!   deviation over [`RESAMPLES`] copies with the cumulants redrawn within their errors.
//!
//! Resampling is seeded and sequential, so the same input and seed give the same result.

use crate::error::ObserveError;
use crate::resample::Gaussian;

/// Number of resampled copies behind each resampling error.
pub const RESAMPLES: usize = 1000;

/// Method name of [`susceptibility_peak`].
pub const SUSCEPTIBILITY_PEAK: &str = "susceptibility-peak";

/// Method name of [`binder_crossing`].
pub const BINDER_CROSSING: &str = "binder-crossing";

/// One point of a scan: a temperature and a measured value with its standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScanPoint {
    /// Temperature, K.
    pub temperature: f64,
    /// The value (susceptibility in 1/meV, or Binder cumulant).
    pub value: f64,
    /// Its standard error, same unit, `>= 0`.
    pub error: f64,
}

/// The Binder cumulant against temperature for one system size.
#[derive(Debug, Clone, PartialEq)]
pub struct BinderCurve {
    /// A measure of the system size (linear size or number of spins); only the order of
    /// the sizes matters.
    pub size: f64,
    /// The points, in any order.
    pub points: Vec<ScanPoint>,
}

/// A Curie-temperature estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct CurieFit {
    /// `Tc`, K.
    pub value: f64,
    /// Its standard error, K (NaN in the unlikely case that fewer than two resampled
    /// copies give an estimate).
    pub error: f64,
    /// [`SUSCEPTIBILITY_PEAK`] or [`BINDER_CROSSING`].
    pub method: &'static str,
}

/// The crossing of the Binder cumulants of two sizes.
#[derive(Debug, Clone, PartialEq)]
pub struct Crossing {
    /// Index (into the curves given) of the smaller system.
    pub smaller: usize,
    /// Index of the larger system.
    pub larger: usize,
    /// Crossing temperature, K.
    pub temperature: f64,
    /// Its resampling error, K (NaN when fewer than two resampled copies cross).
    pub error: f64,
}

/// Result of [`binder_crossing`].
#[derive(Debug, Clone, PartialEq)]
pub struct BinderCrossings {
    /// Mean crossing temperature over the pairs that cross, with its error.
    pub estimate: CurieFit,
    /// The crossing of each pair of sizes that cross.
    pub crossings: Vec<Crossing>,
}

/// A scan sorted by temperature, split into columns.
#[derive(Debug, Clone)]
struct Series {
    t: Vec<f64>,
    v: Vec<f64>,
    e: Vec<f64>,
}

impl Series {
    fn new(what: &'static str, points: &[ScanPoint], need: usize) -> Result<Self, ObserveError> {
        if points.len() < need {
            return Err(ObserveError::TooFew { what, need, got: points.len() });
        }
        for (index, p) in points.iter().enumerate() {
            if !(p.temperature.is_finite() && p.value.is_finite() && p.error.is_finite()) {
                return Err(ObserveError::NonFinite { what, index });
            }
            if p.error < 0.0 {
                return Err(ObserveError::NegativeError { what, index });
            }
        }
        let mut sorted = points.to_vec();
        sorted.sort_by(|a, b| a.temperature.total_cmp(&b.temperature));
        if let Some(w) = sorted.windows(2).find(|w| w[0].temperature == w[1].temperature) {
            return Err(ObserveError::DuplicateTemperature { what, temperature: w[0].temperature });
        }
        Ok(Self {
            t: sorted.iter().map(|p| p.temperature).collect(),
            v: sorted.iter().map(|p| p.value).collect(),
            e: sorted.iter().map(|p| p.error).collect(),
        })
    }

    /// The values redrawn within their errors.
    fn redraw(&self, rng: &mut Gaussian, out: &mut [f64]) {
        for ((o, v), e) in out.iter_mut().zip(&self.v).zip(&self.e) {
            *o = v + e * rng.normal();
        }
    }

    /// Linear interpolation of `values` (and of the error bars) at `t` inside the range.
    fn at(&self, values: &[f64], t: f64) -> (f64, f64) {
        let k = self.t.partition_point(|&x| x <= t).clamp(1, self.t.len() - 1);
        let (t0, t1) = (self.t[k - 1], self.t[k]);
        let w = (t - t0) / (t1 - t0);
        let lerp = |a: f64, b: f64| a + w * (b - a);
        (lerp(values[k - 1], values[k]), lerp(self.e[k - 1], self.e[k]))
    }
}

/// Temperature of the susceptibility peak of a scan, with its error (see the module
/// documentation). Needs at least three points; `seed` drives the resampling.
pub fn susceptibility_peak(points: &[ScanPoint], seed: u64) -> Result<CurieFit, ObserveError> {
    let s = Series::new("susceptibility scan", points, 3)?;
    let value = vertex(&s.t, &s.v)?;
    let k = argmax(&s.v);
    let h = 0.5 * (s.t[k + 1] - s.t[k - 1]);
    let grid = h / 12f64.sqrt();

    let mut rng = Gaussian::new(seed);
    let mut drawn = vec![0.0; s.v.len()];
    let mut vertices = Vec::with_capacity(RESAMPLES);
    for _ in 0..RESAMPLES {
        s.redraw(&mut rng, &mut drawn);
        if let Ok(v) = vertex(&s.t, &drawn) {
            vertices.push(v);
        }
    }
    let noise = std_dev(&vertices);
    Ok(CurieFit { value, error: (grid * grid + noise * noise).sqrt(), method: SUSCEPTIBILITY_PEAK })
}

/// Index of the first largest value.
fn argmax(v: &[f64]) -> usize {
    let mut k = 0;
    for (i, &x) in v.iter().enumerate() {
        if x > v[k] {
            k = i;
        }
    }
    k
}

/// Vertex of the parabola through the largest point and its neighbours.
fn vertex(t: &[f64], v: &[f64]) -> Result<f64, ObserveError> {
    let k = argmax(v);
    if k == 0 || k + 1 == v.len() {
        return Err(ObserveError::PeakAtEdge { temperature: t[k] });
    }
    // Temperatures relative to the middle point keep the algebra free of cancellation.
    let (u0, u2) = (t[k - 1] - t[k], t[k + 1] - t[k]);
    let d0 = (v[k - 1] - v[k]) / u0;
    let d2 = (v[k + 1] - v[k]) / u2;
    let a = (d2 - d0) / (u2 - u0);
    if a >= 0.0 {
        // Three equal values: no curvature, the middle point is the best guess.
        return Ok(t[k]);
    }
    let b = d0 - a * u0;
    Ok(t[k] + (-b / (2.0 * a)).clamp(u0, u2))
}

/// Crossing temperatures of Binder-cumulant curves of two or more sizes, and their mean,
/// with resampling errors (see the module documentation). `seed` drives the resampling.
pub fn binder_crossing(curves: &[BinderCurve], seed: u64) -> Result<BinderCrossings, ObserveError> {
    let mut series = Vec::with_capacity(curves.len());
    for (index, c) in curves.iter().enumerate() {
        if !c.size.is_finite() {
            return Err(ObserveError::NonFinite { what: "Binder curve sizes", index });
        }
        series.push(Series::new("Binder cumulant curve", &c.points, 2)?);
    }
    let mut sizes: Vec<f64> = curves.iter().map(|c| c.size).collect();
    sizes.sort_by(f64::total_cmp);
    sizes.dedup();
    if sizes.len() < 2 {
        return Err(ObserveError::TooFewSizes { sizes: sizes.len() });
    }
    let mut pairs = Vec::new();
    for a in 0..curves.len() {
        for b in 0..curves.len() {
            if curves[a].size < curves[b].size {
                pairs.push((a, b));
            }
        }
    }
    let values: Vec<&[f64]> = series.iter().map(|s| s.v.as_slice()).collect();
    let found: Vec<(usize, usize, f64)> = pairs
        .iter()
        .filter_map(|&(a, b)| crossing(&series[a], values[a], &series[b], values[b]).map(|t| (a, b, t)))
        .collect();
    if found.is_empty() {
        return Err(ObserveError::NoCrossing);
    }
    let value = found.iter().map(|x| x.2).sum::<f64>() / found.len() as f64;

    let mut rng = Gaussian::new(seed);
    let mut drawn: Vec<Vec<f64>> = series.iter().map(|s| vec![0.0; s.v.len()]).collect();
    let mut per_pair: Vec<Vec<f64>> = vec![Vec::with_capacity(RESAMPLES); found.len()];
    let mut means = Vec::with_capacity(RESAMPLES);
    for _ in 0..RESAMPLES {
        for (s, d) in series.iter().zip(drawn.iter_mut()) {
            s.redraw(&mut rng, d);
        }
        let mut sum = 0.0;
        let mut all = true;
        for (p, &(a, b, _)) in found.iter().enumerate() {
            match crossing(&series[a], &drawn[a], &series[b], &drawn[b]) {
                Some(t) => {
                    per_pair[p].push(t);
                    sum += t;
                }
                None => all = false,
            }
        }
        if all {
            means.push(sum / found.len() as f64);
        }
    }
    let crossings = found
        .iter()
        .zip(&per_pair)
        .map(|(&(smaller, larger, temperature), draws)| Crossing {
            smaller,
            larger,
            temperature,
            error: std_dev(draws),
        })
        .collect();
    Ok(BinderCrossings {
        estimate: CurieFit { value, error: std_dev(&means), method: BINDER_CROSSING },
        crossings,
    })
}

/// The crossing of curve `large` from above to below curve `small`, with values `vs`, `vl`,
/// on the merged temperature grid of their common range; the most significant one if
/// there are several.
fn crossing(small: &Series, vs: &[f64], large: &Series, vl: &[f64]) -> Option<f64> {
    let lo = small.t[0].max(large.t[0]);
    let hi = small.t[small.t.len() - 1].min(large.t[large.t.len() - 1]);
    if lo >= hi {
        return None;
    }
    let mut grid: Vec<f64> =
        small.t.iter().chain(&large.t).copied().filter(|&t| t >= lo && t <= hi).collect();
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    let nodes: Vec<(f64, f64, f64)> = grid
        .iter()
        .map(|&t| {
            let (us, es) = small.at(vs, t);
            let (ul, el) = large.at(vl, t);
            (t, ul - us, es * es + el * el)
        })
        .collect();
    let with_errors = nodes.iter().any(|n| n.2 > 0.0);
    let mut best: Option<(f64, f64)> = None;
    for w in nodes.windows(2) {
        let ((t0, d0, s0), (t1, d1, s1)) = (w[0], w[1]);
        if d0 >= 0.0 && d1 < 0.0 {
            let t = t0 + d0 * (t1 - t0) / (d0 - d1);
            let change = d0 - d1;
            let score = if with_errors { change / (s0 + s1).sqrt().max(f64::MIN_POSITIVE) } else { change };
            if best.is_none_or(|(_, b)| score > b) {
                best = Some((t, score));
            }
        }
    }
    best.map(|(t, _)| t)
}

/// Standard deviation (denominator `n - 1`) of resampled values; NaN with fewer than two.
fn std_dev(x: &[f64]) -> f64 {
    if x.len() < 2 {
        return f64::NAN;
    }
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    (x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (x.len() - 1) as f64).sqrt()
}
