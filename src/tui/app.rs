//! The live screen's state, and `update`, the one function that changes it. Nothing here
//! touches the terminal: effects the loop must carry out come back as [`Command`]s, and
//! what became of them comes back as [`AppEvent`]s. The fields are private to this module;
//! [`draw`] is a child of it so that it can read them, and takes `&App`, so it cannot
//! change them.

pub mod board;
pub mod coupled;
#[cfg(test)]
mod coupled_tests;
pub mod draw;
#[cfg(test)]
mod tests;
#[cfg(test)]
mod thermal_tests;
pub mod zero;

use std::path::PathBuf;
use std::sync::Arc;

use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};

use dbtrail::calibration::{Calibration, Flags, Reading, NOT_A_VALUE};
use dbtrail::coupler::{Coupler, CouplerCalibration};
use dbtrail::events::Event;
use dbtrail::link::LinkSnapshot;
use dbtrail::profile::Profile;
use dbtrail::stats::{Averager, Averaging, PowerStats, Settle, Trend};
use dbtrail::uncertainty::{Budget, Uncertainty};
use dbtrail::units::{parse_db, parse_frequency};

use super::line::LineEdit;
use super::noise::{CountWindow, ReadingSpread};
use board::Board;
use coupled::CoupledRun;
use zero::{ZeroOutcome, ZeroTake, COUPLER_ZERO_REFUSED};

/// Everything that can happen to the screen.
#[derive(Debug, Clone)]
pub enum AppEvent {
    /// A key was pressed.
    Key(KeyEvent),
    /// Time has passed; `now` is source time in seconds.
    Tick { now: f64 },
    /// Samples and link events from the source, oldest first.
    Samples(Vec<Event>),
    /// The source's link counters.
    Link(LinkSnapshot),
    /// A replay has reached the end of its file: nothing more will come.
    SourceEnded,
    /// The log asked for could not be opened: the prompt comes back with the name and why.
    LogRefused {
        /// The name given.
        path: PathBuf,
        /// Why, and what to do.
        error: String,
    },
    /// A log was opened and takes rows from now on.
    LogOpened(PathBuf),
    /// The open log holds this many rows.
    LogRows(u64),
    /// The open log was closed, and why.
    LogClosed {
        /// Its file.
        path: PathBuf,
        /// Rows it holds.
        rows: u64,
        /// Why it was closed.
        why: LogEnd,
    },
}

/// Why a log was closed.
#[derive(Debug, Clone, PartialEq)]
pub enum LogEnd {
    /// The user stopped it.
    Stopped,
    /// The frequency or the offset changed: a log keeps one calibration per file.
    Recalibrated,
    /// Writing it failed; what went wrong.
    Failed(String),
}

/// What the loop must do after an update.
#[derive(Debug, Clone, PartialEq)]
pub enum Command {
    /// Leave the screen.
    Quit,
    /// Ring the terminal bell once.
    Bell,
    /// Start logging to this file.
    StartLog(PathBuf),
    /// Stop logging.
    StopLog,
    /// The calibration changed (frequency or offset); a log notes it.
    Recalibrated,
    /// A zero was taken with the RF off: from source time `t` the run's ADC zero is
    /// `zero_counts`; an open log writes a `# zero:` line and goes on.
    Rezero {
        /// Source time of the zero's last sample, seconds.
        t: f64,
        /// The new zero, counts.
        zero_counts: f64,
    },
}

/// The unit of the main reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Units {
    /// dBm.
    Dbm,
    /// Watts with an SI prefix.
    Watts,
    /// Volts rms at the profile's impedance.
    Vrms,
    /// Volts peak.
    Vpk,
    /// Volts peak to peak.
    Vpp,
    /// dB relative to the stored reference.
    Relative,
}

impl Units {
    fn next(self, has_reference: bool) -> Self {
        match self {
            Units::Dbm => Units::Watts,
            Units::Watts => Units::Vrms,
            Units::Vrms => Units::Vpk,
            Units::Vpk => Units::Vpp,
            Units::Vpp if has_reference => Units::Relative,
            Units::Vpp | Units::Relative => Units::Dbm,
        }
    }
}

/// The trend windows the trend key cycles through: (seconds, label).
pub const TREND_WINDOWS: [(f64, &str); 4] = [
    (10.0, "10 s"),
    (60.0, "1 min"),
    (600.0, "10 min"),
    (3600.0, "1 h"),
];
/// Buckets per trend window.
pub const TREND_BUCKETS: usize = 240;
/// How long a warning stays up after the last sample that raised it, seconds.
pub const WARNING_HOLD_S: f64 = 1.5;
/// Flags that raise the warning banner.
pub const ALARMS: Flags = Flags::ADC_CLIP
    .union(Flags::OVER_FULL_SCALE)
    .union(Flags::ABOVE_SPAN)
    .union(Flags::OVER_DETECTOR_MAX)
    .union(Flags::OVER_RATED);

