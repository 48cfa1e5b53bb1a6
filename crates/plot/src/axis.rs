//! Automatic axis ranges and tick labels.

use plotters::coord::ranged1d::Ranged;
use plotters::coord::types::RangedCoordf64;

/// The smallest and largest of the finite values, or `None` if there is none.
pub(crate) fn finite_extent(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values.into_iter().filter(|v| v.is_finite()).fold(None, |acc, v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })
}

/// Widens `[lo, hi]` by 5% of its span on each side. A span too small to resolve in `f64`
/// (a constant series) is widened by 10% of the magnitude instead, or to [-1, 1] around 0,
/// so that a flat line sits in the middle of a readable axis.
pub(crate) fn padded_range(lo: f64, hi: f64) -> (f64, f64) {
    let span = hi - lo;
    let scale = lo.abs().max(hi.abs());
    if span <= 1e-9 * scale || span == 0.0 {
        let pad = if scale > 0.0 { 0.1 * scale } else { 1.0 };
        (lo - pad, hi + pad)
    } else {
        (lo - 0.05 * span, hi + 0.05 * span)
    }
}

/// Formats the tick values plotters will choose for `range` with at most `max_ticks` ticks,
/// with the fewest decimals that tell neighbouring ticks apart, the same for every tick
/// (as in "0.0, 0.5, 1.0"). Very large or very small magnitudes use scientific notation.
pub(crate) struct TickFormat {
    ticks: Vec<f64>,
    scientific: bool,
    decimals: usize,
}

impl TickFormat {
    pub(crate) fn new(range: (f64, f64), max_ticks: usize) -> Self {
        let ticks = RangedCoordf64::from(range.0..range.1).key_points(max_ticks);
        let magnitude = range.0.abs().max(range.1.abs());
        let scientific = !(1e-3..1e5).contains(&magnitude);
        let step = ticks.windows(2).map(|w| (w[1] - w[0]).abs()).fold(f64::INFINITY, f64::min);
        let decimals = (0..=12)
            .find(|&d| {
                let distinct = ticks
                    .windows(2)
                    .all(|w| format_tick(w[0], scientific, d) != format_tick(w[1], scientific, d));
                let exact = !step.is_finite()
                    || ticks.iter().all(|&t| {
                        let shown: f64 = format_tick(t, scientific, d).parse().unwrap_or(f64::NAN);
                        (shown - t).abs() <= 1e-6 * step
                    });
                distinct && exact
            })
            .unwrap_or(6);
        TickFormat { ticks, scientific, decimals }
    }

    pub(crate) fn format(&self, value: f64) -> String {
        format_tick(value, self.scientific, self.decimals)
    }

    /// The labels of all ticks, to size the room they need.
    pub(crate) fn labels(&self) -> Vec<String> {
        self.ticks.iter().map(|&t| self.format(t)).collect()
    }
}

fn format_tick(value: f64, scientific: bool, decimals: usize) -> String {
    let s = if scientific && value != 0.0 {
        format!("{value:.decimals$e}")
    } else {
        format!("{value:.decimals$}")
    };
    // A tick a rounding error below zero must not read "-0.0".
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extent_skips_non_finite_values() {
        assert_eq!(finite_extent([f64::NAN, 2.0, -1.0, f64::INFINITY]), Some((-1.0, 2.0)));
        assert_eq!(finite_extent([f64::NAN]), None);
    }

    #[test]
    fn ranges_have_a_margin_and_constants_get_a_width() {
        assert_eq!(padded_range(0.0, 10.0), (-0.5, 10.5));
        assert_eq!(padded_range(0.0, 0.0), (-1.0, 1.0));
        let (lo, hi) = padded_range(5.0, 5.0);
        assert!((lo - 4.5).abs() < 1e-12 && (hi - 5.5).abs() < 1e-12);
        let (lo, hi) = padded_range(-2e-7, -2e-7);
        assert!(lo < -2e-7 && hi > -2e-7 && hi - lo > 1e-8);
    }

    #[test]
    fn tick_labels_are_short_and_consistent() {
        let f = TickFormat::new((-0.05, 1.05), 7);
        assert_eq!(f.format(0.0), "0.0");
        assert_eq!(f.format(0.5), "0.5");
        assert_eq!(f.format(-1e-17), "0.0");
        let f = TickFormat::new((-10.0, 210.0), 7);
        assert_eq!(f.format(100.0), "100");
        let f = TickFormat::new((0.0, 2.5e-5), 6);
        assert!(f.format(1e-5).contains('e'), "{}", f.format(1e-5));
    }
}
