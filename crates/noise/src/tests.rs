//! Tests of the public API: bitwise reproducibility, independence of keys and counters, and
//! statistical checks with tolerances of five standard errors. The statistics are
//! deterministic (fixed seeds); a transform or generator defect shifts them by many
//! standard errors and fails them.

use super::*;

const N: usize = 1_000_000;

/// `n` sites' thermal-noise deviates (the dense layout) of `(seed, stream, step)`.
fn normals(seed: u64, stream: u32, step: u64, n: usize) -> Vec<[f64; 3]> {
    let mut g = vec![[0.0; 3]; n];
    NoiseStream::new(seed, stream).fill_gaussian3_dense(step, 0, 1.0, &mut g);
    g
}

fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

/// Pearson's correlation coefficient of two equally long samples.
fn correlation(x: &[f64], y: &[f64]) -> f64 {
    let (mx, my) = (mean(x), mean(y));
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx) * (a - mx);
        syy += (b - my) * (b - my);
    }
    sxy / (sxx * syy).sqrt()
}

fn component(g: &[[f64; 3]], i: usize) -> Vec<f64> {
    g.iter().map(|v| v[i]).collect()
}

// SplitMix64 reference outputs from state 0 (Vigna's splitmix64.c, after Steele, Lea, Flood,
// OOPSLA 2014), quoted from memory: output n is mix64((n + 1) * GOLDEN_GAMMA).
#[test]
fn key_mixer_is_splitmix64() {
    assert_eq!(mix64(GOLDEN_GAMMA), 0xe220_a839_7b1d_cdaf);
    assert_eq!(mix64(GOLDEN_GAMMA.wrapping_mul(2)), 0x6e78_9e6a_a1b9_65f4);
    assert_eq!(mix64(GOLDEN_GAMMA.wrapping_mul(3)), 0x06c4_5d18_8009_454f);
}

// The documented layout: key from (seed, stream), counter = (site lo, site hi, step lo,
// step hi). Checked through the public block function.
#[test]
fn words_follow_the_documented_counter_layout() {
    let s = NoiseStream::new(99, STREAM_METROPOLIS);
    let step = 0x0123_4567_89ab_cdef;
    let site = 0xfedc_ba98_7654_3210;
    let expect = philox4x32_10([0x7654_3210, 0xfedc_ba98, 0x89ab_cdef, 0x0123_4567], s.key);
    assert_eq!(s.words(step, site), expect);
    let salt = mix64(2u64.wrapping_mul(GOLDEN_GAMMA));
    let k = mix64(99u64.wrapping_add(salt));
    assert_eq!(s.key, [k as u32, (k >> 32) as u32]);
}

// The property the crate exists for: any split of the sites over any number of threads
// gives the same bits.
#[test]
fn same_bits_for_any_thread_count_and_chunking() {
    let s = NoiseStream::new(2024, STREAM_LLG_THERMAL);
    let n = 10_007;
    let mut serial = vec![[0.0; 3]; n];
    s.fill_gaussian3_dense(3, 0, 1.0, &mut serial);
    for threads in [2usize, 3, 7] {
        let mut parallel = vec![[0.0; 3]; n];
        let chunk = n.div_ceil(threads);
        std::thread::scope(|scope| {
            for (t, part) in parallel.chunks_mut(chunk).enumerate() {
                scope.spawn(move || s.fill_gaussian3_dense(3, (t * chunk) as u64, 1.0, part));
            }
        });
        let same =
            serial.iter().zip(&parallel).all(|(a, b)| (0..3).all(|i| a[i].to_bits() == b[i].to_bits()));
        assert!(same, "{threads} threads");
    }
}

