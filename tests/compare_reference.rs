//! The tests and adjustments used to compare conditions, against scipy.stats and
//! statsmodels (values quoted in the issue, computed with scipy 1.11+ and statsmodels).

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use ringline::study::inference::{
    adjust, mann_whitney_u, wilcoxon_signed_rank, Adjustment, PMethod, TestOutcome,
};

fn computed(t: TestOutcome) -> (f64, f64, PMethod) {
    match t {
        TestOutcome::Computed {
            statistic,
            p,
            method,
        } => (statistic, p, method),
        other => panic!("{other:?}"),
    }
}

#[test]
fn wilcoxon_matches_scipy_exactly() {
    // scipy.stats.wilcoxon(d): statistic 24, exact two-sided p 0.041259765625.
    let d = [
        6.0, 8.0, 14.0, 16.0, 23.0, 24.0, 28.0, 29.0, 41.0, -48.0, 49.0, 56.0, 60.0, -67.0, 75.0,
    ];
    let (t, p, method) = computed(wilcoxon_signed_rank(&d));
    assert_eq!(t, 24.0);
    assert_eq!(p, 0.041259765625);
    assert_eq!(method, PMethod::Exact);
}

#[test]
fn mann_whitney_matches_scipy_exactly() {
    // scipy.stats.mannwhitneyu([19, 22, 16, 29, 24], [20, 11, 17, 12]): U 17, exact p
    // 0.1111 (= 14 / 126).
    let (u, p, method) = computed(mann_whitney_u(
        &[19.0, 22.0, 16.0, 29.0, 24.0],
        &[20.0, 11.0, 17.0, 12.0],
    ));
    assert_eq!(u, 17.0);
    assert!((p - 14.0 / 126.0).abs() < 1e-15, "{p}");
    assert_eq!(method, PMethod::Exact);
}

#[test]
fn holm_and_benjamini_hochberg_match_statsmodels() {
    // statsmodels.stats.multitest.multipletests(p, method="holm" / "fdr_bh").
    let p = [0.01, 0.04, 0.03, 0.005];
    let holm = adjust(&p, Adjustment::Holm);
    let bh = adjust(&p, Adjustment::BenjaminiHochberg);
    for (got, want) in holm.iter().zip([0.03, 0.06, 0.06, 0.02]) {
        assert!((got - want).abs() < 1e-12, "Holm {holm:?}");
    }
    for (got, want) in bh.iter().zip([0.02, 0.04, 0.04, 0.02]) {
        assert!((got - want).abs() < 1e-12, "BH {bh:?}");
    }
}

#[test]
fn all_equal_data_are_reported_as_such() {
    assert!(matches!(
        wilcoxon_signed_rank(&[0.0, 0.0, 0.0]),
        TestOutcome::Degenerate { .. }
    ));
    assert!(matches!(
        mann_whitney_u(&[2.0, 2.0], &[2.0, 2.0, 2.0]),
        TestOutcome::Degenerate { .. }
    ));
}

/// The fixture made by scripts/reference/make_fixtures.py with scipy and statsmodels.
fn fixture() -> serde_json::Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../tests/fixtures/compare_reference.json"
    ))
    .unwrap();
    serde_json::from_str(&text).unwrap()
}

fn numbers(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn close(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= 1e-9 * want.abs().max(1e-300),
        "{what}: {got} against scipy's {want}"
    );
}

#[test]
fn tests_match_the_scipy_fixture_with_ties_zeros_and_large_samples() {
    let f = fixture();
    for case in f["wilcoxon"].as_array().unwrap() {
        let d = numbers(&case["d"]);
        let (t, p, _) = computed(wilcoxon_signed_rank(&d));
        close(t, case["statistic"].as_f64().unwrap(), "Wilcoxon statistic");
        close(
            p,
            case["p"].as_f64().unwrap(),
            &format!("Wilcoxon p (n {})", d.len()),
        );
    }
    for case in f["mannwhitneyu"].as_array().unwrap() {
        let (x, y) = (numbers(&case["x"]), numbers(&case["y"]));
        let (u, p, _) = computed(mann_whitney_u(&x, &y));
        close(u, case["statistic"].as_f64().unwrap(), "U");
        close(
            p,
            case["p"].as_f64().unwrap(),
            &format!("Mann-Whitney p ({} and {})", x.len(), y.len()),
        );
    }
    for case in f["multipletests"].as_array().unwrap() {
        let p = numbers(&case["p"]);
        for (how, key) in [
            (Adjustment::Holm, "holm"),
            (Adjustment::BenjaminiHochberg, "fdr_bh"),
        ] {
            for (got, want) in adjust(&p, how).iter().zip(numbers(&case[key])) {
                close(*got, want, key);
            }
        }
    }
}

