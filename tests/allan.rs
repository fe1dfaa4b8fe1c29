//! The overlapping Allan deviation of interval means: against allantools (through the
//! committed fixture tests/reference/allan.json, written by
//! tests/reference/make_allan_fixtures.py), the NIST SP 1065 nine-point data worked by
//! hand, the trade's shapes (white noise, drift, a constant) and the definition itself
//! summed term by term, and the rules in docs/allan.md for τ, missing rows and bad input.

use dbtrail::report::allan::{on_time_grid, overlapping_adev, overlapping_adev_at, AllanPoint};
use proptest::prelude::*;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    cases: Vec<Case>,
}

#[derive(Deserialize)]
struct Case {
    name: String,
    tau0_s: f64,
    values: Vec<Option<f64>>,
    tau_s: Vec<f64>,
    adev_db: Vec<f64>,
    pairs: Vec<usize>,
}

impl Case {
    /// The series, a missing value (null in JSON) as NaN.
    fn series(&self) -> Vec<f64> {
        self.values.iter().map(|v| v.unwrap_or(f64::NAN)).collect()
    }
}

fn fixture() -> Vec<Case> {
    let text = std::fs::read_to_string("tests/reference/allan.json").unwrap();
    serde_json::from_str::<Fixture>(&text).unwrap().cases
}

fn case(name: &str) -> Case {
    fixture().into_iter().find(|c| c.name == name).unwrap()
}

fn relative(got: f64, want: f64) -> f64 {
    ((got - want) / want).abs()
}

/// The points' averaging times.
fn taus(points: &[AllanPoint]) -> Vec<f64> {
    points.iter().map(|p| p.tau_s).collect()
}

/// Source: allantools 2024.06 `oadev(y, rate=1/tau0, data_type="freq", taus=...)`,
/// tests/reference/allan.json (white noise, a random walk, a ramp, a ramp with noise, the
/// NIST nine-point data; and white noise with gaps, allantools over each gap-free stretch
/// pooled by pair count, as the generator's docstring explains).
#[test]
fn matches_allantools_on_every_fixture_case() {
    let cases = fixture();
    assert_eq!(cases.len(), 6);
    for case in &cases {
        let points = overlapping_adev(&case.series(), case.tau0_s);
        assert_eq!(taus(&points), case.tau_s, "{}: averaging times", case.name);
        for (point, (&want, &pairs)) in points.iter().zip(case.adev_db.iter().zip(&case.pairs)) {
            assert!(
                relative(point.adev_db, want) < 1e-12,
                "{} at τ = {} s: {} against allantools {}",
                case.name,
                point.tau_s,
                point.adev_db,
                want
            );
            assert_eq!(point.pairs, pairs, "{} at τ = {} s", case.name, point.tau_s);
        }
    }
}

/// Source: NIST SP 1065 (Riley, Handbook of Frequency Stability Analysis, 2008), its
/// nine-point test data 892, 809, 823, 798, 671, 644, 883, 903, 677 (τ0 = 1), and its
/// published overlapping Allan deviations 91.22945 (τ = 1) and 85.95287 (τ = 2), as quoted
/// in allantools' own test suite (its nbs14 test, which cites the handbook's table); the
/// handbook itself was not re-read here. τ = 1 also worked by hand: the first differences
/// −83, 14, −25, −127, −27, 239, 20, −226 have squares summing to 133 165, so
/// σ²(1) = 133 165 / (2·8) = 8322.8125 and σ(1) = 91.229450.
#[test]
fn nist_nine_point_data_by_hand() {
    let nine = case("nist_nine_point").series();
    let points = overlapping_adev(&nine, 1.0);
    assert_eq!(taus(&points), [1.0, 2.0], "N = 9 allows m = 1, 2 (N ≥ 4m)");
    assert!((points[0].adev_db - 8322.8125f64.sqrt()).abs() < 1e-12);
    assert!((points[0].adev_db - 91.22945).abs() < 5e-6);
    assert_eq!(points[0].pairs, 8);
    assert!((points[1].adev_db - 85.95287).abs() < 5e-6);
    assert_eq!(points[1].pairs, 6);
}

