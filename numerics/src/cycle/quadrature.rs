//! Adaptive Gauss–Kronrod quadrature of a smooth function on a finite interval.
//!
//! The 7-point Gauss rule and its 15-point Kronrod extension (Kronrod 1965; the
//! pair used by QUADPACK's `qk15`, Piessens et al. 1983 — node and weight values
//! from memory, checked by the unit tests below: the 15-point rule integrates
//! every polynomial of degree ≤ 22 exactly, the 7-point one every polynomial of
//! degree ≤ 13). The difference of the two estimates on a panel is its error
//! estimate; the panel with the largest error is bisected until the summed error
//! estimate is below the tolerance (globally adaptive bisection).

// The node and weight tables keep the published digits; f64 rounds them.
#![allow(clippy::excessive_precision)]

/// Abscissae of the 15-point Kronrod rule on [−1, 1], non-negative half,
/// largest first; odd positions (1, 3, 5) are the 7-point Gauss nodes, and 0 is
/// the last entry.
const XGK: [f64; 8] = [
    0.991_455_371_120_812_639_206_854_697_526_329,
    0.949_107_912_342_758_524_526_189_684_047_851,
    0.864_864_423_359_769_072_789_712_788_640_926,
    0.741_531_185_599_394_439_863_864_773_280_788,
    0.586_087_235_467_691_130_294_144_845_693_013,
    0.405_845_151_377_397_166_906_606_412_076_961,
    0.207_784_955_007_898_467_600_689_403_773_245,
    0.0,
];

/// Weights of the 15-point Kronrod rule, in the order of [`XGK`].
const WGK: [f64; 8] = [
    0.022_935_322_010_529_224_963_732_008_058_970,
    0.063_092_092_629_978_553_290_700_663_189_204,
    0.104_790_010_322_250_183_839_876_322_541_518,
    0.140_653_259_715_525_918_745_189_590_510_238,
    0.169_004_726_639_267_902_826_583_426_598_550,
    0.190_350_578_064_785_409_913_256_402_421_014,
    0.204_432_940_075_298_892_414_161_999_234_649,
    0.209_482_141_084_727_828_012_999_174_891_714,
];

/// Weights of the 7-point Gauss rule at XGK[1], XGK[3], XGK[5] and 0.
const WG: [f64; 4] = [
    0.129_484_966_168_869_693_270_611_432_679_082,
    0.279_705_391_489_276_667_901_467_771_423_780,
    0.381_830_050_505_118_944_950_369_775_488_975,
    0.417_959_183_673_469_387_755_102_040_816_327,
];

/// The result of [`integrate`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Quadrature {
    /// The integral.
    pub value: f64,
    /// Summed |Kronrod − Gauss| over the final panels (an upper-side estimate).
    pub error: f64,
    /// Whether `error` met the tolerance within the panel budget.
    pub converged: bool,
}

/// One panel: (a, b, Kronrod estimate, error estimate).
type Panel = (f64, f64, f64, f64);

fn gauss_kronrod_15(f: &impl Fn(f64) -> f64, a: f64, b: f64) -> Panel {
    let c = 0.5 * (a + b);
    let h = 0.5 * (b - a);
    let f0 = f(c);
    let mut kronrod = WGK[7] * f0;
    let mut gauss = WG[3] * f0;
    for j in 0..7 {
        let dx = h * XGK[j];
        let pair = f(c - dx) + f(c + dx);
        kronrod += WGK[j] * pair;
        if j % 2 == 1 {
            gauss += WG[j / 2] * pair;
        }
    }
    (a, b, kronrod * h, ((kronrod - gauss) * h).abs())
}

