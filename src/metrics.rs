//! Metrics for a time-series engine: what a running station last read and how its link
//! is, as a snapshot the consumer fills, encoded in the OpenMetrics text format by the
//! prometheus-client crate. A reading that is a bound, or a dead link, leaves the power
//! out (so that the engine marks it stale) while the flags say why.

use std::sync::atomic::AtomicU64;

use prometheus_client::encoding::text::encode as encode_registry;
use prometheus_client::metrics::counter::Counter;
use prometheus_client::metrics::family::Family;
use prometheus_client::metrics::gauge::Gauge;
use prometheus_client::metrics::info::Info;
use prometheus_client::registry::{Registry, Unit};

use crate::calibration::Flags;

/// The content type of the OpenMetrics text format.
pub const OPENMETRICS_CONTENT_TYPE: &str =
    "application/openmetrics-text; version=1.0.0; charset=utf-8";

/// The prefix of every metric's name.
pub const PREFIX: &str = "dbtrail";

/// What one station last read and how its link is.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Snapshot {
    /// The station's name (`--station`).
    pub station: String,
    /// The program's version.
    pub version: String,
    /// The profile's name.
    pub profile: String,
    /// The profile file's hash, as the log's `# profile:` line gives it.
    pub profile_hash: String,
    /// The frequency in use, Hz.
    pub frequency_hz: f64,
    /// Each power channel's latest interval.
    pub channels: Vec<ChannelSnapshot>,
    /// The link's health.
    pub link: LinkSnapshot,
    /// The board's temperature, °C, when the profile reads one.
    pub board_c: Option<f64>,
    /// A coupler run's match of its latest interval.
    pub matching: Option<MatchSnapshot>,
}

/// A coupler's match over its latest interval, as the log's match columns give it.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MatchSnapshot {
    /// SWR, return loss and mismatch loss when both arms' means are values and so is their
    /// ratio; None for a bound, a reversed pair or no forward power.
    pub value: Option<MatchValue>,
    /// Net power to the load, watts, when both arms' means are values.
    pub net_w: Option<f64>,
    /// The return loss's expanded uncertainty (k = 2), dB.
    pub u_return_loss_db: Option<f64>,
    /// The lowest return loss the coupler's directivity leaves, dB, when that end holds:
    /// for a value, a match below the directivity, or a return loss at least the one read.
    pub return_loss_lowest_db: Option<f64>,
    /// The highest, when that end holds (a value, below the directivity, or a return loss
    /// at most the one read); infinite when the leakage could hide the whole reflection.
    pub return_loss_highest_db: Option<f64>,
    /// Every mark the log's `match` cell may carry, and whether this interval's does.
    pub marks: Vec<(&'static str, bool)>,
}

/// The match figures of an interval whose ratio is a value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatchValue {
    /// Standing-wave ratio.
    pub swr: f64,
    /// Return loss, dB.
    pub return_loss_db: f64,
    /// Mismatch loss, dB.
    pub mismatch_loss_db: f64,
}

/// One power channel's latest interval.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChannelSnapshot {
    /// The stream channel, from 1.
    pub channel: usize,
    /// A coupler's arm (`forward`, `reflected`), as the `arm` label; None for a detector
    /// of its own.
    pub arm: Option<&'static str>,
    /// Its mean as a value; None for a bound or no reading.
    pub power: Option<Power>,
    /// The interval's flags.
    pub flags: Flags,
}

/// A mean power that is a value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Power {
    /// dBm at the reference plane.
    pub dbm: f64,
    /// Watts.
    pub watts: f64,
    /// Its expanded uncertainty (k = 2), dB, when stated.
    pub u_db: Option<f64>,
}

/// The link's counters and state.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LinkSnapshot {
    /// Samples decoded.
    pub samples: u64,
    /// ASCII lines refused.
    pub bad_lines: u64,
    /// Binary frames with a bad CRC.
    pub crc_errors: u64,
    /// Binary frames missing by their sequence numbers.
    pub dropped_frames: u64,
    /// Events dropped because the ring was full.
    pub ring_overruns: u64,
    /// Times the port came back.
    pub reconnects: u64,
    /// The link is up now.
    pub up: bool,
    /// Seconds since the last sample arrived, when one has.
    pub last_sample_age_s: Option<f64>,
}

