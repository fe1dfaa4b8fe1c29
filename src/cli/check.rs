//! `dbtrail check`: validate a profile and summarise what it can measure, with the
//! frequency correction both ways and the uncertainty budget term by term.

use std::fmt::Write;
use std::path::PathBuf;

use serde_json::{json, Value};

use dbtrail::calibration::{Calibration, Flags};
use dbtrail::correction::{FrequencyCorrection, ROLL_OFF_MIN_ROWS};
use dbtrail::printable::{escape_controls, wrap_words};
use dbtrail::profile::{load_profile, Profile};
use dbtrail::uncertainty::{Budget, TermKind, Uncertainty, COVERAGE_K, NOT_MODELLED};
use dbtrail::units::Si;

use super::{emit, parse_counts_arg, parse_frequency_arg, summary, BadInput, Failure};

mod coupler;

#[derive(clap::Args)]
pub struct Args {
    /// The profile file (TOML)
    #[arg(required_unless_present = "coupler", conflicts_with = "coupler")]
    profile: Option<PathBuf>,
    /// A coupler set-up (TOML) instead: both arms' detectors and the match they can read
    #[arg(long, value_name = "FILE", conflicts_with_all = ["counts", "json"])]
    coupler: Option<PathBuf>,
    /// Frequency in use, e.g. 145.5MHz (default: the profile's reference frequency)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_frequency_arg)]
    freq: Option<f64>,
    /// Also show the reading for these ADC counts (fractional averages allowed)
    #[arg(long, num_args = 1.., value_name = "COUNTS", allow_negative_numbers = true, value_parser = parse_counts_arg)]
    counts: Vec<f64>,
    /// Print one JSON object: the frequency correction and the uncertainty budgets
    #[arg(long)]
    json: bool,
}

/// How many levels across the span the budget is shown at (bottom, steps, top).
const SPAN_LEVELS: usize = 6;

/// Budget columns per block of text, so a block stays inside 100 columns.
const COLUMNS_PER_BLOCK: usize = 6;

pub fn run(args: Args) -> Result<(), Failure> {
    let path = match (&args.coupler, &args.profile) {
        (Some(setup), _) => return coupler::run(setup, args.freq),
        (None, Some(path)) => path,
        (None, None) => unreachable!("clap asks for a profile or --coupler"),
    };
    let profile = load_profile(path).bad_input()?;
    let cal = Calibration::new(&profile, args.freq, 0.0);
    let uncertainty = Uncertainty::new(&profile, &cal);
    let columns = budget_columns(&cal, &uncertainty, &args.counts);
    if args.json {
        let object = json_object(&profile, &cal, &columns);
        return emit(&format!("{object}\n"));
    }
    let mut text = summary::setup(&profile, &cal);
    text.push_str(&summary::resolution(&cal));
    text.push_str(&summary::residuals(&profile));
    text.push_str(&summary::readings(&cal, &args.counts));
    text.push_str(&correction_text(&profile, cal.freq_hz()));
    text.push_str(&budget_text(&profile, &cal, &columns));
    let shown = path.display().to_string();
    text.push_str(&format!("\n{} is valid.\n", escape_controls(&shown)));
    emit(&text)
}

/// One level's budget, and where it came from.
struct Column {
    /// Reference-plane level, dBm.
    dbm: f64,
    /// ADC counts at that level.
    counts: f64,
    /// True when the counts were given with `--counts`.
    given: bool,
    /// The budget; None for given counts outside the span (their level is a bound).
    budget: Option<Budget>,
    /// The reading's flags (empty across the span).
    flags: Flags,
}

/// Which way a column's level leans, as the recorder's `bound` cells name it; None for a
/// value.
fn bound_key(flags: Flags) -> Option<&'static str> {
    if flags.contains(Flags::OVER_FULL_SCALE) {
        Some("none")
    } else if flags.intersects(Flags::ADC_CLIP | Flags::ABOVE_SPAN) {
        Some("at-least")
    } else if flags.contains(Flags::BELOW_SPAN) {
        Some("at-most")
    } else {
        None
    }
}

