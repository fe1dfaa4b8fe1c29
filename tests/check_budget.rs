//! `check`'s frequency correction (the table and the roll-off fitted to it) and its
//! uncertainty budget, read from the output as a user reads them, and from `--json`.

mod common;

use std::collections::BTreeMap;
use std::path::Path;

use dbtrail::calibration::Calibration;
use dbtrail::profile::load_profile;
use dbtrail::uncertainty::Uncertainty;

const DEMO: &str = "profiles/demo-diode.toml";

fn check(args: &[&str]) -> String {
    let out = common::output(common::bin().arg("check").args(args));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn check_json(args: &[&str]) -> serde_json::Value {
    let mut with_json = args.to_vec();
    with_json.push("--json");
    serde_json::from_str(&check(&with_json)).unwrap()
}

/// The indented lines under the line `header`, up to the first that is not indented
/// four spaces or is a footnote in brackets, each split at the label column.
fn lines_under<'a>(text: &'a str, header: &str) -> Vec<(String, &'a str)> {
    let start = text
        .lines()
        .position(|l| l == header)
        .unwrap_or_else(|| panic!("no `{header}` in\n{text}"));
    text.lines()
        .skip(start + 1)
        .take_while(|l| l.starts_with("    ") && !l.starts_with("    ("))
        .map(|l| {
            let (label, rest) = l.split_at(28);
            (label.trim().to_string(), rest)
        })
        .collect()
}

/// The rows of the budget block titled `title`: label, then one cell per column.
fn block(text: &str, title: &str) -> Vec<(String, Vec<String>)> {
    lines_under(text, &format!("  {title}"))
        .into_iter()
        .map(|(label, cells)| {
            (
                label,
                cells.split_whitespace().map(str::to_string).collect(),
            )
        })
        .collect()
}

/// The "Not included" lines: term label → reason.
fn not_included(text: &str) -> BTreeMap<String, String> {
    lines_under(text, "  Not included:")
        .into_iter()
        .map(|(label, why)| (label, why.trim().to_string()))
        .collect()
}

fn number(cell: &str) -> f64 {
    cell.trim_start_matches('±')
        .parse()
        .unwrap_or_else(|_| panic!("`{cell}` is not a number"))
}

/// The terms of a block (the rows between `counts` and `combined`).
fn term_rows(rows: &[(String, Vec<String>)]) -> Vec<(String, Vec<String>)> {
    let from = rows.iter().position(|r| r.0 == "counts").unwrap() + 1;
    let to = rows.iter().position(|r| r.0 == "combined").unwrap();
    rows[from..to].to_vec()
}

fn row<'a>(rows: &'a [(String, Vec<String>)], label: &str) -> &'a [String] {
    &rows.iter().find(|r| r.0 == label).unwrap().1
}

// Source: JCGM 100 (the GUM), from memory — independent standard uncertainties combine
// by root sum of squares, and the expanded uncertainty is k = 2 times the combined one.
// Recomputed here from the printed terms (each rounded to 0.001 dB, hence the tolerance).
#[test]
fn the_expanded_uncertainty_is_twice_the_root_sum_of_squares_of_the_printed_terms() {
    let text = check(&[DEMO, "--freq", "440MHz"]);
    let rows = block(&text, "across the span");
    let terms = term_rows(&rows);
    assert!(!terms.is_empty(), "{text}");
    let combined = row(&rows, "combined");
    let expanded = row(&rows, "expanded, k = 2");
    assert_eq!(combined.len(), 6, "{text}");
    for column in 0..combined.len() {
        let printed: Vec<f64> = terms
            .iter()
            .filter(|t| t.1[column] != "-")
            .map(|t| number(&t.1[column]))
            .collect();
        let rss = printed.iter().map(|u| u * u).sum::<f64>().sqrt();
        let slack = 0.0005 * (printed.len() as f64 + 1.0);
        assert!((number(&combined[column]) - rss).abs() <= slack, "{text}");
        assert!(
            (number(&expanded[column]) - 2.0 * rss).abs() <= 2.0 * slack,
            "{text}"
        );
        assert!(expanded[column].starts_with('±'));
    }
}

