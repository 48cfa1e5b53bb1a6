#!/usr/bin/env python3
"""Regenerates the polynomial coefficients of crates/noise/src/transform.rs (and of the
arctangent in crates/observe/src/atan2.rs).

Each kernel is a polynomial in z = x^2 (or z = s^2 for the logarithm) fitted by the Remez
exchange algorithm to minimise the maximum absolute error of the stated function on the
stated interval, in 60-digit arithmetic (mpmath), then rounded to double (or to single
precision, for the kernels of the thermal noise: `show32`). The Rust tests
check the resulting kernels against the standard library, so this script only documents
where the numbers come from; it is not run by the build.

Usage: python3 fit_polynomials.py   (needs mpmath, and numpy for the single-precision fits)
"""
import mpmath as mp

mp.mp.dps = 60


def remez(f, a, b, degree, iterations=40):
    """Minimax polynomial (coefficients lowest first) of f on [a, b] and its maximum error."""
    a, b = mp.mpf(a), mp.mpf(b)
    n = degree + 2
    xs = [(a + b) / 2 - (b - a) / 2 * mp.cos(mp.pi * i / (n - 1)) for i in range(n)]
    grid = [a + (b - a) * k / 4000 for k in range(4001)]
    for _ in range(iterations):
        matrix = mp.matrix(n, n)
        rhs = mp.matrix(n, 1)
        for i, x in enumerate(xs):
            for j in range(degree + 1):
                matrix[i, j] = x**j
            matrix[i, degree + 1] = (-1) ** i
            rhs[i] = f(x)
        solution = mp.lu_solve(matrix, rhs)
        coefs = [solution[j] for j in range(degree + 1)]
        errors = [f(x) - mp.polyval(coefs[::-1], x) for x in grid]
        # Local extrema of the error, merged into a sequence of alternating signs.
        extrema = []
        for k, e in enumerate(errors):
            left = errors[k - 1] if k > 0 else None
            right = errors[k + 1] if k < len(errors) - 1 else None
            if (left is None or abs(e) >= abs(left)) and (right is None or abs(e) >= abs(right)):
                if extrema and mp.sign(extrema[-1][1]) == mp.sign(e):
                    if abs(e) > abs(extrema[-1][1]):
                        extrema[-1] = (grid[k], e)
                else:
                    extrema.append((grid[k], e))
        while len(extrema) > n:
            extrema.pop(0 if abs(extrema[0][1]) < abs(extrema[-1][1]) else -1)
        worst = max(abs(e) for _, e in extrema)
        xs = [x for x, _ in extrema]
        if abs(worst - abs(solution[degree + 1])) < 1e-6 * worst:
            break
    return coefs, worst


def at_zero_or(limit, g):
    return lambda z: limit if z == 0 else g(z)


def atanh_series(z):
    s = mp.sqrt(z)
    return (mp.atanh(s) / s - 1) / z


def sine_series(z):
    x = mp.sqrt(z)
    return (mp.sin(x) - x) / (z * x)


def cosine_series(z):
    return (mp.cos(mp.sqrt(z)) - 1) / z


def atan_series(z):
    u = mp.sqrt(z)
    return (mp.atan(u) / u - 1) / z


def show(name, coefs):
    print(f"const {name}: [f64; {len(coefs)}] = [")
    for c in coefs:
        print(f"    {float(c)!r},")
    print("];")


def show32(name, coefs, factor=1):
    """Coefficients rounded to single precision (via numpy, which rounds to nearest)."""
    import numpy as np

    print(f"const {name}: [f32; {len(coefs)}] = [")
    for c in coefs:
        print(f"    {str(np.float32(float(factor * c)))},")
    print("];")


def fit(label, at_zero, series, interval, degree):
    """The minimax polynomial of `series` on [0, interval], its error printed under `label`."""
    coefs, e = remez(at_zero_or(at_zero, series), 0, interval, degree)
    print(f"// {label}: max error {float(e):.3g}")
    return coefs


z_ln = (3 - 2 * mp.sqrt(2)) ** 2  # s^2 at most, for m in [sqrt(1/2), sqrt(2))
z_q = (mp.pi / 4) ** 2  # x^2 at most, for |x| <= pi/4
z_t = mp.tan(mp.pi / 8) ** 2  # u^2 at most, for |u| <= tan(pi/8)

# Double precision: sin x = x + x z S(z) and cos x = 1 + z C(z) for |x| <= pi/4 (the
# Monte Carlo trial directions).
show("SIN_C", fit("(sin x - x)/x^3 on |x| <= pi/4", -mp.mpf(1) / 6, sine_series, z_q, 3))
show("COS_C", fit("(cos x - 1)/x^2 on |x| <= pi/4", -mp.mpf(1) / 2, cosine_series, z_q, 4))

# atan u = u + u z P(z) for |u| <= tan(pi/8) (crates/observe/src/atan2.rs).
show("ATAN_P", fit("(atan(u)/u - 1)/z on |u| <= tan(pi/8)", -mp.mpf(1) / 3, atan_series, z_t, 9))

# Single precision, for the Gaussian deviates of the thermal noise: one degree less than
# double precision would need; the fits' errors stay far below the rounding of 2^-24.
# ln m = 2 s (1 + z P(z)), s = (m - 1)/(m + 1), z = s^2; the radius kernel uses
# Q = -4 (1 + z P), printed here after its leading -4.0.
ln_p = fit("(atanh(s)/s - 1)/z, quadratic", mp.mpf(1) / 3, atanh_series, z_ln, 2)
show32("RADIUS_Q (after the leading -4.0)", ln_p, -4)
show32("SIN_C32", fit("(sin x - x)/x^3, quadratic", -mp.mpf(1) / 6, sine_series, z_q, 2))
show32("COS_C32", fit("(cos x - 1)/x^2, cubic", -mp.mpf(1) / 2, cosine_series, z_q, 3))
