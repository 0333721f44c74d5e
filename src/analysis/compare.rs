//! Two-variant comparisons: probability of improvement (Agarwal et al. 2021) and the Mann-Whitney
//! U test (Mann & Whitney, "On a test of whether one of two random variables is stochastically
//! larger than the other", Ann. Math. Statist. 1947), with the normal distribution it needs.

/// Pairwise score S(x, y): 1 when x > y, 1/2 on a tie, 0 otherwise.
fn score(x: f64, y: f64) -> f64 {
    if x > y {
        1.0
    } else if x == y {
        0.5
    } else {
        0.0
    }
}

/// Mann-Whitney U of `x` against `y`: the number of pairs with x > y, ties counting one half.
pub fn u_statistic(x: &[f64], y: &[f64]) -> f64 {
    x.iter()
        .map(|&a| y.iter().map(|&b| score(a, b)).sum::<f64>())
        .sum()
}

/// Probability of improvement P(X > Y) = U / (n m) (Agarwal et al. 2021, Sec. 4.3, for one task).
/// NaN when either side is empty.
pub fn probability_of_improvement(x: &[f64], y: &[f64]) -> f64 {
    if x.is_empty() || y.is_empty() {
        return f64::NAN;
    }
    u_statistic(x, y) / (x.len() * y.len()) as f64
}

/// How the p-value was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum PValueMethod {
    /// Exact null distribution of U (no ties, n + m <= 50).
    Exact,
    /// Normal approximation with tie and continuity corrections.
    Normal,
}

/// Result of a two-sided Mann-Whitney U test.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MannWhitney {
    /// U of the first sample against the second.
    pub u: f64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Exact or normal approximation.
    pub method: PValueMethod,
}

/// Two-sided Mann-Whitney U test of `x` against `y`; None when either sample is empty.
///
/// Without ties and for n + m <= 50 the p-value is exact, from the counts of arrangements with each
/// U value (Mann & Whitney 1947, recurrence eq. 2). Otherwise the normal approximation is used with
/// the tie-corrected variance n m / 12 * ((N + 1) - sum(t^3 - t) / (N (N - 1))) and a continuity
/// correction of 1/2 (Lehmann, "Nonparametrics: Statistical Methods Based on Ranks", 1975, ch. 1).
pub fn mann_whitney(x: &[f64], y: &[f64]) -> Option<MannWhitney> {
    let (n, m) = (x.len(), y.len());
    if n == 0 || m == 0 {
        return None;
    }
    let u = u_statistic(x, y);
    let mut all: Vec<f64> = x.iter().chain(y).copied().collect();
    all.sort_by(f64::total_cmp);
    let tie_sum = tie_term(&all);
    if tie_sum == 0.0 && n + m <= 50 {
        return Some(MannWhitney {
            u,
            p_value: exact_p_two_sided(u.round() as usize, n, m),
            method: PValueMethod::Exact,
        });
    }
    let big_n = (n + m) as f64;
    let nm = (n * m) as f64;
    let var = nm / 12.0 * ((big_n + 1.0) - tie_sum / (big_n * (big_n - 1.0)));
    let p_value = if var <= 0.0 {
        1.0
    } else {
        let z = ((u - nm / 2.0).abs() - 0.5).max(0.0) / var.sqrt();
        (2.0 * normal_sf(z)).min(1.0)
    };
    Some(MannWhitney {
        u,
        p_value,
        method: PValueMethod::Normal,
    })
}

/// sum over tie groups of (t^3 - t), for sorted values.
fn tie_term(sorted: &[f64]) -> f64 {
    let mut total = 0.0;
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i + 1;
        while j < sorted.len() && sorted[j] == sorted[i] {
            j += 1;
        }
        let t = (j - i) as f64;
        total += t * t * t - t;
        i = j;
    }
    total
}

/// Counts of arrangements of n x's and m y's with each value of U (index u = 0..=n m).
/// Recurrence (Mann & Whitney 1947, eq. 2): c(n, m; u) = c(n-1, m; u-m) + c(n, m-1; u).
pub fn u_counts(n: usize, m: usize) -> Vec<f64> {
    // table[j] holds the counts for (i, j) while i sweeps up; start with i = 0: only U = 0.
    let mut table: Vec<Vec<f64>> = (0..=m).map(|_| vec![1.0]).collect();
    for i in 1..=n {
        let mut next: Vec<Vec<f64>> = Vec::with_capacity(m + 1);
        next.push(vec![1.0]); // (i, 0): U = 0 only
        for j in 1..=m {
            let mut c = vec![0.0; i * j + 1];
            // last element is an x larger than all j y's: contributes j to U
            for (u, v) in table[j].iter().enumerate() {
                c[u + j] += v;
            }
            // last element is a y: U unchanged
            for (u, v) in next[j - 1].iter().enumerate() {
                c[u] += v;
            }
            next.push(c);
        }
        table = next;
    }
    table.swap_remove(m)
}

