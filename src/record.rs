//! Recording: calibrated readings written as CSV, either one row per interval (power-domain
//! mean, min, max) or one row per sample, with the run's context in `#` lines at the top.
//! Gaps, reconnects, lost samples and rejected input are marked in the rows they touch; a
//! row with no valid reading leaves its numbers empty rather than inventing one.

use std::io::{self, Write};
use std::time::{Duration, SystemTime};

use crate::calibration::{Calibration, Compensation, Flags};
use crate::coupler::{CouplerCalibration, CouplerSetup};
use crate::events::{Chunk, Event};
use crate::metrics::{ChannelSnapshot, MatchSnapshot, Power};
use crate::printable::escape_controls;
use crate::stats::{Bound, Figures, PowerStats};
use crate::uncertainty::{Noise, TermKind, Uncertainty};
use crate::units::format_frequency;

/// The context a recording is made in, written as `#` lines at the top of the file (with
/// control characters escaped, so that a name cannot break a line).
#[derive(Debug, Clone)]
pub struct RunContext {
    /// Program name and version.
    pub tool: String,
    /// Profile name.
    pub profile: String,
    /// A hash of the profile file's bytes.
    pub profile_hash: String,
    /// When the run started.
    pub started: SystemTime,
    /// What the samples come from.
    pub source: String,
    /// The interval (zero for one row per sample).
    pub every: Duration,
}

/// The row flag of an interval in which the source refused input (see
/// [`Event::Rejected`]). A row's mark only, never a reading's, so it is not one of the
/// readings' [`Flags`]; it follows their names in the flags cell.
pub const REJECTED: &str = "rejected";

/// Readings whose board temperature lay outside the calibrated ones, or was not known:
/// how far off they are is not known, so no uncertainty is stated for them.
const NO_STATED_U: Flags = Flags::TEMP_OUTSIDE.union(Flags::TEMP_UNKNOWN);

/// How close below an interval's end, in sample periods, a sample stamp counts as on it.
const EDGE_SLACK: f64 = 1e-6;

/// What a per-sample recording's `# stamps:` line says when its times are clock readings
/// taken as each read of a live port arrived (the other form is `at N samples/s`).
pub const STAMPED_BY_CLOCK: &str = "by the clock as each read arrived (a live port)";

mod board;
mod coupled;

use board::Board;
pub use board::{BoardChannel, BOARD_COLUMNS, UNCOMPENSATED_COLUMN};
pub use coupled::{
    coupler_context_lines, coupler_header, CouplerChannels, COUPLER_MATCH_COLUMNS,
    OVER_REFLECTED_LIMIT, OVER_SWR_LIMIT,
};
use coupled::{Coupled, ARMS};

/// One detector's chain as rows read it: its calibration, its budget, and the per-sample
/// cells of each code it has met.
struct Chain {
    cal: Calibration,
    budget: Option<Uncertainty>,
    /// Per-sample rows' cells after the time, by code (they depend on nothing else),
    /// worked out at a code's first sample: formatting them is most of such a row's cost.
    /// Unused when the readings are compensated for temperature, since a code's cells
    /// then move with it.
    per_code_cells: Vec<Option<SampleCells>>,
    /// The calibration at each board temperature, when the run reads one.
    compensation: Option<Compensation>,
}

impl Chain {
    fn new(cal: Calibration, budget: Option<Uncertainty>) -> Self {
        Chain {
            per_code_cells: vec![None; cal.code_table().len()],
            compensation: None,
            cal,
            budget,
        }
    }

    /// The same chain, its readings compensated at the board's temperature.
    fn compensated(mut self) -> Self {
        self.compensation = self
            .cal
            .thermal()
            .map(|t| Compensation::new(self.cal.clone(), std::sync::Arc::clone(&t.model)));
        self
    }

    /// The calibration for a board at `kelvin` (the plain one without compensation).
    fn cal_at(&mut self, kelvin: Option<f64>) -> &Calibration {
        cal_at(&mut self.compensation, &self.cal, kelvin)
    }
}

/// The calibration of a chain for a board at `kelvin`: `compensation`'s, or `plain`
/// without one. Apart from the chain so that its budget can be read beside it.
fn cal_at<'c>(
    compensation: &'c mut Option<Compensation>,
    plain: &'c Calibration,
    kelvin: Option<f64>,
) -> &'c Calibration {
    match compensation {
        Some(compensation) => compensation.at(kelvin),
        None => plain,
    }
}

/// Writes readings as CSV rows.
pub struct Recorder<W: Write> {
    out: csv::Writer<W>,
    /// One chain for every channel alike, or a coupler's forward and reflected arms.
    chains: Vec<Chain>,
    /// The coupler whose arms `chains` are, with the match columns' rules.
    coupled: Option<Coupled>,
    every: f64,
    started: SystemTime,
    channels: Option<usize>,
    header_written: bool,
    interval: Option<u64>,
    stats: Vec<PowerStats>,
    row_flags: Flags,
    rejected: bool,
    link_down: bool,
    rows: u64,
    stamps_noted: bool,
    log_channels: Option<usize>,
    pending: Option<String>,
    /// The board's temperature channel, when the profile reads one.
    board: Option<Board>,
    /// Each column group's statistics without temperature compensation (with a board).
    uncompensated: Vec<PowerStats>,
    /// The ADC zero the run started with, counts.
    start_zero: f64,
    /// The last interval row's figures, each power channel's, for a metrics snapshot.
    latest: Vec<ChannelSnapshot>,
    /// The board temperature of the last interval row, °C.
    latest_board_c: Option<f64>,
    /// A coupler run's match in the last interval row.
    latest_match: Option<MatchSnapshot>,
}

/// How a recording begins: a new file, or more rows for an earlier recording.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Opening {
    /// The context lines, then the column header before the first row.
    Fresh,
    /// Added to a log whose rows have `channels` channels (and the same columns): a
    /// `# resumed` line and this run's context lines go before the first row, after a line
    /// end of their own when the log's last row was `cut` part-way.
    Resume {
        /// The channels of the log's rows.
        channels: usize,
        /// The log does not end with a line end.
        cut: bool,
    },
}

/// A stream whose channel count differs from the log it is appended to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
#[error("its rows have {log} channel(s) but this stream sends {stream}")]
pub struct ChannelMismatch {
    /// Channels of the log's rows.
    pub log: usize,
    /// Channels the stream sends.
    pub stream: usize,
}

impl<W: Write> Recorder<W> {
    /// A recorder writing to `out`, opening as `opening` says, with no uncertainty budget:
    /// its `u_db` cells are empty, as its `# u_db:` line says.
    pub fn new(
        out: W,
        cal: Calibration,
        context: &RunContext,
        opening: Opening,
    ) -> io::Result<Self> {
        Self::with_uncertainty(out, cal, None, context, opening)
    }