#[test]
fn shift_intervals_cut_where_the_exact_tables_say() {
    use ringline::study::inference::{shift_paired, shift_two_sample};
    // Six paired differences at 95%: P(T = 0) = 1/64 <= 0.025 < P(T <= 1) = 2/64, so the
    // interval runs from the smallest to the largest Walsh average, with coverage 62/64
    // (Hollander & Wolfe 1999, the signed-rank table; from memory).
    let d = [1.5, -0.5, 2.0, 3.0, 0.25, 4.0];
    let s = shift_paired(&d, 0.95).unwrap();
    assert_eq!(s.interval, Some([-0.5, 4.0]));
    assert_eq!(s.coverage, Some(62.0 / 64.0));
    // Median of the 21 Walsh averages (numpy.median of them): the 11th smallest, 1.75.
    assert_eq!(s.estimate, 1.75);
    // Five against five at 95%: P(U <= 2) = 4/252 <= 0.025 < P(U <= 3) = 7/252, so the third
    // smallest and third largest of the 25 differences, coverage 1 - 8/252 = 96.8%.
    let x = [10.0, 12.0, 15.0, 11.0, 14.0];
    let y = [8.0, 9.5, 7.0, 10.5, 9.0];
    let s = shift_two_sample(&x, &y, 0.95).unwrap();
    let mut diffs: Vec<f64> = x
        .iter()
        .flat_map(|a| y.iter().map(move |b| a - b))
        .collect();
    diffs.sort_by(f64::total_cmp);
    assert_eq!(s.interval, Some([diffs[2], diffs[22]]));
    assert_eq!(s.estimate, diffs[12]);
    assert!((s.coverage.unwrap() - (1.0 - 8.0 / 252.0)).abs() < 1e-15);
    // Too few pairs for any 95% interval.
    assert_eq!(shift_paired(&[1.0, 2.0, 3.0], 0.95).unwrap().interval, None);
}

#[test]
fn shift_intervals_hold_the_true_shift_as_often_as_they_claim() {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal, StudentT};
    use ringline::study::inference::{shift_paired, shift_two_sample};
    // Ground truth by simulation: a true shift of 1 between normal samples (two-sample,
    // exact and normal-approximation sizes) and in heavy-tailed paired differences
    // (Student t, 3 df). Each interval claims at least 95%.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    let normal = Normal::new(0.0, 1.0).unwrap();
    let heavy = StudentT::new(3.0).unwrap();
    let trials = 2000;
    for (n1, n2) in [(6, 7), (15, 20)] {
        let mut held = 0;
        for _ in 0..trials {
            let x: Vec<f64> = (0..n1).map(|_| 1.0 + normal.sample(&mut rng)).collect();
            let y: Vec<f64> = (0..n2).map(|_| normal.sample(&mut rng)).collect();
            let [lo, hi] = shift_two_sample(&x, &y, 0.95).unwrap().interval.unwrap();
            held += usize::from(lo <= 1.0 && 1.0 <= hi);
        }
        let coverage = held as f64 / trials as f64;
        eprintln!("two-sample {n1} and {n2}: coverage {coverage:.3}");
        // Binomial SD at 0.95 over 2000 trials is 0.005: 0.94 is two SDs under the claim.
        assert!((0.94..=0.99).contains(&coverage), "{coverage}");
    }
    for n in [10, 60] {
        let mut held = 0;
        for _ in 0..trials {
            let d: Vec<f64> = (0..n).map(|_| 1.0 + heavy.sample(&mut rng)).collect();
            let [lo, hi] = shift_paired(&d, 0.95).unwrap().interval.unwrap();
            held += usize::from(lo <= 1.0 && 1.0 <= hi);
        }
        let coverage = held as f64 / trials as f64;
        eprintln!("paired {n}: coverage {coverage:.3}");
        assert!((0.94..=0.99).contains(&coverage), "{coverage}");
    }
}

#[test]
fn the_percentile_bootstrap_agrees_with_scipy_within_monte_carlo_error() {
    use ringline::study::bootstrap::percentile_difference;
    // scipy.stats.bootstrap((x, y), median(x) - median(y), method="percentile",
    // n_resamples=20000) against ours with 20,000 resamples of another seed: the ends of the
    // two intervals may differ only by Monte Carlo error. For a median the bootstrap
    // distribution is lumpy (it takes the values of order statistics), so an end can move
    // by one lump; a quarter of the bootstrap SE covers that (common practice, no source).
    let f = fixture();
    for case in f["bootstrap_median_difference"].as_array().unwrap() {
        let (x, y) = (numbers(&case["x"]), numbers(&case["y"]));
        let [lo, hi] =
            percentile_difference(&x, &y, ringline::stats::median, 0.95, 20_000, 11).unwrap();
        let se = case["standard_error"].as_f64().unwrap();
        let (want_lo, want_hi) = (
            case["low"].as_f64().unwrap(),
            case["high"].as_f64().unwrap(),
        );
        eprintln!(
            "n {} and {}: ours {lo:.4} to {hi:.4}, scipy {want_lo:.4} to {want_hi:.4} (SE {se:.4})",
            x.len(),
            y.len()
        );
        assert!((lo - want_lo).abs() <= 0.25 * se && (hi - want_hi).abs() <= 0.25 * se);
    }
}