/// Exact two-sided p-value: 2 min(P(U <= u), P(U >= u)), capped at 1.
fn exact_p_two_sided(u: usize, n: usize, m: usize) -> f64 {
    let counts = u_counts(n, m);
    let total: f64 = counts.iter().sum();
    let lower: f64 = counts[..=u.min(n * m)].iter().sum::<f64>() / total;
    let upper: f64 = counts[u.min(n * m)..].iter().sum::<f64>() / total;
    (2.0 * lower.min(upper)).min(1.0)
}

/// Upper tail of the standard normal, 1 - Phi(z) = erfc(z / sqrt 2) / 2.
pub fn normal_sf(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

/// Standard normal CDF.
pub fn normal_cdf(z: f64) -> f64 {
    normal_sf(-z)
}

/// Standard normal quantile: the z with Phi(z) = p, for p in (0, 1), found by bisection on
/// [`normal_cdf`] to below 1e-13 in z (NaN outside (0, 1)).
pub fn normal_quantile(p: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) {
        return f64::NAN;
    }
    let (mut lo, mut hi) = (-40.0f64, 40.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if normal_cdf(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-13 {
            break;
        }
    }
    0.5 * (lo + hi)
}

/// Complementary error function. |x| < 0.5: Maclaurin series of erf (Abramowitz & Stegun,
/// "Handbook of Mathematical Functions", 1964, eq. 7.1.5); x >= 0.5: the continued fraction
/// A&S eq. 7.1.14 evaluated by the modified Lentz method (Press et al., "Numerical Recipes",
/// 3rd ed. 2007, Sec. 5.2). erfc(-x) = 2 - erfc(x).
pub fn erfc(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x < 0.0 {
        return 2.0 - erfc(-x);
    }
    if x < 0.5 {
        // erf(x) = 2/sqrt(pi) sum_k (-1)^k x^(2k+1) / (k! (2k+1))
        let x2 = x * x;
        let mut term = x; // (-1)^k x^(2k+1) / k!
        let mut sum = x;
        for k in 1..60 {
            let k = k as f64;
            term *= -x2 / k;
            let add = term / (2.0 * k + 1.0);
            sum += add;
            if add.abs() <= 1e-17 * sum.abs() {
                break;
            }
        }
        return 1.0 - sum * 2.0 / std::f64::consts::PI.sqrt();
    }
    if x > 27.0 {
        return 0.0;
    }
    // erfc(x) = exp(-x^2)/sqrt(pi) * 1/(x + (1/2)/(x + 1/(x + (3/2)/(x + 2/(x + ...)))))
    let tiny = 1e-300;
    let mut f = x;
    let mut c = x;
    let mut d = 0.0;
    for k in 1..4000 {
        let a = k as f64 / 2.0;
        d = x + a * d;
        if d.abs() < tiny {
            d = tiny;
        }
        c = x + a / c;
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
    (-x * x).exp() / std::f64::consts::PI.sqrt() / f
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn u_matches_the_tortoise_and_hare_worked_example() {
        // Worked example in the Wikipedia article "Mann-Whitney U test" (Illustration of calculation
        // methods): finishing order T H H H H H T T T T T H gives U_T = 11 and U_H = 25.
        // Encode "beats" as a larger score: the first home gets 12, the last 1.
        let order = "THHHHHTTTTTH";
        let (mut t, mut h) = (Vec::new(), Vec::new());
        for (i, c) in order.chars().enumerate() {
            let score = (12 - i) as f64;
            if c == 'T' {
                t.push(score)
            } else {
                h.push(score)
            }
        }
        assert_eq!(u_statistic(&t, &h), 11.0);
        assert_eq!(u_statistic(&h, &t), 25.0);
        // The same article: U = 11 is not significant at the 5% level (critical value 5 for 6 v 6).
        let r = mann_whitney(&t, &h).unwrap();
        assert_eq!(r.method, PValueMethod::Exact);
        assert!(r.p_value > 0.05);
    }

    #[test]
    fn exact_p_values_reproduce_published_critical_values() {
        // Standard two-sided 5% critical values of U (tables after Mann & Whitney 1947, e.g. in
        // Siegel & Castellan, "Nonparametric Statistics for the Behavioral Sciences", 1988, Table J;
        // values quoted from memory): n = m = 5 -> 2, n = m = 6 -> 5, n = m = 8 -> 13,
        // n = m = 10 -> 23. U <= critical is significant, critical + 1 is not.
        for (n, crit) in [(5usize, 2usize), (6, 5), (8, 13), (10, 23)] {
            assert!(exact_p_two_sided(crit, n, n) <= 0.05, "n={n} U={crit}");
            assert!(
                exact_p_two_sided(crit + 1, n, n) > 0.05,
                "n={n} U={}",
                crit + 1
            );
        }
        // Gaussian binomial [4 choose 2]_q = 1 + q + 2q^2 + q^3 + q^4 (the U counts for n = m = 2;
        // Andrews, "The Theory of Partitions", 1976, Thm 3.1).
        assert_eq!(u_counts(2, 2), vec![1.0, 1.0, 2.0, 1.0, 1.0]);
        // Total arrangements C(n+m, n): C(20, 10) = 184756.
        assert_eq!(u_counts(10, 10).iter().sum::<f64>(), 184756.0);
    }

    #[test]
    fn normal_approximation_matches_statrs() {
        // Reference crate: statrs 0.18 (statrs::distribution::Normal CDF, statrs::function::erf).
        use statrs::distribution::{ContinuousCDF, Normal};
        let std_normal = Normal::new(0.0, 1.0).unwrap();
        // statrs' Normal::cdf and erfc carry up to ~1e-10 relative error (at z = -3.3 its CDF
        // gives 4.834241424235e-4 where the C library's erfc gives 4.834241423837776e-4), so statrs
        // is compared at 1e-9 ...
        for &z in &[
            -6.0, -3.3, -2.0, -0.7, 0.0, 0.4, 1.0, 1.959964, 2.5, 3.0, 4.2, 7.5,
        ] {
            assert_relative_eq!(normal_cdf(z), std_normal.cdf(z), max_relative = 1e-9);
            assert_relative_eq!(erfc(z), statrs::function::erf::erfc(z), max_relative = 1e-9);
        }
        // ... and the C library (glibc) erfc, printed with Python 3.11 `repr(math.erfc(z))`, at 1e-14.
        let glibc = [
            (-3.3, 1.9999969422902035),
            (-0.7, 1.6778011938374184),
            (0.4, 0.5716076449533315),
            (1.0, 0.15729920705028513),
            (1.959964, 0.005574596306381993),
            (2.5, 0.0004069520174449589),
            (3.0, 2.2090496998585438e-05),
            (4.2, 2.8554941795921843e-09),
            (7.5, 2.776649386030569e-26),
        ];
        for (z, want) in glibc {
            assert_relative_eq!(erfc(z), want, max_relative = 1e-14);
        }
        // With ties the test uses the tie-corrected normal approximation (Lehmann 1975). Recompute
        // z by hand for this sample and compare the p-value with statrs' normal tail.
        let x = [1.0, 2.0, 2.0, 3.0, 5.0, 5.0, 7.0];
        let y = [2.0, 3.0, 4.0, 5.0, 6.0, 8.0, 8.0, 9.0];
        let r = mann_whitney(&x, &y).unwrap();
        assert_eq!(r.method, PValueMethod::Normal);
        // Pairs x > y: 1->0, 2->0 (+0.5 tie) twice, 3->1 (+0.5), 5->3 (+0.5) twice, 7->5
        // U = 0 + 0.5 + 0.5 + 1.5 + 3.5 + 3.5 + 5 = 14.5
        assert_eq!(r.u, 14.5);
        // ties among all 15 values: 2 (x3), 3 (x2), 5 (x3), 8 (x2) -> sum t^3-t = 24+6+24+6 = 60
        let var: f64 = 56.0 / 12.0 * (16.0 - 60.0 / (15.0 * 14.0));
        let z = ((14.5f64 - 28.0).abs() - 0.5) / var.sqrt();
        assert_relative_eq!(
            r.p_value,
            2.0 * (1.0 - std_normal.cdf(z)),
            max_relative = 1e-10
        );
    }

    #[test]
    fn normal_quantile_inverts_the_cdf() {
        // Reference crate: statrs 0.18 (Normal::inverse_cdf); the two textbook values
        // z(0.975) = 1.959964 and z(0.8) = 0.841621 are in every normal table (e.g. Abramowitz &
        // Stegun 1964, Table 26.5).
        use statrs::distribution::{ContinuousCDF, Normal};
        let std_normal = Normal::new(0.0, 1.0).unwrap();
        for p in [0.001, 0.025, 0.2, 0.5, 0.8, 0.975, 0.995] {
            assert_relative_eq!(
                normal_quantile(p),
                std_normal.inverse_cdf(p),
                epsilon = 1e-8
            );
        }
        assert_relative_eq!(normal_quantile(0.975), 1.959964, epsilon = 1e-6);
        assert_relative_eq!(normal_quantile(0.8), 0.841621, epsilon = 1e-6);
        assert!(normal_quantile(1.0).is_nan());
    }

    #[test]
    fn probability_of_improvement_counts_pairs() {
        // Agarwal et al. 2021, Sec. 4.3: P(X > Y) = 1/(nm) sum_i sum_j S(x_i, y_j), S = 1, 1/2, 0.
        // x = [1, 3], y = [2, 3]: pairs (1,2)=0 (1,3)=0 (3,2)=1 (3,3)=1/2 -> 1.5/4 = 0.375.
        assert_relative_eq!(probability_of_improvement(&[1.0, 3.0], &[2.0, 3.0]), 0.375);
        assert!(probability_of_improvement(&[], &[1.0]).is_nan());
    }
}
