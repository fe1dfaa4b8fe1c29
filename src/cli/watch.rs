//! `dbtrail watch`: the live screen.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

use anyhow::anyhow;

use super::metrics_serve::MetricsArgs;
use super::run_plan::RunPlan;
use super::source_args::{LinkArgs, ReadingArgs, SourceArgs};
use super::{BadInput, Failure, Runtime};
use crate::endpoint::Published;
use crate::logs::IfExists;
use crate::tui::{self, app::App, ScreenSetup};

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
    #[command(flatten)]
    metrics: MetricsArgs,
}

pub fn run(args: Args) -> Result<(), Failure> {
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
    let plan = RunPlan::from_args(&args.source, &args.link, &args.reading).paced_as_the_present();
    let endpoint = args.metrics.start().bad_input()?;
    let run = plan.start(None)?;
    let context = run.context(Duration::from_secs(1));
    let metrics_at = endpoint.as_ref().map(|endpoint| endpoint.addr);
    let metrics = endpoint.map(|endpoint| Published::new(endpoint, &run.profile_name(), &context));
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let app = match run.coupled {
        Some(coupled) => {
            App::coupled_calibrated(Arc::new(coupled.coupler), coupled.cal, plan.short_label())
        }
        None => App::calibrated(
            Arc::new(run.loaded.profile),
            run.cal,
            run.uncertainty,
            plan.offset_db,
            plan.short_label(),
        ),
    }
    .with_color(color);
    let app = match metrics_at {
        Some(addr) => app.with_metrics_at(addr),
        None => app,
    };
    let log = args.log.map(|path| {
        let if_exists = if args.append {
            IfExists::Append
        } else if args.force {
            IfExists::Replace
        } else {
            IfExists::Refuse
        };
        (path, if_exists)
    });
    let setup = ScreenSetup {
        context,
        source: run.source,
        log,
        metrics,
    };
    tui::run(app, setup).runtime()
}
