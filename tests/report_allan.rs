//! The report's Allan deviation, taken over the log's own time grid: rows missing from a
//! gap are missing from the sum, never closed up as if they were neighbours.

use dbtrail::report::{analyse, read_log, ReportOptions};

/// A log of 1 s rows of a steady ramp of `per_s` dB a second, with the rows of `gap`
/// (start, end seconds) left out.
fn ramp_log(rows: usize, per_s: f64, gap: (usize, usize)) -> String {
    let mut text = String::from(
        "# dbtrail 0.1.0 record\n# profile: synthetic; sha256 0\n# source: test\n\
         # rows: every 1s; power averaged over watts\n\
         time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags\n",
    );
    for t in (0..rows).filter(|t| *t < gap.0 || *t >= gap.1) {
        let m = -10.0 + per_s * t as f64;
        let w = 10f64.powf(m / 10.0) * 1e-3;
        text.push_str(&format!("{t},x,10,{m},{m},{m},{w},\n"));
    }
    text
}

// Source: worked by hand from the definition of the overlapping Allan variance of
// frequency-type data (NIST SP 1065, from memory): for y_i = a + D·i·τ0 every difference
// of neighbouring m-averages is D·m·τ0, so σ(τ) = D·τ/√2 at every τ, whatever positions
// are left out. The positions left out by a gap of g rows are the 2m + g − 1 whose 2m
// values touch it, so the pairs counted are N − 2m + 1 − (2m + g − 1) on a grid of N.
#[test]
fn a_ramp_across_a_gap_keeps_its_allan_deviation_and_loses_only_the_pairs_the_gap_touches() {
    let per_s = 1e-4;
    let text = ramp_log(400, per_s, (150, 160));
    let log = read_log(text.as_bytes(), "ramp.csv", 1).unwrap();
    let report = analyse(&log.runs[0], "ramp.csv", &ReportOptions::default()).unwrap();
    assert!(report.allan.len() >= 5, "{:?}", report.allan);
    for point in &report.allan {
        let want = per_s * point.tau_s / 2f64.sqrt();
        assert!(
            ((point.adev_db - want) / want).abs() < 1e-6,
            "τ {}: {} against {want}",
            point.tau_s,
            point.adev_db
        );
        let m = point.tau_s as usize;
        assert_eq!(
            point.pairs,
            400 - 2 * m + 1 - (2 * m + 10 - 1),
            "τ {}",
            point.tau_s
        );
    }
}
