//! The board's temperature and the zero on the live screen, with the demo diode profile
//! (its thermistor on channel 2): what `update` makes of frames and keys, and what `draw`
//! puts in the cells.

use std::sync::Arc;

use dbtrail::events::Event;
use dbtrail::profile::parse_profile;
use dbtrail::uncertainty::TermKind;

use super::tests::{keys, screen};
use super::{App, AppEvent, Command, Mode, Plusminus, Shown};

const DEMO_DIODE: &str = include_str!("../../../profiles/demo-diode.toml");

/// Sensor codes of the demo's divider (10 kΩ, β 3950 K NTC to ground under 10 kΩ, 12-bit
/// ratiometric ADC, full scale 4095), worked by hand from the β equation
/// R = R25·exp(β·(1/T − 1/298.15 K)) and the divider ratio R/(R + 10 kΩ) = code/4095:
/// code 2048 → R = 10004.9 Ω → 24.99 °C; code 3156 → R = 33610 Ω → 0.01 °C (the
/// REFERENCES table gives 33620.6 Ω at 0 °C, i.e. code 3156.2).
const CODE_25C: u32 = 2048;
const KELVIN_25C: f64 = 298.139_009;
const CODE_0C: u32 = 3156;

/// The demo's lowest calibration point is −27 dBm at 6.1 counts with the zero at 3; 421
/// counts is its 0 dBm point (420.9), well inside the span.
const RF_OFF: u32 = 4;
const RF_ON: u32 = 421;

fn demo() -> App {
    let profile = parse_profile(DEMO_DIODE, "demo-diode.toml").unwrap();
    App::new(Arc::new(profile), None, 0.0, "demo".into())
}

/// Frames every 10 ms from `from` for `seconds`: power `power`, sensor `sensor`.
fn frames(app: &mut App, from: f64, seconds: f64, power: u32, sensor: u32) -> Vec<Command> {
    let n = (seconds * 100.0).round() as usize;
    let events = (0..n)
        .map(|i| Event::sample(from + i as f64 * 0.01, &[power, sensor]))
        .collect();
    let commands = app.update(AppEvent::Samples(events));
    app.update(AppEvent::Tick {
        now: from + seconds,
    });
    commands
}

fn has(lines: &[String], text: &str) -> bool {
    lines.iter().any(|l| l.contains(text))
}

// Source: the β equation worked by hand above (24.99 °C); the calibrated range is the
// demo's 300 K curve ±10 K, 16.85 to 36.85 °C, as docs/calibration.md ("the law's reach")
// says; docs/screen.md: the board line shows the temperature beside the reading.
#[test]
fn the_board_line_shows_the_temperature_and_the_calibrated_range() {
    let mut app = demo();
    frames(&mut app, 0.0, 1.0, 1000, CODE_25C);
    for (w, h) in [(80, 24), (100, 30)] {
        let lines = screen(&app, w, h);
        assert!(has(&lines, "board 24.99 °C"), "{lines:#?}");
        assert!(
            has(&lines, "compensated; calibrated 16.85 to 36.85 °C"),
            "{lines:#?}"
        );
        assert!(
            !has(&lines, "BOARD"),
            "no warning inside the range: {lines:#?}"
        );
    }
}

// Source: docs/calibration.md: the budget reads the model at the board's temperature;
// 298.139 K is the β-equation value worked above (the window holds one code, so its mean
// is that code's temperature).
#[test]
fn the_plusminus_is_the_budget_at_the_board_temperature() {
    let mut app = demo();
    frames(&mut app, 0.0, 1.0, 1000, CODE_25C);
    let Shown::Level(dbm) = app.shown() else {
        panic!("{:?}", app.shown())
    };
    let Plusminus::Budget(shown) = app.plusminus() else {
        panic!("{:?}", app.plusminus())
    };
    let kelvin = app.board.as_ref().and_then(|b| b.kelvin()).unwrap();
    assert!((kelvin - KELVIN_25C).abs() < 1e-4, "{kelvin}");
    let expected = app
        .uncertainty
        .budget_at(dbm, app.counts.noise(), Some(kelvin));
    assert_eq!(shown, expected);
    assert!(shown.terms.iter().any(|t| t.kind == TermKind::Temperature));
}

// Source: docs/screen.md (board line and warning line): a board outside the calibrated
// temperatures is warned of with the range, and its reading has no ±; 0.01 °C from the
// β equation above lies below 16.85 °C.
#[test]
fn a_board_outside_the_range_is_warned_of_and_has_no_plusminus() {
    let mut app = demo();
    frames(&mut app, 0.0, 1.0, 1000, CODE_0C);
    assert_eq!(app.plusminus(), Plusminus::TempOutside);
    let lines = screen(&app, 100, 30);
    assert!(has(&lines, "board 0.01 °C"), "{lines:#?}");
    assert!(
        has(&lines, "! outside the calibrated 16.85 to 36.85 °C: no ±"),
        "{lines:#?}"
    );
    assert!(
        has(&lines, "! BOARD OUTSIDE CALIBRATED TEMPERATURES"),
        "{lines:#?}"
    );
    assert!(
        has(&lines, "no ±: board outside its calibrated temperatures"),
        "{lines:#?}"
    );
}

// Source: common practice for an NTC divider: a thermistor to ground that shorts pulls
// the pin to 0 V (code 0); docs/screen.md: a fault shows its short name and what to check.
#[test]
fn a_shorted_sensor_is_named_with_what_to_check() {
    let mut app = demo();
    frames(&mut app, 0.0, 0.5, 1000, CODE_25C);
    frames(&mut app, 0.5, 0.5, 1000, 0);
    let lines = screen(&app, 80, 24);
    assert!(
        has(
            &lines,
            "sensor-short: check thermistor and leads for a short"
        ),
        "{lines:#?}"
    );
    assert!(has(&lines, "TEMPERATURE SENSOR FAULT"), "{lines:#?}");
}

