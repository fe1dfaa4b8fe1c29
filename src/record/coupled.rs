//! The rows of a coupler run: the forward arm's cells, the reflected arm's, then the match
//! of the two, worked out from each arm's mean over watts (the ratio of the averages), with
//! its bound, its uncertainty, the range the coupler's directivity leaves, and the limits
//! the transmitter tolerates (docs/calibration.md, "Forward and reflected power").

use std::io;

use crate::calibration::Calibration;
use crate::coupler::{arm_power, CouplerCalibration, CouplerSetup, MatchLimits};
use crate::matching::{MatchInterval, MatchState};
use crate::metrics::{MatchSnapshot, MatchValue};
use crate::printable::escape_controls;
use crate::stats::{Bound, Figures};
use crate::units::format_frequency;

use super::{one_reading, Chain, RunContext, PER_INTERVAL_COLUMNS, PER_SAMPLE_COLUMNS};

/// The columns after both arms' cells in a coupler run's rows.
pub const COUPLER_MATCH_COLUMNS: [&str; 9] = [
    "net_w",
    "gamma",
    "swr",
    "return_loss_db",
    "mismatch_loss_db",
    "match",
    "u_return_loss_db",
    "return_loss_low_db",
    "return_loss_high_db",
];

/// The `match` cell's mark of a row whose SWR is above the set-up's `swr_max` (a value,
/// or a bound that says it is at least that).
pub const OVER_SWR_LIMIT: &str = "over-swr-limit";
/// The mark of a row whose reflected power is above the set-up's `reflected_max_dbm`.
pub const OVER_REFLECTED_LIMIT: &str = "over-reflected-limit";

/// The `match` cell of a row in which the forward arm had no sample at all (a gap).
pub const NO_SAMPLES: &str = "gap";

/// Every mark a `match` cell may carry: the states that are not a value, a gap, and the
/// limits.
const MATCH_MARKS: [&str; 9] = [
    MatchState::FLAGGED[0].flag(),
    MatchState::FLAGGED[1].flag(),
    MatchState::FLAGGED[2].flag(),
    MatchState::FLAGGED[3].flag(),
    MatchState::FLAGGED[4].flag(),
    MatchState::FLAGGED[5].flag(),
    NO_SAMPLES,
    OVER_SWR_LIMIT,
    OVER_REFLECTED_LIMIT,
];

/// Whether the lowest return loss of the directivity's range holds in `state`: the range
/// is worked from the measured |Γ|, which a return loss at most the one read (reflected
/// clipped) understates, so that its low end could be too high.
fn lowest_holds(state: MatchState) -> bool {
    matches!(
        state,
        MatchState::Value | MatchState::Unresolved | MatchState::ReturnLossAtLeast
    )
}

/// Whether the highest holds: a return loss at least the one read (reflected below its
/// span, or forward clipped) overstates |Γ|, so that the high end could be too low.
fn highest_holds(state: MatchState) -> bool {
    matches!(
        state,
        MatchState::Value | MatchState::Unresolved | MatchState::ReturnLossAtMost
    )
}

/// Whether an arm's figures come from no sample at all.
fn no_samples(figures: &Figures) -> bool {
    figures.averaged == 0 && figures.mean_w.is_none()
}

/// The coupler's arms as the metrics' `arm` label names them, forward first.
pub(super) const ARMS: [&str; 2] = ["forward", "reflected"];

/// The prefixes of the forward and the reflected arm's columns.
const ARM_PREFIXES: [&str; 2] = ["fwd_", "ref_"];

/// A stream with too few channels for the set-up's arms.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
#[error(
    "the coupler set-up reads channel {needs} but the stream sends {stream} channel(s); check \
     the set-up's [forward] and [reflected] channels against the board"
)]
pub struct CouplerChannels {
    /// The highest channel the set-up reads, from 1.
    pub needs: usize,
    /// Channels the stream sends.
    pub stream: usize,
}