/// The 1000-point test data of NIST SP 1065: n₀ = 1 234 567 890, nᵢ₊₁ = 16 807·nᵢ mod
/// 2 147 483 647, values nᵢ / 2 147 483 647 for i = 0 … 999 (the generator from memory;
/// that it is right is shown by the published figures it reproduces, below and in
/// allantools).
fn nist_thousand_point() -> Vec<f64> {
    const MODULUS: u64 = 2_147_483_647;
    std::iter::successors(Some(1_234_567_890u64), |n| Some(16_807 * n % MODULUS))
        .take(1000)
        .map(|n| n as f64 / MODULUS as f64)
        .collect()
}

/// Source: NIST SP 1065, the published overlapping Allan deviations of its 1000-point test
/// data, 2.922319e−01 (τ = 1), 9.159953e−02 (τ = 10), 3.241343e−02 (τ = 100), as quoted in
/// allantools' test suite (its nbs14 test); allantools 2024.06 gives 0.29223188,
/// 0.09159953, 0.03241343 on the same data (run while writing this test). τ = 1 is also
/// the first point of the octave list.
#[test]
fn nist_thousand_point_data() {
    let data = nist_thousand_point();
    let published = [(1, 2.922319e-01), (10, 9.159953e-02), (100, 3.241343e-02)];
    for (m, want) in published {
        let point = overlapping_adev_at(&data, 1.0, m).unwrap();
        assert_eq!((point.tau_s, point.pairs), (m as f64, 1001 - 2 * m));
        assert!(
            relative(point.adev_db, want) < 2e-7,
            "τ = {m}: {} against {want}",
            point.adev_db
        );
    }
    assert_eq!(
        overlapping_adev(&data, 1.0)[0],
        overlapping_adev_at(&data, 1.0, 1).unwrap()
    );
}

/// Source: the rule in docs/allan.md: one averaging time gives what the octave list gives
/// there, and none past N ≥ 4m (1000 values: m = 250, not 251), for m = 0 or a bad τ0.
#[test]
fn one_averaging_time_follows_the_same_rules() {
    let data = nist_thousand_point();
    let octaves = overlapping_adev(&data, 2.0);
    assert_eq!(octaves.len(), 8, "m = 1 … 128");
    for (k, point) in octaves.iter().enumerate() {
        assert_eq!(Some(*point), overlapping_adev_at(&data, 2.0, 1 << k));
    }
    assert!(overlapping_adev_at(&data, 2.0, 250).is_some());
    assert!(overlapping_adev_at(&data, 2.0, 251).is_none());
    assert!(overlapping_adev_at(&data, 2.0, 0).is_none());
    assert!(overlapping_adev_at(&data, -2.0, 4).is_none());
    assert!(overlapping_adev_at(&data, 2.0, usize::MAX).is_none());
}

/// Source: worked by hand from the formula in docs/allan.md. y_i = a + D·i·τ0: each
/// y_{i+m} − y_i = D·m·τ0, the inner sum over m of them is D·m²·τ0, so
/// σ²(mτ0) = (D·m²·τ0)² / (2m²) = D²·(mτ0)²/2 and σ(τ) = D·τ/√2 exactly, whatever the
/// level a. A day of 1 s rows at −0.12 dB/h on −23.5 dBm; the mean taken out and the
/// compensated sums keep the last digits although the drift per row is 3.3e−5 dB.
#[test]
fn a_linear_drift_gives_slope_times_tau_over_root_two() {
    let slope_db_per_s = -0.12 / 3600.0;
    let day: Vec<f64> = (0..86_400)
        .map(|i| -23.5 + slope_db_per_s * i as f64)
        .collect();
    let points = overlapping_adev(&day, 1.0);
    assert_eq!(points.len(), 15, "m = 1 … 16 384: 86 400 ≥ 4m");
    for point in &points {
        let want = slope_db_per_s.abs() * point.tau_s / 2f64.sqrt();
        assert!(
            relative(point.adev_db, want) < 1e-10,
            "τ = {} s: {} against D·τ/√2 = {}",
            point.tau_s,
            point.adev_db,
            want
        );
    }
}

/// Source: the definition (every difference of a constant is 0) and the rule in
/// docs/allan.md (m = 1, 2, 4 … while N ≥ 4m: 100 values give m up to 16).
#[test]
fn a_constant_gives_zero_at_every_tau() {
    let points = overlapping_adev(&[-3.25; 100], 0.5);
    assert_eq!(taus(&points), [0.5, 1.0, 2.0, 4.0, 8.0]);
    assert!(points.iter().all(|p| p.adev_db == 0.0), "{points:?}");
}