/// A column's level as a person should read it: a bound says which way it leans
/// (≥ for clip or above the span, ≤ below it), counts over full scale have none.
fn level_cell(c: &Column) -> String {
    if !c.dbm.is_finite() {
        "over-FS".into()
    } else if c.flags.intersects(Flags::ADC_CLIP | Flags::ABOVE_SPAN) {
        format!("≥{:+.2}", c.dbm)
    } else if c.flags.contains(Flags::BELOW_SPAN) {
        format!("≤{:+.2}", c.dbm)
    } else {
        format!("{:+.2}", c.dbm)
    }
}

/// The budget at levels across the span, then at each of `counts`.
fn budget_columns(cal: &Calibration, uncertainty: &Uncertainty, counts: &[f64]) -> Vec<Column> {
    let (lo, hi) = cal.span_dbm();
    let across = (0..SPAN_LEVELS).map(|i| {
        let dbm = lo + (hi - lo) * i as f64 / (SPAN_LEVELS - 1) as f64;
        Column {
            dbm,
            counts: cal.counts_for(dbm),
            given: false,
            budget: Some(uncertainty.budget(dbm, None)),
            flags: Flags::empty(),
        }
    });
    let bounds = Flags::BELOW_SPAN | Flags::ABOVE_SPAN | Flags::ADC_CLIP | Flags::OVER_FULL_SCALE;
    let given = counts.iter().map(|&c| {
        let reading = cal.reading(c);
        let inside = !reading.flags.intersects(bounds);
        Column {
            dbm: reading.dbm,
            counts: c,
            given: true,
            budget: inside.then(|| uncertainty.budget(reading.dbm, None)),
            flags: reading.flags,
        }
    });
    across.chain(given).collect()
}

/// Why a term is not in the budget: the `[uncertainty]` keys it needs that the profile
/// lacks, or why no input can give it here.
fn why_missing(kind: TermKind, profile: &Profile, hz: f64) -> String {
    let inputs = &profile.uncertainty;
    let reason = match kind {
        TermKind::Noise => {
            Some("check has no samples; readings and interval means carry it".to_string())
        }
        TermKind::Temperature => Some("not modelled yet".to_string()),
        TermKind::Source => lacks(&[("source", inputs.source_u_db.is_some())]),
        TermKind::Offset if profile.raw.offset.is_none() => {
            Some("the profile has no [offset]".to_string())
        }
        TermKind::Offset => lacks(&[("offset", inputs.offset_u_db.is_some())]),
        TermKind::MismatchCalibration => lacks(&[
            ("source_swr", inputs.source_gamma.is_some()),
            ("detector_swr", inputs.detector_gamma.is_some()),
        ]),
        TermKind::MismatchUse => lacks(&[
            ("dut_swr", inputs.dut_gamma.is_some()),
            (
                "(`front_swr` or `detector_swr`)",
                inputs.front_gamma.is_some() || inputs.detector_gamma.is_some(),
            ),
        ]),
        TermKind::FrequencyInterpolation => Some(match &profile.frequency_correction {
            None => "the profile has no frequency correction".to_string(),
            Some(_) => format!(
                "{} is outside the table: its end value is used, error unknown",
                dbtrail::units::format_frequency(hz)
            ),
        }),
        TermKind::Model => Some(
            "the model gives no error of its own here (a table needs three or more points \
             for its leave-one-out error)"
                .to_string(),
        ),
        TermKind::Quantisation => None,
    };
    reason.unwrap_or_else(|| "not worked out".into())
}

/// "needs `a` and `b` in [uncertainty]" for the keys not given, or None when all are; a key
/// written with its own marks (a choice of two) is shown as it is.
fn lacks(keys: &[(&str, bool)]) -> Option<String> {
    let absent: Vec<String> = keys
        .iter()
        .filter(|(_, given)| !given)
        .map(|(key, _)| {
            if key.contains('`') {
                key.to_string()
            } else {
                format!("`{key}`")
            }
        })
        .collect();
    (!absent.is_empty()).then(|| format!("needs {} in [uncertainty]", absent.join(" and ")))
}

