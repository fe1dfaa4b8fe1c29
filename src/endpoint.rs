//! The metrics endpoint: a station's latest readings served at `GET /metrics` for a
//! time-series engine to scrape, from a thread of its own running a small tokio runtime,
//! so that a slow or stuck scraper holds up neither the reader nor the recorder: they
//! only swap a snapshot in ([`Published`]), and a scrape encodes the one it finds.

use std::net::{SocketAddr, TcpListener};
use std::sync::{Arc, RwLock};
use std::time::Duration;

use anyhow::{anyhow, Context, Result};
use axum::extract::State;
use axum::http::{header, HeaderMap, StatusCode};
use axum::response::IntoResponse;
use axum::routing::get;
use axum::Router;
use dbtrail::metrics::{encode, Format, LinkSnapshot, Snapshot};
use dbtrail::record::{Recorder, RunContext};

use crate::source::Running;

/// The longest a scraper may take to send its request's head.
const HEAD_TIMEOUT: Duration = Duration::from_secs(5);

/// The longest one connection is kept, however it is used.
const CONNECTION_TIMEOUT: Duration = Duration::from_secs(60);

/// Connections served at once; more wait to be accepted.
const MAX_CONNECTIONS: usize = 256;

/// The snapshot the endpoint serves, shared with the consumer that puts it in place.
type Shared = Arc<RwLock<Option<Snapshot>>>;

/// A running metrics endpoint and the snapshot it serves.
pub struct MetricsEndpoint {
    /// The snapshot the consumer keeps up to date; none until its first.
    snapshot: Shared,
    /// What it started with (the station and the version), for every later snapshot.
    pub base: Snapshot,
    /// Where it listens (the port chosen when 0 was asked for).
    pub addr: SocketAddr,
}

impl MetricsEndpoint {
    /// Binds `addr` at once (so that a port in use is refused before the run starts) and
    /// serves from a thread of its own what is published, `snapshot` being what every
    /// snapshot starts from ([`MetricsEndpoint::base`]).
    pub fn start(addr: SocketAddr, snapshot: Snapshot) -> Result<Self> {
        let listener = TcpListener::bind(addr).map_err(|e| {
            anyhow!(
                "cannot serve metrics on {addr} ({e}): choose another port for --metrics \
                     (0 picks a free one), or stop what holds this one"
            )
        })?;
        listener
            .set_nonblocking(true)
            .context("cannot set up the metrics listener")?;
        let addr = listener
            .local_addr()
            .context("cannot read the metrics address")?;
        let base = snapshot;
        let snapshot: Shared = Arc::new(RwLock::new(None));
        let shared = Arc::clone(&snapshot);
        std::thread::Builder::new()
            .name("dbtrail-metrics".into())
            .spawn(move || serve(listener, shared))
            .context("cannot start the metrics thread")?;
        Ok(MetricsEndpoint {
            snapshot,
            base,
            addr,
        })
    }

    /// Puts a new snapshot in place of the old one.
    pub fn publish(&self, snapshot: Snapshot) {
        if let Ok(mut held) = self.snapshot.write() {
            *held = Some(snapshot);
        }
    }
}

/// A run's metrics endpoint and what its snapshots always say.
pub struct Published {
    endpoint: MetricsEndpoint,
    base: Snapshot,
}

impl Published {
    /// The endpoint of a run reading through `profile` (its name: a profile's, or a
    /// coupler set-up's), described by `context`.
    pub fn new(endpoint: MetricsEndpoint, profile: &str, context: &RunContext) -> Self {
        let mut base = endpoint.base.clone();
        base.profile = profile.to_string();
        base.profile_hash = context.profile_hash.clone();
        Published { endpoint, base }
    }

    /// The recorder's last row and the link's state, in place of the last snapshot.
    pub fn publish<W: std::io::Write>(&self, source: &Running, recorder: &Recorder<W>) {
        let link = source.counters.snapshot();
        let age = (source.live && link.last_sample_ns > 0)
            .then(|| (source.now() - link.last_sample_ns as f64 * 1e-9).max(0.0));
        self.endpoint.publish(Snapshot {
            // The recorder's own, as the screen may change the frequency while it runs.
            frequency_hz: recorder.calibration().freq_hz(),
            channels: recorder.latest().to_vec(),
            board_c: recorder.latest_board_c(),
            matching: recorder.latest_match().cloned(),
            link: LinkSnapshot {
                samples: link.samples,
                bad_lines: link.bad_lines,
                crc_errors: link.crc_errors,
                dropped_frames: link.dropped_frames,
                ring_overruns: link.overruns,
                reconnects: link.reconnects,
                up: link.connected,
                last_sample_age_s: age,
            },
            ..self.base.clone()
        });
    }
}