type Labels = Vec<(String, String)>;
type Value = Gauge<f64, AtomicU64>;

/// The snapshot in the OpenMetrics text format, ending in `# EOF`.
pub fn encode_openmetrics(snapshot: &Snapshot) -> String {
    let mut registry = Registry::with_prefix(PREFIX);
    let station = ("station".to_string(), snapshot.station.clone());
    register_info(&mut registry, snapshot, &station);
    register_power(&mut registry, snapshot, &station);
    register_link(&mut registry, &snapshot.link, &station);
    if let Some(matching) = &snapshot.matching {
        register_match(&mut registry, matching, snapshot, &station);
    }
    if let Some(celsius) = snapshot.board_c {
        let board = Family::<Labels, Value>::default();
        set_finite(&board, &vec![station.clone()], celsius);
        registry.register_with_unit(
            "board_temperature",
            "The detector board's temperature that readings are compensated at",
            Unit::Celsius,
            board,
        );
    }
    let mut text = String::new();
    encode_registry(&mut text, &registry).expect("writing to a String cannot fail");
    samples_sorted(&text)
}

/// The text with each family's samples in the order of their lines, so that the same
/// snapshot always reads the same (the crate keeps a family's label sets in a hash map,
/// whose order changes from run to run); the `#` lines stay where they are.
fn samples_sorted(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut samples: Vec<&str> = Vec::new();
    let flush = |samples: &mut Vec<&str>, out: &mut String| {
        samples.sort_unstable();
        for line in samples.drain(..) {
            out.push_str(line);
            out.push('\n');
        }
    };
    for line in text.lines() {
        if line.starts_with('#') {
            flush(&mut samples, &mut out);
            out.push_str(line);
            out.push('\n');
        } else {
            samples.push(line);
        }
    }
    flush(&mut samples, &mut out);
    out
}

fn register_info(registry: &mut Registry, snapshot: &Snapshot, station: &(String, String)) {
    let labels: Labels = vec![
        station.clone(),
        ("version".into(), snapshot.version.clone()),
        ("profile".into(), snapshot.profile.clone()),
        ("profile_hash".into(), snapshot.profile_hash.clone()),
        ("frequency_hz".into(), format!("{}", snapshot.frequency_hz)),
    ];
    registry.register(
        "station",
        "What the station runs: version, profile and frequency",
        Info::new(labels),
    );
}

/// The power gauges of the channels whose mean is a value, and every channel's flags.
fn register_power(registry: &mut Registry, snapshot: &Snapshot, station: &(String, String)) {
    let (dbm, watts, u_db, flags) = (
        Family::<Labels, Value>::default(),
        Family::<Labels, Value>::default(),
        Family::<Labels, Value>::default(),
        Family::<Labels, Value>::default(),
    );
    for channel in &snapshot.channels {
        let mut labels: Labels = vec![
            station.clone(),
            ("channel".into(), channel.channel.to_string()),
            ("profile".into(), snapshot.profile.clone()),
        ];
        if let Some(arm) = channel.arm {
            labels.push(("arm".into(), arm.to_string()));
        }
        if let Some(power) = channel.power.filter(|_| snapshot.link.up) {
            set_finite(&dbm, &labels, power.dbm);
            set_finite(&watts, &labels, power.watts);
            if let Some(u) = power.u_db {
                set_finite(&u_db, &labels, u);
            }
        }
        for flag in Flags::all().iter() {
            let mut labels = labels.clone();
            let name = flag.names().first().copied().unwrap_or("unnamed");
            labels.push(("flag".into(), name.to_string()));
            let set = f64::from(u8::from(channel.flags.contains(flag)));
            flags.get_or_create(&labels).set(set);
        }
    }
    let unit = |name: &str| Unit::Other(name.to_string());
    registry.register_with_unit(
        "power",
        "The latest interval's mean power at the reference plane, over watts",
        unit("dbm"),
        dbm,
    );
    registry.register_with_unit(
        "power",
        "The latest interval's mean power in watts",
        unit("watts"),
        watts,
    );
    registry.register_with_unit(
        "power_uncertainty",
        "The expanded uncertainty (k = 2) of the latest mean",
        unit("db"),
        u_db,
    );
    registry.register(
        "reading_flag",
        "1 when the latest interval carries the flag",
        flags,
    );
}

