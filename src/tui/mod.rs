//! The live screen: one loop that turns keys (from a small reader thread), a steady frame tick, sample
//! batches drained from the source's ring and what became of its commands (a log opened,
//! refused, closed) into [`app::AppEvent`]s, feeds them to [`app::App::update`], and
//! draws with [`app::draw::draw`]. A signal (SIGTERM, SIGHUP, SIGINT) raises the same
//! flag as in `record`.

pub mod app;
pub mod calibrate;
pub mod digits;
pub mod line;
pub mod noise;

use std::fs::File;
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc;
use std::time::{Duration, Instant, SystemTime};

use anyhow::{Context, Result};
use ratatui::crossterm::event::{self as term_event, Event as TermEvent, KeyEvent};
use ratatui::DefaultTerminal;

use dbtrail::events::Event;
use dbtrail::record::{Opening, Recorder, RunContext};
use dbtrail::resume::LogShape;

use crate::endpoint::Published;
use crate::logs::{IfExists, LogFile, LogKeeper, LogOpenError};
use crate::source::Running;
use app::{App, AppEvent, Command, LogEnd};

/// Frames per second the screen redraws at, never faster.
pub const FRAMES_PER_SECOND: u64 = 25;

/// What the screen needs besides the app itself.
pub struct ScreenSetup {
    /// The running source.
    pub source: Running,
    /// Start logging here at once (`--log`), and what to do if the file exists.
    pub log: Option<(PathBuf, IfExists)>,
    /// What a log's header says of the run; a log opened later starts its clock at the
    /// source's start.
    pub context: RunContext,
    /// The metrics endpoint (`--metrics`), served the rows a log would hold.
    pub metrics: Option<Published>,
}

/// Runs the screen until the user quits or a signal arrives; the terminal is restored on
/// every way out, a panic included (ratatui's hook restores it before the message).
pub fn run(app: App, setup: ScreenSetup) -> Result<()> {
    // Ctrl-C arrives as a key in raw mode; SIGINT from elsewhere ends the screen as
    // SIGTERM and SIGHUP do, with the log finished and the terminal restored.
    let stop = crate::signals::stop_flag().context("cannot watch for signals")?;
    let mut terminal = ratatui::init();
    let outcome = event_loop(&mut terminal, app, setup, &stop);
    ratatui::restore();
    outcome
}

/// Test-only switch: set to N, the screen panics after its Nth frame, so a test can show
/// that a panic leaves the terminal restored. Not a user setting; not in the help.
const TEST_PANIC_VAR: &str = "DBTRAIL_TEST_PANIC_AFTER_FRAMES";

fn test_panic_frame() -> Option<u64> {
    std::env::var(TEST_PANIC_VAR).ok()?.parse().ok()
}

/// The longest the loop waits for a key before it looks at the signal flag again.
const SIGNAL_LOOK: Duration = Duration::from_millis(20);
/// How long the key thread waits for a key before it looks whether the loop is gone.
const KEY_POLL: Duration = Duration::from_millis(100);

/// An open log and its keeper.
struct Log {
    recorder: Recorder<LogFile>,
    path: PathBuf,
    keeper: LogKeeper,
}

/// The metrics endpoint and the rows it is served from: a recorder of its own, whose rows
/// go nowhere, so that it serves what a log would hold whether one is open or not.
struct Watched {
    published: Published,
    recorder: Recorder<io::Sink>,
    keeper: LogKeeper,
}

impl Watched {
    fn new(published: Published, app: &App, setup: &ScreenSetup) -> Result<Self> {
        let recorder = recorder_for(app, setup, io::sink(), Opening::Fresh)
            .context("cannot start the metrics' figures")?;
        Ok(Watched {
            published,
            recorder,
            keeper: LogKeeper::new(),
        })
    }