    /// A recorder whose rows carry the expanded uncertainty of their means from `budget`
    /// (the profile's, at this calibration).
    pub fn with_uncertainty(
        out: W,
        cal: Calibration,
        budget: Option<Uncertainty>,
        context: &RunContext,
        opening: Opening,
    ) -> io::Result<Self> {
        let lines = format!(
            "{}{}{}{}",
            context_lines(&cal, context),
            zero_line(0.0, cal.adc().zero_counts(), None),
            board::context_line(&cal),
            uncertainty_line(budget.as_ref(), &cal, context.every.is_zero())
        );
        Self::opened(
            out,
            vec![Chain::new(cal, budget).compensated()],
            None,
            lines,
            context,
            opening,
        )
    }

    /// A recorder of a coupler's two arms and their match: each row holds the forward
    /// arm's cells, the reflected arm's, then [`COUPLER_MATCH_COLUMNS`].
    pub fn for_coupler(
        out: W,
        cal: CouplerCalibration,
        setup: &CouplerSetup,
        context: &RunContext,
        opening: Opening,
    ) -> io::Result<Self> {
        let coupled = Coupled::new(&cal, setup);
        let lines = coupler_context_lines(&cal, setup, context);
        let chains = vec![
            Chain::new(cal.forward, Some(cal.forward_budget)),
            Chain::new(cal.reflected, Some(cal.reflected_budget)),
        ];
        Self::opened(out, chains, Some(coupled), lines, context, opening)
    }

    fn opened(
        mut out: W,
        chains: Vec<Chain>,
        coupled: Option<Coupled>,
        lines: String,
        context: &RunContext,
        opening: Opening,
    ) -> io::Result<Self> {
        let (pending, log_channels) = match opening {
            Opening::Fresh => {
                out.write_all(lines.as_bytes())?;
                (None, None)
            }
            Opening::Resume { channels, cut } => {
                let resumed = humantime::format_rfc3339_millis(context.started);
                let block = format!(
                    "{}# resumed {resumed} by {} from {}\n{lines}",
                    if cut { "\n" } else { "" },
                    escape_controls(&context.tool),
                    escape_controls(&context.source),
                );
                (Some(block), Some(channels))
            }
        };
        let board = match &coupled {
            None => chains[0]
                .cal
                .thermal()
                .map(|setup| Board::new(setup, chains[0].cal.adc())),
            Some(_) => None,
        };
        Ok(Recorder {
            start_zero: chains[0].cal.adc().zero_counts(),
            latest: Vec::new(),
            latest_board_c: None,
            latest_match: None,
            board,
            uncompensated: Vec::new(),
            // Never quoted: the cells are numbers, times and flag names, and `#` lines go
            // through as one cell each, commas and all.
            out: csv::WriterBuilder::new()
                .flexible(true)
                .quote_style(csv::QuoteStyle::Never)
                .from_writer(out),
            chains,
            coupled,
            every: context.every.as_secs_f64(),
            started: context.started,
            channels: None,
            log_channels,
            pending,
            header_written: opening != Opening::Fresh,
            interval: None,
            stats: Vec::new(),
            row_flags: Flags::empty(),
            rejected: false,
            link_down: false,
            rows: 0,
            stamps_noted: false,
        })
    }

    /// The `# resumed` block, written with the first row so that a run that writes none
    /// (refused, or stopped at once) leaves the log as it was.
    fn write_pending(&mut self) -> io::Result<()> {
        if let Some(block) = self.pending.take() {
            // One cell a line; the line end that sets a cut row apart leads the first.
            let (cut, block) = match block.strip_prefix('\n') {
                Some(rest) => ("\n", rest),
                None => ("", block.as_str()),
            };
            for (i, line) in block.split_terminator('\n').enumerate() {
                let lead = if i == 0 { cut } else { "" };
                self.out.write_record([format!("{lead}{line}")])?;
            }
        }
        Ok(())
    }

    /// The channels rows are written for: the stream's once known, else the log's.
    fn channel_count(&self) -> usize {
        self.channels.or(self.log_channels).unwrap_or(1)
    }

    /// The column groups of a row: one per power channel (every channel but the board's
    /// temperature), or a coupler's two arms.
    fn groups(&self) -> usize {
        match &self.coupled {
            Some(_) => 2,
            None => self.channel_count() - usize::from(self.board.is_some()),
        }
    }

    /// Which stream channel a row's column group `g` reads, and through which chain.
    fn source_of(&self, g: usize) -> (usize, usize) {
        source_of(
            self.coupled.as_ref(),
            self.board.as_ref().map(Board::channel),
            g,
        )
    }

    /// Starts the first interval at source time `t` rather than 0, for a recording that
    /// begins part-way through a session.
    pub fn begin_at(&mut self, t: f64) {
        if self.every > 0.0 {
            self.interval = Some((t.max(0.0) / self.every).floor() as u64);
        }
    }

    /// The last interval row's figures, each power channel's (a coupler's two arms), for
    /// a metrics snapshot; empty before the first row and for one row per sample.
    pub fn latest(&self) -> &[ChannelSnapshot] {
        &self.latest
    }

    /// The board temperature the last interval row was read at, °C.
    pub fn latest_board_c(&self) -> Option<f64> {
        self.latest_board_c
    }

    /// A coupler run's match in the last interval row.
    pub fn latest_match(&self) -> Option<&MatchSnapshot> {
        self.latest_match.as_ref()
    }

    /// Rows written so far.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// The calibration in use (a coupler's forward arm's).
    pub fn calibration(&self) -> &Calibration {
        &self.chains[0].cal
    }

    /// The destination.
    pub fn get_ref(&self) -> &W {
        self.out.get_ref()
    }

    /// Takes one event from the source.
    pub fn handle(&mut self, event: &Event) -> io::Result<()> {
        if let Event::Samples(chunk) = event {
            return self.chunk(chunk);
        }
        if self.every > 0.0 {
            self.advance(event.t())?;
        }
        match *event {
            Event::Samples(_) => Ok(()),
            Event::LinkDown { t } => {
                self.link_down = true;
                self.mark(t, Flags::GAP)
            }
            Event::LinkUp { t } => {
                self.link_down = false;
                self.mark(t, Flags::GAP | Flags::RECONNECT)
            }
            Event::Lost { t, .. } => self.mark(t, Flags::LOST),
            Event::Rejected { t, .. } => {
                self.rejected = true;
                self.mark(t, Flags::empty())
            }
        }
    }

    /// A zero taken with the RF off at source time `t`: the ADC zero of the run becomes
    /// `zero_counts` from here on, and a `# zero:` line says how far it moved since the
    /// run began and what that moves at the bottom of the span. Refused for a coupler run,
    /// whose arms' zeros are their profiles'.
    pub fn rezero(&mut self, t: f64, zero_counts: f64) -> io::Result<()> {
        if self.coupled.is_some() || !zero_counts.is_finite() {
            return Err(io::Error::new(
                io::ErrorKind::InvalidInput,
                "a zero is taken on a one-detector run only (a coupler's arms take theirs                  from their profiles)",
            ));
        }
        if self.every > 0.0 {
            self.advance(t)?;
        }
        let chain = &mut self.chains[0];
        let started = chain.cal.with_zero(self.start_zero);
        let shift = started.zero_shift_db_at_span_bottom(zero_counts);
        let bottom = started.span_dbm().0;
        let cal = chain.cal.with_zero(zero_counts);
        *chain = Chain::new(
            cal.clone(),
            chain.budget.take().map(|b| b.with_calibration(&cal)),
        )
        .compensated();
        let line = zero_line(
            t,
            zero_counts,
            Some((zero_counts - self.start_zero, shift, bottom)),
        );
        self.write_pending()?;
        self.out.write_record([line.trim_end()])?;
        Ok(())
    }

