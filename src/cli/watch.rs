//! `dbtrail watch`: the live screen.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::anyhow;

use super::source_args::{self, LinkArgs, SourceArgs};
use super::{parse_db_arg, parse_frequency_arg, BadInput, Failure, Runtime};
use crate::tui::{self, app::App, Session};

#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    source: SourceArgs,
    #[command(flatten)]
    link: LinkArgs,
    /// Detector profile (TOML); --demo uses the bundled demo profile without one
    #[arg(long)]
    profile: Option<PathBuf>,
    /// Frequency in use, e.g. 145.5MHz (default: the demo scenario's, else the profile's)
    #[arg(long, value_parser = parse_frequency_arg)]
    freq: Option<f64>,
    /// Extra offset in dB added to the profile's, e.g. 10dB
    #[arg(long, default_value = "0dB", value_parser = parse_db_arg, allow_hyphen_values = true)]
    offset: f64,
    /// Log to this CSV file from the start (the same rows as `record --every 1s`)
    #[arg(long)]
    log: Option<PathBuf>,
}

/// A few words naming the source for the status line.
fn short_label(source: &SourceArgs, link: &LinkArgs) -> String {
    if let Some(port) = &source.port {
        format!("{port} @ {} baud", link.baud)
    } else if let Some(path) = &source.replay {
        let name = path.file_name().map_or(path.display().to_string(), |n| {
            n.to_string_lossy().into_owned()
        });
        format!("replay {name}")
    } else {
        format!("demo {}", source.demo.map_or("soak", |s| s.name()))
    }
}

pub fn run(mut args: Args) -> Result<(), Failure> {
    if !std::io::stdout().is_terminal() {
        return Err(anyhow!(
            "watch needs a terminal; to write readings to a file or a pipe use `dbtrail record`"
        ))
        .bad_input();
    }
    let loaded = source_args::load(args.profile.as_ref(), &args.source)?;
    let freq = source_args::frequency(args.freq, &args.source);
    // A screen shows the present: files and the simulator run at their own pace.
    args.link.realtime = true;
    args.link.fast = false;
    let source = source_args::start(&args.source, &args.link, &loaded.profile, None)?;
    let mut app = App::new(
        Arc::new(loaded.profile),
        freq,
        args.offset,
        short_label(&args.source, &args.link),
    );
    app.color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let session = Session {
        source,
        log: args.log,
        tool: format!("dbtrail {}", env!("CARGO_PKG_VERSION")),
        profile_hash: super::record::hex_digest(&loaded.bytes),
    };
    tui::run(app, session).runtime()
}
