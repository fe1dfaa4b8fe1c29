//! `--metrics ADDR` of `record` and `watch`: the options, the address rules (a bare port
//! on loopback, any other address only when asked for), and the endpoint started.

use std::net::{IpAddr, Ipv4Addr, SocketAddr};

use anyhow::{anyhow, Result};
use dbtrail::metrics::Snapshot;

use crate::endpoint::MetricsEndpoint;

/// Where `--metrics` serves: a bare port is on loopback; another address only when
/// `anywhere` says so.
pub fn parse_address(text: &str, anywhere: bool) -> Result<SocketAddr> {
    let addr = match text.parse::<u16>() {
        Ok(port) => SocketAddr::new(IpAddr::V4(Ipv4Addr::LOCALHOST), port),
        Err(_) => text.parse::<SocketAddr>().map_err(|_| {
            anyhow!(
                "--metrics `{text}` is not an address: give a port (9464, served on \
                 127.0.0.1) or an address and port (127.0.0.1:9464)"
            )
        })?,
    };
    if !addr.ip().is_loopback() && !anywhere {
        return Err(anyhow!(
            "--metrics {addr} would serve beyond this machine; add --metrics-anywhere to \
             mean it (and see docs/lab.md on exposing it safely), or serve on 127.0.0.1"
        ));
    }
    Ok(addr)
}

/// The `--metrics` options of `record` and `watch`.
#[derive(clap::Args)]
pub struct MetricsArgs {
    /// Serve the latest readings for a time-series engine at http://ADDR/metrics (a bare
    /// port serves on 127.0.0.1; 0 picks a free one)
    #[arg(long, value_name = "ADDR")]
    pub metrics: Option<String>,
    /// Allow --metrics on an address beyond this machine
    #[arg(long, requires = "metrics")]
    pub metrics_anywhere: bool,
    /// The station's name in the metrics (default: the host name)
    #[arg(long, requires = "metrics")]
    pub station: Option<String>,
}

impl MetricsArgs {
    /// The endpoint, started, when `--metrics` was given; the address is checked and bound
    /// before anything else runs.
    pub fn start(&self) -> Result<Option<MetricsEndpoint>> {
        let Some(text) = &self.metrics else {
            return Ok(None);
        };
        let addr = parse_address(text, self.metrics_anywhere)?;
        let snapshot = Snapshot {
            station: self.station.clone().unwrap_or_else(host_name),
            version: env!("CARGO_PKG_VERSION").to_string(),
            ..Snapshot::default()
        };
        let endpoint = MetricsEndpoint::start(addr, snapshot)?;
        eprintln!("dbtrail: metrics at http://{}/metrics", endpoint.addr);
        Ok(Some(endpoint))
    }
}

/// This machine's name, for a station not named otherwise.
fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .or_else(|_| std::fs::read_to_string("/etc/hostname"))
        .map(|name| name.trim().to_string())
        .ok()
        .filter(|name| !name.is_empty())
        .unwrap_or_else(|| "dbtrail".to_string())
}
