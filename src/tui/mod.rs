//! The live screen: a tokio loop that merges keys (from a small reader thread), a steady
//! frame tick, sample batches drained from the source's ring and SIGTERM/SIGHUP into
//! [`app::AppEvent`]s, feeds them to [`app::App::update`], and draws with [`draw::draw`].

pub mod app;
pub mod calibrate;
pub mod digits;
pub mod draw;
pub mod line;
pub mod noise;
#[cfg(test)]
mod tests;

use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use anyhow::{Context, Result};
use ratatui::crossterm::event::{self as term_event, Event as TermEvent};
use ratatui::DefaultTerminal;
use tokio::sync::mpsc;

use dbtrail::events::Event;
use dbtrail::record::{Opening, Recorder, RunContext};
use dbtrail::resume::LogShape;

use crate::cli::files::LogKeeper;
use crate::source::Running;
use app::{App, AppEvent, Command};

/// Frames per second the screen redraws at, never faster.
pub const FRAMES_PER_SECOND: u64 = 25;

/// What the screen needs besides the app itself.
pub struct ScreenSetup {
    /// The running source.
    pub source: Running,
    /// Start logging here at once (`--log`), and what to do if the file exists.
    pub log: Option<(PathBuf, IfExists)>,
    /// Tool name and version, for log headers.
    pub tool: String,
    /// A hash of the profile's bytes, for log headers.
    pub profile_hash: String,
}

/// What a log does with a file of its name that already exists.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IfExists {
    /// Refuses it (the `l` key, and `--log` alone).
    Refuse,
    /// Adds to it after a `# resumed` line (`--append`).
    Append,
    /// Empties it first (`--force`).
    Replace,
}

/// Runs the screen until the user quits or a signal arrives; the terminal is restored on
/// every way out, a panic included (ratatui's hook restores it before the message).
pub fn run(app: App, setup: ScreenSetup) -> Result<()> {
    let runtime = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .context("cannot start the event loop")?;
    let mut terminal = ratatui::init();
    let outcome = runtime.block_on(event_loop(&mut terminal, app, setup));
    ratatui::restore();
    outcome
}

/// Test-only switch: set to N, the screen panics after its Nth frame, so a test can show
/// that a panic leaves the terminal restored. Not a user setting; not in the help.
const TEST_PANIC_VAR: &str = "DBTRAIL_TEST_PANIC_AFTER_FRAMES";

fn test_panic_frame() -> Option<u64> {
    std::env::var(TEST_PANIC_VAR).ok()?.parse().ok()
}

/// An open log and its keeper.
struct Log {
    recorder: Recorder<File>,
    path: PathBuf,
    keeper: LogKeeper,
}

async fn event_loop(
    terminal: &mut DefaultTerminal,
    mut app: App,
    mut setup: ScreenSetup,
) -> Result<()> {
    let stop_keys = Arc::new(AtomicBool::new(false));
    let mut keys = spawn_key_reader(Arc::clone(&stop_keys));
    let mut tick = tokio::time::interval(Duration::from_millis(1000 / FRAMES_PER_SECOND));
    tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Skip);
    let mut terminate = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())?;
    let mut hangup = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::hangup())?;
    let mut log: Option<Log> = None;
    let panic_at = test_panic_frame();
    let mut frames = 0u64;
    if let Some((path, if_exists)) = setup.log.clone() {
        start_log(&mut app, &mut log, &setup, &path, if_exists);
    }
    let result = loop {
        let commands = tokio::select! {
            Some(event) = keys.recv() => app.update(event),
            _ = tick.tick() => {
                let mut commands = drain(&mut app, &mut setup.source, &mut log);
                app.update(AppEvent::Link(setup.source.counters.snapshot()));
                if !setup.source.live && setup.source.exhausted() && !app.ended {
                    app.update(AppEvent::SourceEnded);
                }
                commands.extend(app.update(AppEvent::Tick { now: setup.source.now() }));
                if let Err(e) = terminal.draw(|frame| draw::draw(&app, frame)) {
                    break Err(e).context("cannot draw the screen");
                }
                frames += 1;
                if panic_at == Some(frames) {
                    panic!("test-only panic after frame {frames} ({TEST_PANIC_VAR} is set)");
                }
                commands
            }
            _ = terminate.recv() => break Ok(()),
            _ = hangup.recv() => break Ok(()),
        };
        if carry_out(commands, &mut app, &mut log, &setup) {
            break Ok(());
        }
    };
    stop_keys.store(true, Ordering::Release);
    if let Some(log) = log.as_mut() {
        let _ = log.recorder.finish(setup.source.now());
        let _ = log.recorder.get_ref().sync_data();
    }
    result
}

/// Moves what the source has sent to the log and the app.
fn drain(app: &mut App, source: &mut Running, log: &mut Option<Log>) -> Vec<Command> {
    let mut batch = Vec::new();
    while let Some(event) = source.next_event() {
        batch.push(event);
    }
    if let Some(open) = log.as_mut() {
        if let Err(e) = log_batch(open, &batch, source) {
            app.notice = Some(format!("logging to {} stopped: {e}", open.path.display()));
            *log = None;
            app.logging = None;
        } else {
            app.logging = Some((open.path.clone(), open.recorder.rows()));
        }
    }
    app.update(AppEvent::Samples(batch))
}

