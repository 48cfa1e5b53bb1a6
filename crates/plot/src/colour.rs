//! Colours: a colour-blind-safe palette for curves and a diverging map for `S_z`.
//!
//! The diverging map is K. Moreland's "smooth cool-warm" map (K. Moreland, "Diverging Color
//! Maps for Scientific Visualization", ISVC 2009, LNCS 5876, 92-103). It interpolates
//! between its two end colours in the Msh space, a polar form of CIELAB
//! (`M = |Lab|`, `s = acos(L/M)`, `h = atan2(b, a)`), and passes through an unsaturated
//! white-ish point of magnitude `M_mid = max(M_1, M_2, 88)` in the middle, bending the hue
//! near white so the lightness changes smoothly. The published end points are sRGB
//! (59, 76, 192) and (180, 4, 38).

use plotters::style::RGBColor;

/// Okabe & Ito's colour-blind-safe palette (M. Okabe and K. Ito, "Color Universal Design",
/// 2008), reordered so the first curves get the colours with most contrast on white:
/// blue, vermillion, bluish green, reddish purple, orange, sky blue, black, yellow.
pub const OKABE_ITO: [[u8; 3]; 8] = [
    [0, 114, 178],
    [213, 94, 0],
    [0, 158, 115],
    [204, 121, 167],
    [230, 159, 0],
    [86, 180, 233],
    [0, 0, 0],
    [240, 228, 66],
];

/// The colour of the `index`-th curve; the palette repeats after eight curves.
pub(crate) fn curve_colour(index: usize) -> RGBColor {
    let [r, g, b] = OKABE_ITO[index % OKABE_ITO.len()];
    RGBColor(r, g, b)
}

/// Moreland's cool end, sRGB of the value -1.
const COOL: [f64; 3] = [59.0, 76.0, 192.0];
/// Moreland's warm end, sRGB of the value +1.
const WARM: [f64; 3] = [180.0, 4.0, 38.0];

/// The smooth cool-warm colour (8-bit sRGB) of `value` in [-1, 1]: blue at -1, light grey
/// at 0, red at +1. Values outside are clamped; a non-finite value gives mid grey (128).
pub fn cool_warm(value: f64) -> [u8; 3] {
    if !value.is_finite() {
        return [128, 128, 128];
    }
    let t = (value.clamp(-1.0, 1.0) + 1.0) / 2.0;
    let rgb = lab_to_srgb(msh_to_lab(interpolate_msh(srgb_to_msh(COOL), srgb_to_msh(WARM), t)));
    rgb.map(|c| c.round().clamp(0.0, 255.0) as u8)
}

/// Moreland's interpolation in Msh, with the white-ish middle point and the hue adjustment.
fn interpolate_msh(mut a: [f64; 3], mut b: [f64; 3], mut t: f64) -> [f64; 3] {
    use std::f64::consts::FRAC_PI_3;
    if a[1] > 0.05 && b[1] > 0.05 && angle_difference(a[2], b[2]) > FRAC_PI_3 {
        let m_mid = a[0].max(b[0]).max(88.0);
        if t < 0.5 {
            b = [m_mid, 0.0, 0.0];
            t *= 2.0;
        } else {
            a = [m_mid, 0.0, 0.0];
            t = 2.0 * t - 1.0;
        }
    }
    if a[1] < 0.05 && b[1] > 0.05 {
        a[2] = adjust_hue(b, a[0]);
    } else if b[1] < 0.05 && a[1] > 0.05 {
        b[2] = adjust_hue(a, b[0]);
    }
    [0, 1, 2].map(|k| (1.0 - t) * a[k] + t * b[k])
}

/// The unsigned difference of two hue angles (radians), in [0, pi].
fn angle_difference(h1: f64, h2: f64) -> f64 {
    let d = (h1 - h2).rem_euclid(std::f64::consts::TAU);
    d.min(std::f64::consts::TAU - d)
}

/// The hue that an unsaturated colour of magnitude `m_unsat` should take next to the
/// saturated colour `msh`, so the hue does not jump at white (Moreland 2009, section 5).
fn adjust_hue(msh: [f64; 3], m_unsat: f64) -> f64 {
    let [m, s, h] = msh;
    if m >= m_unsat {
        return h;
    }
    let spin = s * (m_unsat * m_unsat - m * m).sqrt() / (m * s.sin());
    if h > -std::f64::consts::FRAC_PI_3 {
        h + spin
    } else {
        h - spin
    }
}

/// D65 reference white (CIE 1931 2° observer), XYZ with Y = 1.
const WHITE_D65: [f64; 3] = [0.95047, 1.0, 1.08883];

fn srgb_to_msh(rgb: [f64; 3]) -> [f64; 3] {
    let [l, a, b] = srgb_to_lab(rgb);
    let m = (l * l + a * a + b * b).sqrt();
    let s = if m > 0.0 { (l / m).clamp(-1.0, 1.0).acos() } else { 0.0 };
    [m, s, b.atan2(a)]
}

fn msh_to_lab([m, s, h]: [f64; 3]) -> [f64; 3] {
    [m * s.cos(), m * s.sin() * h.cos(), m * s.sin() * h.sin()]
}

