//! The OpenMetrics text a station serves, checked against the rules of the OpenMetrics
//! 1.0 text format (the specification's "Text format" section, from memory where said):
//! every line ends in a line feed and the exposition ends in `# EOF`; a counter's sample
//! is named with `_total`; a metric with a unit has a `# UNIT` line and its name ends in
//! that unit; label values are quoted with `\`, `"` and line feeds escaped.

use dbtrail::calibration::Flags;
use dbtrail::metrics::{
    encode_openmetrics, ChannelSnapshot, LinkSnapshot, MatchSnapshot, MatchValue, Power, Snapshot,
};

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
                arm: None,
                power: Some(Power {
                    dbm: 29.7139,
                    watts: 0.9361,
                    u_db: Some(0.4027),
                }),
                flags: Flags::empty(),
            },
            ChannelSnapshot {
                channel: 3,
                arm: None,
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
        matching: None,
    }
}

/// A coupler station: forward and reflected arms and their match, SWR 1.5 over the limit,
/// the directivity leaving the return loss between 12.1 dB and unbounded.
fn coupler_snapshot() -> Snapshot {
    let arm = |channel, arm, dbm: f64| ChannelSnapshot {
        channel,
        arm: Some(arm),
        power: Some(Power {
            dbm,
            watts: 10f64.powf(dbm / 10.0) * 1e-3,
            u_db: Some(0.3),
        }),
        flags: Flags::empty(),
    };
    Snapshot {
        station: "match-bench".into(),
        profile: "demo-coupler".into(),
        channels: vec![arm(1, "forward", 40.0), arm(2, "reflected", 26.0206)],
        link: LinkSnapshot {
            up: true,
            ..LinkSnapshot::default()
        },
        matching: Some(MatchSnapshot {
            value: Some(MatchValue {
                swr: 1.5,
                return_loss_db: 13.9794,
                mismatch_loss_db: 0.1773,
            }),
            net_w: Some(9.6),
            u_return_loss_db: Some(0.42),
            return_loss_lowest_db: Some(12.1),
            return_loss_highest_db: Some(f64::INFINITY),
            marks: vec![("rl-at-least", false), ("over-swr-limit", true)],
        }),
        ..Snapshot::default()
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

// Source: OpenMetrics 1.0 groups a family's samples together and leaves their order free
// (from memory); ours are sorted, so one snapshot always reads the same and a person can
// find a flag: `above` before `below` before `clip`, channel 1 before channel 3.
#[test]
fn a_familys_samples_are_in_sorted_order_and_the_text_is_the_same_each_time() {
    let text = encode_openmetrics(&snapshot());
    for _ in 0..5 {
        assert_eq!(encode_openmetrics(&snapshot()), text);
    }
    let flags: Vec<&str> = text
        .lines()
        .filter(|l| l.starts_with("dbtrail_reading_flag{"))
        .collect();
    let mut sorted = flags.clone();
    sorted.sort_unstable();
    assert_eq!(flags, sorted);
    assert!(flags[0].contains("channel=\"1\"") && flags[0].contains("flag=\"above\""));
}

// Source: OpenMetrics 1.0 (from memory): a histogram's buckets must run in order of
// `le`, and a counter's `_created` line belongs with its `_total`; sorting a family's
// lines keeps every rule only while families are gauges, info metrics, and counters of
// `_total` samples alone. This holds that precondition of the sorting.
#[test]
fn every_family_is_of_a_kind_whose_lines_may_be_sorted() {
    for snapshot in [snapshot(), coupler_snapshot()] {
        let text = encode_openmetrics(&snapshot);
        for kind in text.lines().filter_map(|l| l.strip_prefix("# TYPE ")) {
            let (_, kind) = kind.split_once(' ').unwrap();
            assert!(
                ["gauge", "counter", "info"].contains(&kind),
                "{kind}: {text}"
            );
        }
        assert!(!text.contains("_created"), "{text}");
    }
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

// Source: the issue's rules (forward, reflected, SWR and return loss when present; the
// labels station, channel, profile) and OpenMetrics 1.0, which writes infinities as `+Inf`
// (from memory; the crate would write `inf`, so an unbounded end is left out). The values
// are the snapshot's: SWR 1.5 is a return loss of 20·log10(2.5/0.5) = 13.98 dB
// (common practice).
#[test]
fn a_coupler_serves_its_arms_and_its_match() {
    let text = encode_openmetrics(&coupler_snapshot());
    let power = samples(&text, "dbtrail_power_dbm");
    assert_eq!(power.len(), 2, "{text}");
    let of_arm = |arm: &str| {
        let arm = format!("arm=\"{arm}\"");
        power
            .iter()
            .find(|(l, _)| l.contains(&arm))
            .copied()
            .unwrap()
    };
    assert!(of_arm("forward").0.contains("channel=\"1\""));
    assert_eq!(of_arm("forward").1, 40.0);
    assert!(of_arm("reflected").0.contains("channel=\"2\""));
    assert_eq!(of_arm("reflected").1, 26.0206);
    assert_eq!(samples(&text, "dbtrail_swr")[0].1, 1.5);
    assert_eq!(samples(&text, "dbtrail_return_loss_db")[0].1, 13.9794);
    assert!(samples(&text, "dbtrail_return_loss_db")[0]
        .0
        .contains("profile=\"demo-coupler\""));
    assert_eq!(
        samples(&text, "dbtrail_return_loss_uncertainty_db")[0].1,
        0.42
    );
    assert_eq!(samples(&text, "dbtrail_return_loss_lowest_db")[0].1, 12.1);
    assert!(
        samples(&text, "dbtrail_return_loss_highest_db").is_empty(),
        "{text}"
    );
    let infinite = |l: &&str| !l.starts_with('#') && l.to_lowercase().ends_with("inf");
    assert!(!text.lines().any(|l| infinite(&l)), "{text}");
    assert_eq!(samples(&text, "dbtrail_mismatch_loss_db")[0].1, 0.1773);
    assert_eq!(samples(&text, "dbtrail_net_power_watts")[0].1, 9.6);
    let marks = samples(&text, "dbtrail_match_flag");
    assert_eq!(marks.len(), 2);
    let over: Vec<f64> = marks
        .iter()
        .filter(|(l, _)| l.contains("flag=\"over-swr-limit\""))
        .map(|(_, v)| *v)
        .collect();
    assert_eq!(over, [1.0]);
    assert!(
        text.contains("# UNIT dbtrail_return_loss_db db\n"),
        "{text}"
    );
    assert!(!text.contains("# UNIT dbtrail_swr"), "{text}");
}

// Source: the issue's rule, as for the power: a match that is a bound, or a dead link,
// leaves its figures out while its flags say why.
#[test]
fn a_bound_match_or_a_dead_link_leaves_the_match_out() {
    let mut bound = coupler_snapshot();
    let matching = bound.matching.as_mut().unwrap();
    matching.value = None;
    matching.marks = vec![("rl-at-least", true), ("over-swr-limit", false)];
    let text = encode_openmetrics(&bound);
    assert!(samples(&text, "dbtrail_swr").is_empty(), "{text}");
    assert!(
        samples(&text, "dbtrail_return_loss_db").is_empty(),
        "{text}"
    );
    assert!(samples(&text, "dbtrail_return_loss_uncertainty_db").is_empty());
    let at_least: Vec<f64> = samples(&text, "dbtrail_match_flag")
        .into_iter()
        .filter(|(l, _)| l.contains("rl-at-least"))
        .map(|(_, v)| v)
        .collect();
    assert_eq!(at_least, [1.0]);
    let mut dead = coupler_snapshot();
    dead.link.up = false;
    let text = encode_openmetrics(&dead);
    for name in [
        "dbtrail_swr",
        "dbtrail_return_loss_db",
        "dbtrail_net_power_watts",
    ] {
        assert!(samples(&text, name).is_empty(), "{name}: {text}");
    }
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

// Source: the Prometheus text exposition format 0.0.4 (from memory): no `# EOF` and no
// `# UNIT`; `# HELP` and `# TYPE` name the samples as they are written (a counter's with
// its `_total`); there is no info type, so an info family is a gauge of its `_info`
// samples. The samples themselves are the same lines.
#[test]
fn the_older_text_format_says_the_same_in_its_own_words() {
    use dbtrail::metrics::{encode, Format};
    let open = encode(&snapshot(), Format::OpenMetrics);
    let old = encode(&snapshot(), Format::PrometheusText);
    assert!(!old.contains("# EOF") && !old.contains("# UNIT"), "{old}");
    assert!(
        old.contains("# TYPE dbtrail_link_samples_total counter\n"),
        "{old}"
    );
    assert!(
        old.contains("# HELP dbtrail_link_samples_total Samples decoded.\n"),
        "{old}"
    );
    assert!(old.contains("# TYPE dbtrail_station_info gauge\n"), "{old}");
    assert!(old.contains("# TYPE dbtrail_power_dbm gauge\n"), "{old}");
    let sample_lines = |text: &str| -> Vec<String> {
        let mut lines: Vec<String> = text
            .lines()
            .filter(|l| !l.starts_with('#'))
            .map(String::from)
            .collect();
        lines.sort();
        lines
    };
    assert_eq!(sample_lines(&old), sample_lines(&open));
}

// Source: HTTP content negotiation as scrapers use it (a Prometheus server sends an
// Accept header naming `application/openmetrics-text` first, from memory): OpenMetrics
// when asked for, or when nothing in particular is; the older text format when only it
// is named.
#[test]
fn the_accept_header_chooses_the_format() {
    use dbtrail::metrics::Format;
    let scraper = "application/openmetrics-text;version=1.0.0,application/openmetrics-text;\
                   version=0.0.1;q=0.75,text/plain;version=0.0.4;q=0.5,*/*;q=0.1";
    assert_eq!(Format::of_accept(Some(scraper)), Format::OpenMetrics);
    assert_eq!(Format::of_accept(None), Format::OpenMetrics);
    assert_eq!(Format::of_accept(Some("*/*")), Format::OpenMetrics);
    assert_eq!(
        Format::of_accept(Some("text/plain;version=0.0.4")),
        Format::PrometheusText
    );
    assert!(Format::OpenMetrics
        .content_type()
        .starts_with("application/openmetrics-text; version=1.0.0"));
}

/// The families the Python prometheus-client's OpenMetrics parser reads from `text`; None
/// when Python or the package is not there (outside CI: a developer's machine may lack it).
fn parsed_by_python(text: &str) -> Option<serde_json::Value> {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("metrics.txt");
    std::fs::write(&path, text).unwrap();
    let script = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/metrics/parse_openmetrics.py"
    );
    let ran = std::process::Command::new("python3")
        .arg(script)
        .arg(&path)
        .output();
    let missing = match &ran {
        Err(e) => Some(format!("python3 could not run: {e}")),
        Ok(out) if String::from_utf8_lossy(&out.stderr).contains("No module named") => {
            Some("the Python package prometheus_client is not installed".to_string())
        }
        Ok(_) => None,
    };
    if let Some(why) = missing {
        assert!(
            std::env::var("CI").is_err(),
            "{why}: .ci/run installs it (pip install prometheus_client), so in CI this fails"
        );
        eprintln!("SKIPPED, NOT CHECKED: {why}; pip install prometheus_client to run it");
        return None;
    }
    let out = ran.unwrap();
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{said}");
    Some(serde_json::from_slice(&out.stdout).unwrap())
}

// Source: the Python prometheus-client 0.26 OpenMetrics parser (PyPI), an implementation
// independent of the Rust crate: it accepts the text, and reads back each family's type
// and unit and the snapshot's values and labels.
#[test]
fn an_independent_openmetrics_parser_reads_the_text_back() {
    let Some(families) = parsed_by_python(&encode_openmetrics(&snapshot())) else {
        return;
    };
    let family = |name: &str| &families[name];
    assert_eq!(family("dbtrail_link_samples")["type"], "counter");
    assert_eq!(
        family("dbtrail_link_samples")["samples"][0]["value"],
        10_800_000.0
    );
    assert_eq!(family("dbtrail_power_dbm")["type"], "gauge");
    assert_eq!(family("dbtrail_power_dbm")["unit"], "dbm");
    let power = &family("dbtrail_power_dbm")["samples"];
    assert_eq!(power.as_array().unwrap().len(), 1);
    assert_eq!(power[0]["value"], 29.7139);
    assert_eq!(power[0]["labels"]["station"], "bench \"A\"\nrack");
    assert_eq!(family("dbtrail_station")["type"], "info");
    assert_eq!(
        family("dbtrail_station")["samples"][0]["labels"]["profile_hash"],
        "85d0a001055e8f52"
    );
    assert_eq!(
        family("dbtrail_board_temperature_celsius")["unit"],
        "celsius"
    );
    assert_eq!(
        family("dbtrail_last_sample_age_seconds")["samples"][0]["value"],
        0.02
    );
    let Some(families) = parsed_by_python(&encode_openmetrics(&coupler_snapshot())) else {
        return;
    };
    assert_eq!(families["dbtrail_swr"]["samples"][0]["value"], 1.5);
    assert_eq!(families["dbtrail_return_loss_db"]["unit"], "db");
    let marks = families["dbtrail_match_flag"]["samples"]
        .as_array()
        .unwrap();
    let over = marks
        .iter()
        .find(|m| m["labels"]["flag"] == "over-swr-limit")
        .unwrap();
    assert_eq!(over["value"], 1.0);
}