    /// Source time has reached `t`: every interval that ended by then is written, empty
    /// ones flagged as gaps (a silent or absent source).
    pub fn advance(&mut self, t: f64) -> io::Result<()> {
        if self.every <= 0.0 {
            return Ok(());
        }
        let target = (t / self.every).floor().max(0.0) as u64;
        let current = *self.interval.get_or_insert(0);
        for k in current..target {
            self.write_interval(k)?;
        }
        self.interval = Some(target.max(current));
        Ok(())
    }

    /// Ends the recording at source time `t`: the partial interval is written.
    pub fn finish(&mut self, t: f64) -> io::Result<()> {
        if self.every > 0.0 {
            self.advance(t)?;
            let current = self.interval.unwrap_or(0);
            let started = current as f64 * self.every;
            let has_data = self.stats.iter().any(|s| s.totals.samples > 0)
                || !self.row_flags.is_empty()
                || self.rejected;
            // An end a rounding error past an interval's start begins no interval.
            if has_data || t > started + self.every * 1e-9 {
                self.write_interval(current)?;
            }
        }
        self.flush()
    }

    /// Pushes buffered rows to the destination.
    pub fn flush(&mut self) -> io::Result<()> {
        self.out.flush()
    }

    /// Takes a run of samples: per interval, each sample costs a table look-up and a few
    /// additions; an interval boundary inside the run closes the interval there.
    fn chunk(&mut self, chunk: &Chunk) -> io::Result<()> {
        if chunk.is_empty() {
            return Ok(());
        }
        if self.channels.is_none() {
            let stream = chunk.channels();
            let log_channels = self.log_channels.filter(|_| self.coupled.is_none());
            if let Some(log) = log_channels.filter(|&log| log != stream) {
                let mismatch = ChannelMismatch { log, stream };
                return Err(io::Error::new(io::ErrorKind::InvalidInput, mismatch));
            }
            if let Some(coupled) = &self.coupled {
                coupled.check_stream(stream)?;
            }
            if let Some(board) = &self.board {
                board::check_stream(board, stream)?;
            }
        }
        self.channels.get_or_insert(chunk.channels());
        if self.every <= 0.0 {
            self.note_stamps(chunk.dt)?;
            for i in 0..chunk.len() {
                self.sample_row(chunk.time(i), chunk.counts(i))?;
            }
            return Ok(());
        }
        // A stamp t0 + i·dt lands a rounding error either side of an interval's end,
        // depending on where the chunk began: this close below the end counts as on it.
        let slack = chunk.dt * EDGE_SLACK;
        let mut i = 0;
        while i < chunk.len() {
            self.advance(chunk.time(i) + slack)?;
            // Writing an interval takes its statistics away.
            self.stats.resize(self.groups(), PowerStats::default());
            let boundary = (self.interval.unwrap_or(0) + 1) as f64 * self.every;
            // Samples of this run that fall before the current interval's end.
            let end = if chunk.dt > 0.0 {
                let room = ((boundary - slack - chunk.time(i)) / chunk.dt)
                    .ceil()
                    .max(1.0) as usize;
                (i + room).min(chunk.len())
            } else {
                chunk.len()
            };
            let width = chunk.channels();
            let counts = &chunk.samples.counts[i * width..end * width];
            if width == 1 && self.coupled.is_none() {
                self.stats[0].add_codes(&self.chains[0].cal, counts);
            } else if self.board.is_some() {
                self.add_compensated(chunk, i, end);
            } else {
                let coupled = self.coupled.as_ref();
                for (g, stats) in self.stats.iter_mut().enumerate().take(width) {
                    let (ch, chain) = source_of(coupled, None, g);
                    stats.add_channel(&self.chains[chain].cal, counts, ch, width);
                }
            }
            i = end;
        }
        Ok(())
    }

    /// Adds the frames `from..to` of `chunk` with the board's temperature: first its
    /// samples of the temperature channel, then each power channel through the
    /// calibration at the temperature that makes, and through the uncompensated one.
    fn add_compensated(&mut self, chunk: &Chunk, from: usize, to: usize) {
        let Some(board) = self.board.as_mut() else {
            return;
        };
        // Runs of frames read at the same temperature go in together.
        let mut runs: Vec<(usize, Option<f64>)> = Vec::new();
        for i in from..to {
            let kelvin = board.frame(chunk.time(i), chunk.counts(i)[board.channel()]);
            board.applied(kelvin, 1);
            if runs.last().is_none_or(|&(_, k)| k != kelvin) {
                runs.push((i, kelvin));
            }
        }
        for (n, &(start, kelvin)) in runs.iter().enumerate() {
            let end = runs.get(n + 1).map_or(to, |&(next, _)| next);
            self.add_at(chunk, start, end, kelvin);
        }
    }

    /// Adds the power channels of frames `from..to` of `chunk` read at `kelvin`, and
    /// without compensation.
    fn add_at(&mut self, chunk: &Chunk, from: usize, to: usize, kelvin: Option<f64>) {
        let width = chunk.channels();
        let counts = &chunk.samples.counts[from * width..to * width];
        let groups = self.groups();
        self.uncompensated.resize(groups, PowerStats::default());
        for g in 0..groups {
            let (ch, c) = self.source_of(g);
            let chain = &mut self.chains[c];
            self.stats[g].add_channel(chain.cal_at(kelvin), counts, ch, width);
            self.uncompensated[g].add_channel(&chain.cal, counts, ch, width);
        }
    }

    fn sample_row(&mut self, t: f64, counts: &[u32]) -> io::Result<()> {
        if self.board.is_some() {
            return self.compensated_sample_row(t, counts);
        }
        let mut row = vec![seconds(t)];
        let groups = self.groups();
        for g in 0..groups {
            let (ch, chain) = self.source_of(g);
            let Some(&code) = counts.get(ch) else {
                continue;
            };
            let chain = &mut self.chains[chain];
            match chain.per_code_cells.get(code as usize) {
                Some(Some(cells)) => row.extend(cells.iter().cloned()),
                _ => {
                    let cells = chain.sample_cells(code);
                    row.extend(cells.iter().cloned());
                    if let Some(slot) = chain.per_code_cells.get_mut(code as usize) {
                        *slot = Some(cells);
                    }
                }
            }
        }
        if let Some(coupled) = &self.coupled {
            row.extend(coupled.sample_cells(&self.chains, counts));
        }
        self.write_row(row)
    }
}