/// The endpoint's own runtime: one thread, for a handful of scrapers.
fn serve(listener: TcpListener, snapshot: Shared) {
    let runtime = match tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
    {
        Ok(runtime) => runtime,
        Err(e) => {
            eprintln!("dbtrail: the metrics endpoint could not start: {e}");
            return;
        }
    };
    runtime.block_on(async move {
        let Ok(listener) = tokio::net::TcpListener::from_std(listener) else {
            eprintln!("dbtrail: the metrics endpoint could not take its listener");
            return;
        };
        let app = Router::new()
            .route("/metrics", get(metrics))
            .with_state(snapshot);
        accept_loop(listener, app).await;
    });
}

/// Takes connections for as long as the run lasts: each served on a task of its own,
/// its request head bounded in time ([`HEAD_TIMEOUT`]; hyper bounds its size), and no
/// more than [`MAX_CONNECTIONS`] at once, so that a scraper that stalls, or many at
/// once, cost a bounded amount and hold up nothing else.
async fn accept_loop(listener: tokio::net::TcpListener, app: Router) {
    let open = Arc::new(tokio::sync::Semaphore::new(MAX_CONNECTIONS));
    loop {
        let Ok(permit) = Arc::clone(&open).acquire_owned().await else {
            return;
        };
        let Ok((stream, _)) = listener.accept().await else {
            continue;
        };
        let service = hyper_util::service::TowerToHyperService::new(app.clone());
        tokio::spawn(async move {
            let connection = hyper::server::conn::http1::Builder::new()
                .timer(hyper_util::rt::TokioTimer::new())
                .header_read_timeout(HEAD_TIMEOUT)
                .serve_connection(hyper_util::rt::TokioIo::new(stream), service);
            // A connection's own failure (a reset, a stalled head) ends only it.
            let _ = tokio::time::timeout(CONNECTION_TIMEOUT, connection).await;
            drop(permit);
        });
    }
}

/// `GET /metrics`: the snapshot in the format the `Accept` header asks for; 503 before
/// the run's first (the profile, its hash and the link not known yet), so that a scrape
/// then stores nothing rather than an empty station.
async fn metrics(State(snapshot): State<Shared>, headers: HeaderMap) -> impl IntoResponse {
    let accept = headers.get(header::ACCEPT).and_then(|v| v.to_str().ok());
    let format = Format::of_accept(accept);
    let body = match snapshot.read().as_deref() {
        Ok(Some(held)) => encode(held, format),
        Ok(None) => {
            return unavailable("dbtrail is starting: no reading yet; scrape again shortly\n")
        }
        // A consumer that panicked while publishing: nothing trustworthy to serve.
        Err(_) => return unavailable("dbtrail's recorder stopped publishing\n"),
    };
    (
        StatusCode::OK,
        [(header::CONTENT_TYPE, format.content_type())],
        body,
    )
}

/// A 503 saying why, in plain text.
fn unavailable(why: &'static str) -> (StatusCode, [(header::HeaderName, &'static str); 1], String) {
    (
        StatusCode::SERVICE_UNAVAILABLE,
        [(header::CONTENT_TYPE, "text/plain; charset=utf-8")],
        why.to_string(),
    )
}

#[cfg(test)]
mod tests {
    use std::io::{Read, Write};

    use super::*;

    /// The status line of a GET of /metrics at `addr`.
    fn status(addr: SocketAddr) -> String {
        let mut stream = std::net::TcpStream::connect(addr).unwrap();
        stream
            .write_all(b"GET /metrics HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n")
            .unwrap();
        let mut answer = String::new();
        stream.read_to_string(&mut answer).unwrap();
        answer.lines().next().unwrap_or_default().to_string()
    }

    // Source: RFC 9110's 503 (Service Unavailable) for a server not ready to answer: before
    // the run's first snapshot the endpoint says so rather than serve an empty station
    // (no profile, no hash, frequency 0); once one is published, 200.
    #[test]
    fn before_the_first_snapshot_the_endpoint_is_unavailable() {
        let base = Snapshot {
            station: "bench-9".into(),
            ..Snapshot::default()
        };
        let endpoint = MetricsEndpoint::start("127.0.0.1:0".parse().unwrap(), base).unwrap();
        assert!(
            status(endpoint.addr).contains(" 503 "),
            "{}",
            status(endpoint.addr)
        );
        endpoint.publish(endpoint.base.clone());
        assert!(status(endpoint.addr).contains(" 200 "));
    }
}
