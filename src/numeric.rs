//! Numerical building blocks shared by families, fitting and integration: normal tail
//! functions on the log scale, stable small-argument forms, and adaptive quadrature.

use std::f64::consts::{PI, SQRT_2};

/// ln √(2π).
pub const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;

/// Standard normal density φ(z).
pub fn normal_pdf(z: f64) -> f64 {
    (-0.5 * z * z - LN_SQRT_2PI).exp()
}

/// Mills ratio R(z) = Q(z)/φ(z) for z ≥ 5 by its continued fraction (Lentz), where the
/// direct form would lose the tail to underflow.
fn mills_ratio_tail(z: f64) -> f64 {
    // R(z) = 1/(z + 1/(z + 2/(z + 3/(z + ...))))
    let tiny = 1e-300;
    let mut f = z;
    let mut c = z;
    let mut d = 0.0;
    for k in 1..500 {
        let a = k as f64;
        d = z + a * d;
        if d.abs() < tiny {
            d = tiny;
        }
        c = z + a / c;
        if c.abs() < tiny {
            c = tiny;
        }
        d = 1.0 / d;
        let delta = c * d;
        f *= delta;
        if (delta - 1.0).abs() < 1e-16 {
            break;
        }
    }
    1.0 / f
}

/// Upper tail Q(z) = 1 - Φ(z), accurate in relative terms for large z (libm's erfc, from
/// FreeBSD's msun, within one unit in the last place; statrs' erfc was measured ~1e-10 off).
pub fn normal_sf(z: f64) -> f64 {
    0.5 * libm::erfc(z / SQRT_2)
}

/// ln Q(z) = ln(1 - Φ(z)), accurate far in the upper tail (no ln(1 - Φ) cancellation).
pub fn log_normal_sf(z: f64) -> f64 {
    // erfc keeps its relative accuracy until it nears underflow (z ≈ 37); the continued
    // fraction is needed only beyond, where it also converges in a few terms.
    if z > 30.0 {
        -0.5 * z * z - LN_SQRT_2PI + mills_ratio_tail(z).ln()
    } else if z < -5.0 {
        // Q close to 1: ln(1 - Φ(z)) with Φ(z) = Q(-z) tiny.
        (-normal_sf(-z)).ln_1p()
    } else {
        normal_sf(z).ln()
    }
}

/// Inverse Mills ratio φ(z)/Q(z): minus the derivative of ln Q(z); tends to z in the tail.
pub fn inverse_mills(z: f64) -> f64 {
    if z > 5.0 {
        1.0 / mills_ratio_tail(z)
    } else {
        normal_pdf(z) / normal_sf(z)
    }
}

/// Standard normal quantile Φ⁻¹(p), Acklam's rational approximation refined by one Halley step.
pub fn normal_quantile(p: f64) -> f64 {
    if p <= 0.0 {
        return f64::NEG_INFINITY;
    }
    if p >= 1.0 {
        return f64::INFINITY;
    }
    const A: [f64; 6] = [
        -3.969_683_028_665_376e1,
        2.209_460_984_245_205e2,
        -2.759_285_104_469_687e2,
        1.383_577_518_672_69e2,
        -3.066_479_806_614_716e1,
        2.506_628_277_459_239,
    ];
    const B: [f64; 5] = [
        -5.447_609_879_822_406e1,
        1.615_858_368_580_409e2,
        -1.556_989_798_598_866e2,
        6.680_131_188_771_972e1,
        -1.328_068_155_288_572e1,
    ];
    const C: [f64; 6] = [
        -7.784_894_002_430_293e-3,
        -3.223_964_580_411_365e-1,
        -2.400_758_277_161_838,
        -2.549_732_539_343_734,
        4.374_664_141_464_968,
        2.938_163_982_698_783,
    ];
    const D: [f64; 4] = [
        7.784_695_709_041_462e-3,
        3.224_671_290_700_398e-1,
        2.445_134_137_142_996,
        3.754_408_661_907_416,
    ];
    let low = 0.024_25;
    let x = if p < low {
        let q = (-2.0 * p.ln()).sqrt();
        (((((C[0] * q + C[1]) * q + C[2]) * q + C[3]) * q + C[4]) * q + C[5])
            / ((((D[0] * q + D[1]) * q + D[2]) * q + D[3]) * q + 1.0)
    } else if p <= 1.0 - low {
        let q = p - 0.5;
        let r = q * q;
        (((((A[0] * r + A[1]) * r + A[2]) * r + A[3]) * r + A[4]) * r + A[5]) * q
            / (((((B[0] * r + B[1]) * r + B[2]) * r + B[3]) * r + B[4]) * r + 1.0)
    } else {
        let q = (-2.0 * (1.0 - p).ln()).sqrt();
        -(((((C[0] * q + C[1]) * q + C[2]) * q + C[3]) * q + C[4]) * q + C[5])
            / ((((D[0] * q + D[1]) * q + D[2]) * q + D[3]) * q + 1.0)
    };
    // Halley refinement on the side of the distribution with the better relative accuracy.
    let e = if x < 0.0 {
        0.5 * libm::erfc(-x / SQRT_2) - p
    } else {
        (1.0 - p) - normal_sf(x)
    };
    let u = e * (2.0 * PI).sqrt() * (x * x / 2.0).exp();
    x - u / (1.0 + x * u / 2.0)
}