/// What the main reading shows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Shown {
    /// No valid reading yet.
    Waiting,
    /// A level, dBm at the reference plane.
    Level(f64),
    /// Below the calibrated span, whose low end is given.
    Below(f64),
    /// At least this level, dBm, and why it is a bound: as the recorder counts them, a
    /// reading at clip or above the span at its own level or the span's top, whichever
    /// is lower, and a mean over readings some of which were counted so.
    AtLeast(f64, Ceiling),
}

/// Why a reading is only a level the true one is at least.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ceiling {
    /// The last reading was at ADC clip.
    AdcClip,
    /// The last reading was above the calibrated span.
    AboveSpan,
    /// The averaging window holds readings above the span, counted at its top.
    WindowAboveSpan,
}

impl Ceiling {
    /// Why, as the screen says it.
    pub fn reason(self) -> &'static str {
        match self {
            Ceiling::AdcClip => "ADC clip",
            Ceiling::AboveSpan => "above the calibrated span",
            Ceiling::WindowAboveSpan => "window has readings above the span",
        }
    }
}

/// The ± beside the main reading, or why there is none.
#[derive(Debug, Clone, PartialEq)]
pub enum Plusminus {
    /// No reading yet.
    Waiting,
    /// The reading is a bound (below the span, above it, at ADC clip, or a mean over
    /// readings above it): a bound has no uncertainty.
    Bound,
    /// Counts over the ADC's full scale came within the warnings' hold time: the samples
    /// around them are not to be trusted.
    OverFullScale,
    /// The board is outside the calibrated temperatures: the model is carried beyond
    /// what was measured, so no budget holds.
    TempOutside,
    /// The board's temperature is not known: the reading is as calibrated, and how far
    /// off that is is not known either.
    TempUnknown,
    /// The budget at the shown level, with the noise of the averaging window.
    Budget(Budget),
}

/// The shown value held by the freeze key, with its ±.
#[derive(Debug, Clone, PartialEq)]
pub struct Frozen {
    /// The reading.
    pub shown: Shown,
    /// Its ± when it was frozen.
    pub plusminus: Plusminus,
}

/// What the input line is asking for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ask {
    /// A frequency such as 145.5MHz.
    Frequency,
    /// An extra offset such as 10dB.
    Offset,
    /// Averaging: off, a count, or a duration.
    Averaging,
    /// A file to log to.
    LogFile,
}

impl Ask {
    /// The question put to the user.
    pub fn question(self) -> &'static str {
        match self {
            Ask::Frequency => "frequency (e.g. 145.5MHz)",
            Ask::Offset => "extra offset in dB (e.g. 10dB, -3dB)",
            Ask::Averaging => "averaging: off, a count (32) or a time (500ms, 2s)",
            Ask::LogFile => "log to file",
        }
    }
}

/// Which readings fill the screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    /// The power of one channel (the forward arm in a coupler run).
    Power,
    /// The match of the forward and reflected arms (a coupler run only).
    Matching,
}

/// What the offset key says in a coupler run, where an extra offset would move one arm.
pub const COUPLER_OFFSET_REFUSED: &str = "no extra offset in a coupler run: the coupler \
     set-up file holds each arm's coupling and the through-loss; edit them there";
/// What the matching key says in a run without a coupler.
pub const NO_COUPLER: &str = "the matching view needs a coupler set-up: start the run with \
     --coupler FILE";

/// The screen's mode.
#[derive(Debug, Clone, PartialEq)]
pub enum Mode {
    /// Readings, keys act at once.
    Normal,
    /// The help overlay.
    Help,
    /// Typing an answer.
    Prompt {
        /// What is asked.
        ask: Ask,
        /// What has been typed, and where the cursor is.
        line: LineEdit,
        /// Why the last answer was refused.
        error: Option<String>,
    },
    /// `q` was pressed while a log is open: a second `q` quits, any other key stays.
    ConfirmQuit,
    /// Taking a zero with the RF off: the power channel's counts so far.
    Zeroing(ZeroTake),
}