/// Sets the gauge of `labels` in `family` to `value` when it is finite; the text format
/// has no word for the infinities the crate would write, and the engine marks a missing
/// sample stale, which is what a value that is not one should look like.
fn set_finite(family: &Family<Labels, Value>, labels: &Labels, value: f64) {
    if value.is_finite() {
        family.get_or_create(labels).set(value);
    }
}

/// A coupler's match: its figures when they are values (none on a dead link), the
/// directivity's range, and every mark of the `match` cell as 0 or 1.
fn register_match(
    registry: &mut Registry,
    matching: &MatchSnapshot,
    snapshot: &Snapshot,
    station: &(String, String),
) {
    let labels: Labels = vec![
        station.clone(),
        ("profile".into(), snapshot.profile.clone()),
    ];
    let up = snapshot.link.up;
    let gauge = |value: Option<f64>| {
        let family = Family::<Labels, Value>::default();
        if let Some(value) = value.filter(|_| up) {
            set_finite(&family, &labels, value);
        }
        family
    };
    let value = matching.value;
    let unit = |name: &str| Unit::Other(name.to_string());
    let with_units = [
        (
            "swr",
            "The standing-wave ratio of the latest interval's means",
            None,
            value.map(|v| v.swr),
        ),
        (
            "return_loss",
            "The return loss of the latest interval's means",
            Some("db"),
            value.map(|v| v.return_loss_db),
        ),
        (
            "return_loss_uncertainty",
            "The expanded uncertainty (k = 2) of the return loss",
            Some("db"),
            matching.u_return_loss_db.filter(|_| value.is_some()),
        ),
        (
            "return_loss_lowest",
            "The lowest return loss the coupler's directivity leaves",
            Some("db"),
            matching.return_loss_lowest_db,
        ),
        (
            "return_loss_highest",
            "The highest return loss the coupler's directivity leaves (absent when unbounded)",
            Some("db"),
            matching.return_loss_highest_db,
        ),
        (
            "mismatch_loss",
            "The mismatch loss of the latest interval's means",
            Some("db"),
            value.map(|v| v.mismatch_loss_db),
        ),
        (
            "net_power",
            "Forward less reflected power: the power the load takes",
            Some("watts"),
            matching.net_w,
        ),
    ];
    for (name, help, unit_name, value) in with_units {
        match unit_name {
            Some(unit_name) => {
                registry.register_with_unit(name, help, unit(unit_name), gauge(value))
            }
            None => registry.register(name, help, gauge(value)),
        }
    }
    let marks = Family::<Labels, Value>::default();
    for (mark, set) in &matching.marks {
        let mut labels = labels.clone();
        labels.push(("flag".into(), mark.to_string()));
        marks.get_or_create(&labels).set(f64::from(u8::from(*set)));
    }
    registry.register(
        "match_flag",
        "1 when the latest interval's match carries the flag",
        marks,
    );
}

