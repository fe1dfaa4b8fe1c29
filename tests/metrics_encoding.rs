//! The OpenMetrics text a station serves, checked against the rules of the OpenMetrics
//! 1.0 text format (the specification's "Text format" section, from memory where said):
//! every line ends in a line feed and the exposition ends in `# EOF`; a counter's sample
//! is named with `_total`; a metric with a unit has a `# UNIT` line and its name ends in
//! that unit; label values are quoted with `\`, `"` and line feeds escaped.

use dbtrail::calibration::Flags;
use dbtrail::metrics::{encode_openmetrics, ChannelSnapshot, LinkSnapshot, Power, Snapshot};

fn snapshot() -> Snapshot {
    Snapshot {
        station: "bench \"A\"\nrack".into(),
        version: "0.1.0".into(),
        profile: "demo-diode".into(),
        profile_hash: "85d0a001055e8f52".into(),
        frequency_hz: 146e6,
        channels: vec![
            ChannelSnapshot {
                channel: 1,
                power: Some(Power {
                    dbm: 29.7139,
                    watts: 0.9361,
                    u_db: Some(0.4027),
                }),
                flags: Flags::empty(),
            },
            ChannelSnapshot {
                channel: 3,
                power: None,
                flags: Flags::BELOW_SPAN,
            },
        ],
        link: LinkSnapshot {
            samples: 10_800_000,
            bad_lines: 2,
            crc_errors: 0,
            dropped_frames: 5,
            ring_overruns: 0,
            reconnects: 1,
            up: true,
            last_sample_age_s: Some(0.02),
        },
        board_c: Some(32.85),
    }
}

/// The samples of metric `name`: (labels, value) for each line that starts with it.
fn samples<'t>(text: &'t str, name: &str) -> Vec<(&'t str, f64)> {
    text.lines()
        .filter_map(|l| {
            let rest = l.strip_prefix(name)?;
            let (labels, value) = match rest.strip_prefix('{') {
                Some(inner) => inner.rsplit_once("} ")?,
                None => ("", rest.strip_prefix(' ')?),
            };
            Some((labels, value.parse().ok()?))
        })
        .collect()
}

// Source: OpenMetrics 1.0, text format: the exposition ends with `# EOF` and a line feed,
// and every line ends with a line feed (from memory).
#[test]
fn the_text_ends_in_eof_and_every_line_in_a_line_feed() {
    let text = encode_openmetrics(&snapshot());
    assert!(text.ends_with("# EOF\n"), "{text}");
    assert_eq!(text.matches("# EOF").count(), 1);
    assert!(!text.contains("\r"));
}

// Source: OpenMetrics 1.0: a counter's sample carries the `_total` suffix, and its
// `# TYPE` line names the family without it (from memory).
#[test]
fn counters_are_sampled_with_total() {
    let text = encode_openmetrics(&snapshot());
    assert!(
        text.contains("# TYPE dbtrail_link_samples counter\n"),
        "{text}"
    );
    let got = samples(&text, "dbtrail_link_samples_total");
    assert_eq!(got.len(), 1, "{text}");
    assert_eq!(got[0].1, 10_800_000.0);
    assert_eq!(
        samples(&text, "dbtrail_link_dropped_frames_total")[0].1,
        5.0
    );
    assert_eq!(samples(&text, "dbtrail_link_reconnects_total")[0].1, 1.0);
}

// Source: OpenMetrics 1.0: a family with a unit has a `# UNIT` line, and its name ends in
// `_` and the unit (from memory); seconds and celsius are base units there.
#[test]
fn units_are_declared_and_end_the_names() {
    let text = encode_openmetrics(&snapshot());
    for (name, unit) in [
        ("dbtrail_power_dbm", "dbm"),
        ("dbtrail_power_watts", "watts"),
        ("dbtrail_power_uncertainty_db", "db"),
        ("dbtrail_last_sample_age_seconds", "seconds"),
        ("dbtrail_board_temperature_celsius", "celsius"),
    ] {
        assert!(
            text.contains(&format!("# UNIT {name} {unit}\n")),
            "{name}: {text}"
        );
        assert!(!samples(&text, name).is_empty(), "{name}: {text}");
    }
}

// Source: the rule in the issue and docs/lab.md: a bound leaves the power gauge out, so the
// engine marks it stale, while the flag metric says why; values are the snapshot's.
#[test]
fn a_bound_leaves_the_power_out_and_its_flag_says_why() {
    let text = encode_openmetrics(&snapshot());
    let power = samples(&text, "dbtrail_power_dbm");
    assert_eq!(power.len(), 1, "{text}");
    assert!(power[0].0.contains("channel=\"1\""));
    assert_eq!(power[0].1, 29.7139);
    let below: Vec<f64> = samples(&text, "dbtrail_reading_flag")
        .into_iter()
        .filter(|(labels, _)| labels.contains("channel=\"3\"") && labels.contains("flag=\"below\""))
        .map(|(_, v)| v)
        .collect();
    assert_eq!(below, [1.0]);
    // Every flag of every channel is there, 0 or 1.
    let flags = samples(&text, "dbtrail_reading_flag");
    assert_eq!(flags.len(), 2 * Flags::all().iter().count());
    assert_eq!(flags.iter().filter(|(_, v)| *v == 1.0).count(), 1);
    // A dead link leaves every power gauge out.
    let mut dead = snapshot();
    dead.link.up = false;
    let text = encode_openmetrics(&dead);
    assert!(samples(&text, "dbtrail_power_dbm").is_empty(), "{text}");
    assert_eq!(samples(&text, "dbtrail_link_up")[0].1, 0.0);
}

// Source: OpenMetrics 1.0: label values are in double quotes with `\\`, `\"` and `\n`
// escaped (from memory); an info metric's sample is named with `_info` and is 1.
#[test]
fn label_values_are_escaped_and_the_info_metric_is_one() {
    let text = encode_openmetrics(&snapshot());
    assert!(text.contains(r#"station="bench \"A\"\nrack""#), "{text}");
    let info = samples(&text, "dbtrail_station_info");
    assert_eq!(info.len(), 1, "{text}");
    assert_eq!(info[0].1, 1.0);
    assert!(info[0].0.contains("profile_hash=\"85d0a001055e8f52\""));
    assert!(info[0].0.contains("frequency_hz=\"146000000\""));
}
