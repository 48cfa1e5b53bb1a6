//! Periodic wrapping of cell coordinates without a division in the common case.

/// `x` modulo `n` in `0 .. n` (`n > 0`), equal to `x.rem_euclid(n)` for every `x`.
///
/// Kernels wrap a cell coordinate plus a bond's offset once per row of cells or per
/// block of sites; a bond spans at most a box length in all but the smallest boxes, so
/// `x` is almost always within one period of `0 .. n` and one comparison and one addition
/// or subtraction give the result. The general case takes the integer division of
/// `rem_euclid`, whose latency is tens of cycles: a dozen per row of cells is a
/// noticeable part of the few hundred cycles of per-row work of the field kernel.
#[inline(always)]
pub fn wrap_index(x: i64, n: i64) -> i64 {
    if x >= 0 {
        if x < n {
            x
        } else if x - n < n {
            x - n
        } else {
            x.rem_euclid(n)
        }
    } else if x >= -n {
        x + n
    } else {
        x.rem_euclid(n)
    }
}

/// Cell coordinate `x` along an axis of `n` cells: wrapped (by [`wrap_index`]) when the
/// axis is periodic, `None` when an open face cuts it off.
#[inline(always)]
pub fn wrap_coordinate(x: i64, n: i64, periodic: bool) -> Option<i64> {
    if periodic {
        Some(wrap_index(x, n))
    } else if x < 0 || x >= n {
        None
    } else {
        Some(x)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Against the standard library's Euclidean remainder (common practice): every x near
    // the box, several periods out, and the extremes of i64 that no offset reaches but the
    // contract covers.
    #[test]
    fn equals_rem_euclid() {
        for n in [1i64, 2, 3, 7, 128, 1000] {
            for x in -5 * n - 3..5 * n + 3 {
                assert_eq!(wrap_index(x, n), x.rem_euclid(n), "{x} mod {n}");
            }
            for x in [i64::MIN, i64::MIN + 1, i64::MAX - 1, i64::MAX] {
                assert_eq!(wrap_index(x, n), x.rem_euclid(n), "{x} mod {n}");
            }
        }
    }

    // Open axes keep coordinates inside the box and cut the rest; periodic ones wrap.
    // (Our own convention, as INTERFACE.md's `periodic` key describes it.)
    #[test]
    fn open_axes_cut_and_periodic_axes_wrap() {
        for x in -9..18 {
            assert_eq!(wrap_coordinate(x, 7, true), Some(x.rem_euclid(7)));
            assert_eq!(wrap_coordinate(x, 7, false), (0..7).contains(&x).then_some(x));
        }
    }
}