/// The frequency correction at `hz` as the table and as the roll-off fitted to it.
fn correction_text(profile: &Profile, hz: f64) -> String {
    let freq = Si::new(hz, "Hz");
    let Some(correction) = &profile.frequency_correction else {
        return format!("\nFrequency correction at {freq}: none (0 dB at every frequency)\n");
    };
    let table = correction.table();
    let mut out = format!(
        "\nFrequency correction at {freq} (in use: {})\n",
        correction.kind().name()
    );
    let _ = writeln!(
        out,
        "  table       {:+.3} dB, interpolation u = {:.3} dB",
        table.at(hz).db,
        table.interpolation_u_db(hz)
    );
    match correction.roll_off() {
        Some(fit) => {
            let _ = writeln!(
                out,
                "  roll-off    {:+.3} dB, corner {}, constant {:+.3} dB, residual u = {:.3} dB",
                fit.db(hz),
                Si::new(fit.corner_hz, "Hz"),
                fit.constant_db,
                fit.residual_db
            );
            let _ = writeln!(
                out,
                "  roll-off minus table {:+.3} dB",
                fit.db(hz) - table.at(hz).db
            );
        }
        None => {
            let _ = writeln!(out, "  roll-off    none: {}", no_roll_off(correction));
        }
    }
    out
}

/// Why a table has no roll-off fitted to it.
fn no_roll_off(correction: &FrequencyCorrection) -> String {
    let rows = correction.rows().len();
    if rows < ROLL_OFF_MIN_ROWS {
        format!("it is fitted to {ROLL_OFF_MIN_ROWS} rows or more; the table has {rows}")
    } else {
        "the rows do not rise with frequency as a single pole does".to_string()
    }
}

/// The budget, terms as rows and levels as columns, in blocks that fit the screen; then
/// the terms not included and why.
fn budget_text(profile: &Profile, cal: &Calibration, columns: &[Column]) -> String {
    let mut out = format!(
        "\nUncertainty at {} (reference plane; standard uncertainties in dB, k = 1)\n",
        Si::new(cal.freq_hz(), "Hz")
    );
    let (across, given): (Vec<&Column>, Vec<&Column>) = columns.iter().partition(|c| !c.given);
    out.push_str(&budget_block("across the span", &across));
    for chunk in given.chunks(COLUMNS_PER_BLOCK) {
        out.push_str(&budget_block("at the counts given", chunk));
    }
    let missing = columns
        .iter()
        .find_map(|c| c.budget.as_ref())
        .map_or(Vec::new(), |b| b.missing.clone());
    if missing.is_empty() {
        return out;
    }
    out.push_str("  Not included:\n");
    let reasons: Vec<(TermKind, String)> = missing
        .iter()
        .map(|&kind| (kind, why_missing(kind, profile, cal.freq_hz())))
        .collect();
    for (kind, why) in &reasons {
        let _ = writeln!(out, "    {:<24}{why}", TermKind::label(*kind));
    }
    if reasons.iter().any(|(_, why)| why.contains("_swr`")) {
        out.push_str("    (any `_swr` may be given as `_return_loss` instead)\n");
    }
    let mut label = "not modelled";
    for line in wrap_words(NOT_MODELLED.split_whitespace(), 70, 70) {
        let _ = writeln!(out, "    {label:<24}{line}");
        label = "";
    }
    out
}

fn budget_block(title: &str, columns: &[&Column]) -> String {
    let mut out = format!("  {title}\n");
    out.push_str(&row("level, dBm", columns, level_cell));
    out.push_str(&row("counts", columns, |c| format!("{:.1}", c.counts)));
    for kind in TermKind::ALL {
        let name = kind.label();
        let included = |c: &&Column| c.budget.as_ref().is_some_and(|b| b.term(kind).is_some());
        if columns.iter().any(included) {
            out.push_str(&row(name, columns, |c| {
                budget_cell(c, |b| {
                    b.term(kind).map_or("-".into(), |u| format!("{u:.3}"))
                })
            }));
        }
    }
    out.push_str(&row("combined", columns, |c| {
        budget_cell(c, |b| format!("{:.3}", b.combined_db()))
    }));
    out.push_str(&row(&format!("expanded, k = {COVERAGE_K}"), columns, |c| {
        budget_cell(c, |b| format!("±{:.3}", b.expanded_db()))
    }));
    if columns.iter().any(|c| c.budget.is_none()) {
        out.push_str(
            "    (-: no uncertainty, the level is a bound: ≥ at clip or above the span,\n     \
             ≤ below it; over-FS: counts over the ADC's full scale)\n",
        );
    }
    out
}

/// One line of a budget block: a name, then a cell per column.
fn row(name: &str, columns: &[&Column], cell: impl Fn(&Column) -> String) -> String {
    let cells: String = columns.iter().map(|c| format!("{:>9}", cell(c))).collect();
    format!("    {name:<24}{cells}\n")
}