/// The state of the live screen.
pub struct App {
    /// The profile in use.
    profile: Arc<Profile>,
    /// The calibration for the current frequency and offset.
    cal: Calibration,
    /// The uncertainty budget for the same frequency and offset, rebuilt with `cal`.
    uncertainty: Uncertainty,
    /// Offset added to the profile's, dB.
    extra_offset_db: f64,
    /// What the samples come from.
    source: String,
    /// Whether colours may be used.
    color: bool,
    /// Where `--metrics` serves, as the status line names it.
    metrics_at: Option<String>,
    /// The mode.
    mode: Mode,
    /// The unit of the main reading.
    units: Units,
    /// The reference for relative readings, dBm.
    reference_dbm: Option<f64>,
    /// Which of [`TREND_WINDOWS`] is shown.
    trend_window: usize,
    /// The shown value held by the freeze key.
    frozen: Option<Frozen>,
    /// Link counters as last reported.
    link: LinkSnapshot,
    /// Samples per second, measured.
    rate: f64,
    /// Source time now, seconds.
    now: f64,
    /// The last reading of the first channel.
    last: Option<Reading>,
    /// When the last sample arrived, source seconds.
    last_sample_t: Option<f64>,
    /// Whether the source is connected.
    connected: bool,
    /// Whether a replay has reached the end of its file.
    ended: bool,
    /// The moving average.
    averager: Averager,
    /// Min and max hold since the reset.
    holds: PowerStats,
    /// When the holds were reset, source seconds.
    holds_since: f64,
    /// The best shown level since the reset, dBm (the peaking aid): taken only from a
    /// full averaging window, never from the few readings of one just started.
    best_dbm: Option<f64>,
    /// The single readings of the averaging window, for the noise shown beside the best.
    spread: ReadingSpread,
    /// The raw counts of the averaging window, for the noise term of the ±.
    counts: CountWindow,
    /// Flags of the warnings now up, and when each was last raised.
    warnings: Vec<(Flags, f64)>,
    /// When the link counters last showed refused input (bad or over-long lines, CRC
    /// errors), source seconds.
    rejected_at: Option<f64>,
    /// Where the log goes and how many rows it has, when logging.
    logging: Option<(PathBuf, u64)>,
    /// A one-line message for the user (an error from a command, say).
    notice: Option<String>,
    settle: Settle,
    trends: Vec<Trend>,
    rate_mark: (f64, u64),
    /// Which readings fill the screen.
    view: View,
    /// Both arms and their match, in a coupler run.
    coupled: Option<CoupledRun>,
    /// The board's temperature and the calibration at it, when the profile reads one.
    board: Option<Board>,
    /// The ADC zero taken on this screen, counts; kept through a new frequency or offset.
    zero_counts: Option<f64>,
    /// Commands raised while samples were taken in (a zero finished), for `update` to return.
    pending: Vec<Command>,
}

impl App {
    /// A screen for `profile` at `freq_hz` (None: the profile's reference) and an extra
    /// offset.
    #[cfg(test)]
    pub fn new(
        profile: Arc<Profile>,
        freq_hz: Option<f64>,
        extra_offset_db: f64,
        source: String,
    ) -> Self {
        let cal = Calibration::new(&profile, freq_hz, extra_offset_db);
        let uncertainty = Uncertainty::new(&profile, &cal);
        Self::calibrated(profile, cal, uncertainty, extra_offset_db, source)
    }

    /// A screen for a calibration already built (with its budget) for `profile` with an
    /// extra offset, so that a run's start builds the code table once.
    pub fn calibrated(
        profile: Arc<Profile>,
        cal: Calibration,
        uncertainty: Uncertainty,
        extra_offset_db: f64,
        source: String,
    ) -> Self {
        App {
            board: Board::of(&cal),
            zero_counts: None,
            pending: Vec::new(),
            uncertainty,
            profile,
            cal,
            extra_offset_db,
            source,
            color: true,
            metrics_at: None,
            mode: Mode::Normal,
            units: Units::Dbm,
            reference_dbm: None,
            trend_window: 1,
            frozen: None,
            link: LinkSnapshot::default(),
            rate: 0.0,
            now: 0.0,
            last: None,
            last_sample_t: None,
            connected: true,
            ended: false,
            averager: Averager::new(Averaging::Samples(16)),
            holds: PowerStats::default(),
            holds_since: 0.0,
            best_dbm: None,
            spread: ReadingSpread::new(Averaging::Samples(16)),
            counts: CountWindow::new(Averaging::Samples(16)),
            warnings: Vec::new(),
            rejected_at: None,
            logging: None,
            notice: None,
            settle: Settle::new(1.0, 0.1),
            trends: TREND_WINDOWS
                .iter()
                .map(|(s, _)| Trend::new(*s, TREND_BUCKETS))
                .collect(),
            rate_mark: (0.0, 0),
            view: View::Power,
            coupled: None,
        }
    }

    /// A screen for a coupler run at `freq_hz`: the power view shows the forward arm, the
    /// matching view both.
    #[cfg(test)]
    pub fn coupled(coupler: Arc<Coupler>, freq_hz: f64, source: String) -> Self {
        let cal = CouplerCalibration::new(&coupler, freq_hz);
        Self::coupled_calibrated(coupler, cal, source)
    }

    /// A screen for a coupler run whose calibration is already built (so that a run's
    /// start builds the code tables once).
    pub fn coupled_calibrated(
        coupler: Arc<Coupler>,
        cal: CouplerCalibration,
        source: String,
    ) -> Self {
        let forward = Arc::new(coupler.forward.clone());
        let mut app = Self::calibrated(
            forward,
            cal.forward.clone(),
            cal.forward_budget.clone(),
            0.0,
            source,
        );
        app.coupled = Some(CoupledRun::new(coupler, cal, app.averager.mode()));
        // Each arm's profile is its own: the arms are read as they were calibrated.
        app.board = None;
        app
    }