impl<W: Write> Recorder<W> {
    /// A per-sample row of a run that reads the board's temperature: each power channel's
    /// cells at the temperature of the moment and its uncompensated level, then the
    /// board's cells.
    fn compensated_sample_row(&mut self, t: f64, counts: &[u32]) -> io::Result<()> {
        let Some(board) = self.board.as_mut() else {
            return Ok(());
        };
        let code = counts.get(board.channel()).copied().unwrap_or(0);
        let kelvin = board.frame(t, code);
        board.applied(kelvin, 1);
        let mut row = vec![seconds(t)];
        for g in 0..self.groups() {
            let (ch, c) = self.source_of(g);
            let Some(&code) = counts.get(ch) else {
                continue;
            };
            let chain = &mut self.chains[c];
            row.extend(chain.sample_cells_at(code, kelvin));
            let plain = one_reading(&chain.cal, code);
            let level = plain.mean_dbm().filter(|_| plain.bound() == Bound::Exact);
            row.push(level.map_or(String::new(), |dbm| format!("{dbm:.4}")));
        }
        if let Some(board) = &mut self.board {
            row.extend(board.take_cells());
        }
        self.write_row(row)
    }
}

impl Chain {
    /// A sample's cells after the time (see [`sample_cells`]).
    fn sample_cells(&self, code: u32) -> SampleCells {
        sample_cells(&self.cal, self.budget.as_ref(), code, None)
    }

    /// A sample's cells after the time with the board at `kelvin`.
    fn sample_cells_at(&mut self, code: u32, kelvin: Option<f64>) -> SampleCells {
        let cal = cal_at(&mut self.compensation, &self.cal, kelvin);
        sample_cells(cal, self.budget.as_ref(), code, kelvin)
    }

    /// The expanded uncertainty of an interval's mean: none for a bound, or without the
    /// noise of its counts (a single sample, a clipped one or one over full scale).
    fn interval_u_db(&self, figures: &Figures, kelvin: Option<f64>) -> Option<f64> {
        let (budget, mean, noise) = (self.budget.as_ref()?, figures.mean_dbm?, figures.noise?);
        (figures.bound == Bound::Exact)
            .then(|| budget.budget_at(mean, Some(noise), kelvin).expanded_db())
    }
}

/// A sample's cells after the time: counts, volts, its level or bound, flags, which it
/// is, and the expanded uncertainty of a value (its noise is not known; none outside the
/// calibrated temperatures), through `cal` with the board at `kelvin`.
fn sample_cells(
    cal: &Calibration,
    budget: Option<&Uncertainty>,
    code: u32,
    kelvin: Option<f64>,
) -> SampleCells {
    {
        let r = cal.reading_code(code);
        let one = one_reading(cal, code);
        let value =
            (one.bound() == Bound::Exact && !r.flags.intersects(NO_STATED_U)).then_some(r.dbm);
        let u_db = value
            .zip(budget)
            .map(|(dbm, budget)| budget.budget_at(dbm, None, kelvin).expanded_db());
        [
            format!("{}", r.counts),
            format!("{:.6}", r.volts),
            one.mean_dbm()
                .map_or(String::new(), |dbm| format!("{dbm:.4}")),
            r.flags.joined(),
            one.bound().cell().to_string(),
            u_cell(u_db),
        ]
    }
}

/// One reading's statistics: its level, or its bound, and which it is.
fn one_reading(cal: &Calibration, code: u32) -> PowerStats {
    let mut one = PowerStats::default();
    one.add_within(&cal.reading_code(code), cal.span_dbm().1);
    one
}

/// Which stream channel a row's column group `g` reads, and through which chain: a
/// coupler's arm, or the `g`-th channel that is not the board's temperature channel.
fn source_of(coupled: Option<&Coupled>, board_channel: Option<usize>, g: usize) -> (usize, usize) {
    match (coupled, board_channel) {
        (Some(c), _) => (c.channels[g], g),
        (None, Some(board)) if g >= board => (g + 1, 0),
        (None, _) => (g, 0),
    }
}

impl<W: Write> Recorder<W> {
    /// Marks the interval holding `t` (or, per sample, writes a marker row).
    fn mark(&mut self, t: f64, flags: Flags) -> io::Result<()> {
        if self.every > 0.0 {
            self.row_flags |= flags;
            return Ok(());
        }
        // Only a live source loses its link or samples, and its time is the clock's.
        self.note_stamps(0.0)?;
        let cell = flags_cell(flags, std::mem::take(&mut self.rejected));
        let mut row = vec![seconds(t)];
        let with_board = self.board.is_some();
        for _ in 0..self.groups() {
            row.extend([
                String::new(),
                String::new(),
                String::new(),
                cell.clone(),
                String::new(),
                String::new(),
            ]);
            if with_board {
                row.push(String::new());
            }
        }
        if let Some(board) = &mut self.board {
            row.extend(board.take_cells());
        }
        if self.coupled.is_some() {
            // No reading, no match: the match cell says why, as the arms' flags do.
            row.extend(COUPLER_MATCH_COLUMNS.iter().map(|&name| {
                if name == "match" {
                    cell.clone()
                } else {
                    String::new()
                }
            }));
        }
        self.write_row(row)
    }

    /// Says once, before a per-sample recording's first row (and its column header), how
    /// its times were stamped: at a steady rate (a capture or the simulator, whose chunks
    /// carry their sample period) or by the clock (a live port, whose reads are stamped
    /// when they arrive, all samples of one read alike), so that a report can tell a gap.
    fn note_stamps(&mut self, dt: f64) -> io::Result<()> {
        if std::mem::replace(&mut self.stamps_noted, true) {
            return Ok(());
        }
        self.write_pending()?;
        let line = if dt > 0.0 {
            // 1/(1/rate) can miss the rate in its last bit: nine digits show it as given.
            let rate: f64 = format!("{:.9e}", 1.0 / dt).parse().unwrap_or(1.0 / dt);
            format!("# stamps: at {rate} samples/s")
        } else {
            format!("# stamps: {STAMPED_BY_CLOCK}")
        };
        self.out.write_record([line])?;
        Ok(())
    }

