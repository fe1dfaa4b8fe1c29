//! `dbtrail watch`: the live screen.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::anyhow;

use super::source_args::{self, LinkArgs, ReadingArgs, SourceArgs};
use super::{BadInput, Failure, Runtime};
use crate::tui::{self, app::App, IfExists, ScreenSetup};

#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    source: SourceArgs,
    #[command(flatten)]
    link: LinkArgs,
    #[command(flatten)]
    reading: ReadingArgs,
    /// Log to this CSV file from the start (the same rows as `record --every 1s`)
    #[arg(long)]
    log: Option<PathBuf>,
    /// Add to an existing --log file instead of refusing it
    #[arg(long, requires = "log")]
    append: bool,
    /// Replace an existing --log file
    #[arg(long, requires = "log", conflicts_with = "append")]
    force: bool,
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
    // Before anything else, so that a bad --log never opens the screen (nor needs one).
    if let Some(path) = &args.log {
        super::files::refuse_existing(path, args.append, args.force)?;
    }
    if !std::io::stdout().is_terminal() {
        return Err(anyhow!(
            "watch needs a terminal; to write readings to a file or a pipe use `dbtrail record`"
        ))
        .bad_input();
    }
    let freq = source_args::frequency(args.reading.freq, &args.source);
    // A screen shows the present: files and the simulator run at their own pace.
    args.link.realtime = true;
    args.link.fast = false;
    let (loaded, source) = source_args::load_and_start(
        args.reading.profile.as_ref(),
        &args.source,
        &args.link,
        None,
    )?;
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let app = App::new(
        Arc::new(loaded.profile),
        freq,
        args.reading.offset,
        short_label(&args.source, &args.link),
    )
    .with_color(color);
    let setup = ScreenSetup {
        source,
        log: args.log.map(|path| {
            let if_exists = if args.append {
                IfExists::Append
            } else if args.force {
                IfExists::Replace
            } else {
                IfExists::Refuse
            };
            (path, if_exists)
        }),
        tool: format!("dbtrail {}", env!("CARGO_PKG_VERSION")),
        profile_hash: super::record::hex_digest(&loaded.bytes),
    };
    tui::run(app, setup).runtime()
}