/// softplus(u) = ln(1 + e^u) without overflow.
pub fn softplus(u: f64) -> f64 {
    if u > 0.0 {
        u + (-u).exp().ln_1p()
    } else {
        u.exp().ln_1p()
    }
}

/// Logistic function 1/(1 + e^-u), the derivative of softplus.
pub fn logistic(u: f64) -> f64 {
    if u >= 0.0 {
        1.0 / (1.0 + (-u).exp())
    } else {
        let e = u.exp();
        e / (1.0 + e)
    }
}

/// (e^x - 1)/x, equal to 1 at x = 0, without cancellation near 0.
pub fn expm1_over_x(x: f64) -> f64 {
    if x.abs() < 1e-5 {
        1.0 + x / 2.0 + x * x / 6.0 + x * x * x / 24.0
    } else {
        x.exp_m1() / x
    }
}

/// Derivative of (e^x - 1)/x, equal to 1/2 at x = 0, without cancellation near 0.
pub fn expm1_over_x_derivative(x: f64) -> f64 {
    if x.abs() < 0.1 {
        // Σ_{k≥1} k x^(k-1)/(k+1)!
        let mut term_fact = 2.0; // (k+1)! for k = 1
        let mut power = 1.0; // x^(k-1)
        let mut sum = 0.0;
        for k in 1..20 {
            sum += k as f64 * power / term_fact;
            power *= x;
            term_fact *= (k + 2) as f64;
        }
        sum
    } else {
        (x.exp() * (x - 1.0) + 1.0) / (x * x)
    }
}

/// ln(1 + x)/x, equal to 1 at x = 0, without cancellation near 0.
pub fn ln1p_over_x(x: f64) -> f64 {
    if x.abs() < 1e-5 {
        1.0 - x / 2.0 + x * x / 3.0 - x * x * x / 4.0
    } else {
        x.ln_1p() / x
    }
}

/// ln(1 - e^x) for x ≤ 0, accurate both near 0 and for very negative x.
pub fn log1m_exp(x: f64) -> f64 {
    if x > -std::f64::consts::LN_2 {
        (-x.exp_m1()).ln()
    } else {
        (-x.exp()).ln_1p()
    }
}