#[test]
fn different_seeds_streams_steps_and_sites_give_different_numbers() {
    let base = NoiseStream::new(1, STREAM_LLG_THERMAL);
    let g = base.gaussian3_dense(10, 20);
    let variants = [
        NoiseStream::new(2, STREAM_LLG_THERMAL).gaussian3_dense(10, 20),
        NoiseStream::new(1, STREAM_METROPOLIS).gaussian3_dense(10, 20),
        NoiseStream::new(1, STREAM_INITIAL_STATE).gaussian3_dense(10, 20),
        base.gaussian3_dense(11, 20),
        base.gaussian3_dense(10, 21),
        // Swapping step and site must not alias.
        base.gaussian3_dense(20, 10),
    ];
    for v in variants {
        for i in 0..3 {
            assert_ne!(g[i], v[i]);
        }
    }
    // Keys of small seeds and the documented streams are all distinct.
    let mut keys: Vec<[u32; 2]> =
        (0..1000u64).flat_map(|seed| (0..4).map(move |st| NoiseStream::new(seed, st).key)).collect();
    keys.sort_unstable();
    keys.dedup();
    assert_eq!(keys.len(), 4000);
}

// Independence of streams, seeds and steps: sample correlations of 10^6 pairs must be
// within 5/sqrt(n) of zero (standard error of r for independent samples is 1/sqrt(n);
// common practice).
#[test]
fn different_seeds_streams_and_steps_are_uncorrelated() {
    let a = component(&normals(1, STREAM_LLG_THERMAL, 0, N), 0);
    let pairs = [
        component(&normals(2, STREAM_LLG_THERMAL, 0, N), 0),
        component(&normals(1, STREAM_METROPOLIS, 0, N), 0),
        component(&normals(1, STREAM_LLG_THERMAL, 1, N), 0),
    ];
    let bound = 5.0 / (N as f64).sqrt();
    for b in &pairs {
        let r = correlation(&a, b);
        assert!(r.abs() < bound, "r = {r}");
    }
}

// Moments of the standard normal (mean 0, variance 1, fourth moment 3; standard errors
// 1/sqrt(n), sqrt(2/n), sqrt(96/n) from E z^8 = 105), and the two-sided tail fractions
// P(|z| > 1) = 0.3173105, P(|z| > 2) = 0.0455003, P(|z| > 3) = 0.0026998, i.e.
// erfc(k / sqrt 2), as in any standard normal table (computed with Python's math.erfc).
// Each of the three components is tested on its own 10^6 deviates.
#[test]
fn normal_moments_and_tails() {
    for (seed, stream) in [(7u64, STREAM_LLG_THERMAL), (123_456_789, STREAM_INITIAL_STATE)] {
        let g = normals(seed, stream, 5, N);
        let n = N as f64;
        for i in 0..3 {
            let x = component(&g, i);
            let m1 = mean(&x);
            let m2 = x.iter().map(|v| v * v).sum::<f64>() / n;
            let m4 = x.iter().map(|v| v.powi(4)).sum::<f64>() / n;
            assert!(m1.abs() < 5.0 / n.sqrt(), "mean {m1}");
            assert!((m2 - 1.0).abs() < 5.0 * (2.0 / n).sqrt(), "variance {m2}");
            assert!((m4 - 3.0).abs() < 5.0 * (96.0 / n).sqrt(), "fourth moment {m4}");
            for (k, p) in [(1.0, 0.317_310_507_9), (2.0, 0.045_500_263_9), (3.0, 0.002_699_796_1)] {
                let frac = x.iter().filter(|v| v.abs() > k).count() as f64 / n;
                let se = (p * (1.0 - p) / n).sqrt();
                assert!((frac - p).abs() < 5.0 * se, "P(|z| > {k}) = {frac}, expected {p}");
            }
            // The cut-off sqrt(66 ln 2) = 6.7637056 as the single-precision radius rounds it.
            assert!(x.iter().all(|v| v.abs() <= 6.763_706));
        }
    }
}