    /// The one place state changes.
    pub fn update(&mut self, event: AppEvent) -> Vec<Command> {
        match event {
            AppEvent::Key(key) if key.kind != KeyEventKind::Release => self.key(key),
            AppEvent::Key(_) => Vec::new(),
            AppEvent::Samples(events) => self.samples(&events),
            AppEvent::Link(link) => {
                if link.rejected() > self.link.rejected() {
                    self.rejected_at = Some(self.now);
                }
                self.connected = link.connected;
                self.link = link;
                Vec::new()
            }
            AppEvent::SourceEnded => {
                self.ended = true;
                Vec::new()
            }
            AppEvent::LogRefused { path, error } => {
                self.mode = Mode::Prompt {
                    ask: Ask::LogFile,
                    line: LineEdit::new(&path.to_string_lossy()),
                    error: Some(error),
                };
                Vec::new()
            }
            AppEvent::LogOpened(path) => {
                self.notice = Some(format!("logging to {}", path.display()));
                self.logging = Some((path, 0));
                Vec::new()
            }
            AppEvent::LogRows(rows) => {
                if let Some((_, shown)) = self.logging.as_mut() {
                    *shown = rows;
                }
                Vec::new()
            }
            AppEvent::LogClosed { path, rows, why } => {
                self.logging = None;
                self.notice = Some(log_closed_notice(&path, rows, &why));
                Vec::new()
            }
            AppEvent::Tick { now } => self.tick(now),
        }
    }

    /// Names where `--metrics` serves on the status line: the port alone on loopback.
    pub fn with_metrics_at(mut self, addr: std::net::SocketAddr) -> Self {
        self.metrics_at = Some(if addr.ip().is_loopback() {
            format!("metrics :{}", addr.port())
        } else {
            format!("metrics {addr}")
        });
        self
    }

    /// Whether colours may be used (`NO_COLOR` unset).
    pub fn with_color(mut self, color: bool) -> Self {
        self.color = color;
        self
    }

    /// The calibration for the current frequency and offset.
    pub fn calibration(&self) -> &Calibration {
        &self.cal
    }

    /// The uncertainty budget that goes with [`App::calibration`].
    pub fn uncertainty(&self) -> &Uncertainty {
        &self.uncertainty
    }

    /// Both arms' calibration, in a coupler run.
    pub fn coupler_calibration(&self) -> Option<&CouplerCalibration> {
        self.coupled.as_ref().map(|run| &run.cal)
    }

    /// The coupler set-up, in a coupler run.
    pub fn coupler(&self) -> Option<&Arc<Coupler>> {
        self.coupled.as_ref().map(|run| &run.coupler)
    }

    /// Whether a replay has reached the end of its file.
    pub fn ended(&self) -> bool {
        self.ended
    }

    /// The level the main reading shows now (or the frozen one).
    pub fn shown(&self) -> Shown {
        self.frozen
            .as_ref()
            .map_or_else(|| self.live_shown(), |f| f.shown)
    }

    /// The ± of the main reading now (or the frozen one's).
    pub fn plusminus(&self) -> Plusminus {
        self.frozen
            .as_ref()
            .map_or_else(|| self.live_plusminus(), |f| f.plusminus.clone())
    }

    fn live_plusminus(&self) -> Plusminus {
        match self.live_shown() {
            Shown::Waiting => Plusminus::Waiting,
            Shown::Below(_) | Shown::AtLeast(..) => Plusminus::Bound,
            Shown::Level(_) if self.active_warnings().contains(Flags::OVER_FULL_SCALE) => {
                Plusminus::OverFullScale
            }
            Shown::Level(_)
                if self
                    .last
                    .is_some_and(|r| r.flags.contains(Flags::TEMP_OUTSIDE)) =>
            {
                Plusminus::TempOutside
            }
            Shown::Level(_)
                if self
                    .last
                    .is_some_and(|r| r.flags.contains(Flags::TEMP_UNKNOWN)) =>
            {
                Plusminus::TempUnknown
            }
            Shown::Level(dbm) => {
                let kelvin = self.board.as_ref().and_then(Board::kelvin);
                Plusminus::Budget(self.uncertainty.budget_at(dbm, self.counts.noise(), kelvin))
            }
        }
    }

