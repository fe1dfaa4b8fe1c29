//! `dbtrail sim --scenario match` end to end: the two-channel stream it writes, decoded by
//! the library's own decoder in both wire modes, read back through each arm's calibration,
//! and the options it refuses.

mod common;

use std::path::Path;

use common::*;
use dbtrail::coupler::{load_coupler, Coupler, CouplerCalibration};
use dbtrail::decode::{Decoder, FlatCounts, Format};
use dbtrail::sim::matching::{MatchBench, MATCH_HZ};
use dbtrail::units::dbm_to_watts;

const RATE_HZ: f64 = 1000.0;
const SECONDS: f64 = 2.0;

fn demo_coupler() -> Coupler {
    load_coupler(Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/profiles/demo-coupler.toml"
    )))
    .unwrap()
}

/// The samples `sim` writes with `extra` options, decoded as `format`.
fn simulated(format: &str, extra: &[&str]) -> FlatCounts {
    let rate = RATE_HZ.to_string();
    let seconds = SECONDS.to_string();
    let mut args = vec![
        "sim",
        "--scenario",
        "match",
        "--seconds",
        &seconds,
        "--rate",
        &rate,
        "--seed",
        "4",
        "--format",
        format,
    ];
    args.extend_from_slice(extra);
    let out = succeeded(&args);
    let mut decoder = Decoder::new(Format::from_name(format).unwrap());
    let mut samples = FlatCounts::default();
    decoder.feed(&out.stdout, &mut samples);
    decoder.finish(&mut samples);
    assert_eq!(
        decoder.stats().rejected(),
        0,
        "every line and frame is good"
    );
    samples
}

fn channel(samples: &FlatCounts, ch: usize) -> Vec<u32> {
    samples
        .counts
        .chunks_exact(samples.channels)
        .map(|s| s[ch])
        .collect()
}

#[test]
fn match_writes_two_channels_at_the_rate_in_both_modes_alike() {
    let ascii = simulated("ascii", &[]);
    assert_eq!(ascii.channels, 2);
    assert_eq!(ascii.len(), (SECONDS * RATE_HZ) as usize);
    let binary = simulated("binary", &[]);
    assert_eq!(binary.channels, 2);
    // The counts fit 16 bits (12-bit ADCs), so both modes carry the same numbers.
    assert_eq!(binary, ascii);
    let forward = channel(&ascii, 0);
    let reflected = channel(&ascii, 1);
    assert_ne!(forward, reflected, "two detectors, not one copied");
}

// Source: the directivity relation (a coupler's leakage Γd = 10^(−D/20) of the reflected
// wave adds to the forward arm's reading at an unknown phase, so the forward power reads
// off by 20·log10(1 ± |Γ|·Γd) dB; common practice). The simulator is its own truth here:
// `MatchBench::truth` gives the forward power it put at the reference plane. The forward
// arm's counts, calibrated with its own profile and coupling and averaged over watts a
// quarter second at a time, lie within that error of the truth's mean over the same
// samples, with 0.05 dB more for the ADC's noise and resolution (from the arms' 12-bit
// ADCs: a few counts of noise average down well below it).
#[test]
fn the_forward_arm_reads_the_forward_power_the_bench_put_in() {
    let coupler = demo_coupler();
    let calibration = CouplerCalibration::new(&coupler, MATCH_HZ);
    let leakage = calibration.leakage;
    let truth_bench = MatchBench::new(&coupler, RATE_HZ, 4);
    let samples = simulated("ascii", &[]);
    let forward = channel(&samples, coupler.setup.forward.channel);
    let window = (RATE_HZ / 4.0) as usize;
    for (w, counts) in forward.chunks_exact(window).enumerate() {
        let times = (0..window).map(|i| (w * window + i) as f64 / RATE_HZ);
        let (mut read_w, mut true_w, mut worst_gamma) = (0.0, 0.0, 0.0f64);
        for (&count, t) in counts.iter().zip(times) {
            read_w += dbm_to_watts(calibration.forward.reading(f64::from(count)).dbm);
            let truth = truth_bench.truth(t);
            true_w += dbm_to_watts(truth.forward_dbm);
            worst_gamma = worst_gamma.max(truth.gamma);
        }
        let error_db = 10.0 * (read_w / true_w).log10();
        let allowed = 20.0 * (1.0 + worst_gamma * leakage).log10() + 0.05;
        assert!(
            error_db.abs() < allowed,
            "window {w}: forward reads {error_db:+.3} dB from the truth, allowed ±{allowed:.3}"
        );
    }
}