/// Integrates `f` over [a, b], first split at the interior `breaks` (points where
/// `f` is peaked or kinked; a peak much narrower than a panel must be given here,
/// or the rule's nodes may miss it), to a summed error estimate below
/// max(abs_tol, rel_tol × |integral|), bisecting at most `max_panels` times.
pub(crate) fn integrate(
    f: impl Fn(f64) -> f64,
    a: f64,
    b: f64,
    breaks: &[f64],
    rel_tol: f64,
    abs_tol: f64,
) -> Quadrature {
    const MAX_PANELS: usize = 2000;
    let mut edges: Vec<f64> = std::iter::once(a)
        .chain(breaks.iter().copied().filter(|&x| x > a && x < b))
        .chain(std::iter::once(b))
        .collect();
    edges.sort_by(f64::total_cmp);
    edges.dedup();
    let mut panels: Vec<Panel> = edges
        .windows(2)
        .map(|w| gauss_kronrod_15(&f, w[0], w[1]))
        .collect();
    loop {
        let value: f64 = panels.iter().map(|p| p.2).sum();
        let error: f64 = panels.iter().map(|p| p.3).sum();
        let target = abs_tol.max(rel_tol * value.abs());
        if error <= target || panels.len() >= MAX_PANELS {
            return Quadrature {
                value,
                error,
                converged: error <= target,
            };
        }
        let worst = panels
            .iter()
            .enumerate()
            .max_by(|x, y| x.1 .3.total_cmp(&y.1 .3))
            .map(|(i, _)| i)
            .expect("at least one panel");
        let (pa, pb, _, _) = panels.swap_remove(worst);
        let mid = 0.5 * (pa + pb);
        if !(mid > pa && mid < pb) {
            // The panel cannot be split further in floating point.
            return Quadrature {
                value,
                error,
                converged: false,
            };
        }
        panels.push(gauss_kronrod_15(&f, pa, mid));
        panels.push(gauss_kronrod_15(&f, mid, pb));
    }
}

/// Break points around a Gaussian-like peak at `center` of width `s`: the peak
/// and ±1, 2, 4, 8 and 16 widths, so that no panel is much wider than the part
/// of the peak it holds (a 15-point rule on a panel far wider than the peak can
/// miss it and report a zero error).
pub(crate) fn peak_breaks(center: f64, s: f64) -> [f64; 11] {
    let mut out = [center; 11];
    for (i, m) in [1.0, 2.0, 4.0, 8.0, 16.0].into_iter().enumerate() {
        out[2 * i + 1] = center - m * s;
        out[2 * i + 2] = center + m * s;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kronrod_rule_is_exact_to_degree_22_and_gauss_to_degree_13() {
        // ∫₋₁¹ xⁿ dx = 2/(n+1) for even n, 0 for odd n (textbook).
        for n in 0..=22 {
            let (_, _, k, e) = gauss_kronrod_15(&|x: f64| x.powi(n), -1.0, 1.0);
            let exact = if n % 2 == 0 {
                2.0 / (n as f64 + 1.0)
            } else {
                0.0
            };
            assert!((k - exact).abs() < 1e-15, "degree {n}: {k} vs {exact}");
            if n <= 13 {
                // Kronrod and Gauss agree, so the error estimate vanishes.
                assert!(e < 1e-15, "degree {n}: error estimate {e}");
            }
        }
        // Degree 24 is beyond the 15-point rule: it must no longer be exact.
        let (_, _, k, _) = gauss_kronrod_15(&|x: f64| x.powi(24), -1.0, 1.0);
        assert!((k - 2.0 / 25.0).abs() > 1e-12);
    }

    #[test]
    fn adaptive_integral_of_a_narrow_gaussian() {
        // ∫ exp(−x²/(2s²)) dx over ℝ = s√(2π) (textbook); s = 1e-3 on [−1, 2],
        // with breaks around the peak (without them, 15 nodes can miss a narrow
        // peak altogether, which is why every caller passes them).
        let s = 1e-3;
        let g = |x: f64| (-0.5 * (x / s).powi(2)).exp();
        let q = integrate(g, -1.0, 2.0, &peak_breaks(0.0, s), 1e-12, 0.0);
        assert!(q.converged);
        let exact = s * (2.0 * std::f64::consts::PI).sqrt();
        assert!((q.value - exact).abs() < 1e-12 * exact, "{}", q.value);
        // ∫₀^π sin x dx = 2.
        let q = integrate(f64::sin, 0.0, std::f64::consts::PI, &[1.0], 1e-13, 0.0);
        assert!((q.value - 2.0).abs() < 1e-13);
    }
}