fn log_batch(log: &mut Log, batch: &[Event], source: &Running) -> io::Result<()> {
    for event in batch {
        log.recorder.handle(event)?;
    }
    let live_clock = source.live.then(|| source.now());
    log.keeper.after_batch(&mut log.recorder, live_clock)
}

/// Carries out commands; true when the screen should close.
fn carry_out(
    commands: Vec<Command>,
    app: &mut App,
    log: &mut Option<Log>,
    setup: &ScreenSetup,
) -> bool {
    for command in commands {
        match command {
            Command::Quit => return true,
            Command::Bell => {
                let mut out = io::stdout();
                let _ = out.write_all(b"\x07").and_then(|()| out.flush());
            }
            Command::StartLog(path) => start_log(app, log, setup, &path, IfExists::Refuse),
            Command::StopLog => {
                if let Some(mut open) = log.take() {
                    let _ = LogKeeper::finish(&mut open.recorder, setup.source.now());
                    app.notice = Some(format!(
                        "log {} closed, {} rows",
                        open.path.display(),
                        open.recorder.rows()
                    ));
                }
                app.logging = None;
            }
            Command::Recalibrated => {
                // A log keeps one calibration per file: close it and say so.
                if let Some(open) = log.as_ref() {
                    let path = open.path.clone();
                    carry_out(vec![Command::StopLog], app, log, setup);
                    app.notice = Some(format!(
                        "frequency or offset changed: log {} closed; press l to start a new one",
                        path.display()
                    ));
                }
            }
        }
    }
    false
}

fn start_log(
    app: &mut App,
    log: &mut Option<Log>,
    setup: &ScreenSetup,
    path: &Path,
    if_exists: IfExists,
) {
    match open_log(app, setup, path, if_exists) {
        Ok(open) => {
            app.logging = Some((open.path.clone(), 0));
            app.notice = Some(format!("logging to {}", path.display()));
            *log = Some(open);
        }
        Err(e) => {
            app.update(AppEvent::LogRefused {
                path: path.to_path_buf(),
                error: format!("{e:#}"),
            });
        }
    }
}

fn open_log(app: &App, setup: &ScreenSetup, path: &Path, if_exists: IfExists) -> Result<Log> {
    let (file, opening) = open_log_file(path, if_exists)?;
    let context = RunContext {
        tool: setup.tool.clone(),
        profile: app.profile.name.clone(),
        profile_hash: setup.profile_hash.clone(),
        started: SystemTime::now() - Duration::from_secs_f64(setup.source.now()),
        source: setup.source.description.clone(),
        every: Duration::from_secs(1),
    };
    let budget = Some(app.uncertainty.clone());
    let mut recorder = Recorder::with_uncertainty(file, app.cal.clone(), budget, &context, opening)
        .with_context(|| format!("cannot write {}", path.display()))?;
    recorder.begin_at(setup.source.now());
    Ok(Log {
        recorder,
        path: path.to_path_buf(),
        keeper: LogKeeper::new(),
    })
}

/// Opens the log's file as `if_exists` says, locked against a second recorder (the same
/// advisory lock as `record` takes), and how its rows begin.
fn open_log_file(path: &Path, if_exists: IfExists) -> Result<(File, Opening)> {
    let name = path.display();
    let mut options = OpenOptions::new();
    match if_exists {
        IfExists::Refuse => options.write(true).create_new(true),
        IfExists::Append => options.read(true).append(true).create(true),
        IfExists::Replace => options.write(true).create(true),
    };
    let file = match options.open(path) {
        // Short, to fit the prompt's line: `watch --log --append/--force` is in the help.
        Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {
            anyhow::bail!("{name} already exists: give another name")
        }
        other => other.with_context(|| format!("cannot create {name}"))?,
    };
    file.try_lock()
        .with_context(|| format!("cannot lock {name}: is another dbtrail writing it?"))?;
    let opening = match if_exists {
        IfExists::Refuse => Opening::Fresh,
        IfExists::Replace => {
            file.set_len(0)
                .with_context(|| format!("cannot empty {name}"))?;
            Opening::Fresh
        }
        IfExists::Append => resume_opening(&file, path)?,
    };
    Ok((file, opening))
}

/// How rows go on after those of the log in `file`: fresh when it is empty, else after a
/// `# resumed` line, when it holds rows per interval as the screen writes them.
fn resume_opening(file: &File, path: &Path) -> Result<Opening> {
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
    Ok(Opening::Resume {
        channels: shape.channels,
        cut: shape.cut,
    })
}

/// A thread that turns terminal key presses into events; it never blocks the loop.
fn spawn_key_reader(stop: Arc<AtomicBool>) -> mpsc::UnboundedReceiver<AppEvent> {
    let (tx, rx) = mpsc::unbounded_channel();
    std::thread::spawn(move || {
        while !stop.load(Ordering::Acquire) {
            match term_event::poll(Duration::from_millis(100)) {
                Ok(true) => {}
                Ok(false) => continue,
                Err(_) => break,
            }
            if let Ok(TermEvent::Key(key)) = term_event::read() {
                if tx.send(AppEvent::Key(key)).is_err() {
                    break;
                }
            }
        }
    });
    rx
}