    fn live_shown(&self) -> Shown {
        let at_least = |dbm: f64, why| Shown::AtLeast(self.counted_dbm(dbm), why);
        match self.last {
            None => Shown::Waiting,
            Some(r) if r.flags.contains(Flags::BELOW_SPAN) => Shown::Below(r.dbm),
            Some(r) if r.flags.contains(Flags::ADC_CLIP) => at_least(r.dbm, Ceiling::AdcClip),
            Some(r) if r.flags.contains(Flags::ABOVE_SPAN) => at_least(r.dbm, Ceiling::AboveSpan),
            Some(_) => match self.averager.mean_dbm() {
                None => Shown::Waiting,
                Some(mean) if self.counts.sums().above_span() > 0 => {
                    Shown::AtLeast(mean, Ceiling::WindowAboveSpan)
                }
                Some(mean) => Shown::Level(mean),
            },
        }
    }

    /// A level past the span's top as the recorder counts it: no higher than the top
    /// (`CodeEntry::counted_dbm`), since the model read beyond its points says no more.
    fn counted_dbm(&self, dbm: f64) -> f64 {
        dbm.min(self.cal.span_dbm().1)
    }

    /// True when samples flow, a value is shown (not a bound), the averaging window is
    /// full and the shown value has stopped moving.
    pub fn is_settled(&self) -> bool {
        self.samples_flow()
            && matches!(self.live_shown(), Shown::Level(_))
            && self.averager.is_full(self.now)
            && self.settle.is_settled(self.now)
    }

    /// False after a disconnect or the end of a replay: the last reading stands, but
    /// says nothing of the level now.
    pub fn samples_flow(&self) -> bool {
        self.connected && !self.ended
    }

    /// How the shown value moved over the last second, dB.
    pub fn change_over_last_second(&self) -> Option<f64> {
        self.settle.change_over_last_second(self.now)
    }

    /// The trend of the selected window as columns of (min, max) dBm.
    pub fn trend_columns(&self, columns: usize) -> Vec<Option<(f64, f64)>> {
        self.trends[self.trend_window].columns(self.now, columns)
    }

    /// True while the source is refusing input, or did within the warnings' hold time.
    pub fn is_rejecting(&self) -> bool {
        self.rejected_at
            .is_some_and(|t| self.now - t < WARNING_HOLD_S)
    }

    /// The flags of the warnings up now.
    pub fn active_warnings(&self) -> Flags {
        self.warnings
            .iter()
            .filter(|(_, t)| self.now - t < WARNING_HOLD_S)
            .fold(Flags::empty(), |all, (f, _)| all | *f)
    }

    fn samples(&mut self, events: &[Event]) -> Vec<Command> {
        let before = self.active_warnings();
        let limits_before = self.over_limits();
        for event in events {
            match event {
                Event::Samples(chunk) => self.chunk(chunk),
                Event::LinkDown { .. } => self.connected = false,
                Event::LinkUp { .. } => self.connected = true,
                // Shown from the link counters, which every source keeps.
                Event::Lost { .. } | Event::Rejected { .. } => {}
            }
        }
        let sampled = events.iter().any(|e| matches!(e, Event::Samples(_)));
        if let Some(run) = self.coupled.as_mut().filter(|_| sampled) {
            run.refresh(self.now);
        }
        let raised = self.active_warnings().difference(before);
        let limits = self.over_limits();
        let limit_raised =
            (limits.swr && !limits_before.swr) || (limits.reflected && !limits_before.reflected);
        let mut commands = std::mem::take(&mut self.pending);
        if !raised.is_empty() || limit_raised {
            commands.push(Command::Bell);
        }
        commands
    }

    /// The transmitter's limits the match is past now (none in a plain run).
    pub fn over_limits(&self) -> coupled::OverLimits {
        self.coupled
            .as_ref()
            .map(|run| run.over_now(self.now))
            .unwrap_or_default()
    }

    /// A chunk's samples: channel 0 in a plain run; in a coupler run the forward arm's
    /// channel for the power view and both arms' for the match.
    fn chunk(&mut self, chunk: &dbtrail::events::Chunk) {
        for i in 0..chunk.len() {
            let (t, counts) = (chunk.time(i), chunk.counts(i));
            match self.coupled.as_mut() {
                None => {
                    let read = match self.board.as_mut() {
                        Some(board) => board.read(t, counts),
                        None => counts.first().map(|&c| (c, self.cal.reading_code(c))),
                    };
                    if let Some((code, reading)) = read {
                        self.take_zero_sample(t, code, &reading);
                        self.sample(t, code, reading);
                    }
                }
                Some(run) => match run.codes(counts) {
                    Some(codes) => {
                        run.push(t, codes);
                        // The reflected detector has its ratings and its clip too.
                        let reflected = run.cal.reflected.reading_code(codes.1).flags;
                        self.raise_warnings(reflected, t);
                        let reading = self.cal.reading_code(codes.0);
                        self.sample(t, codes.0, reading);
                    }
                    None => {
                        self.notice = Some(self.too_few_channels(counts.len()));
                        return;
                    }
                },
            }
        }
    }

