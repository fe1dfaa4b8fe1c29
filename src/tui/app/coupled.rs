//! The screen's side of a coupler run: both arms' counts over the averaging window, the
//! match of their means (the ratio of the averages, never the average of ratios), the
//! best match so far, the return loss's recent change and trend, and the transmitter's
//! limits. The power view of the same run shows the forward arm alone.

use std::collections::VecDeque;
use std::sync::Arc;

use dbtrail::calibration::{Flags, Reading};
use dbtrail::coupler::{Coupler, CouplerCalibration};
use dbtrail::matching::{MatchInterval, MatchState};
use dbtrail::stats::{Averaging, Bound, Figures, PowerStats, Settle, Trend, AVERAGE_BUCKETS};

use super::{TREND_BUCKETS, TREND_WINDOWS, WARNING_HOLD_S};

/// Which figure of the match the large digits show.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BigFigure {
    /// SWR.
    Swr,
    /// Return loss, dB.
    ReturnLoss,
}

impl BigFigure {
    fn other(self) -> Self {
        match self {
            BigFigure::Swr => BigFigure::ReturnLoss,
            BigFigure::ReturnLoss => BigFigure::Swr,
        }
    }
}

/// The match over the averaging window, with each arm's figures it was taken from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatchNow {
    /// Forward power's figures over the window.
    pub forward: Figures,
    /// Reflected power's.
    pub reflected: Figures,
    /// The match of the two.
    pub interval: MatchInterval,
}

impl MatchNow {
    /// The return loss when the match is a plain value.
    pub fn value_db(&self) -> Option<f64> {
        match (self.interval.state, self.interval.figures) {
            (MatchState::Value, Some(m)) => Some(m.return_loss_db),
            _ => None,
        }
    }
}

/// Which of the transmitter's limits the match is past.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct OverLimits {
    /// SWR above `limits.swr_max` (a value, a bound that is at least it, or reversed).
    pub swr: bool,
    /// Reflected power above `limits.reflected_max_dbm`.
    pub reflected: bool,
}

/// Both arms' counts over the averaging window, and when its first sample came.
#[derive(Debug, Clone)]
struct PairWindow {
    held: PairsHeld,
    first_t: Option<f64>,
}

/// What a [`PairWindow`] keeps.
#[derive(Debug, Clone)]
enum PairsHeld {
    /// Off (the last pair) or by count: the codes themselves, tallied when asked.
    Last(LastPairs),
    /// By time: each slice's tallies of both arms, [`AVERAGE_BUCKETS`] slices as the
    /// power view's average keeps them.
    Slices {
        width_s: f64,
        slices: VecDeque<(i64, PowerStats, PowerStats)>,
    },
}

impl PairWindow {
    fn new(mode: Averaging) -> Self {
        let last = |keep: usize| PairsHeld::Last(LastPairs::new(keep));
        let held = match mode {
            Averaging::Off => last(1),
            Averaging::Samples(n) => last(n),
            Averaging::Seconds(s) => PairsHeld::Slices {
                width_s: s / AVERAGE_BUCKETS as f64,
                slices: VecDeque::new(),
            },
        };
        PairWindow {
            held,
            first_t: None,
        }
    }

    fn push(&mut self, t: f64, codes: (u32, u32), cal: &CouplerCalibration) {
        self.first_t.get_or_insert(t);
        match &mut self.held {
            PairsHeld::Last(last) => last.push(codes, cal),
            PairsHeld::Slices { width_s, slices } => {
                let index = (t / *width_s).floor() as i64;
                match slices.back_mut() {
                    Some((last, _, _)) if *last > index => return,
                    Some((last, _, _)) if *last == index => {}
                    _ => slices.push_back((index, PowerStats::default(), PowerStats::default())),
                }
                if let Some((_, f, r)) = slices.back_mut() {
                    f.add_code(&cal.forward, codes.0);
                    r.add_code(&cal.reflected, codes.1);
                }
                while slices
                    .front()
                    .is_some_and(|(first, _, _)| index - first >= AVERAGE_BUCKETS as i64)
                {
                    slices.pop_front();
                }
            }
        }
    }

    /// Each arm's tally over the window, counted as a log's interval counts it.
    fn tallies(&self, cal: &CouplerCalibration) -> (PowerStats, PowerStats) {
        let (mut f, mut r) = (PowerStats::default(), PowerStats::default());
        match &self.held {
            PairsHeld::Last(last) => (f, r) = last.tallies(cal),
            PairsHeld::Slices { slices, .. } => {
                for (_, sf, sr) in slices {
                    f.merge(sf);
                    r.merge(sr);
                }
            }
        }
        (f, r)
    }