/// Source: common practice (NIST SP 1065, from memory): for white noise of standard
/// deviation s the means of m values have deviation s/√m and so does the Allan deviation,
/// σ(τ) = s·√(τ0/τ), a slope of −1/2 on log-log axes. Monte-Carlo with a fixed seed:
/// 2^16 values of s = 0.01 dB; the overlapping estimate at m has about 3(N − 1)/(2m) − 2
/// degrees of freedom for this noise (SP 1065's white-noise formula, from memory), 94 at
/// m = 1024, a relative spread of about 1/√(2·94) ≈ 7 %, so each point is held to 25 %
/// and the fitted slope to ±0.05.
#[test]
fn white_noise_falls_as_one_over_root_tau() {
    let s = 0.01;
    let mut rng = rand_pcg::Pcg64::seed_from_u64(20261202);
    let noise = Normal::new(0.0, s).unwrap();
    let values: Vec<f64> = (0..1 << 16).map(|_| 8.0 + noise.sample(&mut rng)).collect();
    let points: Vec<AllanPoint> = overlapping_adev(&values, 1.0)
        .into_iter()
        .filter(|p| p.tau_s <= 1024.0)
        .collect();
    assert_eq!(points.len(), 11);
    for point in &points {
        let want = s / point.tau_s.sqrt();
        assert!(
            relative(point.adev_db, want) < 0.25,
            "τ = {}: {} against s/√τ = {}",
            point.tau_s,
            point.adev_db,
            want
        );
    }
    let slope = log_log_slope(&points);
    assert!((slope + 0.5).abs() < 0.05, "log-log slope {slope}");
}

/// Least-squares slope of ln σ against ln τ.
fn log_log_slope(points: &[AllanPoint]) -> f64 {
    let xy: Vec<(f64, f64)> = points
        .iter()
        .map(|p| (p.tau_s.ln(), p.adev_db.ln()))
        .collect();
    let n = xy.len() as f64;
    let (mx, my) = xy
        .iter()
        .fold((0.0, 0.0), |(a, b), (x, y)| (a + x / n, b + y / n));
    let sxy: f64 = xy.iter().map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xy.iter().map(|(x, _)| (x - mx).powi(2)).sum();
    sxy / sxx
}

/// The defining double sum, term by term over the complete positions only (the plain
/// reference for the prefix sums): O(N·m) per τ.
fn by_definition(values: &[f64], m: usize) -> (f64, usize) {
    let (mut squares, mut pairs) = (0.0, 0usize);
    for j in 0..=values.len() - 2 * m {
        if values[j..j + 2 * m].iter().any(|v| !v.is_finite()) {
            continue;
        }
        let inner: f64 = (j..j + m).map(|i| values[i + m] - values[i]).sum();
        squares += inner * inner;
        pairs += 1;
    }
    (
        (squares / (2.0 * (m * m) as f64 * pairs as f64)).sqrt(),
        pairs,
    )
}

proptest! {
    /// Source: the formula in docs/allan.md summed term by term, with missing values
    /// (NaN, ±inf) leaving out the positions that include them, and the τ rule there
    /// (at least 2m + 1 complete pairs).
    #[test]
    fn prefix_sums_match_the_definition(
        values in prop::collection::vec(
            prop_oneof![
                8 => -40.0f64..20.0,
                1 => Just(f64::NAN),
                1 => Just(f64::INFINITY),
            ],
            0..200,
        ),
        tau0 in 0.01f64..100.0,
    ) {
        let points = overlapping_adev(&values, tau0);
        let mut m = 1;
        for point in &points {
            let (want, pairs) = by_definition(&values, m);
            prop_assert_eq!(point.pairs, pairs);
            prop_assert!(pairs > 2 * m);
            prop_assert!((point.tau_s - m as f64 * tau0).abs() <= 1e-12 * point.tau_s);
            prop_assert!(
                (point.adev_db - want).abs() <= 1e-9 * want.max(1e-6),
                "m = {}: {} against {}", m, point.adev_db, want
            );
            m *= 2;
        }
        let next_has_room = 2 * m <= values.len() && by_definition(&values, m).1 > 2 * m;
        prop_assert!(!next_has_room, "stopped early at m = {}", m);
    }
}