fn register_link(registry: &mut Registry, link: &LinkSnapshot, station: &(String, String)) {
    let labels: Labels = vec![station.clone()];
    let counters = [
        ("link_samples", "Samples decoded", link.samples),
        ("link_bad_lines", "ASCII lines refused", link.bad_lines),
        (
            "link_crc_errors",
            "Binary frames with a bad CRC",
            link.crc_errors,
        ),
        (
            "link_dropped_frames",
            "Binary frames missing",
            link.dropped_frames,
        ),
        (
            "link_ring_overruns",
            "Events dropped on a full ring",
            link.ring_overruns,
        ),
        (
            "link_reconnects",
            "Times the port came back",
            link.reconnects,
        ),
    ];
    for (name, help, value) in counters {
        let family = Family::<Labels, Counter>::default();
        family.get_or_create(&labels).inc_by(value);
        registry.register(name, help, family);
    }
    let up = Family::<Labels, Value>::default();
    up.get_or_create(&labels).set(f64::from(u8::from(link.up)));
    registry.register("link_up", "1 while the link is up", up);
    let age = Family::<Labels, Value>::default();
    if let Some(seconds) = link.last_sample_age_s {
        age.get_or_create(&labels).set(seconds);
    }
    registry.register_with_unit(
        "last_sample_age",
        "Time since the last sample arrived",
        Unit::Seconds,
        age,
    );
}

/// The content type of the older Prometheus text format (version 0.0.4).
pub const PROMETHEUS_TEXT_CONTENT_TYPE: &str = "text/plain; version=0.0.4; charset=utf-8";

/// Which text format a scraper asked for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// OpenMetrics 1.0 text.
    OpenMetrics,
    /// The older Prometheus text format.
    PrometheusText,
}

impl Format {
    /// The format an `Accept` header asks for: the older text format when it names
    /// `text/plain` and not `application/openmetrics-text`; OpenMetrics otherwise (no
    /// header, `*/*`, or OpenMetrics named).
    pub fn of_accept(accept: Option<&str>) -> Format {
        match accept {
            Some(accept)
                if accept.contains("text/plain")
                    && !accept.contains("application/openmetrics-text") =>
            {
                Format::PrometheusText
            }
            _ => Format::OpenMetrics,
        }
    }

    /// The content type of a response in this format.
    pub fn content_type(self) -> &'static str {
        match self {
            Format::OpenMetrics => OPENMETRICS_CONTENT_TYPE,
            Format::PrometheusText => PROMETHEUS_TEXT_CONTENT_TYPE,
        }
    }
}

/// The snapshot in the format asked for.
pub fn encode(snapshot: &Snapshot, format: Format) -> String {
    let text = encode_openmetrics(snapshot);
    match format {
        Format::OpenMetrics => text,
        Format::PrometheusText => to_prometheus_text(&text),
    }
}

/// OpenMetrics text as the older Prometheus text format says the same: no `# UNIT` lines
/// and no `# EOF`; a counter's family named as its `_total` samples are; an info family
/// a gauge named as its `_info` samples are.
fn to_prometheus_text(open_metrics: &str) -> String {
    let mut renamed: Vec<(String, String)> = Vec::new();
    for line in open_metrics.lines() {
        if let Some(rest) = line.strip_prefix("# TYPE ") {
            if let Some((name, kind)) = rest.split_once(' ') {
                match kind {
                    "counter" => renamed.push((name.to_string(), format!("{name}_total"))),
                    "info" => renamed.push((name.to_string(), format!("{name}_info"))),
                    _ => {}
                }
            }
        }
    }
    let rename = |name: &str| {
        renamed
            .iter()
            .find(|(from, _)| from == name)
            .map_or(name.to_string(), |(_, to)| to.clone())
    };
    let mut out = String::with_capacity(open_metrics.len());
    for line in open_metrics.lines() {
        if line.starts_with("# UNIT ") || line == "# EOF" {
            continue;
        }
        let described = ["# HELP ", "# TYPE "]
            .iter()
            .find_map(|lead| line.strip_prefix(lead).map(|rest| (*lead, rest)));
        match described.and_then(|(lead, rest)| rest.split_once(' ').map(|(n, r)| (lead, n, r))) {
            Some((lead, name, rest)) => {
                let rest = if rest == "info" { "gauge" } else { rest };
                out.push_str(&format!("{lead}{} {rest}\n", rename(name)));
            }
            None => {
                out.push_str(line);
                out.push('\n');
            }
        }
    }
    out
}