/// What a recorder needs of a coupler beyond its arms' chains.
pub(super) struct Coupled {
    /// The stream channels of the forward and the reflected arm, from 0.
    pub(super) channels: [usize; 2],
    leakage: f64,
    limits: MatchLimits,
}

impl Coupled {
    pub(super) fn new(cal: &CouplerCalibration, setup: &CouplerSetup) -> Self {
        Coupled {
            channels: [setup.forward.channel, setup.reflected.channel],
            leakage: cal.leakage,
            limits: setup.limits,
        }
    }

    /// Refuses a stream that lacks one of the arms' channels.
    pub(super) fn check_stream(&self, stream: usize) -> io::Result<()> {
        let needs = self.channels[0].max(self.channels[1]) + 1;
        if needs > stream {
            let error = CouplerChannels { needs, stream };
            return Err(io::Error::new(io::ErrorKind::InvalidInput, error));
        }
        Ok(())
    }

    /// The match cells of an interval from its arms' figures, through the arms' `chains`
    /// (forward, reflected).
    pub(super) fn interval_cells(
        &self,
        chains: &[Chain],
        forward: &Figures,
        reflected: &Figures,
    ) -> Vec<String> {
        self.interval(chains, forward, reflected).0
    }

    /// An interval's match cells and the same match for a metrics snapshot.
    pub(super) fn interval(
        &self,
        chains: &[Chain],
        forward: &Figures,
        reflected: &Figures,
    ) -> (Vec<String>, MatchSnapshot) {
        let m = MatchInterval::new(
            arm_power(forward, chains[0].budget.as_ref()),
            arm_power(reflected, chains[1].budget.as_ref()),
            self.leakage,
        );
        let marks = self.marks(&m, forward, reflected);
        let snapshot = MatchSnapshot {
            value: m
                .figures
                .filter(|_| m.state == MatchState::Value)
                .map(|f| MatchValue {
                    swr: f.swr,
                    return_loss_db: f.return_loss_db,
                    mismatch_loss_db: f.mismatch_loss_db,
                }),
            net_w: m.net_w,
            u_return_loss_db: m.u_return_loss_db,
            return_loss_lowest_db: m
                .return_loss_range_db
                .filter(|_| lowest_holds(m.state))
                .map(|r| r.0),
            return_loss_highest_db: m
                .return_loss_range_db
                .filter(|_| highest_holds(m.state))
                .map(|r| r.1),
            marks: MATCH_MARKS
                .iter()
                .map(|&mark| (mark, marks.contains(&mark)))
                .collect(),
        };
        (self.cells(&m, &marks), snapshot)
    }

    /// The match cells of one sample of each arm (no noise is known: no uncertainty).
    pub(super) fn sample_cells(&self, chains: &[Chain], counts: &[u32]) -> Vec<String> {
        let figures = |cal: &Calibration, ch: usize| {
            counts
                .get(ch)
                .map(|&code| one_reading(cal, code).figures(cal))
        };
        match (
            figures(&chains[0].cal, self.channels[0]),
            figures(&chains[1].cal, self.channels[1]),
        ) {
            (Some(f), Some(r)) => self.interval_cells(chains, &f, &r),
            _ => vec![String::new(); COUPLER_MATCH_COLUMNS.len()],
        }
    }