/// sRGB (0-255) to CIELAB under D65, with the sRGB transfer curve of IEC 61966-2-1.
fn srgb_to_lab(rgb: [f64; 3]) -> [f64; 3] {
    let [r, g, b] = rgb.map(|c| {
        let c = c / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    });
    let xyz = [
        0.4124564 * r + 0.3575761 * g + 0.1804375 * b,
        0.2126729 * r + 0.7151522 * g + 0.0721750 * b,
        0.0193339 * r + 0.1191920 * g + 0.9503041 * b,
    ];
    let [fx, fy, fz] = [0, 1, 2].map(|k| lab_f(xyz[k] / WHITE_D65[k]));
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

fn lab_to_srgb([l, a, b]: [f64; 3]) -> [f64; 3] {
    let fy = (l + 16.0) / 116.0;
    let f = [fy + a / 500.0, fy, fy - b / 200.0];
    let [x, y, z] = [0, 1, 2].map(|k| lab_f_inv(f[k]) * WHITE_D65[k]);
    let linear = [
        3.2404542 * x - 1.5371385 * y - 0.4985314 * z,
        -0.9692660 * x + 1.8760108 * y + 0.0415560 * z,
        0.0556434 * x - 0.2040259 * y + 1.0572252 * z,
    ];
    linear.map(|c| {
        let c = c.clamp(0.0, 1.0);
        255.0 * if c <= 0.0031308 { 12.92 * c } else { 1.055 * c.powf(1.0 / 2.4) - 0.055 }
    })
}

const LAB_DELTA: f64 = 6.0 / 29.0;

fn lab_f(t: f64) -> f64 {
    if t > LAB_DELTA.powi(3) {
        t.cbrt()
    } else {
        t / (3.0 * LAB_DELTA * LAB_DELTA) + 4.0 / 29.0
    }
}

fn lab_f_inv(f: f64) -> f64 {
    if f > LAB_DELTA {
        f.powi(3)
    } else {
        3.0 * LAB_DELTA * LAB_DELTA * (f - 4.0 / 29.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Moreland 2009, table of the smooth cool-warm map (end points and middle quoted from
    /// memory): -1 -> (59, 76, 192), 0 -> (221, 221, 221), +1 -> (180, 4, 38).
    #[test]
    fn cool_warm_matches_moreland_end_points_and_middle() {
        assert_eq!(cool_warm(-1.0), [59, 76, 192]);
        assert_eq!(cool_warm(1.0), [180, 4, 38]);
        let mid = cool_warm(0.0);
        for (k, c) in mid.iter().enumerate() {
            assert!((*c as i32 - 221).abs() <= 1, "channel {k} of the middle is {c}, expected 221");
        }
        assert_eq!(cool_warm(-7.0), cool_warm(-1.0), "values below -1 are clamped");
        assert_eq!(cool_warm(f64::NAN), [128, 128, 128]);
    }

    /// The defining property of a diverging map (Moreland 2009, section 3): CIELAB lightness
    /// rises monotonically from each end to the middle.
    #[test]
    fn cool_warm_lightness_peaks_in_the_middle() {
        let lightness = |v: f64| srgb_to_lab(cool_warm(v).map(f64::from))[0];
        let samples: Vec<f64> = (0..=40).map(|i| -1.0 + i as f64 / 20.0).collect();
        for w in samples.windows(2) {
            let (l0, l1) = (lightness(w[0]), lightness(w[1]));
            if w[1] <= 0.0 {
                assert!(l1 > l0 - 0.5, "lightness falls from {} to {} on the cool side", w[0], w[1]);
            } else {
                assert!(l1 < l0 + 0.5, "lightness rises from {} to {} on the warm side", w[0], w[1]);
            }
        }
        assert!(lightness(0.0) > lightness(-1.0) + 30.0);
        assert!(lightness(0.0) > lightness(1.0) + 30.0);
    }

    /// The CIELAB conversion against a textbook value: sRGB white is L* = 100, a* = b* = 0
    /// (CIE 15:2004 with the D65 white point), and mid grey 119 is close to L* = 50
    /// (common practice, from memory: sRGB 119 gives L* of about 50.0).
    #[test]
    fn lab_conversion_reference_points() {
        let white = srgb_to_lab([255.0; 3]);
        assert!((white[0] - 100.0).abs() < 1e-3 && white[1].abs() < 1e-2 && white[2].abs() < 1e-2);
        let grey = srgb_to_lab([119.0; 3]);
        assert!((grey[0] - 50.0).abs() < 0.3, "L* of sRGB 119 is {}", grey[0]);
        // The two 7-digit sRGB matrices are inverses only to about 1e-7, hence the tolerance
        // of a hundredth of an 8-bit step.
        let back = lab_to_srgb(srgb_to_lab([12.0, 200.0, 77.0]));
        for (k, c) in back.iter().enumerate() {
            assert!((c - [12.0, 200.0, 77.0][k]).abs() < 1e-2, "channel {k}: {c}");
        }
    }

    #[test]
    fn palette_colours_are_distinct() {
        for i in 0..OKABE_ITO.len() {
            for j in 0..i {
                assert_ne!(curve_colour(i), curve_colour(j));
            }
        }
        assert_eq!(curve_colour(8), curve_colour(0));
    }
}