#[test]
fn a_coupler_file_decides_which_channel_is_which() {
    let tmp = scratch("sim-coupler");
    let dir = tmp.path();
    let profiles = Path::new(env!("CARGO_MANIFEST_DIR")).join("profiles");
    for name in ["demo-coupler-forward.toml", "demo-coupler-reflected.toml"] {
        std::fs::copy(profiles.join(name), dir.join(name)).unwrap();
    }
    let setup = std::fs::read_to_string(profiles.join("demo-coupler.toml")).unwrap();
    let swapped = setup
        .replace("channel = 1", "channel = @")
        .replace("channel = 2", "channel = 1")
        .replace("channel = @", "channel = 2");
    assert_ne!(swapped, setup);
    let path = dir.join("swapped.toml");
    std::fs::write(&path, swapped).unwrap();
    let bundled = simulated("ascii", &[]);
    let from_file = simulated("ascii", &["--coupler", path.to_str().unwrap()]);
    assert_eq!(channel(&from_file, 0), channel(&bundled, 1));
    assert_eq!(channel(&from_file, 1), channel(&bundled, 0));
}

/// Runs `sim` with `args`, insists it was refused as bad input (exit 2, nothing written),
/// and gives what it said.
fn refused(args: &[&str]) -> String {
    let out = output(bin().arg("sim").args(args));
    let said = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{said}");
    assert!(out.stdout.is_empty());
    said
}

#[test]
fn a_profile_with_match_and_a_coupler_without_it_are_refused() {
    let said = refused(&[
        "--scenario",
        "match",
        "--profile",
        "profiles/demo-diode.toml",
    ]);
    assert!(
        said.contains("--profile") && said.contains("--coupler"),
        "{said}"
    );
    let said = refused(&[
        "--scenario",
        "tune",
        "--coupler",
        "profiles/demo-coupler.toml",
    ]);
    assert!(
        said.contains("--coupler") && said.contains("--scenario tune"),
        "{said}"
    );
    let said = refused(&[
        "--scenario",
        "match",
        "--coupler",
        "profiles/demo-coupler.toml",
        "--profile",
        "profiles/demo-diode.toml",
    ]);
    assert!(
        said.contains("--coupler") && said.contains("--profile"),
        "{said}"
    );
}

#[test]
fn a_profile_given_as_the_coupler_is_refused_with_where_it_belongs() {
    let said = refused(&[
        "--scenario",
        "match",
        "--coupler",
        "profiles/demo-diode.toml",
    ]);
    assert!(said.contains("not a coupler set-up"), "{said}");
}

// Source: docs/protocol.md, "A two-channel board", must show what the simulator writes;
// the frame's CRC there was worked by hand from the CRC-16/CCITT-FALSE definition
// (polynomial 0x1021, initial 0xFFFF; the CRC catalogue's check value 0x29B1), and the
// library's decoder must take both forms as two channels of 367 and 2843.
#[test]
fn the_protocol_documents_the_first_match_samples() {
    let run = |format| {
        succeeded([
            "sim",
            "--scenario",
            "match",
            "--seconds",
            "0.003",
            "--format",
            format,
        ])
        .stdout
    };
    assert_eq!(run("ascii"), b"367,2843\n365,2845\n365,2845\n");
    let frame = [
        0xA5, 0x5A, 0x00, 0x00, 0x02, 0x6F, 0x01, 0x1B, 0x0B, 0xA3, 0x61,
    ];
    let binary = run("binary");
    assert_eq!(binary.len(), 3 * frame.len());
    assert_eq!(binary[..frame.len()], frame);
    let mut decoder = Decoder::new(Format::Binary);
    let mut samples = FlatCounts::default();
    decoder.feed(&frame, &mut samples);
    decoder.finish(&mut samples);
    assert_eq!((samples.channels, samples.counts), (2, vec![367, 2843]));
}
