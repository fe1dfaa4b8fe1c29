//! The per-code table: every ADC code's reading computed once, laid out for the interval
//! statistics' inner loop, and that loop itself ([`CodeTable::accumulate`]), so that the
//! layout and the code that relies on it live together.

use super::{Counted, Flags, Reading};
use crate::units::dbm_to_watts;

/// The largest ADC whose every code gets a precomputed reading (16 bits: 65536 entries).
pub const TABLE_MAX_CODES: u32 = 1 << 16;

/// One ADC code's reading, computed once: what the hot path needs per sample, laid out
/// so that a sample adds to a set of statistics without a branch, whether it is a value or
/// a bound (see `stats::Bound`).
#[derive(Debug, Clone, Copy, PartialEq)]
#[repr(align(32))]
pub struct CodeEntry {
    /// Reference-plane dBm, as the reading shows it (the span's low end below the span).
    pub dbm: f64,
    /// The watts interval statistics count: the value's, or its bound's; 0 for a code
    /// never counted.
    pub watts: f64,
    /// The level interval statistics count: `dbm` for a value, the span's top for an
    /// above-span code or a clipped one above it; NaN for a code never counted, which
    /// leaves the lowest and highest level unchanged.
    pub counted_dbm: f64,
    /// Its flags.
    pub flags: Flags,
    /// Its kind as one tally, [`TALLY_VALUE`], [`TALLY_AT_LEAST`], [`TALLY_AT_MOST`] or 0
    /// (never counted): one integer addition per sample counts all three kinds, each in
    /// its own 10-bit lane, for up to 1023 samples (a block of [`CodeTable::accumulate`]).
    pub tally: u32,
}

/// The tally of a value (see [`CodeEntry::tally`]).
pub const TALLY_VALUE: u32 = 1;
/// The tally of a code counted at a bound the true level is at least (clip, above span).
pub const TALLY_AT_LEAST: u32 = 1 << 10;
/// The tally of a code counted at a bound the true level is at most (below span).
pub const TALLY_AT_MOST: u32 = 1 << 20;

/// (values, at least, at most) of a sum of at most 1023 tallies.
#[inline(always)]
pub fn untally(tally: u32) -> (u64, u64, u64) {
    let lane = |shift: u32| u64::from((tally >> shift) & 0x3FF);
    (lane(0), lane(10), lane(20))
}

impl CodeEntry {
    /// The entry of a code whose reading is `r`, in a calibration whose span tops out at
    /// `span_top_dbm` (reference plane).
    pub(super) fn of(r: &Reading, span_top_dbm: f64) -> CodeEntry {
        let counted = Counted::of(r.flags, r.dbm, span_top_dbm);
        let counted_dbm = counted.dbm();
        CodeEntry {
            dbm: r.dbm,
            watts: if counted_dbm.is_nan() {
                0.0
            } else {
                dbm_to_watts(counted_dbm)
            },
            counted_dbm,
            flags: r.flags,
            tally: counted.tally(),
        }
    }

    /// 1 for a value, 0 for a bound or a code never counted.
    pub fn valid(&self) -> u64 {
        untally(self.tally).0
    }
}

/// Every code's entry, from 0, and the same arranged by runs.
#[derive(Debug, Clone)]
pub struct CodeTable {
    entries: Vec<CodeEntry>,
    runs: CodeRuns,
}

/// The table arranged for whole blocks of codes: when a block's lowest and highest code
/// lie in one run of counted codes with the same flags (so all values, or all bounds of
/// one way) and counted levels that move one way only, its extremes, flags and kinds are
/// those of its end codes, and only its watts need a look-up per code.
#[derive(Debug, Clone)]
pub struct CodeRuns {
    /// Each code's watts, packed densely for the summing loop, in an array as long as
    /// the largest table so that a 16-bit index needs no bounds check (only the codes'
    /// pages are touched).
    watts: Box<[f64; TABLE_MAX_CODES as usize]>,
    /// For each code that is counted, the last code of the run it lies in.
    run_end: Vec<Option<u32>>,
    /// Levels fall as codes rise (a detector whose output falls with power).
    falling: bool,
}

fn dense_watts(table: &[CodeEntry]) -> Box<[f64; TABLE_MAX_CODES as usize]> {
    let mut watts = vec![0.0; TABLE_MAX_CODES as usize];
    for (slot, entry) in watts.iter_mut().zip(table) {
        *slot = entry.watts;
    }
    watts
        .into_boxed_slice()
        .try_into()
        .expect("a vector of the table's largest length")
}

impl CodeRuns {
    fn of(table: &[CodeEntry]) -> CodeRuns {
        let values = || table.iter().filter(|e| e.tally == TALLY_VALUE);
        let falling = match (values().next(), values().next_back()) {
            (Some(first), Some(last)) => last.dbm < first.dbm,
            _ => false,
        };
        let counted = |e: &CodeEntry| !e.counted_dbm.is_nan();
        // Equal flags make equal kinds: values, or bounds of one way.
        let joins = |a: &CodeEntry, b: &CodeEntry| {
            let steady = if falling {
                b.counted_dbm <= a.counted_dbm
            } else {
                b.counted_dbm >= a.counted_dbm
            };
            counted(a) && counted(b) && a.flags == b.flags && steady
        };
        let mut run_end: Vec<Option<u32>> = (0..table.len() as u32)
            .map(|code| counted(&table[code as usize]).then_some(code))
            .collect();
        for code in (1..table.len()).rev() {
            if joins(&table[code - 1], &table[code]) {
                run_end[code - 1] = run_end[code];
            }
        }
        CodeRuns {
            watts: dense_watts(table),
            run_end,
            falling,
        }
    }