// Source: the budget's own API (src/uncertainty.rs): every printed term is the budget's
// term at the printed level, and the first and last levels are the span's ends.
#[test]
fn the_printed_terms_are_the_budget_at_each_level_across_the_span() {
    let text = check(&[DEMO, "--freq", "440MHz"]);
    let rows = block(&text, "across the span");
    let profile = load_profile(Path::new(DEMO)).unwrap();
    let cal = Calibration::new(&profile, Some(440e6), 0.0);
    let uncertainty = Uncertainty::new(&profile, &cal);
    let levels: Vec<f64> = row(&rows, "level, dBm").iter().map(|c| number(c)).collect();
    let (lo, hi) = cal.span_dbm();
    assert!((levels[0] - lo).abs() < 0.006 && (levels[5] - hi).abs() < 0.006);
    let labels = [
        (
            "ADC quantisation",
            dbtrail::uncertainty::TermKind::Quantisation,
        ),
        ("calibration source", dbtrail::uncertainty::TermKind::Source),
        ("offset", dbtrail::uncertainty::TermKind::Offset),
    ];
    for (i, &level) in levels.iter().enumerate() {
        let budget = uncertainty.budget(lo + (hi - lo) * i as f64 / 5.0, None);
        assert!((level - (lo + (hi - lo) * i as f64 / 5.0)).abs() < 0.006);
        for (label, kind) in labels {
            let printed = rows.iter().find(|r| r.0 == label);
            match (budget.term(kind), printed) {
                (Some(u), Some(r)) => assert!((number(&r.1[i]) - u).abs() <= 0.0005, "{label}"),
                (None, None) => {}
                (u, r) => panic!("{label}: budget {u:?}, printed {r:?}"),
            }
        }
        let combined = number(&row(&rows, "combined")[i]);
        assert!((combined - budget.combined_db()).abs() <= 0.0005);
    }
}

// Source: worked by hand from the demo's rows (250 MHz, 1.3 dB) and (440 MHz, 2.6 dB).
// At 300 MHz log-frequency interpolation gives 1.3 + 1.3·ln(1.2)/ln(1.76) = 1.71927 dB and
// linear-frequency interpolation 1.3 + 1.3·50/190 = 1.64211 dB, so the estimate is
// (1.71927 − 1.64211)/2/√3 = 0.02228 dB; on the 440 MHz row it is zero.
#[test]
fn the_interpolation_estimate_is_nonzero_between_rows_and_zero_on_a_row() {
    let between = check(&[DEMO, "--freq", "300MHz"]);
    assert!(
        between.contains("  table       +1.719 dB, interpolation u = 0.022 dB\n"),
        "{between}"
    );
    let on_row = check(&[DEMO, "--freq", "440MHz"]);
    assert!(
        on_row.contains("  table       +2.600 dB, interpolation u = 0.000 dB\n"),
        "{on_row}"
    );
    let json = check_json(&[DEMO, "--freq", "300MHz"]);
    let correction = &json["frequency_correction"];
    assert!((correction["table_db"].as_f64().unwrap() - 1.719271).abs() < 1e-5);
    assert!((correction["table_interpolation_u_db"].as_f64().unwrap() - 0.022276).abs() < 1e-5);
}

// Source: the rule that the frequency-interpolation estimate is a budget term,
// zero at a tabled frequency (values as worked in the test above). The budget maths in
// src/uncertainty.rs does not include the term yet; this test holds once it does.
#[test]
fn the_budget_carries_the_interpolation_term_between_rows_only() {
    let between = block(&check(&[DEMO, "--freq", "300MHz"]), "across the span");
    for cell in row(&between, "frequency interpolation") {
        assert!((number(cell) - 0.022).abs() < 0.0011, "{cell}");
    }
    let on_row = block(&check(&[DEMO, "--freq", "440MHz"]), "across the span");
    let zero = on_row
        .iter()
        .find(|r| r.0 == "frequency interpolation")
        .is_none_or(|r| r.1.iter().all(|c| number(c) == 0.0));
    assert!(zero, "{on_row:?}");
}