// Pearson's chi-square goodness of fit (K. Pearson, Phil. Mag. 50, 157, 1900) of one
// component against the standard normal in 20 equiprobable bins. The bin edges are the
// normal quantiles at k/20, from a standard normal table (computed with Python's
// statistics.NormalDist). With 19 degrees of freedom the statistic has mean 19 and
// standard deviation sqrt(38); the bound is mean + 5 sd.
#[test]
fn normal_histogram_chi_square() {
    const EDGES: [f64; 19] = [
        -1.644_853_627,
        -1.281_551_566,
        -1.036_433_389,
        -0.841_621_234,
        -0.674_489_750,
        -0.524_400_513,
        -0.385_320_466,
        -0.253_347_103,
        -0.125_661_347,
        0.0,
        0.125_661_347,
        0.253_347_103,
        0.385_320_466,
        0.524_400_513,
        0.674_489_750,
        0.841_621_234,
        1.036_433_389,
        1.281_551_566,
        1.644_853_627,
    ];
    let g = normals(31, STREAM_LLG_THERMAL, 0, N);
    for i in 0..3 {
        let mut counts = [0usize; 20];
        for v in &g {
            counts[EDGES.partition_point(|&e| e < v[i])] += 1;
        }
        let expected = N as f64 / 20.0;
        let chi2: f64 = counts.iter().map(|&c| (c as f64 - expected).powi(2) / expected).sum();
        assert!(chi2 < 19.0 + 5.0 * 38f64.sqrt(), "chi2 = {chi2}, counts {counts:?}");
    }
}

/// The standard normal distribution function from the rational approximation of erf in
/// M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions (1964), eq. 7.1.26
/// (after C. Hastings, 1955), absolute error below 1.5e-7; coefficients quoted from memory
/// and checked against table values in `normal_cdf_matches_tables`.
fn normal_cdf(x: f64) -> f64 {
    let y = x.abs() / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * y);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736 + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    let erf = 1.0 - poly * (-y * y).exp();
    if x >= 0.0 {
        0.5 * (1.0 + erf)
    } else {
        0.5 * (1.0 - erf)
    }
}

// Table values of the standard normal distribution function (any statistics table; here
// Phi(1) = 0.8413447461, Phi(2) = 0.9772498681, Phi(3) = 0.9986501020, as given by
// Python's statistics.NormalDist): the approximation must be within its 1.5e-7.
#[test]
fn normal_cdf_matches_tables() {
    for (x, phi) in [(0.0, 0.5), (1.0, 0.841_344_746_1), (2.0, 0.977_249_868_1), (3.0, 0.998_650_102_0)] {
        assert!((normal_cdf(x) - phi).abs() < 1.5e-7, "Phi({x})");
        assert!((normal_cdf(-x) - (1.0 - phi)).abs() < 1.5e-7, "Phi(-{x})");
    }
}

/// Kolmogorov-Smirnov statistic `sup |F_n(x) - F(x)|` of a sample against `cdf`.
fn ks_statistic(mut x: Vec<f64>, cdf: impl Fn(f64) -> f64) -> f64 {
    x.sort_unstable_by(f64::total_cmp);
    let n = x.len() as f64;
    x.iter()
        .enumerate()
        .map(|(i, &v)| {
            let f = cdf(v);
            (f - i as f64 / n).abs().max(((i + 1) as f64 / n - f).abs())
        })
        .fold(0.0, f64::max)
}

// Kolmogorov-Smirnov tests (A. N. Kolmogorov, Giorn. Ist. Ital. Attuari 4, 83, 1933;
// N. Smirnov, Ann. Math. Statist. 19, 279, 1948) of 10^6 deviates against the normal
// distribution function above: each component, and a rotated combination of the first
// pair, which is standard normal only if the pair's angle is uniform on the whole circle.
// The squared radius of the pair, g1^2 + g2^2, is exponential with mean 2 (chi-square with
// two degrees of freedom; textbook), distribution function 1 - exp(-x/2). Asymptotically
// P(sqrt(n) D > 2.5) = 2 exp(-12.5) = 7e-6, so the bound is D < 2.5 / sqrt(n); a transform
// that misplaced a quarter of the circle or mis-scaled the radius by 1% fails it.
#[test]
fn kolmogorov_smirnov_against_normal_and_chi_square() {
    let g = normals(2026, STREAM_LLG_THERMAL, 9, N);
    let bound = 2.5 / (N as f64).sqrt();
    let (ca, sa) = (0.3f64.cos(), 0.3f64.sin());
    let samples = [
        ("component 0", component(&g, 0)),
        ("component 1", component(&g, 1)),
        ("component 2", component(&g, 2)),
        ("rotated pair", g.iter().map(|v| ca * v[0] + sa * v[1]).collect()),
    ];
    for (name, x) in samples {
        let d = ks_statistic(x, normal_cdf);
        assert!(d < bound, "{name}: D = {d}, bound {bound}");
    }
    let r2: Vec<f64> = g.iter().map(|v| v[0] * v[0] + v[1] * v[1]).collect();
    let d = ks_statistic(r2, |x| 1.0 - (-0.5 * x).exp());
    assert!(d < bound, "squared radius: D = {d}, bound {bound}");
}

