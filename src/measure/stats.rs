//! Small statistics: robust location and scale, the normal quantile, χ² tail probabilities
//! and the Ljung–Box whiteness statistic.

/// Median (NaN-free input; the slice is copied).
pub fn median(values: &[f64]) -> f64 {
    if values.is_empty() {
        return 0.0;
    }
    let mut v = values.to_vec();
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    let m = *m;
    if v.len() % 2 == 1 {
        m
    } else {
        let lower = v[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + m)
    }
}

/// Consistency factor of the median absolute deviation for normal data, 1/Φ⁻¹(3/4)
/// (Hampel 1974).
pub const MAD_NORMAL: f64 = 1.482_602_218_505_602;

/// Noise σ from first differences: MAD(Δy)·1.4826/√2, immune to a slow baseline and to a
/// few spikes (the difference-based estimator of von Neumann et al. 1941, made robust with
/// the MAD of Hampel 1974).
pub fn noise_from_differences(values: &[f64]) -> f64 {
    if values.len() < 3 {
        return 0.0;
    }
    let d: Vec<f64> = values.windows(2).map(|w| w[1] - w[0]).collect();
    let m = median(&d);
    let dev: Vec<f64> = d.iter().map(|x| (x - m).abs()).collect();
    MAD_NORMAL * median(&dev) / std::f64::consts::SQRT_2
}

/// RMS of first differences / √2 (the plain von Neumann estimate), for coarse quantisation
/// where the MAD of differences collapses to zero.
pub fn rms_from_differences(values: &[f64]) -> f64 {
    if values.len() < 3 {
        return 0.0;
    }
    let s: f64 = values.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum();
    (s / (2.0 * (values.len() - 1) as f64)).sqrt()
}