    fn take(&mut self, batch: &[Event], source: &Running) {
        // The rows go nowhere: writing them cannot fail.
        let _ = feed(&mut self.recorder, &mut self.keeper, batch, source);
        self.published.publish(source, &self.recorder);
    }

    /// Figures from now on through the app's calibration as it now is.
    fn recalibrated(&mut self, app: &App, setup: &ScreenSetup) {
        if let Ok(recorder) = recorder_for(app, setup, io::sink(), Opening::Fresh) {
            self.recorder = recorder;
        }
    }
}

/// Keys as they come, a frame (samples drained, the link's counters, a tick,
/// a draw) every 1/[`FRAMES_PER_SECOND`] s, and the signal flag between the two.
fn event_loop(
    terminal: &mut DefaultTerminal,
    mut app: App,
    mut setup: ScreenSetup,
    stop: &AtomicBool,
) -> Result<()> {
    let period = Duration::from_millis(1000 / FRAMES_PER_SECOND);
    let panic_at = test_panic_frame();
    let mut frames = 0u64;
    let mut log: Option<Log> = None;
    let mut watched = match setup.metrics.take() {
        Some(published) => Some(Watched::new(published, &app, &setup)?),
        None => None,
    };
    if let Some((path, if_exists)) = setup.log.clone() {
        let opened = start_log(&mut log, &app, &setup, &path, if_exists);
        app.update(opened);
    }
    let keys = spawn_key_reader();
    let mut next_frame = Instant::now();
    let result = loop {
        if stop.load(Ordering::Acquire) {
            break Ok(());
        }
        let now = Instant::now();
        let commands = if now >= next_frame {
            // A frame missed (the machine busy) is skipped, not caught up.
            next_frame = (next_frame + period).max(now);
            let commands = frame(&mut app, &mut setup, &mut log, watched.as_mut());
            if let Err(e) = terminal.draw(|frame| app::draw::draw(&app, frame)) {
                break Err(e).context("cannot draw the screen");
            }
            frames += 1;
            if panic_at == Some(frames) {
                panic!("test-only panic after frame {frames} ({TEST_PANIC_VAR} is set)");
            }
            commands
        } else {
            match keys.recv_timeout((next_frame - now).min(SIGNAL_LOOK)) {
                Ok(key) => app.update(AppEvent::Key(key)),
                Err(mpsc::RecvTimeoutError::Timeout) => continue,
                Err(mpsc::RecvTimeoutError::Disconnected) => {
                    break Err(anyhow::anyhow!("the keyboard can no longer be read"))
                }
            }
        };
        if carry_out(commands, &mut app, &mut log, &setup, watched.as_mut()) {
            break Ok(());
        }
    };
    if let Some(log) = log.as_mut() {
        let _ = LogKeeper::finish(&mut log.recorder, setup.source.now());
    }
    result
}

/// A thread that reads the keys: a terminal that has gone away can leave crossterm's
/// read spinning, and the loop must still see a signal and end (the thread ends with the
/// process). It stops reading when the loop has gone.
fn spawn_key_reader() -> mpsc::Receiver<KeyEvent> {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || loop {
        match term_event::poll(KEY_POLL) {
            Ok(false) => continue,
            Ok(true) => {}
            Err(_) => break,
        }
        match term_event::read() {
            Ok(TermEvent::Key(key)) => {
                if tx.send(key).is_err() {
                    break;
                }
            }
            Ok(_) => {}
            Err(_) => break,
        }
    });
    rx
}

/// What a frame feeds the app: what the source sent, its link's counters, its end, the time.
fn frame(
    app: &mut App,
    setup: &mut ScreenSetup,
    log: &mut Option<Log>,
    watched: Option<&mut Watched>,
) -> Vec<Command> {
    let mut commands = drain(app, &mut setup.source, log, watched);
    app.update(AppEvent::Link(setup.source.counters.snapshot()));
    if !setup.source.live && setup.source.exhausted() && !app.ended() {
        app.update(AppEvent::SourceEnded);
    }
    commands.extend(app.update(AppEvent::Tick {
        now: setup.source.now(),
    }));
    commands
}

