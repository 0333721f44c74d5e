//! Descriptive statistics the study summary is built from: accurate mean and standard deviation,
//! the interquartile mean (IQM) and percentile quantiles.

/// Arithmetic mean, NaN for an empty slice.
///
/// Two passes: the plain mean, then the mean of the residuals added back, which recovers the digits
/// a single sum loses when the values share a large common part (NIST StRD NumAcc3/NumAcc4).
pub fn mean(xs: &[f64]) -> f64 {
    if xs.is_empty() {
        return f64::NAN;
    }
    let n = xs.len() as f64;
    let first = xs.iter().sum::<f64>() / n;
    let residual = xs.iter().map(|x| x - first).sum::<f64>() / n;
    first + residual
}

/// Sample standard deviation (n - 1 denominator), NaN for fewer than two values.
///
/// Corrected two-pass algorithm (Chan, Golub, LeVeque, "Algorithms for computing the sample
/// variance", The American Statistician 1983, eq. 1.7): sum of squared deviations from the mean
/// minus the square of the summed deviations over n, which cancels the rounding error of the mean.
pub fn sample_std(xs: &[f64]) -> f64 {
    if xs.len() < 2 {
        return f64::NAN;
    }
    let n = xs.len() as f64;
    let m = mean(xs);
    let (sum_sq, sum) = xs.iter().fold((0.0, 0.0), |(sq, s), x| {
        let d = x - m;
        (sq + d * d, s + d)
    });
    ((sum_sq - sum * sum / n) / (n - 1.0)).sqrt()
}

/// Symmetric trimmed mean: sort, drop `floor(fraction * n)` values from each end, average the rest.
/// NaN for an empty slice.
pub fn trimmed_mean(xs: &[f64], fraction: f64) -> f64 {
    if xs.is_empty() {
        return f64::NAN;
    }
    let mut sorted = xs.to_vec();
    sorted.sort_by(f64::total_cmp);
    let cut = (fraction * xs.len() as f64).floor() as usize;
    mean(&sorted[cut..xs.len() - cut])
}

/// Interquartile mean: the 25% trimmed mean, i.e. the mean of the middle half of the runs
/// (Agarwal et al., "Deep RL at the Edge of the Statistical Precipice", NeurIPS 2021, Sec. 4.3).
/// For n not divisible by 4, `floor(n / 4)` runs are dropped from each end.
pub fn iqm(xs: &[f64]) -> f64 {
    trimmed_mean(xs, 0.25)
}

/// Quantile `q` in [0, 1] of already sorted values by linear interpolation between order statistics
/// (Hyndman & Fan, "Sample quantiles in statistical packages", The American Statistician 1996,
/// definition 7). NaN for an empty slice.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> f64 {
    match sorted.len() {
        0 => f64::NAN,
        1 => sorted[0],
        n => {
            let h = q.clamp(0.0, 1.0) * (n - 1) as f64;
            let lo = h.floor() as usize;
            let hi = (lo + 1).min(n - 1);
            sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
        }
    }
}

/// The finite values of `xs` (NaN and infinities removed).
pub fn finite(xs: impl IntoIterator<Item = f64>) -> Vec<f64> {
    xs.into_iter().filter(|x| x.is_finite()).collect()
}