/// The demo diode without its `[uncertainty]` table.
fn demo_without_uncertainty() -> String {
    let text = std::fs::read_to_string(DEMO).unwrap();
    let cut = text.find("\n# Inputs of the uncertainty budget").unwrap();
    text[..cut].to_string()
}

// Source: the rule in issue 14 ("where an input is missing, its term is left out and
// every output says which terms are not included"): the demo diode gives every input but
// the device under test's match, so the only term put down to a missing key is the
// mismatch in use; without [uncertainty], every term that needs a key names it.
#[test]
fn the_missing_list_names_exactly_what_the_profile_lacks() {
    let named = |missing: BTreeMap<String, String>| -> BTreeMap<String, String> {
        missing
            .into_iter()
            .filter(|(_, why)| why.starts_with("needs"))
            .collect()
    };
    let demo = not_included(&check(&[DEMO, "--freq", "440MHz"]));
    assert_eq!(
        named(demo.clone()),
        BTreeMap::from([(
            "mismatch in use".to_string(),
            "needs `dut_swr` in [uncertainty]".to_string()
        )]),
        "{demo:?}"
    );
    let tmp = common::scratch("check-budget-missing");
    let dir = tmp.path();
    let bare = dir.join("bare.toml");
    std::fs::write(&bare, demo_without_uncertainty()).unwrap();
    let bare_missing = not_included(&check(&[bare.to_str().unwrap(), "--freq", "440MHz"]));
    let want = [
        ("calibration source", "needs `source` in [uncertainty]"),
        (
            "mismatch at calibration",
            "needs `source_swr` and `detector_swr` in [uncertainty]",
        ),
        (
            "mismatch in use",
            "needs `dut_swr` and (`front_swr` or `detector_swr`) in [uncertainty]",
        ),
        ("offset", "needs `offset` in [uncertainty]"),
    ];
    let want: BTreeMap<String, String> = want
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
    assert_eq!(named(bare_missing.clone()), want, "{bare_missing:?}");
    assert_eq!(
        bare_missing.get("noise of the mean").map(String::as_str),
        Some("check has no samples; readings and interval means carry it")
    );
}

// Source: JCGM 100 (the GUM), from memory, as above; the JSON carries unrounded terms, so
// the expanded value is recomputed to 1e-12. Counts at clip (4090 ≥ 4075) give no budget:
// their level is a bound (the rule in issue 14).
#[test]
fn json_carries_the_terms_the_missing_and_the_counts_given() {
    let json = check_json(&[DEMO, "--freq", "300MHz", "--counts", "100", "4090"]);
    assert_eq!(json["freq_hz"].as_f64(), Some(300e6));
    let across = json["across_span"].as_array().unwrap();
    assert_eq!(across.len(), 6);
    for level in across {
        let budget = &level["budget"];
        let terms = budget["terms"].as_array().unwrap();
        assert!(!terms.is_empty());
        let rss = terms
            .iter()
            .map(|t| t["standard_u_db"].as_f64().unwrap().powi(2))
            .sum::<f64>()
            .sqrt();
        assert_eq!(budget["k"].as_f64(), Some(2.0));
        assert!((budget["expanded_db"].as_f64().unwrap() - 2.0 * rss).abs() < 1e-12);
        for missing in budget["missing"].as_array().unwrap() {
            assert!(missing["term"].is_string() && !missing["why"].as_str().unwrap().is_empty());
        }
    }
    let given = json["counts_given"].as_array().unwrap();
    let profile = load_profile(Path::new(DEMO)).unwrap();
    let cal = Calibration::new(&profile, Some(300e6), 0.0);
    assert!((given[0]["dbm"].as_f64().unwrap() - cal.reading(100.0).dbm).abs() < 1e-9);
    assert!(given[0]["budget"].is_object());
    assert!(given[1]["budget"].is_null(), "{}", given[1]);
}