    fn cells(&self, m: &MatchInterval, marks: &[&'static str]) -> Vec<String> {
        let fixed = |v: Option<f64>, digits: usize| {
            v.map_or(String::new(), |v| {
                if v.is_infinite() {
                    "inf".into()
                } else {
                    format!("{v:.digits$}")
                }
            })
        };
        let figures = m.figures.as_ref();
        let range = m.return_loss_range_db;
        vec![
            m.net_w.map_or(String::new(), |w| format!("{w:.6e}")),
            fixed(figures.map(|f| f.gamma), 6),
            fixed(figures.map(|f| f.swr), 4),
            fixed(figures.map(|f| f.return_loss_db), 4),
            fixed(figures.map(|f| f.mismatch_loss_db), 4),
            marks.join("|"),
            fixed(m.u_return_loss_db, 4),
            fixed(range.map(|r| r.0), 4),
            fixed(range.map(|r| r.1), 4),
        ]
    }

    /// The `match` cell: the state's flag, then any limit the row is over.
    fn marks(
        &self,
        m: &MatchInterval,
        forward: &Figures,
        reflected: &Figures,
    ) -> Vec<&'static str> {
        if m.state == MatchState::NoForward && no_samples(forward) {
            // Nothing came: a gap, which the arms' flags say, not a carrier too weak.
            return vec![NO_SAMPLES];
        }
        let mut marks: Vec<&'static str> = Vec::new();
        if m.state != MatchState::Value {
            marks.push(m.state.flag());
        }
        // A value over the limit, or a bound that puts it over (an SWR at least this).
        let swr_over = matches!(m.state, MatchState::Value | MatchState::ReturnLossAtMost)
            && m.figures
                .zip(self.limits.swr_max)
                .is_some_and(|(f, max)| f.swr > max);
        if swr_over {
            marks.push(OVER_SWR_LIMIT);
        }
        let reflected_over = matches!(reflected.bound, Bound::Exact | Bound::AtLeast)
            && reflected
                .mean_dbm
                .zip(self.limits.reflected_max_dbm)
                .is_some_and(|(dbm, max)| dbm > max);
        if reflected_over {
            marks.push(OVER_REFLECTED_LIMIT);
        }
        marks
    }
}

/// The `#` lines that open a coupler run's log: the common ones with the coupler's and
/// each arm's chain, the limits, and what the uncertainty columns hold.
pub fn coupler_context_lines(
    cal: &CouplerCalibration,
    setup: &CouplerSetup,
    context: &RunContext,
) -> String {
    let hz = cal.forward.freq_hz();
    let arm = |name: &str, c: &Calibration| {
        format!(
            "{name} arm: frequency correction {:+.2} dB, offset {:+.2} dB",
            c.correction_db(),
            c.offset_db()
        )
    };
    let frequency = format!(
        "{}; {}; {}",
        format_frequency(hz),
        arm("forward", &cal.forward),
        arm("reflected", &cal.reflected)
    );
    let coupler = format!(
        "# coupler: {name}: forward on channel {f}, reflected on channel {r}; directivity \
         {d:.1} dB (|Γd| {leak:.4}); through-loss {l:.2} dB; powers at the {plane}\n\
         # limits: {limits}\n",
        name = escape_controls(&setup.name),
        f = setup.forward.channel + 1,
        r = setup.reflected.channel + 1,
        d = setup.directivity.at(hz).db,
        leak = cal.leakage,
        l = setup.through_loss.at(hz).db,
        plane = setup.plane.name(),
        limits = limits_words(&setup.limits),
    );
    let per_sample = context.every.is_zero();
    format!(
        "{}{coupler}{}# u_return_loss_db: expanded uncertainty (k = 2) of the return loss, \
         from both arms' u_db (root sum of squares); empty unless both arms are values; \
         return_loss_low_db and return_loss_high_db are the range the directivity leaves \
         the true return loss\n",
        super::context_lines_with(&frequency, context),
        super::uncertainty_lines(
            &[
                ("forward arm", &cal.forward_budget, &cal.forward),
                ("reflected arm", &cal.reflected_budget, &cal.reflected),
            ],
            per_sample
        ),
    )
}

fn limits_words(limits: &MatchLimits) -> String {
    let mut words = Vec::new();
    if let Some(swr) = limits.swr_max {
        words.push(format!("SWR above {swr} marked {OVER_SWR_LIMIT}"));
    }
    if let Some(dbm) = limits.reflected_max_dbm {
        words.push(format!(
            "reflected power above {dbm:+.1} dBm marked {OVER_REFLECTED_LIMIT}"
        ));
    }
    if words.is_empty() {
        "none set".into()
    } else {
        words.join("; ")
    }
}