    /// What the screen says of a stream with too few channels for the coupler set-up.
    fn too_few_channels(&self, channels: usize) -> String {
        let (f, r) = self.coupled.as_ref().map_or((0, 0), |run| {
            let setup = &run.coupler.setup;
            (setup.forward.channel + 1, setup.reflected.channel + 1)
        });
        format!(
            "stream sends {channels} channel(s), set-up reads forward on {f}, reflected on \
             {r}: check board or set-up"
        )
    }

    /// One power sample, `code`, and its reading.
    fn sample(&mut self, t: f64, code: u32, reading: Reading) {
        self.now = self.now.max(t);
        self.last_sample_t = Some(t);
        if !reading.flags.contains(Flags::OVER_FULL_SCALE) {
            // A damaged sample raises its warning but is neither shown nor averaged.
            self.last = Some(reading);
        }
        self.raise_warnings(reading.flags, t);
        if reading
            .flags
            .intersects(Flags::BELOW_SPAN | Flags::ADC_CLIP)
        {
            // The level has left what the average can describe; start it afresh.
            self.averager.clear();
            self.spread.clear();
            self.counts.clear();
        } else if !reading.flags.contains(Flags::OVER_FULL_SCALE) {
            // Above the span the reading counts at the span's top, as in a log's mean;
            // the window then says it holds such a reading, and the mean is a bound.
            let counted = Reading {
                dbm: self.counted_dbm(reading.dbm),
                ..reading
            };
            self.averager.push(t, &counted);
            self.spread.push(t, counted.dbm);
            self.counts
                .push(t, code, reading.flags.contains(Flags::ABOVE_SPAN));
        }
        // The holds and the trend keep values only; a bound is not a level reached.
        if !reading.flags.intersects(NOT_A_VALUE | Flags::ABOVE_SPAN) {
            self.holds.add(&reading);
            for trend in &mut self.trends {
                trend.push(t, &reading);
            }
        }
    }

    /// Raises (or holds up) the warnings of a reading's alarm flags, at `t`.
    fn raise_warnings(&mut self, flags: Flags, t: f64) {
        for flag in (flags & ALARMS).iter() {
            match self.warnings.iter_mut().find(|(f, _)| *f == flag) {
                Some(entry) => entry.1 = t,
                None => self.warnings.push((flag, t)),
            }
        }
    }

    fn tick(&mut self, now: f64) -> Vec<Command> {
        self.now = self.now.max(now);
        match self.live_shown() {
            // Settling starts afresh with the samples that come after a gap.
            _ if !self.samples_flow() => self.settle.clear(),
            Shown::Level(dbm) => {
                self.settle.push(self.now, dbm);
                // A window just started holds a few readings whose noise is barely
                // averaged: their maximum would stand well above the level.
                if self.averager.is_full(self.now) {
                    self.best_dbm = Some(self.best_dbm.map_or(dbm, |b| b.max(dbm)));
                }
            }
            // Settled counts from the first value shown after a bound, not from before it.
            _ => self.settle.clear(),
        }
        let flowing = self.samples_flow();
        if let Some(run) = self.coupled.as_mut() {
            run.tick(self.now, flowing);
        }
        self.tick_counters()
    }

    /// The measured rate and the warnings' hold, on every frame.
    fn tick_counters(&mut self) -> Vec<Command> {
        let (t0, n0) = self.rate_mark;
        if self.now - t0 >= 1.0 {
            self.rate = (self.link.samples.saturating_sub(n0)) as f64 / (self.now - t0);
            self.rate_mark = (self.now, self.link.samples);
        }
        let now = self.now;
        self.warnings.retain(|(_, t)| now - t < WARNING_HOLD_S);
        Vec::new()
    }

    fn key(&mut self, key: KeyEvent) -> Vec<Command> {
        if key.modifiers.contains(KeyModifiers::CONTROL) && key.code == KeyCode::Char('c') {
            return vec![Command::Quit];
        }
        match self.mode.clone() {
            Mode::Help => {
                self.mode = Mode::Normal;
                if key.code == KeyCode::Char('q') {
                    return self.quit_key();
                }
                Vec::new()
            }
            Mode::ConfirmQuit => {
                self.mode = Mode::Normal;
                if key.code == KeyCode::Char('q') {
                    return vec![Command::Quit];
                }
                Vec::new()
            }
            Mode::Prompt { ask, line, error } => self.prompt_key(ask, line, error, key),
            Mode::Zeroing(_) => self.zeroing_key(key),
            Mode::Normal => self.normal_key(key),
        }
    }

    /// `q`: quits, or first asks while a log is open, since quitting closes it.
    fn quit_key(&mut self) -> Vec<Command> {
        if self.logging.is_some() {
            self.mode = Mode::ConfirmQuit;
            Vec::new()
        } else {
            vec![Command::Quit]
        }
    }