    /// True when the window holds all it is meant to: as many pairs as it keeps, or
    /// samples from its whole time.
    fn is_full(&self, now: f64) -> bool {
        match &self.held {
            PairsHeld::Last(last) => last.codes.len() >= last.keep,
            PairsHeld::Slices { width_s, .. } => self
                .first_t
                .is_some_and(|t0| now - t0 >= width_s * AVERAGE_BUCKETS as f64),
        }
    }

    /// Moves each arm's levels (the frequency changed); codes kept as codes need nothing.
    fn shift_db(&mut self, forward_db: f64, reflected_db: f64) {
        let tallies = match &mut self.held {
            PairsHeld::Slices { slices, .. } => slices.iter_mut(),
            PairsHeld::Last(last) => last.blocks.iter_mut(),
        };
        for (_, f, r) in tallies {
            f.shift_db(forward_db);
            r.shift_db(reflected_db);
        }
    }
}

/// Pairs are tallied in blocks of this many as they come, so that the tally of a long
/// window is its blocks' merged and the codes of at most one block tallied afresh.
const BLOCK: u64 = 1024;

/// The last few pairs of codes, and the tallies of the blocks they fall in.
#[derive(Debug, Clone)]
struct LastPairs {
    keep: usize,
    codes: VecDeque<(u32, u32)>,
    /// Pairs pushed since the window started; pair i falls in block i / [`BLOCK`].
    pushed: u64,
    /// Each block's tallies of both arms, oldest first, the newest still filling.
    blocks: VecDeque<(i64, PowerStats, PowerStats)>,
}

impl LastPairs {
    fn new(keep: usize) -> Self {
        LastPairs {
            keep: keep.max(1),
            codes: VecDeque::new(),
            pushed: 0,
            blocks: VecDeque::new(),
        }
    }

    fn push(&mut self, codes: (u32, u32), cal: &CouplerCalibration) {
        let block = (self.pushed / BLOCK) as i64;
        self.pushed += 1;
        self.codes.push_back(codes);
        if self.codes.len() > self.keep {
            self.codes.pop_front();
        }
        if self.blocks.back().is_none_or(|(b, _, _)| *b != block) {
            let empty = PowerStats::default();
            self.blocks.push_back((block, empty, empty));
        }
        if let Some((_, f, r)) = self.blocks.back_mut() {
            f.add_code(&cal.forward, codes.0);
            r.add_code(&cal.reflected, codes.1);
        }
        let first_block = (self.start() / BLOCK) as i64;
        while self
            .blocks
            .front()
            .is_some_and(|(b, _, _)| *b < first_block)
        {
            self.blocks.pop_front();
        }
    }

    /// The index of the window's oldest pair.
    fn start(&self) -> u64 {
        self.pushed - self.codes.len() as u64
    }

    /// Both arms' tallies over the window: the pairs of its first block that are in it
    /// tallied afresh (all of that block when the window starts on its edge), then the
    /// later blocks' tallies merged in order.
    fn tallies(&self, cal: &CouplerCalibration) -> (PowerStats, PowerStats) {
        let (mut f, mut r) = (PowerStats::default(), PowerStats::default());
        let start = self.start();
        let first_block = start / BLOCK;
        let mut later = self.blocks.iter().peekable();
        if !start.is_multiple_of(BLOCK) {
            let head = ((first_block + 1) * BLOCK - start) as usize;
            let (fwd, refl): (Vec<u32>, Vec<u32>) = self.codes.iter().take(head).copied().unzip();
            f.add_codes(&cal.forward, &fwd);
            r.add_codes(&cal.reflected, &refl);
            while later
                .next_if(|(b, _, _)| *b == first_block as i64)
                .is_some()
            {}
        }
        for (_, bf, br) in later {
            f.merge(bf);
            r.merge(br);
        }
        (f, r)
    }
}

/// What the screen keeps of a coupler run.
#[derive(Debug, Clone)]
pub struct CoupledRun {
    /// The set-up and both detectors' profiles.
    pub coupler: Arc<Coupler>,
    /// Both arms at the run's frequency.
    pub cal: CouplerCalibration,
    window: PairWindow,
    /// The match over the window, as last worked out.
    now: Option<MatchNow>,
    /// The match held by the freeze key.
    pub frozen: Option<MatchNow>,
    /// The highest return loss (lowest SWR) of a value over a full window since the reset.
    best_db: Option<f64>,
    /// The return loss of values, for its change over the last second.
    settle: Settle,
    /// The return loss of values over each of [`TREND_WINDOWS`].
    trends: Vec<Trend>,
    /// When each limit was last found passed, source seconds.
    swr_over_at: Option<f64>,
    reflected_over_at: Option<f64>,
    /// Which figure the large digits show.
    pub big: BigFigure,
}

