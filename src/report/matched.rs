//! The match over a coupler run's log: forward and net power, and return loss (best, worst
//! and mean) over the rows whose match is a value, with the rows of every other state
//! counted. The mean return loss is the ratio of the arms' mean powers over those rows,
//! never the mean of the rows' dB.

use std::collections::BTreeMap;
use std::io::Read;

use serde::Serialize;

use crate::matching::swr;
use crate::record::{OVER_REFLECTED_LIMIT, OVER_SWR_LIMIT};
use crate::units::{dbm_to_watts, watts_to_dbm};

use super::LogError;

/// One row's return loss, where it is, and its uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RowMatch {
    /// Seconds since the run started.
    pub t: f64,
    /// Return loss, dB.
    pub return_loss_db: f64,
    /// SWR.
    pub swr: f64,
    /// Expanded uncertainty (k = 2) of the return loss, dB, where the row gives one.
    pub u_return_loss_db: Option<f64>,
}

/// Lowest, highest and mean (over watts, weighted by samples) of a power.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PowerSpread {
    /// The mean, dBm (of the mean power).
    pub mean_dbm: f64,
    /// The mean, watts.
    pub mean_w: f64,
    /// The lowest row, watts.
    pub min_w: f64,
    /// The highest row, watts.
    pub max_w: f64,
}

/// The match over a coupler run's rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MatchSummary {
    /// Rows read.
    pub rows: u64,
    /// Rows whose match is a value (a limit passed or not).
    pub valid_rows: u64,
    /// Forward power over the rows where it is a value.
    pub forward: Option<PowerSpread>,
    /// Net power over the rows that give one.
    pub net: Option<PowerSpread>,
    /// The best (highest) return loss of a valid row.
    pub best: Option<RowMatch>,
    /// The worst (lowest).
    pub worst: Option<RowMatch>,
    /// The return loss of the arms' mean powers over the valid rows, dB.
    pub mean_return_loss_db: Option<f64>,
    /// The SWR of that return loss.
    pub mean_swr: Option<f64>,
    /// Rows by the mark of their match cell that is not a limit (`below-directivity`,
    /// `rl-at-least`, `reversed`, …).
    pub states: BTreeMap<String, u64>,
    /// Rows over the set-up's SWR limit.
    pub over_swr_limit: u64,
    /// Rows over its reflected-power limit.
    pub over_reflected_limit: u64,
}

/// Sums over the rows.
#[derive(Default)]
struct Sums {
    forward: Spread,
    net: Spread,
    valid_forward_w: f64,
    valid_reflected_w: f64,
}

#[derive(Default)]
struct Spread {
    weight: f64,
    sum_w: f64,
    min_w: f64,
    max_w: f64,
}

impl Spread {
    fn add(&mut self, watts: f64, weight: f64) {
        if self.weight == 0.0 {
            (self.min_w, self.max_w) = (watts, watts);
        }
        self.weight += weight;
        self.sum_w += watts * weight;
        self.min_w = self.min_w.min(watts);
        self.max_w = self.max_w.max(watts);
    }

    fn done(&self) -> Option<PowerSpread> {
        (self.weight > 0.0).then(|| {
            let mean_w = self.sum_w / self.weight;
            PowerSpread {
                mean_dbm: watts_to_dbm(mean_w),
                mean_w,
                min_w: self.min_w,
                max_w: self.max_w,
            }
        })
    }
}

/// The columns the summary reads.
struct Columns {
    time: usize,
    samples: Option<usize>,
    fwd_dbm: usize,
    fwd_bound: usize,
    ref_dbm: usize,
    net_w: usize,
    return_loss: usize,
    u_return_loss: usize,
    mark: usize,
}