/// Source: the rule in docs/allan.md: m = 1, 2, 4 … while N ≥ 4m, so 16 values reach m = 4
/// and 15 only m = 2; fewer than 4 values give no point.
#[test]
fn averaging_times_stop_where_four_m_exceeds_n() {
    assert_eq!(taus(&overlapping_adev(&ramp(16), 1.0)), [1.0, 2.0, 4.0]);
    assert_eq!(taus(&overlapping_adev(&ramp(15), 1.0)), [1.0, 2.0]);
    assert_eq!(taus(&overlapping_adev(&ramp(4), 3.0)), [3.0]);
    assert!(overlapping_adev(&ramp(3), 1.0).is_empty());
    assert!(overlapping_adev(&[], 1.0).is_empty());
}

fn ramp(n: usize) -> Vec<f64> {
    (0..n).map(|i| i as f64 * 0.1).collect()
}

/// Source: the rule in docs/allan.md: a τ0 that is not a positive number gives no point
/// rather than a meaningless τ.
#[test]
fn a_bad_spacing_gives_no_points() {
    assert_eq!(
        overlapping_adev(&ramp(64), 1.0).len(),
        5,
        "m = 1 … 16 at τ0 = 1 s"
    );
    for tau0 in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        assert!(overlapping_adev(&ramp(64), tau0).is_empty(), "τ0 = {tau0}");
    }
}

/// Source: the rule in docs/allan.md: a missing value leaves out the positions that
/// include it, so a series whose only missing values are at its ends gives what the
/// stretch between them gives (same averaging times, deviations and pair counts), and
/// one with nothing but missing values gives no point.
#[test]
fn missing_values_at_the_ends_are_left_out() {
    let inner = case("white").series();
    let mut padded = vec![f64::NAN; 3];
    padded.extend(&inner);
    padded.extend([f64::NAN, f64::NEG_INFINITY]);
    let (got, want) = (
        overlapping_adev(&padded, 10.0),
        overlapping_adev(&inner, 10.0),
    );
    assert_eq!(taus(&got), taus(&want));
    for (g, w) in got.iter().zip(&want) {
        assert_eq!(g.pairs, w.pairs);
        assert!(relative(g.adev_db, w.adev_db) < 1e-12);
    }
    assert!(overlapping_adev(&[f64::NAN; 50], 1.0).is_empty());
}

/// Source: the rule in docs/allan.md: each row goes to its nearest slot of step τ0 from
/// the first row, NaN where none fell.
#[test]
fn rows_with_a_gap_are_put_on_the_time_grid() {
    let times = [100.0, 110.0, 120.1, 149.9, 160.0];
    let grid = on_time_grid(&times, &[1.0, 2.0, 3.0, 4.0, 5.0], 10.0).unwrap();
    assert_eq!(grid.len(), 7);
    assert_eq!(&grid[..3], [1.0, 2.0, 3.0]);
    assert!(grid[3].is_nan() && grid[4].is_nan());
    assert_eq!(&grid[5..], [4.0, 5.0]);
}

/// Source: the rule in docs/allan.md: rows not on one grid of step τ0 (two in one slot,
/// out of order, a time that is not a number), mismatched lengths, a bad τ0 or a grid of
/// more than four slots a row give none.
#[test]
fn rows_off_the_time_grid_are_refused() {
    let v = [1.0, 2.0, 3.0];
    assert!(
        on_time_grid(&[0.0, 1.0, 1.2], &v, 1.0).is_none(),
        "two in one slot"
    );
    assert!(
        on_time_grid(&[0.0, 2.0, 1.0], &v, 1.0).is_none(),
        "out of order"
    );
    assert!(
        on_time_grid(&[0.0, f64::NAN, 2.0], &v, 1.0).is_none(),
        "NaN time"
    );
    assert!(
        on_time_grid(&[0.0, 1.0], &v, 1.0).is_none(),
        "lengths differ"
    );
    assert!(on_time_grid(&[0.0, 1.0, 2.0], &v, 0.0).is_none(), "τ0 of 0");
    assert!(
        on_time_grid(&[0.0, 1.0, 12.0], &v, 1.0).is_none(),
        "13 slots for 3 rows"
    );
    assert_eq!(on_time_grid(&[0.0, 1.0, 11.0], &v, 1.0).unwrap().len(), 12);
    assert_eq!(on_time_grid(&[], &[], 1.0), None);
}