impl CoupledRun {
    /// A run of `coupler` through its calibration, averaged as `mode` says.
    pub fn new(coupler: Arc<Coupler>, cal: CouplerCalibration, mode: Averaging) -> Self {
        CoupledRun {
            coupler,
            cal,
            window: PairWindow::new(mode),
            now: None,
            frozen: None,
            best_db: None,
            settle: Settle::new(1.0, 0.1),
            trends: TREND_WINDOWS
                .iter()
                .map(|(s, _)| Trend::new(*s, TREND_BUCKETS))
                .collect(),
            swr_over_at: None,
            reflected_over_at: None,
            big: BigFigure::Swr,
        }
    }

    /// The forward and reflected arms' counts in a sample of the stream, or None when it
    /// has too few channels for the set-up.
    pub fn codes(&self, counts: &[u32]) -> Option<(u32, u32)> {
        let setup = &self.coupler.setup;
        Some((
            *counts.get(setup.forward.channel)?,
            *counts.get(setup.reflected.channel)?,
        ))
    }

    /// Adds one sample's pair of codes, taken at `t`.
    pub fn push(&mut self, t: f64, codes: (u32, u32)) {
        self.window.push(t, codes, &self.cal);
    }

    /// Works out the match of the window after a batch of samples at `now`: its trend, and
    /// whether it is past the transmitter's limits.
    pub fn refresh(&mut self, now: f64) {
        let found = self.measure();
        if let Some(db) = found.value_db() {
            let reading = return_loss_reading(db);
            for trend in &mut self.trends {
                trend.push(now, &reading);
            }
        }
        let over = self.over_limits(&found);
        if over.swr {
            self.swr_over_at = Some(now);
        }
        if over.reflected {
            self.reflected_over_at = Some(now);
        }
        self.now = Some(found);
    }

    /// The match of the window as it holds now: each arm averaged over watts on its own,
    /// then the ratio of the two means.
    fn measure(&self) -> MatchNow {
        let (f, r) = self.window.tallies(&self.cal);
        let forward = f.figures(&self.cal.forward);
        let reflected = r.figures(&self.cal.reflected);
        MatchNow {
            forward,
            reflected,
            interval: self.cal.interval(&forward, &reflected),
        }
    }

    fn over_limits(&self, found: &MatchNow) -> OverLimits {
        let limits = self.coupler.setup.limits;
        let swr = limits
            .swr_max
            .is_some_and(|max| match found.interval.state {
                // A reflection as large as the forward wave reads so too: safer to warn.
                MatchState::Reversed => true,
                MatchState::Value | MatchState::ReturnLossAtMost => {
                    found.interval.figures.is_some_and(|m| m.swr > max)
                }
                _ => false,
            });
        let reflected = limits.reflected_max_dbm.is_some_and(|max| {
            let r = &found.reflected;
            matches!(r.bound, Bound::Exact | Bound::AtLeast) && r.mean_dbm.is_some_and(|d| d > max)
        });
        OverLimits { swr, reflected }
    }

    /// The limits passed within the warnings' hold time before `now`.
    pub fn over_now(&self, now: f64) -> OverLimits {
        let held = |at: Option<f64>| at.is_some_and(|t| now - t < WARNING_HOLD_S);
        OverLimits {
            swr: held(self.swr_over_at),
            reflected: held(self.reflected_over_at),
        }
    }

    /// On every frame: the change over the last second and the best match.
    pub fn tick(&mut self, now: f64, flowing: bool) {
        match self.now.as_ref().and_then(MatchNow::value_db) {
            Some(db) if flowing => {
                self.settle.push(now, db);
                if self.window.is_full(now) {
                    self.best_db = Some(self.best_db.map_or(db, |b| b.max(db)));
                }
            }
            _ => self.settle.clear(),
        }
    }

    /// The match shown: the frozen one, or the one over the window now.
    pub fn shown(&self) -> Option<&MatchNow> {
        self.frozen.as_ref().or(self.now.as_ref())
    }