/// A cell from a column's budget, or `-` when it has none.
fn budget_cell(column: &Column, cell: impl Fn(&Budget) -> String) -> String {
    column.budget.as_ref().map_or("-".to_string(), cell)
}

/// `check --json`: the frequency correction and every budget column with its terms.
fn json_object(profile: &Profile, cal: &Calibration, columns: &[Column]) -> Value {
    let hz = cal.freq_hz();
    let correction = profile.frequency_correction.as_ref().map(|c| {
        let table_db = c.table().at(hz).db;
        json!({
            "kind": c.kind().name(),
            "in_use_db": c.at(hz).db,
            "table_db": table_db,
            "table_interpolation_u_db": c.table().interpolation_u_db(hz),
            "roll_off": c.roll_off().map(|fit| json!({
                "db": fit.db(hz),
                "corner_hz": fit.corner_hz,
                "constant_db": fit.constant_db,
                "residual_db": fit.residual_db,
                "minus_table_db": fit.db(hz) - table_db,
            })),
        })
    });
    let budget_json = |c: &Column| {
        let budget = c.budget.as_ref()?;
        let terms: Vec<Value> = budget
            .terms
            .iter()
            .map(|t| json!({ "term": TermKind::key(t.kind), "standard_u_db": t.u_db }))
            .collect();
        let missing: Vec<Value> = budget
            .missing
            .iter()
            .map(|&k| json!({ "term": TermKind::key(k), "why": why_missing(k, profile, hz) }))
            .collect();
        Some(json!({
            "terms": terms,
            "combined_db": budget.combined_db(),
            "k": COVERAGE_K,
            "expanded_db": budget.expanded_db(),
            "missing": missing,
        }))
    };
    let levels = |given: bool| -> Vec<Value> {
        columns
            .iter()
            .filter(|c| c.given == given)
            .map(|c| {
                json!({
                    "dbm": c.dbm,
                    "bound": bound_key(c.flags),
                    "counts": c.counts,
                    "budget": budget_json(c),
                })
            })
            .collect()
    };
    json!({
        "profile": profile.name,
        "valid": true,
        "freq_hz": hz,
        "frequency_correction": correction,
        "not_modelled": NOT_MODELLED,
        "across_span": levels(false),
        "counts_given": levels(true),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use dbtrail::uncertainty::Term;

    // Source: worked by hand — terms of 0.3 and 0.4 dB combine by root sum of squares to
    // 0.5 dB (3-4-5), expanded with k = 2 to ±1.000 dB; a term no column has gets no row.
    #[test]
    fn a_block_prints_each_term_the_combined_and_the_expanded() {
        let budget = Budget {
            terms: vec![
                Term {
                    kind: TermKind::Quantisation,
                    u_db: 0.3,
                },
                Term {
                    kind: TermKind::Source,
                    u_db: 0.4,
                },
            ],
            missing: vec![TermKind::Offset],
        };
        let below = Column {
            flags: Flags::BELOW_SPAN,
            ..at_minus_five(None)
        };
        let text = budget_block("t", &[&at_minus_five(Some(budget)), &below]);
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines,
            [
                "  t",
                "    level, dBm                  -5.00   ≤-5.00",
                "    counts                       12.0     12.0",
                "    ADC quantisation            0.300        -",
                "    calibration source          0.400        -",
                "    combined                    0.500        -",
                "    expanded, k = 2            ±1.000        -",
                "    (-: no uncertainty, the level is a bound: ≥ at clip or above the span,",
                "     ≤ below it; over-FS: counts over the ADC's full scale)",
            ]
        );
    }

    fn at_minus_five(budget: Option<Budget>) -> Column {
        Column {
            dbm: -5.0,
            counts: 12.0,
            given: false,
            budget,
            flags: Flags::empty(),
        }
    }

    // Source: the rule that every budget term has a label and a JSON name of its own.
    #[test]
    fn every_term_has_one_label_and_one_name() {
        for (i, a) in TermKind::ALL.iter().enumerate() {
            for b in &TermKind::ALL[i + 1..] {
                assert!(
                    a.label() != b.label() && a.key() != b.key(),
                    "{a:?} / {b:?}"
                );
            }
        }
    }
}