/// J of groups (pairs a < b with a in an earlier group, ties a half), by definition.
fn j_of(groups: &[Vec<f64>]) -> f64 {
    let mut j = 0.0;
    for i in 0..groups.len() {
        for k in i + 1..groups.len() {
            for &a in &groups[i] {
                for &b in &groups[k] {
                    j += if a < b {
                        1.0
                    } else if a == b {
                        0.5
                    } else {
                        0.0
                    };
                }
            }
        }
    }
    j
}

/// Every way of dealing the pooled values into groups of the given sizes (the permutation
/// null distribution), with J of each.
fn all_deals(values: &[f64], sizes: &[usize], out: &mut Vec<f64>, dealt: &mut Vec<Vec<f64>>) {
    if sizes.is_empty() {
        out.push(j_of(dealt));
        return;
    }
    let n = sizes[0];
    let idx: Vec<usize> = (0..values.len()).collect();
    fn choose(
        idx: &[usize],
        k: usize,
        start: usize,
        cur: &mut Vec<usize>,
        all: &mut Vec<Vec<usize>>,
    ) {
        if cur.len() == k {
            all.push(cur.clone());
            return;
        }
        for i in start..idx.len() {
            cur.push(idx[i]);
            choose(idx, k, i + 1, cur, all);
            cur.pop();
        }
    }
    let mut picks = Vec::new();
    choose(&idx, n, 0, &mut Vec::new(), &mut picks);
    for pick in picks {
        let group: Vec<f64> = pick.iter().map(|&i| values[i]).collect();
        let rest: Vec<f64> = (0..values.len())
            .filter(|i| !pick.contains(i))
            .map(|i| values[i])
            .collect();
        dealt.push(group);
        all_deals(&rest, &sizes[1..], out, dealt);
        dealt.pop();
    }
}

fn permutation_p(groups: &[Vec<f64>]) -> f64 {
    let values: Vec<f64> = groups.iter().flatten().copied().collect();
    let sizes: Vec<usize> = groups.iter().map(Vec::len).collect();
    let mut js = Vec::new();
    all_deals(&values, &sizes, &mut js, &mut Vec::new());
    let observed = j_of(groups);
    let below = js.iter().filter(|&&j| j <= observed + 1e-9).count() as f64;
    let above = js.iter().filter(|&&j| j >= observed - 1e-9).count() as f64;
    (2.0 * below.min(above) / js.len() as f64).min(1.0)
}

#[test]
fn jonckheere_terpstra_matches_the_permutation_distribution() {
    use ringline::study::inference::jonckheere_terpstra;
    // Without ties the exact distribution must equal enumerating every deal of the values
    // into the groups; with ties the normal approximation must come close to it.
    for groups in [
        vec![vec![1.2, 3.4], vec![2.2, 5.1], vec![4.4, 6.0]],
        vec![
            vec![10.1, 12.5, 9.7],
            vec![13.0, 11.2],
            vec![15.5, 14.1, 12.9],
        ],
        vec![
            vec![3.0, 1.0, 2.5, 0.5],
            vec![2.0, 4.5, 3.5],
            vec![5.0, 6.5, 4.0, 5.5],
        ],
    ] {
        let (j, p, method) = computed(jonckheere_terpstra(&groups));
        assert_eq!(method, PMethod::Exact);
        assert_eq!(j, j_of(&groups));
        let want = permutation_p(&groups);
        assert!(
            (p - want).abs() < 1e-12,
            "exact {p} against enumeration {want}"
        );
    }
    let tied = vec![
        vec![1.0, 2.0, 2.0, 3.0],
        vec![2.0, 3.0, 3.0, 4.0],
        vec![3.0, 4.0, 5.0, 5.0],
    ];
    let (_, p, method) = computed(jonckheere_terpstra(&tied));
    assert_eq!(method, PMethod::Normal);
    let want = permutation_p(&tied);
    eprintln!("ties: normal {p:.4}, enumeration {want:.4}");
    // The normal approximation with 12 values: within 0.01 (common practice, no source).
    assert!(
        (p - want).abs() < 0.01,
        "normal {p} against enumeration {want}"
    );
}