    /// The match over the window now, frozen or not.
    pub fn live(&self) -> Option<&MatchNow> {
        self.now.as_ref()
    }

    /// The best return loss since the reset, dB.
    pub fn best_db(&self) -> Option<f64> {
        self.best_db
    }

    /// How the return loss moved over the last second, dB (up is a better match).
    pub fn change_over_last_second(&self, now: f64) -> Option<f64> {
        self.settle.change_over_last_second(now)
    }

    /// The return loss trend of window `which` as columns of (min, max) dB.
    pub fn trend_columns(&self, which: usize, now: f64, columns: usize) -> Vec<Option<(f64, f64)>> {
        self.trends[which].columns(now, columns)
    }

    /// Forgets the best match.
    pub fn reset_best(&mut self) {
        self.best_db = None;
    }

    /// Flips the large digits between SWR and return loss.
    pub fn cycle_big(&mut self) {
        self.big = self.big.other();
    }

    /// A new averaging window: it starts empty.
    pub fn set_averaging(&mut self, mode: Averaging) {
        self.window = PairWindow::new(mode);
        self.settle.clear();
    }

    /// Both arms at a new frequency. The arms move by their own change of correction and
    /// coupling, so the return loss's history moves by their difference.
    pub fn retune(&mut self, hz: f64) {
        let total = |c: &dbtrail::calibration::Calibration| c.correction_db() + c.offset_db();
        let (f0, r0) = (total(&self.cal.forward), total(&self.cal.reflected));
        self.cal = CouplerCalibration::new(&self.coupler, hz);
        let forward = total(&self.cal.forward) - f0;
        let reflected = total(&self.cal.reflected) - r0;
        self.window.shift_db(forward, reflected);
        let return_loss = forward - reflected;
        self.settle.shift_db(return_loss);
        for trend in &mut self.trends {
            trend.shift_db(return_loss);
        }
        self.best_db = self.best_db.map(|b| b + return_loss);
        self.frozen = None;
        if self.now.is_some() {
            self.now = Some(self.measure());
        }
    }
}

/// A return loss as the trend keeps a level: the buckets' extremes are what the chart
/// draws, whatever the figure is.
fn return_loss_reading(db: f64) -> Reading {
    Reading {
        counts: f64::NAN,
        volts: f64::NAN,
        detector_dbm: db,
        dbm: db,
        flags: Flags::empty(),
    }
}

#[cfg(test)]
mod tests {
    use std::path::Path;

    use dbtrail::coupler::load_coupler;

    use super::*;

    fn demo() -> CouplerCalibration {
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("profiles/demo-coupler.toml");
        CouplerCalibration::new(&load_coupler(&path).unwrap(), 145e6)
    }

    /// Codes that wander over both detectors' spans and past them.
    fn code(i: u32, arm: u32) -> u32 {
        (i * 37 + arm * 1001) % 4096
    }

    // The block tallies are a shortcut: whatever the window's length and where it falls
    // on the blocks, they must agree with tallying the window's codes one by one, as a
    // log's interval counts them (`PowerStats::add_code`).
    #[test]
    fn a_window_tallied_by_blocks_agrees_with_its_codes_tallied_one_by_one() {
        let cal = demo();
        for (keep, pushed) in [
            (16, 10),
            (16, 5000),
            (1024, 3072),
            (1500, 4000),
            (3000, 2999),
        ] {
            let mut window = LastPairs::new(keep);
            for i in 0..pushed {
                window.push((code(i, 0), code(i, 1)), &cal);
            }
            let (f, r) = window.tallies(&cal);
            let first = pushed.saturating_sub(keep as u32);
            let (mut f1, mut r1) = (PowerStats::default(), PowerStats::default());
            for i in first..pushed {
                f1.add_code(&cal.forward, code(i, 0));
                r1.add_code(&cal.reflected, code(i, 1));
            }
            for (by_blocks, one_by_one) in [(f, f1), (r, r1)] {
                let (a, b) = (by_blocks.totals, one_by_one.totals);
                assert_eq!(
                    (a.samples, a.valid, a.at_least, a.at_most),
                    (b.samples, b.valid, b.at_least, b.at_most),
                    "{keep} of {pushed}"
                );
                assert!(
                    (a.sum_w - b.sum_w).abs() <= 1e-12 * b.sum_w,
                    "{keep} of {pushed}"
                );
                assert_eq!(by_blocks.moments.n, one_by_one.moments.n);
            }
            assert!(window.blocks.len() as u64 <= keep as u64 / BLOCK + 2);
        }
    }
}
