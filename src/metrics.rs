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
}

/// One power channel's latest interval.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChannelSnapshot {
    /// The stream channel, from 1.
    pub channel: usize,
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
    if let Some(celsius) = snapshot.board_c {
        let board = Family::<Labels, Value>::default();
        board.get_or_create(&vec![station.clone()]).set(celsius);
        registry.register_with_unit(
            "board_temperature",
            "The detector board's temperature that readings are compensated at",
            Unit::Celsius,
            board,
        );
    }
    let mut text = String::new();
    encode_registry(&mut text, &registry).expect("writing to a String cannot fail");
    text
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
        let labels: Labels = vec![
            station.clone(),
            ("channel".into(), channel.channel.to_string()),
            ("profile".into(), snapshot.profile.clone()),
        ];
        if let Some(power) = channel.power.filter(|_| snapshot.link.up) {
            dbm.get_or_create(&labels).set(power.dbm);
            watts.get_or_create(&labels).set(power.watts);
            if let Some(u) = power.u_db {
                u_db.get_or_create(&labels).set(u);
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