const KRONROD_NODES: [f64; 8] = [
    0.991_455_371_120_812_6,
    0.949_107_912_342_758_5,
    0.864_864_423_359_769_1,
    0.741_531_185_599_394_4,
    0.586_087_235_467_691_1,
    0.405_845_151_377_397_2,
    0.207_784_955_007_898_5,
    0.0,
];
const KRONROD_WEIGHTS: [f64; 8] = [
    0.022_935_322_010_529_22,
    0.063_092_092_629_978_55,
    0.104_790_010_322_250_2,
    0.140_653_259_715_525_9,
    0.169_004_726_639_267_9,
    0.190_350_578_064_785_4,
    0.204_432_940_075_298_9,
    0.209_482_141_084_728_8,
];
const GAUSS_WEIGHTS: [f64; 4] = [
    0.129_484_966_168_869_7,
    0.279_705_391_489_276_7,
    0.381_830_050_505_118_9,
    0.417_959_183_673_469_4,
];

/// Gauss–Kronrod 7/15 on [a, b]: (Kronrod estimate, error estimate).
fn gauss_kronrod(f: &impl Fn(f64) -> f64, a: f64, b: f64) -> (f64, f64) {
    let centre = 0.5 * (a + b);
    let half = 0.5 * (b - a);
    let fc = f(centre);
    let mut kronrod = KRONROD_WEIGHTS[7] * fc;
    let mut gauss = GAUSS_WEIGHTS[3] * fc;
    for i in 0..7 {
        let dx = half * KRONROD_NODES[i];
        let pair = f(centre - dx) + f(centre + dx);
        kronrod += KRONROD_WEIGHTS[i] * pair;
        if i % 2 == 1 {
            gauss += GAUSS_WEIGHTS[i / 2] * pair;
        }
    }
    (kronrod * half, ((kronrod - gauss) * half).abs())
}

/// Adaptive Gauss–Kronrod integral of `f` over [a, b] to absolute-or-relative tolerance `tol`.
pub fn integrate(f: impl Fn(f64) -> f64, a: f64, b: f64, tol: f64) -> f64 {
    integrate_with_floor(f, a, b, tol, 0.0)
}

/// As [`integrate`], but a piece is also accepted once its error estimate is within its share
/// of `absolute` (for integrands that vanish at an end, where a purely relative test chases
/// rounding noise).
pub fn integrate_with_floor(
    f: impl Fn(f64) -> f64,
    a: f64,
    b: f64,
    tol: f64,
    absolute: f64,
) -> f64 {
    if b <= a {
        return 0.0;
    }
    let mut stack = vec![(a, b, gauss_kronrod(&f, a, b))];
    let mut total = 0.0;
    let mut pieces = 0usize;
    while let Some((lo, hi, (value, error))) = stack.pop() {
        let width_share = (hi - lo) / (b - a);
        let scale = value.abs().max(1e-300);
        if error <= tol * width_share.max(1e-3) * scale.max(tol)
            || error <= absolute * width_share
            || error <= 1e-15 * scale
            || pieces > 20_000
            || hi - lo < 1e-12 * (b - a)
        {
            total += value;
            continue;
        }
        pieces += 1;
        let mid = 0.5 * (lo + hi);
        stack.push((lo, mid, gauss_kronrod(&f, lo, mid)));
        stack.push((mid, hi, gauss_kronrod(&f, mid, hi)));
    }
    total
}

/// Cholesky factor L (lower triangular, A = L·Lᵀ) of a symmetric matrix; `None` unless positive definite.
pub fn cholesky(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let mut sum = a[i][j];
            for k in 0..j {
                sum -= l[i][k] * l[j][k];
            }
            if i == j {
                if sum.is_nan() || sum <= 0.0 || sum.is_infinite() {
                    return None;
                }
                l[i][i] = sum.sqrt();
            } else {
                l[i][j] = sum / l[j][j];
            }
        }
    }
    Some(l)
}