    /// The codes whose entries give the lowest and the highest level of every code from
    /// `lo` to `hi`, when those codes lie in one run.
    #[inline]
    pub fn extreme_codes(&self, lo: u32, hi: u32) -> Option<(u32, u32)> {
        let end = (*self.run_end.get(lo as usize)?)?;
        match (hi <= end, self.falling) {
            (false, _) => None,
            (true, false) => Some((lo, hi)),
            (true, true) => Some((hi, lo)),
        }
    }
}

impl CodeTable {
    /// A table of no codes, for a calibration while its table is built.
    pub(super) fn empty() -> CodeTable {
        CodeTable {
            entries: Vec::new(),
            runs: CodeRuns::of(&[]),
        }
    }

    /// A table of `codes` entries (none above [`TABLE_MAX_CODES`]), each from `entry`.
    pub(super) fn build(codes: u32, entry: impl Fn(u32) -> CodeEntry + Sync) -> CodeTable {
        let entries = if codes > TABLE_MAX_CODES {
            Vec::new()
        } else {
            entries_in_parallel(codes, &entry)
        };
        CodeTable {
            runs: CodeRuns::of(&entries),
            entries,
        }
    }

    /// The entries, one per ADC code from 0 (empty above 16 bits).
    pub fn entries(&self) -> &[CodeEntry] {
        &self.entries
    }

    /// The table arranged by runs of codes.
    pub fn runs(&self) -> &CodeRuns {
        &self.runs
    }

    /// Adds up the codes the table covers, in blocks of [`CODE_BLOCK`], and hands each
    /// block to `each_block` with whether every code of it lay in the table (the caller
    /// takes the rest, codes above the ADC's full scale, through the exact model). The
    /// codes take four partial sums in turn, added together at the end: one chain of
    /// float additions would hold the loop to an add's latency per sample.
    #[inline]
    pub fn accumulate(
        &self,
        codes: &[u32],
        mut each_block: impl FnMut(&[u32], bool),
    ) -> TableTotals {
        let table = &*self.entries;
        let mut run = TableRun::default();
        let mut sums = [0.0; 4];
        // Codes that swing over the table rarely fall in one run: after a block that did
        // not, the next few go the long way without looking (the result is the same).
        let mut unlooked = 0;
        for block in codes.chunks(CODE_BLOCK) {
            if unlooked > 0 {
                unlooked -= 1;
            } else if run.take_steady(self, block, &mut sums) {
                // A run lies inside the table.
                each_block(block, true);
                continue;
            } else {
                unlooked = BLOCKS_UNLOOKED;
            }
            let mut untabled = 0;
            sum_by_fours(block, &mut sums, |code, sum| {
                match table.get(code as usize) {
                    Some(entry) => run.take(entry, sum),
                    None => untabled += 1,
                }
            });
            run.end_block(block.len() - untabled);
            each_block(block, untabled == 0);
        }
        let [s0, s1, s2, s3] = sums;
        TableTotals {
            samples: run.taken,
            valid: run.valid,
            at_least: run.at_least,
            at_most: run.at_most,
            sum_w: (s0 + s1) + (s2 + s3),
            min_dbm: run.lo,
            max_dbm: run.hi,
            flags: run.flags,
        }
    }
}

/// Every code's entry, shared out over the cores: each code is independent and a diode
/// model's inverse takes microseconds, so a 12-bit table is ready before the first samples
/// arrive. On threads of its own, not the thread pool's: a replay's reader may sit in the
/// pool blocked on a silent FIFO while the table is built, and the table would wait.
fn entries_in_parallel(codes: u32, entry: &(impl Fn(u32) -> CodeEntry + Sync)) -> Vec<CodeEntry> {
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get().min(8)) as u32;
    let per_thread = codes.div_ceil(threads);
    std::thread::scope(|scope| {
        let parts: Vec<_> = (0..threads)
            .map(|t| {
                let first = t * per_thread;
                let last = (first + per_thread).min(codes);
                scope.spawn(move || (first..last).map(entry).collect::<Vec<_>>())
            })
            .collect();
        parts
            .into_iter()
            .flat_map(|part| {
                part.join()
                    .expect("a table part computes without panicking")
            })
            .collect()
    })
}