// No correlation between the three components of one site, nor between the same component
// of consecutive sites, nor of consecutive steps at one site: |r| < 5/sqrt(n) (common
// practice, standard error 1/sqrt(n)). Nor between consecutive deviates of the flattened
// sequence (component 2 of one site, component 0 of the next), or their squares: in the
// dense layout those are the pairs that cross a site boundary and may share a radius.
#[test]
fn components_sites_and_steps_are_uncorrelated() {
    let g = normals(11, STREAM_LLG_THERMAL, 0, N);
    let c: Vec<Vec<f64>> = (0..3).map(|i| component(&g, i)).collect();
    let bound = 5.0 / (N as f64).sqrt();
    for (i, j) in [(0, 1), (0, 2), (1, 2)] {
        let r = correlation(&c[i], &c[j]);
        assert!(r.abs() < bound, "components {i},{j}: r = {r}");
    }
    for i in 0..3 {
        let r = correlation(&c[i][..N - 1], &c[i][1..]);
        assert!(r.abs() < 5.0 / ((N - 1) as f64).sqrt(), "consecutive sites, component {i}: r = {r}");
    }
    // The squares too: Box-Muller pairs share a radius, which would show up here if two
    // pairs were built from overlapping words.
    let sq: Vec<Vec<f64>> = c.iter().map(|x| x.iter().map(|v| v * v).collect()).collect();
    for (i, j) in [(0, 1), (0, 2), (1, 2)] {
        let r = correlation(&sq[i], &sq[j]);
        assert!(r.abs() < bound, "squares of components {i},{j}: r = {r}");
    }
    let flat = g.as_flattened();
    let m = flat.len() - 1;
    let flat_sq: Vec<f64> = flat.iter().map(|v| v * v).collect();
    for (name, x) in [("deviates", flat), ("squares", &flat_sq[..])] {
        let r = correlation(&x[..m], &x[1..]);
        assert!(r.abs() < 5.0 / (m as f64).sqrt(), "consecutive {name} of the sequence: r = {r}");
    }
    // One site over consecutive steps; site 18 starts in the middle of a dense block.
    let s = NoiseStream::new(11, STREAM_LLG_THERMAL);
    let series: Vec<f64> = (0..N as u64).map(|step| s.gaussian3_dense(step, 18)[0]).collect();
    let r = correlation(&series[..N - 1], &series[1..]);
    assert!(r.abs() < 5.0 / ((N - 1) as f64).sqrt(), "consecutive steps: r = {r}");
}

