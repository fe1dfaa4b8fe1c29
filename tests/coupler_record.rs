//! `record --coupler` end to end: a two-channel capture made from the simulated matching
//! bench (two different detectors behind a coupler of finite directivity), then a level
//! held on each arm for every edge case, replayed through the real binary; the rows' match
//! against the simulator's truth and against the standard relations.

mod common;

use std::path::Path;

use common::{bin, column, rows, scratch, succeeded};
use dbtrail::coupler::{load_coupler, CouplerCalibration};
use dbtrail::decode::encode_ascii;
use dbtrail::sim::matching::{MatchBench, MATCH_HZ};
use dbtrail::units::dbm_to_watts;

const RATE_HZ: f64 = 2000.0;
const SET_UP: &str = "profiles/demo-coupler.toml";
/// Seconds of the bench: a turn of the capacitor and more, the dip included.
const BENCH_S: usize = 60;
/// Seconds each held level lasts: two half-second rows.
const HELD_S: usize = 1;

/// A level held on each arm: forward and reflected power at the reference plane, dBm, or a
/// raw code (the ADC's top for a clipped arm, zero for an arm with nothing on it).
#[derive(Clone, Copy)]
enum Held {
    Dbm(f64),
    Code(u32),
}

/// The held segments after the bench, with the `match` cell each must give. The demo
/// set-up's forward arm reads +13.4 to +55.4 dBm and its reflected arm −40.1 to +39.9 dBm
/// at 146 MHz (`dbtrail check --coupler`); its directivity is 26 dB; its SWR limit 2.5.
const HELD: [(Held, Held, &str); 8] = [
    (Held::Dbm(40.0), Held::Dbm(25.0), ""),
    (Held::Dbm(40.0), Held::Dbm(10.0), "below-directivity"),
    (Held::Dbm(50.0), Held::Code(0), "rl-at-least"),
    (Held::Dbm(50.0), Held::Code(4095), "rl-at-most"),
    (Held::Code(4095), Held::Dbm(25.0), "rl-at-least"),
    (Held::Code(0), Held::Dbm(25.0), "no-forward"),
    (Held::Dbm(30.0), Held::Dbm(31.0), "reversed"),
    (Held::Dbm(40.0), Held::Dbm(35.0), "over-swr-limit"),
];

struct Capture {
    /// The true return loss of each half-second of the bench, from the interval's mean
    /// true powers (the ratio of the averages).
    bench_rl: Vec<f64>,
}

fn write_capture(path: &Path) -> Capture {
    let coupler = load_coupler(Path::new(SET_UP)).unwrap();
    let cal = CouplerCalibration::new(&coupler, MATCH_HZ);
    let mut bench = MatchBench::new(&coupler, RATE_HZ, 5);
    let (fwd, refl) = (
        coupler.setup.forward.channel,
        coupler.setup.reflected.channel,
    );
    let mut bytes = Vec::new();
    let mut bench_rl = Vec::new();
    let half = (RATE_HZ / 2.0) as usize;
    for _ in 0..BENCH_S * 2 {
        let mut counts = Vec::new();
        let t0 = bench.fill(half, &mut counts);
        let (mut pf, mut pr) = (0.0, 0.0);
        for (i, frame) in counts.chunks(bench.channels()).enumerate() {
            let truth = bench.truth(t0 + i as f64 / RATE_HZ);
            pf += dbm_to_watts(truth.forward_dbm);
            pr += dbm_to_watts(truth.reflected_dbm);
            encode_ascii(&[frame[fwd], frame[refl]], &mut bytes);
        }
        bench_rl.push(10.0 * (pf / pr).log10());
    }
    let code = |held: Held, cal: &dbtrail::calibration::Calibration| match held {
        Held::Dbm(dbm) => cal.counts_for(dbm).round() as u32,
        Held::Code(code) => code,
    };
    for (forward, reflected, _) in HELD {
        let frame = [code(forward, &cal.forward), code(reflected, &cal.reflected)];
        for _ in 0..HELD_S * RATE_HZ as usize {
            encode_ascii(&frame, &mut bytes);
        }
    }
    std::fs::write(path, bytes).unwrap();
    Capture { bench_rl }
}