/// Wilson score interval of a proportion: `successes` of `n` trials, two-sided at `confidence`
/// (Wilson, "Probable inference, the law of succession, and statistical inference", JASA 22, 1927).
/// Used for the classical controller, whose spread comes from its evaluation episodes, not seeds.
/// Centre (p + z^2/2n) / (1 + z^2/n), half-width z / (1 + z^2/n) * sqrt(p(1-p)/n + z^2/4n^2).
/// NaN ends when n = 0.
pub fn wilson_interval(successes: f64, n: f64, confidence: f64) -> (f64, f64) {
    if n <= 0.0 {
        return (f64::NAN, f64::NAN);
    }
    let z = super::compare::normal_quantile(0.5 + confidence / 2.0);
    let p = (successes / n).clamp(0.0, 1.0);
    let z2 = z * z;
    let denom = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denom;
    let half = z / denom * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn wilson_interval_matches_newcombes_worked_examples() {
        // Newcombe, "Two-sided confidence intervals for the single proportion: comparison of seven
        // methods", Statistics in Medicine 17, 1998, Table II, method 3 (score interval without
        // continuity correction), 95%; values quoted from memory, four decimals as printed there.
        for (r, n, lo, hi) in [
            (81.0, 263.0, 0.2553, 0.3662),
            (15.0, 148.0, 0.0624, 0.1605),
            (0.0, 20.0, 0.0, 0.1611),
            (1.0, 29.0, 0.0061, 0.1718),
        ] {
            let (a, b) = wilson_interval(r, n, 0.95);
            assert!((a - lo).abs() < 6e-5, "{r}/{n}: lo {a} vs {lo}");
            assert!((b - hi).abs() < 6e-5, "{r}/{n}: hi {b} vs {hi}");
        }
        // 0 of n: the upper end is z^2 / (n + z^2) exactly (set p = 0 in Wilson's formula).
        let z2 = 1.959963984540054f64.powi(2);
        assert_relative_eq!(
            wilson_interval(0.0, 30.0, 0.95).1,
            z2 / (30.0 + z2),
            epsilon = 1e-9
        );
        assert!(wilson_interval(0.0, 0.0, 0.95).0.is_nan());
    }

    /// Digits of agreement as NIST scores them: -log10(|computed - certified| / |certified|),
    /// capped at 15 (NIST StRD, "Univariate Summary Statistics", background on the LRE).
    fn lre(computed: f64, certified: f64) -> f64 {
        let err = (computed - certified).abs();
        if err == 0.0 {
            15.0
        } else {
            (-(err / certified.abs()).log10()).min(15.0)
        }
    }

    /// NIST StRD NumAcc datasets, constructed as NIST describes them
    /// (/work/shared/reference/nist-strd-univariate.md: first value, then 500 pairs).
    fn numacc(centre: f64, below: f64, above: f64) -> Vec<f64> {
        let mut v = vec![centre];
        for _ in 0..500 {
            v.push(below);
            v.push(above);
        }
        v
    }

    #[test]
    fn nist_numacc1_certified_mean_and_std() {
        // NIST StRD NumAcc1: certified mean 10000002, certified sample std. dev. 1 (exact).
        let x = [10000001.0, 10000003.0, 10000002.0];
        assert_eq!(mean(&x), 10000002.0);
        assert_eq!(sample_std(&x), 1.0);
    }

    #[test]
    fn nist_numacc2_to_4_certified_values() {
        // NIST StRD NumAcc2/3/4 certified values: mean 1.2 / 1000000.2 / 10000000.2, std 0.1.
        // NIST certifies 15 digits; the inputs are not exactly representable in f64, so the best
        // attainable agreement drops with the magnitude of the common part. Required digits: at
        // least 14 (NumAcc2), 9 (NumAcc3), 8 (NumAcc4) for the std, 15 for every mean; NIST's own
        // commentary calls 8-9 digits on NumAcc4 good for double precision.
        let cases = [
            (numacc(1.2, 1.1, 1.3), 1.2, 14.0),
            (numacc(1000000.2, 1000000.1, 1000000.3), 1000000.2, 9.0),
            (numacc(10000000.2, 10000000.1, 10000000.3), 10000000.2, 8.0),
        ];
        for (data, certified_mean, std_digits) in cases {
            assert_eq!(data.len(), 1001);
            assert!(
                lre(mean(&data), certified_mean) >= 15.0,
                "mean {certified_mean}"
            );
            let s = sample_std(&data);
            assert!(
                lre(s, 0.1) >= std_digits,
                "std for mean {certified_mean}: {s} has {} digits",
                lre(s, 0.1)
            );
        }
    }

    fn read_dat(name: &str) -> Vec<f64> {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/fixtures/nist")
            .join(name);
        std::fs::read_to_string(&path)
            .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
            .split(|c: char| c.is_whitespace() || c == ',')
            .filter(|s| !s.is_empty())
            .map(|s| s.parse().unwrap())
            .collect()
    }

    #[test]
    fn nist_michelson_certified_values() {
        // NIST StRD Michelso (lower difficulty, 100 observations): certified mean 299.852400000000,
        // certified sample std. dev. 0.0790105478190518. Data file: tests/fixtures/nist/README.md.
        let x = read_dat("michelson.dat");
        assert_eq!(x.len(), 100);
        assert!(lre(mean(&x), 299.852400000000) >= 15.0);
        assert!(lre(sample_std(&x), 0.0790105478190518) >= 13.0);
    }

    #[test]
    fn nist_lew_certified_values() {
        // NIST StRD Lew (lower difficulty, 200 observations): certified mean -177.435000000000,
        // certified sample std. dev. 277.332168044316.
        let x = read_dat("lew.dat");
        assert_eq!(x.len(), 200);
        assert!(lre(mean(&x), -177.435000000000) >= 15.0);
        assert!(lre(sample_std(&x), 277.332168044316) >= 14.0);
    }

    #[test]
    fn iqm_is_the_25_percent_trimmed_mean_on_hand_worked_sets() {
        // Agarwal et al. 2021 (Sec. 4.3): IQM = mean of the middle 50% of runs, i.e. the 25% trimmed
        // mean; floor(n/4) dropped per side is the common trimmed-mean convention. Hand-worked:
        // n=4: [1,2,3,4] -> drop 1 each end -> (2+3)/2 = 2.5
        assert_relative_eq!(iqm(&[4.0, 1.0, 3.0, 2.0]), 2.5);
        // n=5: [1,2,3,4,100] -> drop 1 each end -> (2+3+4)/3 = 3
        assert_relative_eq!(iqm(&[100.0, 2.0, 1.0, 4.0, 3.0]), 3.0);
        // n=6: [0,1,2,3,10,50] -> drop 1 each end -> (1+2+3+10)/4 = 4
        assert_relative_eq!(iqm(&[50.0, 0.0, 10.0, 1.0, 3.0, 2.0]), 4.0);
        // n=7: [-9,1,1,2,5,8,90] -> drop 1 each end -> (1+1+2+5+8)/5 = 3.4
        assert_relative_eq!(iqm(&[90.0, 1.0, -9.0, 1.0, 8.0, 2.0, 5.0]), 3.4);
        // n=8: [1..8] -> drop 2 each end -> (3+4+5+6)/4 = 4.5
        assert_relative_eq!(iqm(&[8.0, 7.0, 6.0, 5.0, 4.0, 3.0, 2.0, 1.0]), 4.5);
        // n=3: drop 0 -> plain mean (1+2+6)/3 = 3; n=1: the value itself.
        assert_relative_eq!(iqm(&[6.0, 1.0, 2.0]), 3.0);
        assert_relative_eq!(iqm(&[7.5]), 7.5);
        assert!(iqm(&[]).is_nan());
    }

    #[test]
    fn quantile_matches_hyndman_fan_type_7() {
        // Hyndman & Fan 1996, definition 7: h = (n-1)q, interpolate x[floor h], x[floor h + 1].
        // For [1,2,3,4]: q=0.25 -> h=0.75 -> 1.75; q=0.5 -> 2.5; q=1 -> 4.
        let s = [1.0, 2.0, 3.0, 4.0];
        assert_relative_eq!(quantile_sorted(&s, 0.25), 1.75);
        assert_relative_eq!(quantile_sorted(&s, 0.5), 2.5);
        assert_relative_eq!(quantile_sorted(&s, 1.0), 4.0);
        assert_relative_eq!(quantile_sorted(&s, 0.0), 1.0);
    }
}