/// A coupler run's column header: the time (and the calendar time of interval rows), each
/// arm's columns under its prefix (an interval's mean is the arm's `dbm` and `w`), then
/// [`COUPLER_MATCH_COLUMNS`].
pub fn coupler_header(per_sample: bool) -> Vec<String> {
    let (mut names, per_channel): (Vec<String>, &[&str]) = if per_sample {
        (vec!["time_s".into()], &PER_SAMPLE_COLUMNS)
    } else {
        (vec!["time_s".into(), "utc".into()], &PER_INTERVAL_COLUMNS)
    };
    for prefix in ARM_PREFIXES {
        names.extend(per_channel.iter().map(|name| {
            let name = match *name {
                "mean_dbm" => "dbm",
                "mean_w" => "w",
                other => other,
            };
            format!("{prefix}{name}")
        }));
    }
    names.extend(COUPLER_MATCH_COLUMNS.iter().map(|n| n.to_string()));
    names
}

#[cfg(test)]
mod tests {
    use std::path::Path;
    use std::time::{Duration, SystemTime};

    use super::*;
    use crate::coupler::load_coupler;
    use crate::events::Event;
    use crate::record::{Opening, Recorder};

    fn recorder(every: f64) -> (Recorder<Vec<u8>>, CouplerCalibration) {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/demo-coupler.toml");
        let coupler = load_coupler(Path::new(path)).unwrap();
        let cal = CouplerCalibration::new(&coupler, 146e6);
        let context = RunContext {
            tool: "dbtrail test".into(),
            profile: "demo coupler".into(),
            profile_hash: "0".into(),
            started: SystemTime::UNIX_EPOCH,
            source: "test".into(),
            every: Duration::from_secs_f64(every),
        };
        let recorder = Recorder::for_coupler(
            Vec::new(),
            cal.clone(),
            &coupler.setup,
            &context,
            Opening::Fresh,
        )
        .unwrap();
        (recorder, cal)
    }

    // Source: the rule in docs/recording.md ("The zero"): a coupler's arms take their
    // zeros from their profiles, so a zero is refused and nothing is written.
    #[test]
    fn a_zero_is_refused_in_a_coupler_run() {
        let (mut r, _) = recorder(1.0);
        let before = r.get_ref().len();
        let err = r.rezero(1.0, 4.0).unwrap_err();
        assert_eq!(err.kind(), std::io::ErrorKind::InvalidInput);
        assert!(err.to_string().contains("one-detector run only"), "{err}");
        assert_eq!(r.get_ref().len(), before);
    }

    /// The rows as cells by column name.
    fn rows(r: Recorder<Vec<u8>>) -> Vec<std::collections::HashMap<String, String>> {
        let text = String::from_utf8(r.out.into_inner().unwrap()).unwrap();
        let mut lines = text.lines().filter(|l| !l.starts_with('#'));
        let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
        lines
            .map(|l| {
                header
                    .iter()
                    .cloned()
                    .zip(l.split(',').map(String::from))
                    .collect()
            })
            .collect()
    }

    fn frame(cal: &CouplerCalibration, forward_dbm: f64, reflected_dbm: f64) -> [u32; 2] {
        [
            cal.forward.counts_for(forward_dbm).round() as u32,
            cal.reflected.counts_for(reflected_dbm).round() as u32,
        ]
    }

    /// The match a recorder would serve after one interval of `counts`.
    fn served(counts: [u32; 2]) -> MatchSnapshot {
        let (mut r, _) = recorder(1.0);
        r.handle(&Event::sample(0.1, &counts)).unwrap();
        r.finish(1.0).unwrap();
        r.latest_match().cloned().expect("a coupler run's match")
    }