fn record(capture: &Path, out: &Path, every: &str) {
    succeeded([
        "record",
        "--replay",
        capture.to_str().unwrap(),
        "--coupler",
        SET_UP,
        "--freq",
        "146MHz",
        "--rate",
        "2000",
        "--every",
        every,
        "--out",
        out.to_str().unwrap(),
    ]);
}

fn number(cell: &str) -> Option<f64> {
    cell.parse().ok()
}

// Source: the GUM's coverage at k = 2 (about 95 %, JCGM 100:2008 6.2) for the budgets'
// part and the directivity relation for the leakage's (a bound, common practice): over the
// bench's 120 half-second rows the true return loss lies within the stated directivity
// range widened by the stated uncertainty in at least 95 % of the rows given as values.
// The held rows: SWR from the standard relations (Pozar, Microwave Engineering, the
// transmission-line chapter; from memory) at 15 dB return loss, |Γ| = 10^(−15/20) =
// 0.17783, SWR 1.4326, mismatch loss 0.1395 dB, net power 10 W − 0.316 W = 9.684 W; and
// each edge case its own mark.
#[test]
fn a_coupler_run_replayed_holds_the_truth_and_marks_every_edge_case() {
    let dir = scratch("coupler-record");
    let capture = dir.path().join("bench.txt");
    let truth = write_capture(&capture);
    let log = dir.path().join("match.csv");
    record(&capture, &log, "0.5s");
    let (header, rows) = rows(&log);
    let col = |name: &str| column(&header, name);
    let (u, low, high, mark) = (
        col("u_return_loss_db"),
        col("return_loss_low_db"),
        col("return_loss_high_db"),
        col("match"),
    );
    assert_eq!(rows.len(), BENCH_S * 2 + HELD.len() * HELD_S * 2);

    let (mut values, mut covered, mut unresolved, mut over_limit) = (0, 0, 0, 0);
    for (row, true_rl) in rows.iter().zip(&truth.bench_rl) {
        let (low, high) = (number(&row[low]).unwrap(), number(&row[high]).unwrap());
        // The bench starts far from a match, past the set-up's SWR limit of 2.5.
        let state = match row[mark].strip_suffix("over-swr-limit") {
            Some(state) => {
                over_limit += 1;
                assert!(number(&row[col("swr")]).unwrap() > 2.5, "{row:?}");
                state.trim_end_matches('|')
            }
            None => row[mark].as_str(),
        };
        match state {
            "" => {
                values += 1;
                let u = number(&row[u]).expect("a value carries its uncertainty");
                covered += usize::from(*true_rl >= low - u && *true_rl <= high + u);
            }
            "below-directivity" => {
                unresolved += 1;
                assert!(high.is_infinite(), "{row:?}");
                assert!(*true_rl >= low - 0.5, "{true_rl} below the floor {low}");
            }
            other => panic!("{other} on the bench, which stays within both spans: {row:?}"),
        }
    }
    assert!(
        covered as f64 >= 0.95 * values as f64,
        "{covered} of {values}"
    );
    assert!(values >= 60 && unresolved > 0, "{values} {unresolved}");
    assert!(over_limit > 0 && over_limit < values, "{over_limit}");

    let held = &rows[BENCH_S * 2..];
    for (i, (_, _, expected)) in HELD.iter().enumerate() {
        for row in &held[i * HELD_S * 2..(i + 1) * HELD_S * 2] {
            assert_eq!(row[mark], *expected, "held level {i}: {row:?}");
        }
    }
    let value = &held[0];
    let close = |name: &str, expected: f64, tol: f64| {
        let got = number(&value[col(name)]).unwrap();
        assert!((got - expected).abs() <= tol, "{name}: {got} vs {expected}");
    };
    // The held codes are the nearest to the levels asked: a count is worth under
    // 0.02 dB on either arm there.
    close("return_loss_db", 15.0, 0.05);
    close("gamma", 0.17783, 0.0015);
    close("swr", 1.4326, 0.004);
    close("mismatch_loss_db", 0.1395, 0.002);
    close("net_w", 9.684, 0.05);
    // A bound has no uncertainty, a ratio with no forward no figures at all.
    let no_forward = &held[5 * HELD_S * 2];
    for name in [
        "gamma",
        "swr",
        "return_loss_db",
        "net_w",
        "u_return_loss_db",
    ] {
        assert_eq!(no_forward[col(name)], "", "{name} with no forward");
    }
    let at_least = &held[2 * HELD_S * 2];
    assert_eq!(at_least[col("u_return_loss_db")], "");
    assert_eq!(at_least[col("ref_bound")], "at-most");
    assert!(number(&at_least[col("return_loss_db")]).unwrap() > 85.0);
}

