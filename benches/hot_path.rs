//! The hot path, stage by stage: decoding (both wire modes), calibration (the exact table
//! and diode models, and the per-code table), the statistics' inner loop, and the board
//! temperature channel (a thermistor's code to °C, the averaging window). Figures are
//! shown, never asserted; docs/performance.md records them.

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use dbtrail::calibration::Calibration;
use dbtrail::decode::{encode_ascii, encode_binary, Decoder, FlatCounts, Format};
use dbtrail::profile::parse_profile;
use dbtrail::stats::PowerStats;
use dbtrail::thermal::{Ntc, NtcLaw, NtcPlacement, Sensor, TemperatureWindow};

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

/// A 10 kΩ, β 3950 K thermistor to ground under 10 kΩ, and a window of 5 s at 10 k
/// readings a second (50 000 held), as a fast board sensor would fill it.
fn thermal(c: &mut Criterion) {
    let adc = dbtrail::adc::Adc::new(12, 3.3, 1.0, 0.0, 0.005);
    let law = NtcLaw::Beta {
        r0_ohms: 1e4,
        t0_c: 25.0,
        beta_k: 3950.0,
    };
    let sensor = Sensor::Ntc(Ntc {
        law,
        fixed_ohms: 1e4,
        placement: NtcPlacement::ToGround,
    });
    let codes: Vec<u32> = (0..SAMPLES as u32).map(|i| 1000 + i % 2000).collect();
    let mut group = c.benchmark_group("thermal");
    group.throughput(Throughput::Elements(SAMPLES as u64));
    group.bench_function("thermistor code to celsius", |b| {
        b.iter(|| {
            black_box(&codes)
                .iter()
                .filter_map(|&code| sensor.celsius(&adc, f64::from(code)).ok())
                .sum::<f64>()
        })
    });
    let mut window = TemperatureWindow::new(5.0);
    let mut t = 0.0;
    group.bench_function("window push, 5 s at 10 k/s", |b| {
        b.iter(|| {
            for i in 0..SAMPLES {
                t += 1e-4;
                window.push(t, 25.0 + (i % 13) as f64 * 0.01);
            }
            window.mean()
        })
    });
    group.finish();
}

criterion_group!(benches, decoding, calibration, statistics, thermal);
criterion_main!(benches);