    fn normal_key(&mut self, key: KeyEvent) -> Vec<Command> {
        self.notice = None;
        // Esc cancels prompts and closes the help; here there is nothing to cancel, and
        // one Esc too many must not end the screen (and its log).
        let KeyCode::Char(c) = key.code else {
            return Vec::new();
        };
        match c {
            'q' => return self.quit_key(),
            '?' | 'h' => self.mode = Mode::Help,
            'f' => self.ask(Ask::Frequency, LineEdit::default()),
            'o' if self.coupled.is_some() => self.notice = Some(COUPLER_OFFSET_REFUSED.into()),
            'o' => self.ask(Ask::Offset, LineEdit::default()),
            'm' => self.switch_view(),
            'a' => self.ask(Ask::Averaging, LineEdit::default()),
            'l' if self.logging.is_some() => return vec![Command::StopLog],
            'l' => self.ask(Ask::LogFile, LineEdit::offered(&default_log_name())),
            'u' => match (self.view, self.coupled.as_mut()) {
                (View::Matching, Some(run)) => run.cycle_big(),
                _ => self.units = self.units.next(self.reference_dbm.is_some()),
            },
            't' => self.trend_window = (self.trend_window + 1) % TREND_WINDOWS.len(),
            'r' => self.reset_holds(),
            's' => self.set_reference(),
            'c' => {
                self.reference_dbm = None;
                if self.units == Units::Relative {
                    self.units = Units::Dbm;
                }
            }
            ' ' => self.freeze(),
            'z' if self.coupled.is_some() => self.notice = Some(COUPLER_ZERO_REFUSED.into()),
            'z' => self.mode = Mode::Zeroing(ZeroTake::default()),
            _ => {}
        }
        Vec::new()
    }

    /// The freeze key: holds (or lets go) the shown reading, and in a coupler run the
    /// shown match with it.
    fn freeze(&mut self) {
        let freezing = self.frozen.is_none();
        self.frozen = freezing.then(|| Frozen {
            shown: self.live_shown(),
            plusminus: self.live_plusminus(),
        });
        if let Some(run) = self.coupled.as_mut() {
            run.frozen = if freezing { run.live().copied() } else { None };
        }
    }

    fn switch_view(&mut self) {
        if self.coupled.is_none() {
            self.notice = Some(NO_COUPLER.into());
            return;
        }
        self.view = match self.view {
            View::Power => View::Matching,
            View::Matching => View::Power,
        };
    }

    fn ask(&mut self, ask: Ask, line: LineEdit) {
        self.mode = Mode::Prompt {
            ask,
            line,
            error: None,
        };
    }

    fn prompt_key(
        &mut self,
        ask: Ask,
        mut line: LineEdit,
        error: Option<String>,
        key: KeyEvent,
    ) -> Vec<Command> {
        match key.code {
            KeyCode::Esc => self.mode = Mode::Normal,
            KeyCode::Enter => match self.answer(ask, line.text()) {
                Ok(commands) => {
                    self.mode = Mode::Normal;
                    return commands;
                }
                Err(error) => {
                    self.mode = Mode::Prompt {
                        ask,
                        line,
                        error: Some(error),
                    }
                }
            },
            _ => {
                // The refusal stays up until the answer is changed.
                let changed = line.key(key);
                self.mode = Mode::Prompt {
                    ask,
                    line,
                    error: if changed { None } else { error },
                };
            }
        }
        Vec::new()
    }

    fn answer(&mut self, ask: Ask, text: &str) -> Result<Vec<Command>, String> {
        match ask {
            Ask::Frequency => {
                let hz = parse_frequency(text).map_err(|e| e.to_string())?;
                Ok(self.recalibrate(Some(hz), self.extra_offset_db))
            }
            Ask::Offset => {
                let db = parse_db(text).map_err(|e| e.to_string())?;
                Ok(self.recalibrate(Some(self.cal.freq_hz()), db))
            }
            Ask::Averaging => {
                let mode = Averaging::parse(text).map_err(|e| e.to_string())?;
                self.averager = Averager::new(mode);
                self.spread = ReadingSpread::new(mode);
                self.counts = CountWindow::new(mode);
                self.settle.clear();
                if let Some(run) = self.coupled.as_mut() {
                    run.set_averaging(mode);
                }
                Ok(Vec::new())
            }
            Ask::LogFile => {
                let path = text.trim();
                if path.is_empty() {
                    return Err("give a file name".into());
                }
                Ok(vec![Command::StartLog(PathBuf::from(path))])
            }
        }
    }

