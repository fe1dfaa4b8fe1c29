//! The hot path, stage by stage: decoding (both wire modes), calibration (the exact table
//! and diode models, and the per-code table), and the statistics' inner loop. Figures are
//! shown, never asserted; docs/performance.md records them.

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use dbtrail::calibration::Calibration;
use dbtrail::decode::{encode_ascii, encode_binary, Decoder, FlatCounts, Format};
use dbtrail::profile::parse_profile;
use dbtrail::stats::PowerStats;

const SAMPLES: usize = 1 << 16;

fn counts() -> Vec<u32> {
    // A slow ramp with a little noise-like wobble, as 12-bit counts.
    (0..SAMPLES as u32)
        .map(|i| 200 + (i * 7919) % 3500)
        .collect()
}

/// A steady level with a few counts of noise, as in a soak.
fn steady_counts() -> Vec<u32> {
    (0..SAMPLES as u32).map(|i| 1260 + (i * 7919) % 7).collect()
}

fn decoding(c: &mut Criterion) {
    let counts = counts();
    let mut ascii = Vec::new();
    let mut binary = Vec::new();
    for (i, &v) in counts.iter().enumerate() {
        encode_ascii(&[v], &mut ascii);
        encode_binary(i as u16, &[v as u16], &mut binary);
    }
    // A steady level (every line four digits), as a soak streams.
    let mut steady = Vec::new();
    for &v in &steady_counts() {
        encode_ascii(&[v], &mut steady);
    }
    let mut group = c.benchmark_group("decode");
    group.throughput(Throughput::Elements(SAMPLES as u64));
    for (name, bytes, format) in [
        ("ascii", &ascii, Format::Ascii),
        ("ascii steady", &steady, Format::Ascii),
        ("binary", &binary, Format::Binary),
    ] {
        // One output reused, its pages touched once: the decoder, not the page faults of
        // a fresh vector, is what is timed.
        let mut out = FlatCounts {
            channels: 0,
            counts: Vec::with_capacity(SAMPLES),
        };
        group.bench_function(name, |b| {
            b.iter(|| {
                out.counts.clear();
                out.channels = 0;
                let mut decoder = Decoder::new(format);
                decoder.feed(black_box(bytes), &mut out);
                out.counts.len()
            })
        });
    }
    group.finish();
}

fn profile(name: &str) -> Calibration {
    let text = std::fs::read_to_string(format!(
        "{}/profiles/{name}.toml",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap();
    let profile = parse_profile(&text, name).unwrap();
    Calibration::new(&profile, None, 0.0)
}

fn calibration(c: &mut Criterion) {
    let counts = counts();
    let diode = profile("demo-diode");
    let table_text = std::fs::read_to_string(format!(
        "{}/profiles/demo-diode.toml",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap()
    .replace("kind = \"diode\"\ntemperature = 300", "kind = \"table\"");
    let table = Calibration::new(&parse_profile(&table_text, "table").unwrap(), None, 0.0);
    let mut group = c.benchmark_group("calibrate");
    group.throughput(Throughput::Elements(1024));
    let probe: Vec<f64> = counts
        .iter()
        .take(1024)
        .map(|&c| f64::from(c % 2800) + 0.37)
        .collect();
    group.bench_function("diode model, exact", |b| {
        b.iter(|| probe.iter().map(|&c| diode.reading(c).dbm).sum::<f64>())
    });
    group.bench_function("table model, exact", |b| {
        b.iter(|| probe.iter().map(|&c| table.reading(c).dbm).sum::<f64>())
    });
    let codes: Vec<u32> = counts.iter().take(1024).copied().collect();
    group.bench_function("per-code table", |b| {
        b.iter(|| {
            codes
                .iter()
                .map(|&c| diode.reading_code(c).dbm)
                .sum::<f64>()
        })
    });
    group.finish();
}

fn statistics(c: &mut Criterion) {
    let counts = counts();
    let cal = profile("demo-diode");
    let mut group = c.benchmark_group("statistics");
    group.throughput(Throughput::Elements(SAMPLES as u64));
    group.bench_function("interval stats over codes", |b| {
        b.iter(|| {
            let mut stats = PowerStats::default();
            stats.add_codes(&cal, black_box(&counts));
            stats
        })
    });
    // Blocks of codes that lie in one run of the table.
    let steady = steady_counts();
    group.bench_function("interval stats over steady codes", |b| {
        b.iter(|| {
            let mut stats = PowerStats::default();
            stats.add_codes(&cal, black_box(&steady));
            stats
        })
    });
    group.bench_function("merge", |b| {
        let mut part = PowerStats::default();
        part.add_codes(&cal, &counts);
        b.iter(|| {
            let mut total = PowerStats::default();
            for _ in 0..64 {
                total.merge(black_box(&part));
            }
            total
        })
    });
    group.finish();
}

criterion_group!(benches, decoding, calibration, statistics);
criterion_main!(benches);