    fn write_interval(&mut self, k: u64) -> io::Result<()> {
        let start = k as f64 * self.every;
        let mut flags = std::mem::take(&mut self.row_flags);
        let rejected = std::mem::take(&mut self.rejected);
        if self.link_down {
            flags |= Flags::GAP;
        }
        self.stats.resize(self.groups(), PowerStats::default());
        let mut row = vec![seconds(start), calendar_time(self.started, start)];
        let mut arms = Vec::with_capacity(2);
        let kelvin = self.board.as_ref().and_then(Board::row_kelvin);
        self.latest_board_c = kelvin.map(|k| k - crate::units::CELSIUS_ZERO_K);
        self.latest.clear();
        let mut uncompensated = std::mem::take(&mut self.uncompensated);
        uncompensated.resize(self.groups(), PowerStats::default());
        for (g, stats) in std::mem::take(&mut self.stats).into_iter().enumerate() {
            let (ch, c) = self.source_of(g);
            let chain = &mut self.chains[c];
            let mut row_flags = flags | stats.totals.flags;
            if stats.totals.samples == 0 {
                row_flags |= Flags::GAP;
            }
            let number = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v:.4}"));
            row.push(stats.totals.samples.to_string());
            let figures = stats.figures(chain.cal_at(kelvin));
            row.push(number(figures.mean_dbm));
            row.push(number(figures.min_dbm));
            row.push(number(figures.max_dbm));
            row.push(figures.mean_w.map_or(String::new(), |w| format!("{w:.6e}")));
            row.push(flags_cell(row_flags, rejected));
            row.push(figures.bound.cell().to_string());
            row.push(figures.averaged.to_string());
            let u_db = if row_flags.intersects(NO_STATED_U) {
                None
            } else {
                chain.interval_u_db(&figures, kelvin)
            };
            row.push(u_cell(u_db));
            self.latest.push(ChannelSnapshot {
                channel: ch + 1,
                arm: self.coupled.as_ref().map(|_| ARMS[g]),
                power: figures
                    .mean_dbm
                    .zip(figures.mean_w)
                    .filter(|_| figures.bound == Bound::Exact)
                    .map(|(dbm, watts)| Power { dbm, watts, u_db }),
                flags: row_flags,
            });
            if self.board.is_some() {
                let plain = uncompensated[g].figures(&chain.cal);
                row.push(number(
                    plain.mean_dbm.filter(|_| plain.bound == Bound::Exact),
                ));
            }
            arms.push(figures);
        }
        if let (Some(coupled), [forward, reflected]) = (&self.coupled, arms.as_slice()) {
            let (cells, matching) = coupled.interval(&self.chains, forward, reflected);
            row.extend(cells);
            self.latest_match = Some(matching);
        }
        if let Some(board) = &mut self.board {
            row.extend(board.take_cells());
        }
        self.write_row(row)
    }

    fn write_row(&mut self, row: Vec<String>) -> io::Result<()> {
        self.write_pending()?;
        if !self.header_written {
            let header = self.column_names();
            self.out.write_record(&header)?;
            self.header_written = true;
        }
        self.out.write_record(&row)?;
        self.rows += 1;
        Ok(())
    }

    fn column_names(&self) -> Vec<String> {
        let per_channel: &[&str] = if self.every > 0.0 {
            &PER_INTERVAL_COLUMNS
        } else {
            &PER_SAMPLE_COLUMNS
        };
        let mut names = vec!["time_s".to_string()];
        if self.every > 0.0 {
            names.push("utc".into());
        }
        if self.coupled.is_some() {
            return coupler_header(self.every <= 0.0);
        }
        for g in 0..self.groups() {
            let ch = self.source_of(g).0;
            let suffix = if ch == 0 {
                String::new()
            } else {
                format!("_ch{}", ch + 1)
            };
            names.extend(per_channel.iter().map(|n| format!("{n}{suffix}")));
            if self.board.is_some() {
                names.push(format!("{UNCOMPENSATED_COLUMN}{suffix}"));
            }
        }
        if self.board.is_some() {
            names.extend(BOARD_COLUMNS.iter().map(|n| n.to_string()));
        }
        names
    }
}

/// The cells of one sample after its time, as [`PER_SAMPLE_COLUMNS`] names them.
type SampleCells = [String; PER_SAMPLE_COLUMNS.len()];

/// The columns of each channel in a log of one row per sample.
pub const PER_SAMPLE_COLUMNS: [&str; 6] = ["counts", "volts", "dbm", "flags", "bound", "u_db"];
/// The columns of each channel in a log of one row per interval.
pub const PER_INTERVAL_COLUMNS: [&str; 9] = [
    "samples", "mean_dbm", "min_dbm", "max_dbm", "mean_w", "flags", "bound", "averaged", "u_db",
];

/// A `u_db` cell: the expanded uncertainty to 0.1 mdB, or empty.
fn u_cell(u_db: Option<f64>) -> String {
    u_db.map_or(String::new(), |u| format!("{u:.4}"))
}

/// The `# u_db:` line: what the column holds and which terms of the budget it leaves out
/// (those whose inputs are missing at the span's ends and middle, and the noise of one
/// sample in per-sample rows), so that nothing is claimed silently.
fn uncertainty_line(budget: Option<&Uncertainty>, cal: &Calibration, per_sample: bool) -> String {
    let Some(budget) = budget else {
        return "# u_db: not worked out (no uncertainty budget was given); the column is \
                empty\n"
            .into();
    };
    uncertainty_lines(&[("", budget, cal)], per_sample)
}

/// The `# u_db:` line of rows whose chains are `chains` (a label, for more than one, and
/// each chain's budget and calibration).
fn uncertainty_lines(chains: &[(&str, &Uncertainty, &Calibration)], per_sample: bool) -> String {
    let left_out: Vec<String> = chains
        .iter()
        .map(|(label, budget, cal)| {
            let terms = left_out_terms(budget, cal, per_sample);
            if label.is_empty() {
                terms
            } else {
                format!("on the {label} {terms}")
            }
        })
        .collect();
    format!(
        "# u_db: expanded uncertainty (k = {}) of the row's {}, dB; empty for a bound; \
         leaves out: {}; not modelled: {}\n",
        crate::uncertainty::COVERAGE_K,
        if per_sample { "reading" } else { "mean" },
        left_out.join("; "),
        crate::uncertainty::NOT_MODELLED
    )
}

/// The terms of `budget` whose inputs are missing somewhere in the span, as words.
fn left_out_terms(budget: &Uncertainty, cal: &Calibration, per_sample: bool) -> String {
    let (lo, hi) = cal.span_dbm();
    // Any noise stands for the rows' own: which terms are missing does not depend on it.
    let noise = (!per_sample).then_some(Noise {
        sigma_counts: 1.0,
        n_eff: 100.0,
    });
    let mut missing: Vec<TermKind> = Vec::new();
    for level in [lo, (lo + hi) / 2.0, hi] {
        for kind in budget.budget(level, noise).missing {
            if !missing.contains(&kind) {
                missing.push(kind);
            }
        }
    }
    let names: Vec<String> = missing.into_iter().map(|k| k.label().to_string()).collect();
    if names.is_empty() {
        "nothing".to_string()
    } else {
        names.join(", ")
    }
}

/// A `# zero:` line: the zero at `t`, and for one taken during the run its change since
/// the start (counts), what that change moves at the span's bottom (dB) and that bottom
/// (dBm at the reference plane).
fn zero_line(t: f64, counts: f64, change: Option<(f64, f64, f64)>) -> String {
    match change {
        None => format!("# zero: time_s={t:.3} counts={counts:.3} source=profile\n"),
        Some((counts_change, db, bottom)) => format!(
            "# zero: time_s={t:.3} counts={counts:.3} change_counts={counts_change:+.3} \
             change_db_at_span_bottom={db:+.3} span_bottom_dbm={bottom:.3}\n"
        ),
    }
}

/// The calendar time `t` seconds after `started`; empty past what the clock can hold, so
/// an absurd stamp costs its cell, never the rows after it.
fn calendar_time(started: SystemTime, t: f64) -> String {
    Duration::try_from_secs_f64(t)
        .ok()
        .and_then(|d| started.checked_add(d))
        .map_or(String::new(), |utc| {
            humantime::format_rfc3339_millis(utc).to_string()
        })
}

fn seconds(t: f64) -> String {
    format!("{t:.6}")
}

/// A row's flags cell: the names of `flags`, then [`REJECTED`] when input was refused.
fn flags_cell(flags: Flags, rejected: bool) -> String {
    let mut names = flags.names();
    if rejected {
        names.push(REJECTED);
    }
    names.join("|")
}