/// Moves what the source has sent to the log and the app.
fn drain(
    app: &mut App,
    source: &mut Running,
    log: &mut Option<Log>,
    watched: Option<&mut Watched>,
) -> Vec<Command> {
    let mut batch = Vec::new();
    while let Some(event) = source.next_event() {
        batch.push(event);
    }
    if let Some(watched) = watched {
        watched.take(&batch, source);
    }
    if let Some(open) = log.as_mut() {
        let written = log_batch(open, &batch, source);
        let rows = open.recorder.rows();
        let effect = match written {
            Ok(()) => AppEvent::LogRows(rows),
            Err(e) => {
                let path = open.path.clone();
                *log = None;
                AppEvent::LogClosed {
                    path,
                    rows,
                    why: LogEnd::Failed(e.to_string()),
                }
            }
        };
        app.update(effect);
    }
    app.update(AppEvent::Samples(batch))
}

fn log_batch(log: &mut Log, batch: &[Event], source: &Running) -> io::Result<()> {
    feed(&mut log.recorder, &mut log.keeper, batch, source)
}

/// Hands a batch to a recorder, and a live source's clock after it.
fn feed<W: crate::logs::Durable>(
    recorder: &mut Recorder<W>,
    keeper: &mut LogKeeper,
    batch: &[Event],
    source: &Running,
) -> io::Result<()> {
    for event in batch {
        recorder.handle(event)?;
    }
    let live_clock = source.live.then(|| source.now());
    keeper.after_batch(recorder, live_clock)
}

/// Carries out commands, telling the app what became of them; true when the screen
/// should close.
fn carry_out(
    commands: Vec<Command>,
    app: &mut App,
    log: &mut Option<Log>,
    setup: &ScreenSetup,
    mut watched: Option<&mut Watched>,
) -> bool {
    for command in commands {
        if let Some(watched) = watched.as_deref_mut() {
            match command {
                Command::Recalibrated => watched.recalibrated(app, setup),
                Command::Rezero { t, zero_counts } => {
                    let _ = watched.recorder.rezero(t, zero_counts);
                }
                _ => {}
            }
        }
        let effect = match command {
            Command::Quit => return true,
            Command::Bell => {
                let mut out = io::stdout();
                let _ = out.write_all(b"\x07").and_then(|()| out.flush());
                None
            }
            Command::StartLog(path) => Some(start_log(log, app, setup, &path, IfExists::Refuse)),
            Command::StopLog => close_log(log, setup, LogEnd::Stopped),
            // A log keeps one calibration per file.
            Command::Recalibrated => close_log(log, setup, LogEnd::Recalibrated),
            Command::Rezero { t, zero_counts } => rezero_log(log, setup, t, zero_counts),
        };
        if let Some(event) = effect {
            app.update(event);
        }
    }
    false
}

/// Tells the open log, if any, of a zero taken at `t`; a log that cannot take it is closed.
fn rezero_log(
    log: &mut Option<Log>,
    setup: &ScreenSetup,
    t: f64,
    zero_counts: f64,
) -> Option<AppEvent> {
    let written = log.as_mut()?.recorder.rezero(t, zero_counts);
    let error = written.err()?;
    let why = LogEnd::Failed(format!("cannot write the zero line: {error}"));
    close_log(log, setup, why)
}

/// Closes the open log, if any, with its last partial interval.
fn close_log(log: &mut Option<Log>, setup: &ScreenSetup, why: LogEnd) -> Option<AppEvent> {
    let mut open = log.take()?;
    let _ = LogKeeper::finish(&mut open.recorder, setup.source.now());
    Some(AppEvent::LogClosed {
        path: open.path,
        rows: open.recorder.rows(),
        why,
    })
}