// Source: the definition of return loss, 10·log10(Pf/Pr) (common practice), of the mean
// powers over the valid rows: worked out here from the rows' own powers and sample counts;
// and the held rows' marks counted as the capture holds them (two rows each).
#[test]
fn the_report_of_a_coupler_log_gives_the_match_of_the_mean_powers() {
    let dir = scratch("coupler-report");
    let capture = dir.path().join("bench.txt");
    write_capture(&capture);
    let log = dir.path().join("match.csv");
    record(&capture, &log, "0.5s");
    let (header, rows) = rows(&log);
    let (mut pf, mut pr) = (0.0, 0.0);
    for row in rows.iter().filter(|r| {
        r[column(&header, "match")].is_empty() || r[column(&header, "match")] == "over-swr-limit"
    }) {
        let n: f64 = row[column(&header, "fwd_samples")].parse().unwrap();
        pf += n * number(&row[column(&header, "fwd_w")]).unwrap();
        pr += n * number(&row[column(&header, "ref_w")]).unwrap();
    }
    let expected = 10.0 * (pf / pr).log10();
    let out = succeeded(["report", log.to_str().unwrap(), "--json"]);
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let summary = &json["match"];
    let mean = summary["mean_return_loss_db"].as_f64().unwrap();
    // The rows' watts are written to 7 digits.
    assert!((mean - expected).abs() < 1e-4, "{mean} vs {expected}");
    let states = &summary["states"];
    for mark in ["rl-at-least", "rl-at-most", "no-forward", "reversed"] {
        let held = HELD.iter().filter(|h| h.2 == mark).count() as u64;
        assert_eq!(
            states[mark].as_u64(),
            Some(held * 2 * HELD_S as u64),
            "{mark}"
        );
    }
    let text = succeeded(["report", log.to_str().unwrap()]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("Soak report:") && text.contains("the forward arm"),
        "{text}"
    );
    assert!(
        text.contains(&format!("mean match    {mean:.2} dB")),
        "{text}"
    );
}

// A per-sample coupler log holds the same columns for each sample, and a stream with one
// channel is refused as bad input naming the set-up's channels.
#[test]
fn per_sample_coupler_rows_and_a_one_channel_stream_refused() {
    let dir = scratch("coupler-samples");
    let capture = dir.path().join("bench.txt");
    write_capture(&capture);
    let log = dir.path().join("samples.csv");
    record(&capture, &log, "0");
    let (header, rows) = rows(&log);
    assert_eq!(
        rows.len(),
        (BENCH_S + HELD.len() * HELD_S) * RATE_HZ as usize
    );
    for name in [
        "fwd_counts",
        "fwd_dbm",
        "ref_dbm",
        "ref_u_db",
        "swr",
        "match",
    ] {
        column(&header, name);
    }
    let last = rows.last().unwrap();
    assert_eq!(last[column(&header, "match")], "over-swr-limit");

    let single = dir.path().join("one.txt");
    std::fs::write(&single, "1000\n".repeat(100)).unwrap();
    let out = bin()
        .args([
            "record",
            "--replay",
            single.to_str().unwrap(),
            "--coupler",
            SET_UP,
        ])
        .args(["--out", dir.path().join("x.csv").to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("reads channel 2 but the stream sends 1 channel"),
        "{stderr}"
    );
}