/// Inverse of a symmetric positive-definite matrix through its Cholesky factor; `None` otherwise.
pub fn invert_positive_definite(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let l = cholesky(a)?;
    let mut inverse = vec![vec![0.0; n]; n];
    for col in 0..n {
        // Solve L y = e_col, then Lᵀ x = y.
        let mut y = vec![0.0; n];
        for i in 0..n {
            let mut sum = if i == col { 1.0 } else { 0.0 };
            for k in 0..i {
                sum -= l[i][k] * y[k];
            }
            y[i] = sum / l[i][i];
        }
        for i in (0..n).rev() {
            let mut sum = y[i];
            for k in i + 1..n {
                sum -= l[k][i] * inverse[k][col];
            }
            inverse[i][col] = sum / l[i][i];
        }
    }
    Some(inverse)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_tail_log_matches_asymptotic_series() {
        // Asymptotic expansion of the Mills ratio (Abramowitz and Stegun, 1964, 26.2.12):
        // Q(z) ≈ φ(z)/z · (1 - 1/z² + 3/z⁴ - 15/z⁶ + 105/z⁸).
        for &z in &[10.0f64, 20.0, 40.0, 100.0] {
            let series = 1.0 - 1.0 / z.powi(2) + 3.0 / z.powi(4) - 15.0 / z.powi(6)
                + 105.0 / z.powi(8)
                - 945.0 / z.powi(10)
                + 10395.0 / z.powi(12);
            let expected = -0.5 * z * z - LN_SQRT_2PI - z.ln() + series.ln();
            assert!((log_normal_sf(z) - expected).abs() < 1e-9 * expected.abs());
        }
        // Continuity across the switch point at z = 30.
        // Both forms agree where they meet.
        for z in [6.0f64, 30.0] {
            let tail = -0.5 * z * z - LN_SQRT_2PI + mills_ratio_tail(z).ln();
            assert!(
                (tail - normal_sf(z).ln()).abs() < 1e-13 * tail.abs(),
                "z={z}"
            );
        }
    }

    #[test]
    fn normal_values_match_tables() {
        // Φ(1.959963984540054) = 0.975 (standard normal table, common practice).
        assert!((normal_quantile(0.975) - 1.959_963_984_540_054).abs() < 1e-12);
        assert!((normal_sf(1.959_963_984_540_054) - 0.025).abs() < 1e-16);
        // erfc(1) = 0.157299207050285130658... (Abramowitz and Stegun, 1964, Table 7.1).
        assert!((libm::erfc(1.0) - 0.157_299_207_050_285_13).abs() < 1e-16);
        for &p in &[1e-12, 1e-5, 0.01, 0.3, 0.5, 0.8, 0.999_999] {
            let z = normal_quantile(p);
            let back = normal_sf(-z);
            assert!((back - p).abs() < 1e-14 * p.max(1e-3), "p={p}");
        }
    }

    #[test]
    fn small_argument_forms_match_direct_ones() {
        for &x in &[1e-8f64, -1e-8, 1e-3, -0.05, 0.09, 0.5, -3.0] {
            let direct = (x.exp() * (x - 1.0) + 1.0) / (x * x);
            if x.abs() > 1e-3 {
                assert!((expm1_over_x_derivative(x) - direct).abs() < 1e-9);
            }
            assert!((expm1_over_x(x) - x.exp_m1() / x).abs() < 1e-12);
        }
        assert!((expm1_over_x_derivative(0.0) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn inverse_of_positive_definite_matrix_is_exact() {
        // [[4, 2], [2, 3]]⁻¹ = [[3, -2], [-2, 4]] / 8 (2×2 inverse formula).
        let inv = invert_positive_definite(&[vec![4.0, 2.0], vec![2.0, 3.0]]).unwrap();
        let expected = [[0.375, -0.25], [-0.25, 0.5]];
        for i in 0..2 {
            for j in 0..2 {
                assert!((inv[i][j] - expected[i][j]).abs() < 1e-15);
            }
        }
        assert!(cholesky(&[vec![1.0, 2.0], vec![2.0, 1.0]]).is_none());
    }

    #[test]
    fn quadrature_integrates_known_functions() {
        // ∫₀^π sin = 2; ∫₀^10 e^-t = 1 - e^-10 (calculus).
        assert!((integrate(f64::sin, 0.0, PI, 1e-12) - 2.0).abs() < 1e-12);
        let exact = 1.0 - (-10.0f64).exp();
        assert!((integrate(|t| (-t).exp(), 0.0, 10.0, 1e-12) - exact).abs() < 1e-12);
    }
}