/// Opens a log at `path`; the app is told it opened, or why it was refused.
fn start_log(
    log: &mut Option<Log>,
    app: &App,
    setup: &ScreenSetup,
    path: &Path,
    if_exists: IfExists,
) -> AppEvent {
    match open_log(app, setup, path, if_exists) {
        Ok(open) => {
            *log = Some(open);
            AppEvent::LogOpened(path.to_path_buf())
        }
        Err(e) => AppEvent::LogRefused {
            path: path.to_path_buf(),
            error: format!("{e:#}"),
        },
    }
}

fn open_log(app: &App, setup: &ScreenSetup, path: &Path, if_exists: IfExists) -> Result<Log> {
    let board = app.coupler().is_none() && app.calibration().thermal().is_some();
    let (file, opening) = open_log_file(path, if_exists, app.coupler().is_some(), board)?;
    let recorder = recorder_for(app, setup, file, opening)
        .with_context(|| format!("cannot write {}", path.display()))?;
    Ok(Log {
        recorder,
        path: path.to_path_buf(),
        keeper: LogKeeper::new(),
    })
}

/// A recorder of the screen's rows to `out` through the app's calibration as it now is,
/// its first interval the one the source is in.
fn recorder_for<W: Write>(
    app: &App,
    setup: &ScreenSetup,
    out: W,
    opening: Opening,
) -> io::Result<Recorder<W>> {
    let context = RunContext {
        started: SystemTime::now() - Duration::from_secs_f64(setup.source.now()),
        ..setup.context.clone()
    };
    let mut recorder = match (app.coupler(), app.coupler_calibration()) {
        (Some(coupler), Some(cal)) => {
            Recorder::for_coupler(out, cal.clone(), &coupler.setup, &context, opening)
        }
        _ => {
            let budget = Some(app.uncertainty().clone());
            let cal = app.calibration().clone();
            Recorder::with_uncertainty(out, cal, budget, &context, opening)
        }
    }?;
    recorder.begin_at(setup.source.now());
    Ok(recorder)
}

/// Opens the log's file as `if_exists` says, locked against a second recorder (as
/// `record`'s are), and how its rows begin.
fn open_log_file(
    path: &Path,
    if_exists: IfExists,
    coupled: bool,
    board: bool,
) -> Result<(LogFile, Opening)> {
    // Short, to fit the prompt's line: `watch --log --append/--force` is in the help.
    let file = LogFile::open(path, if_exists).map_err(|e| match e {
        LogOpenError::Exists(_) | LogOpenError::Locked(_) => {
            anyhow::anyhow!("{e}: give another name")
        }
        other => other.into(),
    })?;
    let opening = match if_exists {
        IfExists::Append => resume_opening(file.file(), path, coupled, board)?,
        IfExists::Refuse | IfExists::Replace => Opening::Fresh,
    };
    Ok((file, opening))
}

/// How rows go on after those of the log in `file`: fresh when it is empty, else after a
/// `# resumed` line, when it holds rows per interval as the screen writes them.
fn resume_opening(file: &File, path: &Path, coupled: bool, board: bool) -> Result<Opening> {
    let name = path.display();
    let len = file
        .metadata()
        .with_context(|| format!("cannot read the state of {name}"))?
        .len();
    if len == 0 {
        return Ok(Opening::Fresh);
    }
    let shape = LogShape::scan(io::BufReader::new(file))
        .map_err(|e| anyhow::anyhow!("cannot add to {name}: {e}; choose another file"))?;
    if shape.per_sample {
        anyhow::bail!(
            "cannot add to {name}: it holds one row per sample and the screen logs a row a \
             second; choose another file"
        );
    }
    if let Some(why) = shape.other_kind(coupled, board) {
        anyhow::bail!("cannot add to {name}: {why}; choose another file");
    }
    Ok(Opening::Resume {
        channels: shape.channels,
        cut: shape.cut,
    })
}