    /// Moves to a new frequency or offset. Both only add dB at the reference plane, so
    /// the history is shifted by the change rather than thrown away.
    fn recalibrate(&mut self, freq_hz: Option<f64>, extra_offset_db: f64) -> Vec<Command> {
        let before = self.cal.correction_db() + self.cal.offset_db();
        match self.coupled.as_mut() {
            // The power view is the forward arm's, rebuilt with both.
            Some(run) => {
                run.retune(freq_hz.unwrap_or(self.cal.freq_hz()));
                self.cal = run.cal.forward.clone();
                self.uncertainty = run.cal.forward_budget.clone();
            }
            None => {
                let cal = Calibration::new(&self.profile, freq_hz, extra_offset_db);
                self.cal = match self.zero_counts {
                    Some(zero) => cal.with_zero(zero),
                    None => cal,
                };
                // The budget's terms depend on the level at the detector and the frequency.
                self.uncertainty = Uncertainty::new(&self.profile, &self.cal);
            }
        }
        self.extra_offset_db = extra_offset_db;
        let shift = self.cal.correction_db() + self.cal.offset_db() - before;
        self.averager.shift_db(shift);
        self.settle.shift_db(shift);
        self.holds.shift_db(shift);
        self.spread.shift_db(shift);
        for trend in &mut self.trends {
            trend.shift_db(shift);
        }
        self.best_dbm = self.best_dbm.map(|b| b + shift);
        self.reread_last();
        vec![Command::Recalibrated]
    }

    /// The last reading again through the calibration now in use (and the board's
    /// temperature now).
    fn reread_last(&mut self) {
        if let Some(board) = self.board.as_mut() {
            board.recalibrate(&self.cal);
        }
        let Some(counts) = self.last.map(|r| r.counts) else {
            return;
        };
        self.last = Some(read_counts(self.board.as_mut(), &self.cal, counts));
    }

    /// Keys while a zero is taken: Esc cancels it, `q` quits as ever, others wait.
    fn zeroing_key(&mut self, key: KeyEvent) -> Vec<Command> {
        match key.code {
            KeyCode::Esc => {
                self.mode = Mode::Normal;
                self.notice = Some("zero cancelled, nothing changed".into());
            }
            KeyCode::Char('q') => {
                self.mode = Mode::Normal;
                return self.quit_key();
            }
            _ => {}
        }
        Vec::new()
    }

    /// A power sample into the zero being taken, if one is; the zero ends when it has
    /// its time's worth.
    fn take_zero_sample(&mut self, t: f64, code: u32, reading: &Reading) {
        let Mode::Zeroing(take) = &mut self.mode else {
            return;
        };
        take.push(t, code, reading);
        let outcome = take.outcome(|counts| read_counts(self.board.as_mut(), &self.cal, counts));
        match outcome {
            ZeroOutcome::Collecting => {}
            ZeroOutcome::Refused(why) => {
                self.mode = Mode::Normal;
                self.notice = Some(why);
            }
            ZeroOutcome::Taken {
                zero_counts,
                samples,
            } => {
                self.mode = Mode::Normal;
                self.set_zero(t, zero_counts, samples);
            }
        }
    }

    /// The run's ADC zero becomes `zero_counts`: the calibration, its budget and the
    /// compensation are rebuilt with it, and an open log is told.
    fn set_zero(&mut self, t: f64, zero_counts: f64, samples: u64) {
        let before = self.cal.adc().zero_counts();
        self.cal = self.cal.with_zero(zero_counts);
        self.uncertainty = self.uncertainty.clone().with_calibration(&self.cal);
        self.zero_counts = Some(zero_counts);
        // Readings before the zero were read with the old one.
        self.averager.clear();
        self.spread.clear();
        self.counts.clear();
        self.settle.clear();
        self.reread_last();
        self.notice = Some(format!(
            "zero set: {zero_counts:.2} counts (was {before:.2}), mean of {samples} samples"
        ));
        self.pending.push(Command::Rezero { t, zero_counts });
    }

    fn reset_holds(&mut self) {
        self.holds = PowerStats::default();
        self.holds_since = self.now;
        self.best_dbm = None;
        if let Some(run) = self.coupled.as_mut() {
            run.reset_best();
        }
    }

    fn set_reference(&mut self) {
        match self.live_shown() {
            Shown::Level(dbm) => {
                self.reference_dbm = Some(dbm);
                self.units = Units::Relative;
            }
            _ => self.notice = Some("no valid reading to take as the reference".into()),
        }
    }
}

/// Fractional counts read at the board's temperature now, or through `cal` without a
/// board.
fn read_counts(board: Option<&mut Board>, cal: &Calibration, counts: f64) -> Reading {
    match board {
        Some(board) => board.reading(counts),
        None => cal.reading(counts),
    }
}

/// What the screen says when a log closes.
fn log_closed_notice(path: &std::path::Path, rows: u64, why: &LogEnd) -> String {
    let name = path.display();
    match why {
        LogEnd::Stopped => format!("log {name} closed, {rows} rows"),
        LogEnd::Recalibrated => {
            format!("frequency or offset changed: log {name} closed; press l to start a new one")
        }
        LogEnd::Failed(error) => format!("logging to {name} stopped: {error}"),
    }
}

/// A log file name from the wall clock, e.g. `dbtrail-2026-12-01T22-30-31Z.csv`.
fn default_log_name() -> String {
    let stamp = humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string();
    format!("dbtrail-{}.csv", stamp.replace(':', "-"))
}