/// The `#` lines that open a recording.
pub(crate) fn context_lines(cal: &Calibration, c: &RunContext) -> String {
    let frequency = format!(
        "{}; frequency correction {:+.2} dB; offset {:+.2} dB",
        format_frequency(cal.freq_hz()),
        cal.correction_db(),
        cal.offset_db(),
    );
    context_lines_with(&frequency, c)
}

/// The `#` lines that open a recording whose calibration `frequency` describes.
fn context_lines_with(frequency: &str, c: &RunContext) -> String {
    let every = if c.every.is_zero() {
        "every sample".to_string()
    } else {
        format!("every {}", humantime::format_duration(c.every))
    };
    format!(
        "# {tool} record\n# profile: {profile}; sha256 {hash}\n\
         # frequency: {frequency}\n\
         # started: {started}\n# source: {source}\n# rows: {every}; power averaged over watts; \
         flags: {legend}\n",
        legend = flags_cell(Flags::all(), true).replace('|', " "),
        tool = escape_controls(&c.tool),
        profile = escape_controls(&c.profile),
        hash = c.profile_hash,
        started = humantime::format_rfc3339_millis(c.started),
        source = escape_controls(&c.source),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::FlatCounts;
    use crate::profile::parse_profile;

    fn recorder(every: f64) -> Recorder<Vec<u8>> {
        let profile = parse_profile(
            include_str!("../profiles/demo-logamp.toml"),
            "demo-logamp.toml",
        )
        .unwrap();
        let context = RunContext {
            tool: "dbtrail test".into(),
            profile: "demo-logamp".into(),
            profile_hash: "0".into(),
            started: SystemTime::UNIX_EPOCH,
            source: "test".into(),
            every: Duration::from_secs_f64(every),
        };
        Recorder::new(
            Vec::new(),
            Calibration::new(&profile, None, 0.0),
            &context,
            Opening::Fresh,
        )
        .unwrap()
    }

    impl Recorder<Vec<u8>> {
        fn context_for_test(&self) -> RunContext {
            RunContext {
                tool: "dbtrail test".into(),
                profile: "demo-logamp".into(),
                profile_hash: "0".into(),
                started: self.started,
                source: "test".into(),
                every: Duration::from_secs_f64(self.every),
            }
        }
    }

    fn sample(t: f64, counts: u32) -> Event {
        Event::sample(t, &[counts])
    }

    fn data_rows(r: Recorder<Vec<u8>>) -> Vec<Vec<String>> {
        let text = String::from_utf8(r.out.into_inner().unwrap()).unwrap();
        text.lines()
            .filter(|l| !l.starts_with('#') && !l.starts_with("time_s"))
            .map(|l| l.split(',').map(String::from).collect())
            .collect()
    }

    #[test]
    fn calendar_times_past_the_clocks_reach_leave_the_cell_empty() {
        // Source: the Unix epoch is 1970-01-01T00:00:00Z (POSIX), written per RFC 3339.
        assert_eq!(
            calendar_time(SystemTime::UNIX_EPOCH, 90.5),
            "1970-01-01T00:01:30.500Z"
        );
        assert_eq!(calendar_time(SystemTime::now(), 1e300), "");
        assert_eq!(calendar_time(SystemTime::now(), f64::INFINITY), "");
    }

    #[test]
    fn silent_intervals_become_gap_rows_and_a_reconnect_is_marked() {
        let mut r = recorder(1.0);
        for event in [
            sample(0.2, 2000),
            Event::LinkDown { t: 1.5 },
            Event::LinkUp { t: 3.2 },
            sample(3.5, 2000),
        ] {
            r.handle(&event).unwrap();
        }
        r.finish(4.0).unwrap();
        let rows = data_rows(r);
        let flags: Vec<&str> = rows.iter().map(|row| row[7].as_str()).collect();
        assert_eq!(flags, ["", "gap", "gap", "gap|reconnect"]);
        let samples: Vec<&str> = rows.iter().map(|row| row[2].as_str()).collect();
        assert_eq!(samples, ["1", "0", "0", "1"]);
        assert_eq!(rows[1][3], "", "no number where there was no reading");
    }

    // Source: the rule in docs/recording.md: a row whose interval saw refused input says
    // so with `rejected`, not only `gap` when nothing else came.
    #[test]
    fn rejected_input_flags_its_interval_and_gets_a_marker_row_per_sample() {
        let mut r = recorder(1.0);
        for event in [
            sample(0.2, 2000),
            Event::Rejected { t: 1.4, count: 3 },
            Event::Rejected { t: 2.1, count: 1 },
            sample(2.5, 2000),
            sample(3.5, 2000),
        ] {
            r.handle(&event).unwrap();
        }
        r.finish(4.0).unwrap();
        let flags: Vec<String> = data_rows(r).iter().map(|row| row[7].clone()).collect();
        assert_eq!(flags, ["", "gap|rejected", "rejected", ""]);
        let mut r = recorder(0.0);
        r.handle(&sample(0.1, 2000)).unwrap();
        r.handle(&Event::Rejected { t: 0.2, count: 1 }).unwrap();
        r.finish(0.3).unwrap();
        let rows = data_rows(r);
        assert_eq!(rows[1], ["0.200000", "", "", "", "rejected", "", ""]);
    }

    #[test]
    fn a_chunk_across_interval_boundaries_fills_each_interval() {
        let mut r = recorder(1.0);
        let mut samples = FlatCounts {
            channels: 1,
            counts: Vec::new(),
        };
        samples.counts.resize(2500, 2000);
        r.handle(&Event::Samples(Chunk {
            t0: 0.0,
            dt: 0.001,
            samples,
        }))
        .unwrap();
        r.finish(2.5).unwrap();
        let counts: Vec<String> = data_rows(r).iter().map(|row| row[2].clone()).collect();
        assert_eq!(counts, ["1000", "1000", "500"]);
    }

    // Source: common practice (an interval of 1 s at 10 k samples/s holds 10 000 samples).
    // Sample k is stamped k·dt whichever chunk it comes in, and a stamp a rounding error
    // below a boundary must still count in the next interval.
    #[test]
    fn interval_counts_do_not_depend_on_how_the_samples_are_chunked() {
        let dt = 1e-4;
        for chunk_len in [1, 7, 4096, 16_384, 49_999, 100_000] {
            let mut r = recorder(1.0);
            let (mut first, mut last_t) = (0usize, 0.0);
            while first < 100_000 {
                let n = chunk_len.min(100_000 - first);
                let chunk = Chunk {
                    t0: first as f64 * dt,
                    dt,
                    samples: FlatCounts {
                        channels: 1,
                        counts: vec![2000; n],
                    },
                };
                last_t = chunk.time(n - 1);
                r.handle(&Event::Samples(chunk)).unwrap();
                first += n;
            }
            // As a replay ends: one sample period after the last sample's stamp.
            r.finish(last_t + dt).unwrap();
            let counts: Vec<String> = data_rows(r).iter().map(|row| row[2].clone()).collect();
            assert_eq!(counts, vec!["10000"; 10], "chunks of {chunk_len}");
        }
    }

    fn text(r: Recorder<Vec<u8>>) -> String {
        String::from_utf8(r.out.into_inner().unwrap()).unwrap()
    }

    // Source: worked example on the demo log-amp, a line V = slope·(P − intercept): a
    // zero that rises by Δ counts, left untaken, reads every level Δ·(volts per count)/
    // slope dB high; here Δ = 2.5 counts of 3.3 V/4095. The rows after the zero read
    // through it: the same count then reads that much lower.
    #[test]
    fn a_zero_taken_is_written_with_its_change_and_read_from_then_on() {
        let mut r = recorder(1.0);
        let slope = {
            let profile = parse_profile(
                include_str!("../profiles/demo-logamp.toml"),
                "demo-logamp.toml",
            )
            .unwrap();
            profile.model.param("slope").unwrap()
        };
        let shift_db = 2.5 * (3.3 / 4095.0) / slope;
        for i in 0..10 {
            r.handle(&sample(f64::from(i) * 0.1, 2000)).unwrap();
        }
        r.rezero(1.0, 2.5).unwrap();
        for i in 10..20 {
            r.handle(&sample(f64::from(i) * 0.1, 2000)).unwrap();
        }
        r.finish(2.0).unwrap();
        let out = text(r);
        let zeros: Vec<&str> = out.lines().filter(|l| l.starts_with("# zero:")).collect();
        assert_eq!(zeros[0], "# zero: time_s=0.000 counts=0.000 source=profile");
        let taken = zeros[1];
        assert!(
            taken.starts_with("# zero: time_s=1.000 counts=2.500 change_counts=+2.500"),
            "{taken}"
        );
        let field = |key: &str| -> f64 {
            let start = taken.find(key).unwrap() + key.len();
            taken[start..].split(' ').next().unwrap().parse().unwrap()
        };
        assert!(
            (field("change_db_at_span_bottom=") - shift_db).abs() < 1e-3,
            "{taken}"
        );
        let rows: Vec<Vec<&str>> = out
            .lines()
            .filter(|l| !l.starts_with('#') && !l.starts_with("time_s"))
            .map(|l| l.split(',').collect())
            .collect();
        let mean = |row: &Vec<&str>| -> f64 { row[3].parse().unwrap() };
        assert!(
            (mean(&rows[0]) - mean(&rows[1]) - shift_db).abs() < 1e-3,
            "{rows:?}"
        );
        // The zero line sits between the two rows.
        let at = |needle: &str| out.find(needle).unwrap();
        assert!(at("1.000000,") > at(taken) && at(taken) > at("0.000000,"));
    }

    /// The rows of the demo diode's soak (its board streamed as channel 2) for 30 s at
    /// 1 kHz, fed in chunks of `chunk_len` frames, every `every` seconds.
    fn board_rows(every: f64, chunk_len: usize) -> Vec<Vec<String>> {
        let profile = parse_profile(
            include_str!("../profiles/demo-diode.toml"),
            "demo-diode.toml",
        )
        .unwrap();
        let cal = Calibration::new(&profile, Some(146e6), 0.0);
        let budget = Uncertainty::new(&profile, &cal);
        let mut sim = crate::sim::Simulator::new(&profile, crate::sim::Scenario::Soak, 1e3, 9);
        let mut frames = Vec::new();
        sim.fill(30_000, &mut frames);
        let mut r = recorder(every);
        let context = r.context_for_test();
        r = Recorder::with_uncertainty(Vec::new(), cal, Some(budget), &context, Opening::Fresh)
            .unwrap();
        for (k, part) in frames.chunks(2 * chunk_len).enumerate() {
            let chunk = Chunk {
                t0: (k * chunk_len) as f64 * 1e-3,
                dt: 1e-3,
                samples: FlatCounts {
                    channels: 2,
                    counts: part.to_vec(),
                },
            };
            r.handle(&Event::Samples(chunk)).unwrap();
        }
        r.finish(30.0).unwrap();
        data_rows(r)
    }

    // Source: the rule in docs/recording.md ("The board's temperature"): the temperature a
    // sample is compensated at is the window's mean taken at fixed ticks of source time,
    // so rows are the same however the samples came in, and an interval's mean is that of
    // its per-sample readings.
    #[test]
    fn compensated_rows_do_not_depend_on_chunking_and_per_sample_rows_agree() {
        let whole = board_rows(1.0, 30_000);
        assert_eq!(whole.len(), 30);
        for chunk_len in [1, 37, 1000] {
            assert_eq!(board_rows(1.0, chunk_len), whole, "chunks of {chunk_len}");
        }
        let samples = board_rows(0.0, 4096);
        assert_eq!(samples.len(), 30_000);
        let cell = |row: &[String], back: usize| -> f64 { row[row.len() - back].parse().unwrap() };
        for (second, row) in whole.iter().enumerate() {
            let these = &samples[second * 1000..(second + 1) * 1000];
            // Each sample's temp_c is the temperature it was read at (3 decimals).
            let applied = these.iter().map(|s| cell(s, 2)).sum::<f64>() / 1000.0;
            assert!(
                (applied - cell(row, 2)).abs() < 6e-4,
                "{second} s: {applied} vs {row:?}"
            );
            let watts = these
                .iter()
                .map(|s| crate::units::dbm_to_watts(s[3].parse().unwrap()))
                .sum::<f64>();
            let folded = crate::units::watts_to_dbm(watts / 1000.0);
            let mean: f64 = row[3].parse().unwrap();
            // 4 decimals a cell, and a steady level's mean is the reading of its mean count.
            assert!(
                (folded - mean).abs() < 3e-4,
                "{second} s: {folded} vs {mean}"
            );
            assert_eq!(row.last().unwrap(), "", "no sensor fault");
        }
    }

    // Source: the rule in docs/recording.md: a per-sample recording says before its first
    // row how its times were stamped; chunks with a sample period of 1 ms come from a
    // source stamping at 1000 samples/s, chunks of one read (period 0) from a live port.
    #[test]
    fn a_per_sample_recording_says_how_its_times_were_stamped() {
        let steady = |dt: f64| Chunk {
            t0: 0.0,
            dt,
            samples: FlatCounts {
                channels: 1,
                counts: vec![2000; 3],
            },
        };
        let mut r = recorder(0.0);
        r.handle(&Event::Samples(steady(0.001))).unwrap();
        r.handle(&Event::Samples(steady(0.001))).unwrap();
        r.finish(0.003).unwrap();
        let rated = text(r);
        assert!(
            rated.contains("\n# stamps: at 1000 samples/s\ntime_s,counts"),
            "{rated}"
        );
        assert_eq!(rated.matches("# stamps").count(), 1);
        let mut r = recorder(0.0);
        r.handle(&Event::Samples(steady(0.0))).unwrap();
        r.finish(0.1).unwrap();
        assert!(text(r).contains(&format!("\n# stamps: {STAMPED_BY_CLOCK}\ntime_s,")));
        // A port that drops before its first sample: the marker row is a clock time too.
        let mut r = recorder(0.0);
        r.handle(&Event::LinkDown { t: 0.4 }).unwrap();
        assert!(text(r).contains(&format!("# stamps: {STAMPED_BY_CLOCK}\ntime_s,")));
        // Rows per interval need no stamps line: their interval is in `# rows:`.
        let mut r = recorder(1.0);
        r.handle(&Event::Samples(steady(0.001))).unwrap();
        r.finish(1.0).unwrap();
        assert!(!text(r).contains("# stamps"));
    }

    /// The bound, averaged, mean and min cells of one interval of `codes`.
    fn bound_cells(codes: &[u32]) -> (String, String, String, String) {
        let mut r = recorder(1.0);
        let events: Vec<Event> = codes
            .iter()
            .enumerate()
            .map(|(i, &c)| sample(0.1 + 0.01 * i as f64, c))
            .collect();
        for event in &events {
            r.handle(event).unwrap();
        }
        r.finish(1.0).unwrap();
        let row = data_rows(r).remove(0);
        (
            row[8].clone(),
            row[9].clone(),
            row[3].clone(),
            row[4].clone(),
        )
    }

    // Source: the rule in docs/recording.md ("Bounds"): clipped samples make a row
    // `at-least`, below-span ones `at-most`, both `none` with no figures, and samples over
    // full scale stay out of `averaged`. On the demo log amp 2000 counts is a value,
    // 4095 clips, 100 lies below the span and 5000 is over the 12-bit full scale. Before
    // the bound column these rows showed plain means of their values alone.
    #[test]
    fn interval_rows_name_their_bound_and_the_samples_averaged() {
        let cal = recorder(1.0).chains.remove(0).cal;
        let bottom = format!("{:.4}", cal.span_dbm().0);
        let (bound, averaged, mean, _) = bound_cells(&[2000, 2000, 2000]);
        assert_eq!((bound.as_str(), averaged.as_str()), ("", "3"));
        let plain: f64 = mean.parse().unwrap();
        let (bound, averaged, mean, _) = bound_cells(&[2000, 2000, 4095]);
        assert_eq!((bound.as_str(), averaged.as_str()), ("at-least", "3"));
        assert!(
            mean.parse::<f64>().unwrap() > plain,
            "{mean} against {plain}"
        );
        let (bound, averaged, mean, min) = bound_cells(&[2000, 100, 2000]);
        assert_eq!((bound.as_str(), averaged.as_str()), ("at-most", "3"));
        assert!(
            mean.parse::<f64>().unwrap() < plain,
            "{mean} against {plain}"
        );
        assert_eq!(
            min, bottom,
            "the below-span sample counts at the span's bottom"
        );
        let (bound, averaged, mean, min) = bound_cells(&[2000, 100, 4095]);
        assert_eq!((bound.as_str(), averaged.as_str()), ("none", "0"));
        assert_eq!((mean.as_str(), min.as_str()), ("", ""));
        let (bound, averaged, mean, _) = bound_cells(&[2000, 5000, 2000]);
        assert_eq!((bound.as_str(), averaged.as_str()), ("", "2"));
        assert_eq!(mean.parse::<f64>().unwrap(), plain);
    }

    fn recorder_with_budget(every: f64) -> Recorder<Vec<u8>> {
        let profile = parse_profile(
            include_str!("../profiles/demo-logamp.toml"),
            "demo-logamp.toml",
        )
        .unwrap();
        let cal = Calibration::new(&profile, None, 0.0);
        let budget = Uncertainty::new(&profile, &cal);
        let context = RunContext {
            every: Duration::from_secs_f64(every),
            ..recorder(every).context_for_test()
        };
        Recorder::with_uncertainty(Vec::new(), cal, Some(budget), &context, Opening::Fresh).unwrap()
    }

    // Source: ADC quantisation, a step ÷ √12 (common practice), worked by hand from the
    // demo log amp's points: 80 dB over 2961.4 − 544.1 = 2417.3 counts is 0.033095 dB a
    // count, so a constant count has a quantisation term of 0.033095 / √12 = 0.00955 dB;
    // the row's u_db is the whole budget at its level expanded with k = 2 (the GUM), in
    // interval and per-sample rows alike. A clipped row has none. The `# u_db:` line
    // names the terms the budget leaves out, once. Before, rows had no u_db column.
    #[test]
    fn rows_carry_their_uncertainty_and_the_log_says_what_it_leaves_out() {
        let profile = parse_profile(
            include_str!("../profiles/demo-logamp.toml"),
            "demo-logamp.toml",
        )
        .unwrap();
        let cal = Calibration::new(&profile, None, 0.0);
        let level = cal.reading_code(2000).dbm;
        let steady = Noise {
            sigma_counts: 0.0,
            n_eff: 20.0,
        };
        let whole = Uncertainty::new(&profile, &cal).budget(level, Some(steady));
        let by_hand = 80.0 / 2417.3 / 12f64.sqrt();
        let quantisation = whole.term(TermKind::Quantisation).unwrap();
        assert!(
            (quantisation - by_hand).abs() < 1e-4,
            "{quantisation} {by_hand}"
        );
        for every in [1.0, 0.0] {
            let expected = if every > 0.0 {
                whole.expanded_db()
            } else {
                Uncertainty::new(&profile, &cal)
                    .budget(level, None)
                    .expanded_db()
            };
            let mut r = recorder_with_budget(every);
            for i in 0..20 {
                r.handle(&sample(0.01 * f64::from(i), 2000)).unwrap();
            }
            r.handle(&sample(1.5, 4095)).unwrap();
            r.finish(2.0).unwrap();
            let text = text(r);
            let rows: Vec<Vec<&str>> = text
                .lines()
                .filter(|l| !l.starts_with('#') && !l.starts_with("time_s"))
                .map(|l| l.split(',').collect())
                .collect();
            let u_col = if every > 0.0 { 10 } else { 6 };
            let u: f64 = rows[0][u_col].parse().unwrap();
            assert!(
                (u - expected).abs() < 1e-4,
                "every {every}: {u} against {expected}"
            );
            assert_eq!(rows.last().unwrap()[u_col], "", "a clipped row has no u_db");
            let line: Vec<&str> = text.lines().filter(|l| l.starts_with("# u_db:")).collect();
            assert_eq!(line.len(), 1, "{text}");
            let left_out = if every > 0.0 {
                "leaves out: temperature; not modelled: "
            } else {
                "leaves out: noise of the mean, temperature; not modelled: "
            };
            assert!(line[0].contains(left_out), "{}", line[0]);
            assert!(
                line[0].ends_with(crate::uncertainty::NOT_MODELLED),
                "{}",
                line[0]
            );
        }
    }

    #[test]
    fn a_recording_begun_part_way_starts_at_its_own_interval() {
        let mut r = recorder(1.0);
        r.begin_at(6.3);
        r.handle(&sample(6.4, 2000)).unwrap();
        r.handle(&sample(7.1, 2000)).unwrap();
        r.finish(7.5).unwrap();
        let rows = data_rows(r);
        let times: Vec<&str> = rows.iter().map(|row| row[0].as_str()).collect();
        assert_eq!(times, ["6.000000", "7.000000"]);
    }
}