// Source: docs/screen.md: a stream without the sensor's channel leaves the temperature
// unknown and says so, reading at the calibration's 300 K (26.85 °C).
#[test]
fn a_stream_without_the_sensor_says_the_temperature_is_unknown() {
    let mut app = demo();
    let events = (0..50)
        .map(|i| Event::sample(i as f64 * 0.01, &[1000]))
        .collect();
    app.update(AppEvent::Samples(events));
    let lines = screen(&app, 100, 30);
    assert!(
        has(
            &lines,
            "board temperature unknown: read at the calibration's 26.85 °C"
        ),
        "{lines:#?}"
    );
    assert!(has(&lines, "BOARD TEMPERATURE UNKNOWN"), "{lines:#?}");
    // As in a log (docs/recording.md): no uncertainty is stated for such a reading.
    assert_eq!(app.plusminus(), Plusminus::TempUnknown);
    assert!(has(&lines, "no ±: board temperature unknown"), "{lines:#?}");
}

// Source: docs/screen.md (zero): z says to keep the RF off and collects 2 s of source
// time; the zero becomes the counts' mean (4 and 5 alternating: 4.5, worked by hand).
#[test]
fn a_zero_prompts_collects_two_seconds_and_sets_the_mean() {
    let mut app = demo();
    frames(&mut app, 0.0, 0.5, RF_OFF, CODE_25C);
    keys(&mut app, "z");
    frames(&mut app, 0.5, 1.0, RF_OFF, CODE_25C);
    let lines = screen(&app, 80, 24);
    assert!(has(&lines, "ZERO: keep the RF OFF"), "{lines:#?}");
    assert!(has(&lines, "Esc cancels"), "{lines:#?}");
    assert!(matches!(app.mode, Mode::Zeroing(_)));
    let events: Vec<Event> = (0..120)
        .map(|i| Event::sample(1.5 + i as f64 * 0.01, &[RF_OFF + i % 2, CODE_25C]))
        .collect();
    // The first sample of the take was at 0.5 s; 2 s later it ends (at 2.5 s).
    let commands = app.update(AppEvent::Samples(events));
    assert_eq!(app.mode, Mode::Normal);
    let zero = app.cal.adc().zero_counts();
    let Some(Command::Rezero { zero_counts, .. }) = commands.first() else {
        panic!("{commands:?}")
    };
    assert_eq!(*zero_counts, zero);
    // 100 samples of 4 from 0.5 s, then 4, 5, 4, 5… up to 2.5 s: 201 samples in all.
    let expected = (100.0 * 4.0 + 51.0 * 4.0 + 50.0 * 5.0) / 201.0;
    assert!((zero - expected).abs() < 1e-12, "{zero} vs {expected}");
    assert!(has(
        &screen(&app, 80, 24),
        "zero set: 4.25 counts (was 3.00)"
    ));
}

// Source: docs/screen.md (zero): counts that read inside the calibrated span show RF is
// on; the zero is refused and nothing changes (the demo's zero stays 3 counts).
#[test]
fn a_zero_with_rf_on_is_refused_and_changes_nothing() {
    let mut app = demo();
    keys(&mut app, "z");
    let commands = frames(&mut app, 0.0, 2.5, RF_ON, CODE_25C);
    assert!(commands.is_empty(), "{commands:?}");
    assert_eq!(app.cal.adc().zero_counts(), 3.0);
    assert_eq!(app.mode, Mode::Normal);
    let lines = screen(&app, 100, 30);
    assert!(has(&lines, "zero refused, nothing changed"), "{lines:#?}");
    assert!(has(&lines, "RF is on"), "{lines:#?}");
}

// Source: docs/screen.md (zero): Esc cancels and nothing changes.
#[test]
fn esc_cancels_a_zero() {
    let mut app = demo();
    keys(&mut app, "z");
    frames(&mut app, 0.0, 1.0, RF_OFF, CODE_25C);
    keys(&mut app, "\x1b");
    frames(&mut app, 1.0, 2.0, RF_OFF, CODE_25C);
    assert_eq!(app.cal.adc().zero_counts(), 3.0);
    assert!(has(
        &screen(&app, 80, 24),
        "zero cancelled, nothing changed"
    ));
}

// Source: docs/screen.md (keys): the help lists every key; the zero's with its RF note.
#[test]
fn the_help_lists_the_zero_key_with_the_rf_note() {
    let mut app = demo();
    keys(&mut app, "?");
    let lines = screen(&app, 80, 24);
    assert!(
        has(
            &lines,
            "z        zero the ADC with the RF OFF (2 s; RF present is refused)"
        ),
        "{lines:#?}"
    );
}

// Source: docs/screen.md (zero): the zero taken is kept through a later `f`; the demo's
// 146 MHz row corrects by +0.6 dB (profiles/demo-diode.toml).
#[test]
fn a_zero_taken_is_kept_through_a_new_frequency() {
    let mut app = demo();
    keys(&mut app, "z");
    let commands = frames(&mut app, 0.0, 2.5, RF_OFF, CODE_25C);
    assert!(
        matches!(commands.first(), Some(Command::Rezero { .. })),
        "{commands:?}"
    );
    assert_eq!(keys(&mut app, "f146MHz\n"), [Command::Recalibrated]);
    assert_eq!(app.cal.adc().zero_counts(), f64::from(RF_OFF));
    assert!((app.cal.correction_db() - 0.6).abs() < 1e-9);
}