/// The match over the coupler run's log in `input` between `from_s` and `to_s`; None for
/// a log of one detector (no `match` column).
pub fn summarise(
    input: impl Read,
    origin: &str,
    from_s: Option<f64>,
    to_s: Option<f64>,
) -> Result<Option<MatchSummary>, LogError> {
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .flexible(true)
        .from_reader(input);
    let header = reader
        .headers()
        .map_err(|e| unreadable(origin, &e))?
        .clone();
    let Some(cols) = columns(&header) else {
        return Ok(None);
    };
    let mut summary = MatchSummary {
        rows: 0,
        valid_rows: 0,
        forward: None,
        net: None,
        best: None,
        worst: None,
        mean_return_loss_db: None,
        mean_swr: None,
        states: BTreeMap::new(),
        over_swr_limit: 0,
        over_reflected_limit: 0,
    };
    let mut sums = Sums::default();
    for record in reader.records() {
        let record = record.map_err(|e| unreadable(origin, &e))?;
        let line = record.position().map_or(0, |p| p.line());
        let cell = |i: usize| record.get(i).unwrap_or("").trim();
        let number = |i: usize| -> Result<Option<f64>, LogError> {
            match cell(i) {
                "" => Ok(None),
                text => text.parse::<f64>().map(Some).map_err(|_| LogError::BadRow {
                    origin: origin.into(),
                    line,
                    field: header.get(i).unwrap_or("").into(),
                    message: format!("`{text}` is not a number; fix or remove the row"),
                }),
            }
        };
        let Some(t) = number(cols.time)? else {
            continue;
        };
        if from_s.is_some_and(|from| t < from) || to_s.is_some_and(|to| t > to) {
            continue;
        }
        let weight = match cols.samples {
            Some(i) => number(i)?.unwrap_or(0.0),
            None => 1.0,
        };
        summary.rows += 1;
        let marks: Vec<&str> = cell(cols.mark)
            .split('|')
            .filter(|m| !m.is_empty())
            .collect();
        let mut state = None;
        for mark in &marks {
            match *mark {
                OVER_SWR_LIMIT => summary.over_swr_limit += 1,
                OVER_REFLECTED_LIMIT => summary.over_reflected_limit += 1,
                other => state = Some(other),
            }
        }
        let forward_dbm = number(cols.fwd_dbm)?;
        if let (Some(dbm), "") = (forward_dbm, cell(cols.fwd_bound)) {
            sums.forward.add(dbm_to_watts(dbm), weight);
        }
        if let Some(net) = number(cols.net_w)? {
            sums.net.add(net, weight);
        }
        if let Some(state) = state {
            *summary.states.entry(state.to_string()).or_default() += 1;
            continue;
        }
        let (Some(rl), Some(fwd), Some(refl)) = (
            number(cols.return_loss)?,
            forward_dbm,
            number(cols.ref_dbm)?,
        ) else {
            continue;
        };
        summary.valid_rows += 1;
        sums.valid_forward_w += dbm_to_watts(fwd) * weight;
        sums.valid_reflected_w += dbm_to_watts(refl) * weight;
        let row = RowMatch {
            t,
            return_loss_db: rl,
            swr: swr(10f64.powf(-rl / 20.0)),
            u_return_loss_db: number(cols.u_return_loss)?,
        };
        if summary.best.is_none_or(|b| rl > b.return_loss_db) {
            summary.best = Some(row);
        }
        if summary.worst.is_none_or(|w| rl < w.return_loss_db) {
            summary.worst = Some(row);
        }
    }
    summary.forward = sums.forward.done();
    summary.net = sums.net.done();
    if sums.valid_reflected_w > 0.0 {
        let rl = 10.0 * (sums.valid_forward_w / sums.valid_reflected_w).log10();
        summary.mean_return_loss_db = Some(rl);
        summary.mean_swr = Some(swr(10f64.powf(-rl / 20.0)));
    }
    Ok(Some(summary))
}

fn columns(header: &csv::StringRecord) -> Option<Columns> {
    let find = |name: &str| header.iter().position(|h| h.trim() == name);
    Some(Columns {
        time: find("time_s")?,
        samples: find("fwd_samples"),
        fwd_dbm: find("fwd_dbm")?,
        fwd_bound: find("fwd_bound")?,
        ref_dbm: find("ref_dbm")?,
        net_w: find("net_w")?,
        return_loss: find("return_loss_db")?,
        u_return_loss: find("u_return_loss_db")?,
        mark: find("match")?,
    })
}