// Source: common practice (the single-pole formula 10·log10(1 + (f/fc)²)); the roll-off's
// value at F is recomputed from the corner and constant that check reports.
#[test]
fn check_shows_the_roll_off_and_its_difference_from_the_table() {
    let json = check_json(&[DEMO, "--freq", "300MHz"]);
    let correction = &json["frequency_correction"];
    assert_eq!(correction["kind"], "table");
    let fit = &correction["roll_off"];
    let (corner, constant) = (
        fit["corner_hz"].as_f64().unwrap(),
        fit["constant_db"].as_f64().unwrap(),
    );
    let by_hand = constant + 10.0 * (1.0 + (300e6 / corner).powi(2)).log10();
    assert!((fit["db"].as_f64().unwrap() - by_hand).abs() < 1e-12);
    let table_db = correction["table_db"].as_f64().unwrap();
    assert!((fit["minus_table_db"].as_f64().unwrap() - (by_hand - table_db)).abs() < 1e-12);
    assert_eq!(correction["in_use_db"].as_f64(), Some(table_db));
    let text = check(&[DEMO, "--freq", "300MHz"]);
    assert!(text.contains("Frequency correction at 300.0 MHz (in use: table)\n"));
    assert!(
        text.contains(&format!(
            "  roll-off minus table {:+.3} dB\n",
            by_hand - table_db
        )),
        "{text}"
    );
}

// Source: the rule in docs/profiles.md — `kind = "roll-off"` puts the fitted curve in use,
// so the correction applied is the curve's value, not the table's.
#[test]
fn a_profile_may_put_the_roll_off_in_use() {
    let text = std::fs::read_to_string(DEMO).unwrap().replace(
        "[frequency_correction]\n",
        "[frequency_correction]\nkind = \"roll-off\"\n",
    );
    let tmp = common::scratch("check-budget-roll-off");
    let dir = tmp.path();
    let path = dir.join("roll-off.toml");
    std::fs::write(&path, text).unwrap();
    let path = path.to_str().unwrap();
    let json = check_json(&[path, "--freq", "300MHz"]);
    let correction = &json["frequency_correction"];
    assert_eq!(correction["kind"], "roll-off");
    let fit_db = correction["roll_off"]["db"].as_f64().unwrap();
    assert_eq!(correction["in_use_db"].as_f64(), Some(fit_db));
    assert!((fit_db - correction["table_db"].as_f64().unwrap()).abs() > 0.05);
    let shown = check(&[path, "--freq", "300MHz"]);
    assert!(
        shown.contains(&format!("correction {fit_db:+.2} dB")),
        "{shown}"
    );
    assert!(shown.contains("(in use: roll-off)"), "{shown}");
}

// Source: the brief for check's output — readable on a terminal 100 columns wide.
#[test]
fn the_correction_and_budget_fit_in_a_hundred_columns() {
    let text = check(&[DEMO, "--freq", "250MHz", "--counts", "50", "400", "3000"]);
    let from = text.find("\nFrequency correction at").unwrap();
    for line in text[from..].lines() {
        assert!(line.chars().count() <= 100, "{line}");
    }
}