/// The tallies of a set of readings: what [`CodeTable::accumulate`] adds up over the codes
/// the table covers, and what `stats::PowerStats` keeps beside the counts' moments.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableTotals {
    /// Codes the table covered.
    pub samples: u64,
    /// Of those, values.
    pub valid: u64,
    /// Codes counted at a bound the level is at least.
    pub at_least: u64,
    /// Codes counted at a bound the level is at most.
    pub at_most: u64,
    /// Sum of the watts counted.
    pub sum_w: f64,
    /// Lowest level counted, dBm (+∞ when none).
    pub min_dbm: f64,
    /// Highest level counted, dBm (−∞ when none).
    pub max_dbm: f64,
    /// Every flag of the codes covered.
    pub flags: Flags,
}

impl Default for TableTotals {
    fn default() -> Self {
        TableTotals {
            samples: 0,
            valid: 0,
            at_least: 0,
            at_most: 0,
            sum_w: 0.0,
            min_dbm: f64::INFINITY,
            max_dbm: f64::NEG_INFINITY,
            flags: Flags::empty(),
        }
    }
}

impl TableTotals {
    /// Adds `other`'s tallies, as if its readings had been added one by one.
    pub fn merge(&mut self, other: &TableTotals) {
        self.samples += other.samples;
        self.valid += other.valid;
        self.at_least += other.at_least;
        self.at_most += other.at_most;
        self.sum_w += other.sum_w;
        self.min_dbm = self.min_dbm.min(other.min_dbm);
        self.max_dbm = self.max_dbm.max(other.max_dbm);
        self.flags |= other.flags;
    }
}

/// Codes taken as one block by `accumulate`: a multiple of four, so that a code adds to
/// the same partial sum whichever way it is taken.
pub const CODE_BLOCK: usize = 256;
/// Blocks taken the long way after one that did not lie in one run.
const BLOCKS_UNLOOKED: u32 = 3;

/// What `accumulate` keeps in registers over a run of table look-ups (the sums apart).
struct TableRun {
    taken: u64,
    valid: u64,
    at_least: u64,
    at_most: u64,
    /// The tallies of the block being taken, added into the counts at its end.
    tally: u32,
    lo: f64,
    hi: f64,
    flags: Flags,
}

impl Default for TableRun {
    fn default() -> Self {
        TableRun {
            taken: 0,
            valid: 0,
            at_least: 0,
            at_most: 0,
            tally: 0,
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
            flags: Flags::empty(),
        }
    }
}

/// Hands each code with one of four partial sums in turn (the last few with the first),
/// so four chains of additions run side by side.
#[inline(always)]
fn sum_by_fours(codes: &[u32], sums: &mut [f64; 4], mut step: impl FnMut(u32, &mut f64)) {
    let [s0, s1, s2, s3] = sums;
    let groups = codes.chunks_exact(4);
    let rest = groups.remainder();
    for group in groups {
        step(group[0], s0);
        step(group[1], s1);
        step(group[2], s2);
        step(group[3], s3);
    }
    for &code in rest {
        step(code, s0);
    }
}

impl TableRun {
    /// Takes a block whose codes all lie in one run of the table (see `CodeRuns`): watts
    /// looked up per code, the rest from the block's end codes (a run's codes are all of
    /// one kind, values or bounds of one way). False, taking nothing, for any other block.
    #[inline(always)]
    fn take_steady(&mut self, table: &CodeTable, block: &[u32], sums: &mut [f64; 4]) -> bool {
        let runs = &table.runs;
        let (lo, hi) = block.iter().fold((u32::MAX, 0), |(lo, hi), &code| {
            (lo.min(code), hi.max(code))
        });
        let Some((lowest, highest)) = runs.extreme_codes(lo, hi) else {
            return false;
        };
        // Every code of the block is at most `hi`, inside the table: the mask only
        // spares the loop its bounds checks.
        let watts = &*runs.watts;
        sum_by_fours(block, sums, |code, sum| {
            *sum += watts[code as usize & 0xFFFF]
        });
        let entries = &table.entries;
        let (low, high) = (&entries[lowest as usize], &entries[highest as usize]);
        let n = block.len() as u64;
        let (valid, at_least, at_most) = untally(low.tally);
        self.taken += n;
        self.valid += n * valid;
        self.at_least += n * at_least;
        self.at_most += n * at_most;
        self.flags |= low.flags;
        self.widen(low.counted_dbm, high.counted_dbm);
        true
    }

    #[inline(always)]
    fn take(&mut self, entry: &CodeEntry, sum_w: &mut f64) {
        self.flags |= entry.flags;
        self.tally += entry.tally;
        *sum_w += entry.watts;
        self.widen(entry.counted_dbm, entry.counted_dbm);
    }

    /// Ends a block taken code by code: its tallies into the counts.
    #[inline(always)]
    fn end_block(&mut self, tabled: usize) {
        let (valid, at_least, at_most) = untally(std::mem::take(&mut self.tally));
        self.taken += tabled as u64;
        self.valid += valid;
        self.at_least += at_least;
        self.at_most += at_most;
    }

    /// Plain comparisons (one instruction each): a NaN key, the level of a code never
    /// counted, compares false and leaves the extreme as it was.
    #[inline(always)]
    fn widen(&mut self, low_key: f64, high_key: f64) {
        self.lo = if low_key < self.lo { low_key } else { self.lo };
        self.hi = if high_key > self.hi {
            high_key
        } else {
            self.hi
        };
    }
}