fn unreadable(origin: &str, e: &csv::Error) -> LogError {
    LogError::Unreadable {
        origin: origin.into(),
        line: e.position().map_or(0, |p| p.line()),
        why: e.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "time_s,utc,fwd_samples,fwd_dbm,fwd_min_dbm,fwd_max_dbm,fwd_w,\
        fwd_flags,fwd_bound,fwd_averaged,fwd_u_db,ref_samples,ref_dbm,ref_min_dbm,ref_max_dbm,\
        ref_w,ref_flags,ref_bound,ref_averaged,ref_u_db,net_w,gamma,swr,return_loss_db,\
        mismatch_loss_db,match,u_return_loss_db,return_loss_low_db,return_loss_high_db";

    /// A row of 1000 samples with these powers (dBm) and match cells.
    fn row(t: f64, fwd: f64, refl: f64, mark: &str) -> String {
        let rl = fwd - refl;
        let net = dbm_to_watts(fwd) - dbm_to_watts(refl);
        format!(
            "{t},x,1000,{fwd},{fwd},{fwd},0,,,1000,0.4,1000,{refl},{refl},{refl},0,,,1000,0.5,\
             {net},0,0,{rl},0,{mark},0.64,0,0"
        )
    }

    fn summary(rows: &[String]) -> MatchSummary {
        let text = format!("# dbtrail test\n{HEADER}\n{}\n", rows.join("\n"));
        summarise(text.as_bytes(), "t.csv", None, None)
            .unwrap()
            .unwrap()
    }

    // Source: the definition of return loss, 10·log10(Pf/Pr) (common practice), taken of
    // the mean powers: 10 W forward with 0.4 W and then 0.1 W reflected is 20 W over 0.5 W
    // in all, 16.02 dB; the mean of the rows' 14.0 and 20.0 dB would be 17.0 dB.
    #[test]
    fn the_mean_return_loss_is_the_ratio_of_the_mean_powers() {
        let s = summary(&[row(0.0, 40.0, 26.0206, ""), row(1.0, 40.0, 20.0, "")]);
        assert_eq!(s.valid_rows, 2);
        let mean = s.mean_return_loss_db.unwrap();
        assert!((mean - 16.0206).abs() < 1e-3, "{mean}");
        assert!((s.best.unwrap().return_loss_db - 20.0).abs() < 1e-9);
        assert_eq!(s.best.unwrap().t, 1.0);
        assert!((s.worst.unwrap().return_loss_db - 13.9794).abs() < 1e-3);
        // Source: SWR = (1 + |Γ|)/(1 − |Γ|) (Pozar, from memory): 20 dB is |Γ| 0.1, 1.2222.
        assert!((s.best.unwrap().swr - 1.2222).abs() < 1e-4);
        // Net: 9.6 W and 9.9 W, mean 9.75 W.
        assert!((s.net.unwrap().mean_w - 9.75).abs() < 1e-3);
    }

    #[test]
    fn rows_of_other_states_are_counted_not_averaged() {
        let s = summary(&[
            row(0.0, 40.0, 30.0, ""),
            row(1.0, 40.0, 10.0, "below-directivity"),
            row(2.0, 40.0, 35.0, "over-swr-limit"),
            "3,x,1000,,,,,gap,,0,,1000,,,,,gap,,0,,,,,,,gap,,,".to_string(),
        ]);
        assert_eq!(s.rows, 4);
        assert_eq!(s.valid_rows, 2, "a value over the limit is still a value");
        assert_eq!(s.states["below-directivity"], 1);
        assert_eq!(s.states["gap"], 1);
        assert_eq!(s.over_swr_limit, 1);
        assert!((s.worst.unwrap().return_loss_db - 5.0).abs() < 1e-9);
        // Forward over the three rows where it is a value: 10 W each.
        assert!((s.forward.unwrap().mean_w - 10.0).abs() < 1e-9);
    }

    #[test]
    fn a_one_detector_log_has_no_match() {
        let text = "# dbtrail\ntime_s,utc,samples,mean_dbm\n0,x,1,3\n";
        assert_eq!(summarise(text.as_bytes(), "t", None, None).unwrap(), None);
    }
}