    fn marked(m: &MatchSnapshot) -> Vec<&'static str> {
        m.marks
            .iter()
            .filter(|(_, set)| *set)
            .map(|(n, _)| *n)
            .collect()
    }

    // Source: the definitions of the bounds (docs/calibration.md, "Forward and reflected
    // power"): with the reflected arm clipped the true |Γ| is at least the one read, so
    // the directivity's lowest return loss, worked from it, could be too high and is left
    // out; with it below its span |Γ| is at most the one read and the highest is left out.
    // A value keeps both ends and its SWR; neither bound has an SWR.
    #[test]
    fn a_bound_match_serves_only_the_end_of_the_range_that_holds() {
        let (_, cal) = recorder(1.0);
        let value = served(frame(&cal, 40.0, 25.0));
        assert!(value.value.is_some() && marked(&value).is_empty());
        assert!(value.return_loss_lowest_db.is_some() && value.return_loss_highest_db.is_some());
        let forward = cal.forward.counts_for(50.0).round() as u32;
        let clipped = served([forward, 4095]);
        assert_eq!(marked(&clipped), ["rl-at-most"]);
        assert!(clipped.value.is_none());
        assert!(clipped.return_loss_lowest_db.is_none());
        assert!(clipped.return_loss_highest_db.is_some());
        let silent = served([forward, 0]);
        assert_eq!(marked(&silent), ["rl-at-least"]);
        assert!(silent.value.is_none());
        assert!(silent.return_loss_lowest_db.is_some());
        assert!(silent.return_loss_highest_db.is_none());
    }

    // An interval in which nothing came is a gap: the match says so, not "no forward".
    #[test]
    fn a_silent_interval_is_a_gap_not_a_missing_carrier() {
        let (mut r, cal) = recorder(1.0);
        let counts = frame(&cal, 40.0, 25.0);
        r.handle(&Event::sample(0.1, &counts)).unwrap();
        r.handle(&Event::sample(2.1, &counts)).unwrap();
        r.finish(2.5).unwrap();
        let rows = rows(r);
        assert_eq!(rows.len(), 3);
        assert_eq!(rows[0]["match"], "");
        assert_eq!(rows[1]["match"], NO_SAMPLES);
        assert_eq!(rows[1]["fwd_flags"], "gap");
        assert_eq!(rows[1]["swr"], "");
        assert_eq!(rows[2]["match"], "");
    }

    // Source: the standard relations (SWR = (1 + |Γ|)/(1 − |Γ|), |Γ| = √(Pr/Pf); Pozar,
    // Microwave Engineering, from memory): 10 W forward and 1 W reflected at the plane
    // is |Γ| 0.3162, SWR 1.925, return loss 10 dB, 9 W net.
    #[test]
    fn one_sample_of_each_arm_gives_its_match_per_sample() {
        let (mut r, cal) = recorder(0.0);
        r.handle(&Event::sample(0.0, &frame(&cal, 40.0, 30.0)))
            .unwrap();
        r.handle(&Event::LinkDown { t: 0.5 }).unwrap();
        r.finish(1.0).unwrap();
        let rows = rows(r);
        let number = |cell: &str| cell.parse::<f64>().unwrap();
        let row = &rows[0];
        // A count is worth under 0.02 dB on either arm at these levels.
        assert!(
            (number(&row["return_loss_db"]) - 10.0).abs() < 0.05,
            "{row:?}"
        );
        assert!((number(&row["gamma"]) - 0.3162).abs() < 0.002, "{row:?}");
        assert!((number(&row["swr"]) - 1.925).abs() < 0.01, "{row:?}");
        assert!((number(&row["net_w"]) - 9.0).abs() < 0.06, "{row:?}");
        assert_eq!(row["u_return_loss_db"], "", "one sample shows no noise");
        assert_eq!(rows[1]["match"], "gap", "{:?}", rows[1]);
    }

    #[test]
    fn a_stream_without_the_reflected_channel_is_refused() {
        let (mut r, _) = recorder(1.0);
        let error = r.handle(&Event::sample(0.0, &[1000])).unwrap_err();
        let inner = error.get_ref().unwrap().downcast_ref::<CouplerChannels>();
        assert_eq!(
            inner,
            Some(&CouplerChannels {
                needs: 2,
                stream: 1
            })
        );
    }
}