/// Sample autocorrelations r₁..r_h of a series (mean removed).
pub fn autocorrelation(x: &[f64], lags: usize) -> Vec<f64> {
    let n = x.len();
    if n < 2 {
        return vec![0.0; lags];
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let c0: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    if c0 == 0.0 {
        return vec![0.0; lags];
    }
    (1..=lags)
        .map(|k| {
            if k >= n {
                return 0.0;
            }
            let s: f64 = (0..n - k).map(|i| (x[i] - mean) * (x[i + k] - mean)).sum();
            s / c0
        })
        .collect()
}

/// Ljung–Box statistic Q = n(n+2) Σ r_k²/(n−k) over h lags (Ljung & Box 1978); ~χ²(h) for
/// white noise.
pub fn ljung_box(x: &[f64], lags: usize) -> f64 {
    let n = x.len() as f64;
    autocorrelation(x, lags)
        .iter()
        .enumerate()
        .map(|(k, r)| r * r / (n - (k + 1) as f64))
        .sum::<f64>()
        * n
        * (n + 2.0)
}

/// Standard normal upper tail Q(z) = ½ erfc(z/√2).
pub fn normal_sf(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

/// Complementary error function, |relative error| < 1.2e-7 (Numerical Recipes' erfcc,
/// Press et al. 2007, §6.2, a Chebyshev fit).
pub fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.265_512_23
        + t * (1.000_023_68
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    let r = t * poly.exp();
    if x >= 0.0 { r } else { 2.0 - r }
}

/// Upper tail of χ²(k) at x by the Wilson–Hilferty cube-root normal approximation
/// (Wilson & Hilferty 1931).
pub fn chi2_sf(x: f64, k: f64) -> f64 {
    if k <= 0.0 {
        // No degrees of freedom: any misfit is fitted exactly.
        return 1.0;
    }
    if x <= 0.0 {
        return 1.0;
    }
    let a = 2.0 / (9.0 * k);
    let z = ((x / k).cbrt() - (1.0 - a)) / a.sqrt();
    normal_sf(z)
}

/// Standard normal quantile Φ⁻¹(p), 0 < p < 1 (Wichura 1988, algorithm AS 241, PPND16:
/// about 16 digits).
pub fn normal_quantile(p: f64) -> f64 {
    let q = p - 0.5;
    if q.abs() <= 0.425 {
        let r = 0.180625 - q * q;
        return q * poly(&AS241_A, r) / poly(&AS241_B, r);
    }
    let r = if q < 0.0 { p } else { 1.0 - p };
    let r = (-r.ln()).sqrt();
    let v = if r <= 5.0 {
        let r = r - 1.6;
        poly(&AS241_C, r) / poly(&AS241_D, r)
    } else {
        let r = r - 5.0;
        poly(&AS241_E, r) / poly(&AS241_F, r)
    };
    if q < 0.0 { -v } else { v }
}

fn poly(c: &[f64; 8], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &k| acc * x + k)
}

const AS241_A: [f64; 8] = [
    3.387_132_872_796_366_5,
    1.331_416_678_917_843_8e2,
    1.971_590_950_306_551_3e3,
    1.373_169_376_550_946e4,
    4.592_195_393_154_987e4,
    6.726_577_092_700_87e4,
    3.343_057_558_358_813e4,
    2.509_080_928_730_122_7e3,
];
const AS241_B: [f64; 8] = [
    1.0,
    4.231_333_070_160_091e1,
    6.871_870_074_920_579e2,
    5.394_196_021_424_751e3,
    2.121_379_430_158_659_7e4,
    3.930_789_580_009_271e4,
    2.872_908_573_572_194_3e4,
    5.226_495_278_852_545e3,
];
const AS241_C: [f64; 8] = [
    1.423_437_110_749_683_5,
    4.630_337_846_156_546,
    5.769_497_221_460_691,
    3.647_848_324_763_204_5,
    1.270_458_252_452_368_4,
    2.417_807_251_774_506e-1,
    2.272_384_498_926_918_4e-2,
    7.745_450_142_783_414e-4,
];
const AS241_D: [f64; 8] = [
    1.0,
    2.053_191_626_637_759,
    1.676_384_830_183_803_8,
    6.897_673_349_851e-1,
    1.481_039_764_274_800_8e-1,
    1.519_866_656_361_645_7e-2,
    5.475_938_084_995_345e-4,
    1.050_750_071_644_416_9e-9,
];
const AS241_E: [f64; 8] = [
    6.657_904_643_501_103,
    5.463_784_911_164_114,
    1.784_826_539_917_291_3,
    2.965_605_718_285_048_7e-1,
    2.653_218_952_657_612_4e-2,
    1.242_660_947_388_078_4e-3,
    2.711_555_568_743_487_6e-5,
    2.010_334_399_292_288_1e-7,
];
const AS241_F: [f64; 8] = [
    1.0,
    5.998_322_065_558_88e-1,
    1.369_298_809_227_358e-1,
    1.487_536_129_085_061_5e-2,
    7.868_691_311_456_133e-4,
    1.846_318_317_510_054_8e-5,
    1.421_511_758_316_446e-7,
    2.044_263_103_389_939_7e-15,
];

/// Two-sided 95 % coverage factor of the normal distribution, Φ⁻¹(0.975).
pub fn z95() -> f64 {
    normal_quantile(0.975)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_quantiles_match_tables() {
        // Abramowitz & Stegun 1964, table 26.5: z(0.975) = 1.959963985, z(0.999) = 3.090232306.
        assert!((normal_quantile(0.975) - 1.959_963_984_540_054).abs() < 1e-12);
        assert!((normal_quantile(0.999) - 3.090_232_306_167_813_5).abs() < 1e-12);
        assert!((normal_quantile(1e-10) + 6.361_340_902_404_056).abs() < 1e-9);
        assert!((normal_sf(1.959_963_984_540_054) - 0.025).abs() < 1e-7);
    }

    #[test]
    fn chi2_tail_is_close_to_exact() {
        // χ²(2) has the exact tail e^(−x/2); Wilson–Hilferty is within 1e-2 there.
        for x in [1.0, 4.0, 9.0] {
            assert!((chi2_sf(x, 2.0) - (-x / 2.0f64).exp()).abs() < 1e-2);
        }
        // χ²(20) upper 5 % point 31.410 (Abramowitz & Stegun 1964, table 26.8).
        assert!((chi2_sf(31.410, 20.0) - 0.05).abs() < 1e-3);
    }

    #[test]
    fn robust_noise_of_a_ramp_with_steps() {
        // Differences of a straight line are constant: the MAD of differences is zero.
        let line: Vec<f64> = (0..100).map(|i| 0.5 * i as f64).collect();
        assert_eq!(noise_from_differences(&line), 0.0);
        assert_eq!(median(&[3.0, 1.0, 2.0, 4.0]), 2.5);
    }
}