// Source: the rule in docs/calibration.md ("The uncertainty budget", offset): with no
// [offset] the offset in use is 0 dB, nothing sits in front whose uncertainty could be
// given, so the term is neither counted nor asked for.
#[test]
fn with_no_offset_the_offset_term_asks_for_no_key() {
    let text = demo_without_uncertainty();
    let (before, after) = text.split_at(text.find("# The 20 dB attenuator").unwrap());
    let no_offset = format!("{before}{}", &after[after.find("[limits]").unwrap()..]);
    let tmp = common::scratch("check-budget-no-offset");
    let dir = tmp.path();
    let path = dir.join("no-offset.toml");
    std::fs::write(&path, no_offset).unwrap();
    let text = check(&[path.to_str().unwrap(), "--freq", "440MHz"]);
    let missing = not_included(&text);
    assert!(!missing.contains_key("offset"), "{missing:?}");
    assert!(missing.contains_key("calibration source"), "{missing:?}");
    let budget = &text[text.find("\nUncertainty at").unwrap()..];
    assert!(
        !budget.lines().any(|l| l.trim_start().starts_with("offset")),
        "{budget}"
    );
}

// Source: the rule in docs/reliability.md that nothing panics on user input and bad input
// exits 2; and the ADC's own range (common practice): counts lie from 0 to full scale
// (4095 for the demo's 12 bits). Counts over full scale have no level, clipped ones and
// those outside the span are bounds and are marked so. Before, 4096 counts panicked in the
// model term and the bounds read like values.
#[test]
fn counts_past_full_scale_or_outside_the_span_are_marked_and_negative_counts_refused() {
    let text = check(&[DEMO, "--freq", "146MHz", "--counts", "2", "4095", "4096"]);
    let given = block(&text, "at the counts given");
    let levels = row(&given, "level, dBm");
    assert!(levels[0].starts_with('≤'), "{levels:?}");
    assert!(levels[1].starts_with('≥'), "{levels:?}");
    assert_eq!(levels[2], "over-FS", "{levels:?}");
    assert!(
        row(&given, "expanded, k = 2").iter().all(|c| c == "-"),
        "{text}"
    );
    let out = common::output(common::bin().args(["check", DEMO, "--counts", "-1"]));
    assert_eq!(out.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("never gives negative counts"),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

// Source: the rule in docs/calibration.md ("The uncertainty budget") that a term whose
// input is missing is named, never guessed: beyond the correction table's last row
// (440 MHz in the demo) the end value stands in and how far off it is there is unknown,
// so the interpolation term is left out with that reason, where before it read 0.000.
#[test]
fn beyond_the_correction_table_the_interpolation_term_is_named_as_unknown() {
    let text = check(&[DEMO, "--freq", "5GHz"]);
    let missing = not_included(&text);
    assert!(
        missing
            .get("frequency interpolation")
            .is_some_and(|why| why.contains("outside the table")),
        "{missing:?}"
    );
    let profile = load_profile(Path::new(DEMO)).unwrap();
    let cal = Calibration::new(&profile, Some(5e9), 0.0);
    let budget = Uncertainty::new(&profile, &cal).budget(10.0, None);
    assert!(budget
        .missing
        .contains(&dbtrail::uncertainty::TermKind::FrequencyInterpolation));
    let inside = Calibration::new(&profile, Some(300e6), 0.0);
    let within = Uncertainty::new(&profile, &inside).budget(10.0, None);
    assert!(within
        .term(dbtrail::uncertainty::TermKind::FrequencyInterpolation)
        .is_some_and(|u| u > 0.0));
}

// Source: the rule in docs/reliability.md that nothing panics on user input: a level that
// is not a number (counts over full scale have none) gets no model term from any model,
// the table and the fitted ones alike. Before, both interpolations of the model's error
// took the NaN as below their first level and subtracted one from an index of zero.
#[test]
fn no_model_gives_an_error_at_a_level_that_is_not_a_number() {
    for text in [
        include_str!("../profiles/demo-diode.toml").to_string(),
        include_str!("../profiles/demo-logamp.toml").to_string(),
        include_str!("../profiles/demo-diode.toml")
            .replace("kind = \"diode\"", "kind = \"table\"")
            .replace("temperature = 300\n", ""),
    ] {
        let profile = dbtrail::profile::parse_profile(&text, "demo").unwrap();
        assert_eq!(profile.model.detector.model_u_db(f64::NAN), None);
        assert!(profile.model.detector.model_u_db(0.0).is_some());
    }
}