// The dense layout's bulk fill against its per-site call, bit for bit, for every offset of
// the first site within a group of four, lengths around the group sizes, and first sites
// whose Philox blocks (three per four sites, the block index in the counter's site words)
// carry into the high counter word within a group of 48 blocks (5726623032: block
// 2^32 - 22) or have a nonzero high word without a carry (5 2^32), or that make the call
// wrap around 2^64; with scale 1 (the public per-site values) and another scale, which
// multiplies each radius.
#[test]
fn dense_bulk_fill_equals_per_site_calls_bit_for_bit() {
    let s = NoiseStream::new(7, STREAM_LLG_THERMAL);
    let carry = (((1u64 << 32) - 22) / 3) * 4;
    for &first in &[0u64, 1, 2, 3, 5, (1 << 32) - 3, carry, carry + 2, 5 << 32, u64::MAX - 40, u64::MAX - 4] {
        for len in [0usize, 1, 3, 4, 5, 31, 32, 33, 35, 64, 100, 1001] {
            for scale in [1.0, 0.37] {
                let mut g = vec![[f64::NAN; 3]; len];
                s.fill_gaussian3_dense(42, first, scale, &mut g);
                for (k, got) in g.iter().enumerate() {
                    let site = first.wrapping_add(k as u64);
                    let one = s.dense_site(42, site, scale);
                    for i in 0..3 {
                        assert_eq!(
                            got[i].to_bits(),
                            one[i].to_bits(),
                            "site {site} component {i} scale {scale}"
                        );
                    }
                    if scale == 1.0 {
                        assert_eq!(one, s.gaussian3_dense(42, site));
                    }
                }
            }
        }
    }
    // The scale multiplies the deviates (up to the rounding of one product).
    let (mut a, mut b) = (vec![[0.0; 3]; 100], vec![[0.0; 3]; 100]);
    s.fill_gaussian3_dense(3, 8, 1.0, &mut a);
    s.fill_gaussian3_dense(3, 8, 0.37, &mut b);
    for (x, y) in a.as_flattened().iter().zip(b.as_flattened()) {
        assert!((0.37 * x - y).abs() <= 4.0 * f64::EPSILON * y.abs(), "{x} scaled {y}");
    }
}

// Any split of the sites gives the same bits in the dense layout too, including splits that
// cut a group of four.
#[test]
fn dense_layout_same_bits_for_any_chunking() {
    let s = NoiseStream::new(2024, STREAM_LLG_THERMAL);
    let n = 10_007;
    let mut serial = vec![[0.0; 3]; n];
    s.fill_gaussian3_dense(3, 0, 1.0, &mut serial);
    for chunk in [1usize, 3, 5, 256, 1001, 3337] {
        let mut parts = vec![[0.0; 3]; n];
        for (t, part) in parts.chunks_mut(chunk).enumerate() {
            s.fill_gaussian3_dense(3, (t * chunk) as u64, 1.0, part);
        }
        let same = serial.iter().zip(&parts).all(|(a, b)| (0..3).all(|i| a[i].to_bits() == b[i].to_bits()));
        assert!(same, "chunks of {chunk}");
    }
}

// Uniform on [0, 1): mean 1/2 (standard error sqrt(1/12n)), variance 1/12 (standard error
// sqrt(1/180n), from E (u - 1/2)^4 = 1/80), no correlation between the four words, and a
// 100-bin chi-square (Pearson 1900; 99 degrees of freedom, bound mean + 5 sd).
#[test]
fn uniform_moments_histogram_and_correlation() {
    let stream = NoiseStream::new(5, STREAM_INITIAL_STATE);
    let u: Vec<[f64; 4]> = (0..N as u64).map(|site| stream.uniform4(9, site)).collect();
    let n = N as f64;
    let cols: Vec<Vec<f64>> = (0..4).map(|i| u.iter().map(|v| v[i]).collect()).collect();
    for x in &cols {
        assert!(x.iter().all(|v| (0.0..1.0).contains(v)));
        let m = mean(x);
        let var = x.iter().map(|v| (v - 0.5).powi(2)).sum::<f64>() / n;
        assert!((m - 0.5).abs() < 5.0 * (1.0 / (12.0 * n)).sqrt(), "mean {m}");
        assert!((var - 1.0 / 12.0).abs() < 5.0 * (1.0 / (180.0 * n)).sqrt(), "variance {var}");
        let mut counts = [0usize; 100];
        for v in x {
            counts[(v * 100.0) as usize] += 1;
        }
        let e = n / 100.0;
        let chi2: f64 = counts.iter().map(|&c| (c as f64 - e).powi(2) / e).sum();
        assert!(chi2 < 99.0 + 5.0 * 198f64.sqrt(), "chi2 = {chi2}");
    }
    let bound = 5.0 / n.sqrt();
    for i in 0..4 {
        for j in i + 1..4 {
            let r = correlation(&cols[i], &cols[j]);
            assert!(r.abs() < bound, "words {i},{j}: r = {r}");
        }
        let r = correlation(&cols[i][..N - 1], &cols[i][1..]);
        assert!(r.abs() < 5.0 / (n - 1.0).sqrt(), "consecutive sites, word {i}: r = {r}");
    }
}
