//! The coupler run on the screen: the forward arm in the power view, the match of both
//! arms in the matching view, its keys, its best match, and the transmitter's limits.
//! Samples are made from known powers through each arm's own calibration
//! (`Calibration::counts_for`), so the match they should give is known from the
//! standard relations.

use std::path::Path;
use std::sync::Arc;

use dbtrail::coupler::{load_coupler, Coupler, CouplerCalibration};
use dbtrail::events::Event;
use dbtrail::matching::{return_loss_db, swr, MatchState};

use super::coupled::{BigFigure, MatchNow};
use super::tests::{key_bar, keys, screen};
use super::{App, AppEvent, Command, Mode, Shown, Units, View, COUPLER_OFFSET_REFUSED, NO_COUPLER};

/// The demo set-up at 145 MHz: forward reads +13.4 to +55.4 dBm at the load, reflected
/// −40.1 to +39.9 dBm, directivity 26.1 dB, SWR limit 2.5 (see profiles/demo-coupler.toml).
const FREQ_HZ: f64 = 145e6;

fn demo_coupler() -> Coupler {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("profiles/demo-coupler.toml");
    load_coupler(&path).unwrap()
}

fn coupled_app() -> App {
    App::coupled(Arc::new(demo_coupler()), FREQ_HZ, "test bench".into())
}

/// The stream's counts for a forward and a reflected power, dBm at the reference plane:
/// each arm's calibration run backwards, rounded to the ADC's whole counts.
fn counts_for(app: &App, forward_dbm: f64, reflected_dbm: f64) -> Vec<u32> {
    let cal = app.coupler_calibration().unwrap();
    let setup = &app.coupler().unwrap().setup;
    let mut counts = vec![0u32; setup.forward.channel.max(setup.reflected.channel) + 1];
    counts[setup.forward.channel] = cal.forward.counts_for(forward_dbm).round() as u32;
    counts[setup.reflected.channel] = cal.reflected.counts_for(reflected_dbm).round() as u32;
    counts
}

fn pair(app: &mut App, t: f64, forward_dbm: f64, reflected_dbm: f64) -> Vec<Command> {
    let counts = counts_for(app, forward_dbm, reflected_dbm);
    app.update(AppEvent::Samples(vec![Event::sample(t, &counts)]))
}

/// Samples of a steady pair of powers, 20 a second from `t0` for `seconds`, a frame after
/// each; the commands they brought.
fn steady(
    app: &mut App,
    t0: f64,
    seconds: f64,
    forward_dbm: f64,
    reflected_dbm: f64,
) -> Vec<Command> {
    let mut commands = Vec::new();
    let n = (seconds * 20.0).round() as usize;
    for i in 0..n {
        let t = t0 + i as f64 * 0.05;
        commands.extend(pair(app, t, forward_dbm, reflected_dbm));
        commands.extend(app.update(AppEvent::Tick { now: t }));
    }
    commands
}

/// Reflected power, dBm, that gives `swr` with `forward_dbm`: Pr = Pf·|Γ|², |Γ| =
/// (SWR − 1)/(SWR + 1).
fn reflected_for_swr(forward_dbm: f64, swr: f64) -> f64 {
    let gamma = (swr - 1.0) / (swr + 1.0);
    forward_dbm + 20.0 * gamma.log10()
}

fn live(app: &App) -> MatchNow {
    *app.coupled.as_ref().unwrap().live().expect("a match")
}

/// The screen's rows joined, with runs of spaces made one, so that words wrapped over
/// rows are found.
fn words(lines: &[String]) -> String {
    lines
        .iter()
        .flat_map(|l| l.split_whitespace())
        .collect::<Vec<_>>()
        .join(" ")
}

/// The number after `before` on the screen.
fn number_after(lines: &[String], before: &str) -> f64 {
    let text = words(lines);
    let at = text
        .find(before)
        .unwrap_or_else(|| panic!("no `{before}`: {lines:#?}"));
    let rest = &text[at + before.len()..];
    let number: String = rest
        .trim_start()
        .chars()
        .take_while(|c| c.is_ascii_digit() || *c == '.' || *c == '-' || *c == '+')
        .collect();
    number
        .parse()
        .unwrap_or_else(|_| panic!("`{before}` then `{rest}`"))
}

// Source: the standard transmission-line relations (Pozar, Microwave Engineering, the
// chapter on transmission-line theory; from memory): |Γ| = √(Pr/Pf), SWR =
// (1 + |Γ|)/(1 − |Γ|), return loss −20·log10|Γ|; and common practice: 100 W forward and
// 4 W reflected is |Γ| 0.2, SWR 1.5, 13.979 dB, 96 W net. The screen's figures must hold
// the truth within the ± it states (its k = 2 expanded uncertainty).
#[test]
fn a_hundred_watts_forward_and_four_reflected_show_swr_one_and_a_half_within_the_stated_u() {
    let mut app = coupled_app();
    steady(&mut app, 0.0, 2.0, 50.0, 36.0206);
    keys(&mut app, "m");
    let lines = screen(&app, 100, 30);
    let shown_rl = number_after(&lines, "return loss");
    let u = number_after(&lines, &format!("return loss {shown_rl:.2} dB ±"));
    let truth_rl = return_loss_db(0.2);
    assert!(
        (shown_rl - truth_rl).abs() <= u,
        "{shown_rl} ± {u}: {lines:#?}"
    );
    assert!(u > 0.0 && u < 3.0, "{u}");
    // The SWR beside the return loss, when the digits show the return loss.
    keys(&mut app, "u");
    let lines = screen(&app, 100, 30);
    let shown_swr = number_after(&lines, "SWR");
    let (lowest, highest) = (
        swr(10f64.powf(-(truth_rl + u) / 20.0)),
        swr(10f64.powf(-(truth_rl - u) / 20.0)),
    );
    assert!(
        (lowest..=highest).contains(&shown_swr),
        "{shown_swr}: {lines:#?}"
    );
    assert!((shown_swr - 1.5).abs() < 0.01, "{shown_swr}");
    let net = number_after(&lines, "net");
    assert!(
        (net - 96.0).abs() < 96.0 * (10f64.powf(u / 10.0) - 1.0),
        "{net}"
    );
    assert!(
        words(&lines).contains("forward +50.00 dBm 100.0 W"),
        "{lines:#?}"
    );
}

// Source: common practice — averages are taken over watts. 10 W forward with 1 W and
// 0.1 W reflected in turn average to 0.55 W reflected: return loss 10·log10(10/0.55) =
// 12.596 dB. The average of the two ratios in dB would be 15 dB.
#[test]
fn the_match_is_the_ratio_of_the_averages_never_the_average_of_ratios() {
    let mut app = coupled_app();
    for i in 0..16 {
        let reflected = if i % 2 == 0 { 30.0 } else { 20.0 };
        pair(&mut app, f64::from(i) * 0.05, 40.0, reflected);
    }
    let m = live(&app);
    assert_eq!(m.interval.state, MatchState::Value);
    let rl = m.interval.figures.unwrap().return_loss_db;
    // Each arm's reading is good to the ADC's count, a few hundredths of a dB here.
    assert!((rl - 10.0 * (10.0f64 / 0.55).log10()).abs() < 0.05, "{rl}");
}

#[test]
fn the_power_view_of_a_coupler_run_reads_the_forward_arm() {
    let mut app = coupled_app();
    pair(&mut app, 0.0, 50.0, 36.0);
    let Shown::Level(dbm) = app.shown() else {
        panic!("{:?}", app.shown())
    };
    // The forward detector's count is good to a hundredth of a dB at this level.
    assert!((dbm - 50.0).abs() < 0.02, "{dbm}");
    assert_eq!(app.calibration().freq_hz(), FREQ_HZ);
    let forward = CouplerCalibration::new(&demo_coupler(), FREQ_HZ).forward;
    assert_eq!(app.calibration().span_dbm(), forward.span_dbm());
}

#[test]
fn m_switches_views_and_u_there_cycles_swr_and_return_loss() {
    let mut app = coupled_app();
    steady(&mut app, 0.0, 1.0, 50.0, 36.0);
    assert_eq!(app.view, View::Power);
    keys(&mut app, "m");
    assert_eq!(app.view, View::Matching);
    let big = |app: &App| app.coupled.as_ref().unwrap().big;
    assert_eq!(big(&app), BigFigure::Swr);
    assert!(words(&screen(&app, 100, 30)).contains("SWR"));
    keys(&mut app, "u");
    assert_eq!(big(&app), BigFigure::ReturnLoss);
    assert_eq!(app.units, Units::Dbm, "the power view's units stay");
    assert!(words(&screen(&app, 100, 30)).contains("dB return loss"));
    keys(&mut app, "u");
    assert_eq!(big(&app), BigFigure::Swr);
    keys(&mut app, "m");
    assert_eq!(app.view, View::Power);
    keys(&mut app, "u");
    assert_eq!(app.units, Units::Watts);
}

#[test]
fn a_run_without_a_coupler_says_the_matching_view_needs_one() {
    let mut app = super::tests::app();
    keys(&mut app, "m");
    assert_eq!(app.view, View::Power);
    assert_eq!(app.notice.as_deref(), Some(NO_COUPLER));
    assert!(words(&screen(&app, 100, 30)).contains("needs a coupler set-up"));
}

// Source: the standard relations (as above): SWR 2 is 9.542 dB, 1.5 is 13.979 dB, 3 is
// 6.021 dB. The best is the lowest SWR reached; the present one, at SWR 3, is 13.979 −
// 6.021 = 7.958 dB of return loss short of it.
#[test]
fn the_best_match_is_the_lowest_swr_reached_and_the_present_is_measured_from_it() {
    let mut app = coupled_app();
    steady(&mut app, 0.0, 2.0, 40.0, reflected_for_swr(40.0, 2.0));
    steady(&mut app, 2.0, 2.0, 40.0, reflected_for_swr(40.0, 1.5));
    steady(&mut app, 4.0, 2.0, 40.0, reflected_for_swr(40.0, 3.0));
    let best = app.coupled.as_ref().unwrap().best_db().unwrap();
    assert!((best - 13.979).abs() < 0.05, "{best}");
    keys(&mut app, "m");
    let lines = screen(&app, 100, 30);
    let best_swr = number_after(&lines, "best SWR");
    assert!((best_swr - 1.5).abs() < 0.01, "{lines:#?}");
    let short = number_after(&lines, "dB) now");
    assert!((short - 7.958).abs() < 0.1, "{lines:#?}");
    keys(&mut app, "r");
    assert_eq!(app.coupled.as_ref().unwrap().best_db(), None);
}

// Source: the standard relations (as above): SWR 3 is past the demo set-up's limit of
// 2.5 (profiles/demo-coupler.toml); the warning rings the bell once, as the other
// warnings do, and clears after the hold.
#[test]
fn a_high_swr_takes_the_warning_line_and_rings_the_bell_once() {
    let mut app = coupled_app();
    assert!(steady(&mut app, 0.0, 1.0, 40.0, reflected_for_swr(40.0, 2.0)).is_empty());
    let commands = pair(&mut app, 1.0, 40.0, reflected_for_swr(40.0, 3.0));
    assert!(
        commands.is_empty(),
        "the window of 16 still averages to below the limit"
    );
    let commands = steady(&mut app, 1.05, 1.0, 40.0, reflected_for_swr(40.0, 3.0));
    assert_eq!(commands, [Command::Bell], "one bell");
    keys(&mut app, "m");
    let lines = screen(&app, 100, 30);
    assert!(lines[1].contains("HIGH SWR"), "{lines:#?}");
    assert!(screen(&app, 80, 24)[1].contains("HIGH SWR"));
    steady(&mut app, 2.05, 3.0, 40.0, reflected_for_swr(40.0, 1.5));
    assert!(!screen(&app, 100, 30)[1].contains("HIGH SWR"));
    let again = steady(&mut app, 5.05, 1.0, 40.0, reflected_for_swr(40.0, 3.0));
    assert_eq!(again, [Command::Bell], "a new event rings again");
}

#[test]
fn reflected_power_over_its_limit_warns_with_a_bell() {
    let mut coupler = demo_coupler();
    coupler.setup.limits.reflected_max_dbm = Some(35.0);
    let mut app = App::coupled(Arc::new(coupler), FREQ_HZ, "test bench".into());
    // SWR 1.5 at 50 dBm forward: within the SWR limit, 1 dB over the reflected one.
    let commands = steady(&mut app, 0.0, 1.0, 50.0, 36.0);
    assert_eq!(commands, [Command::Bell]);
    let over = app.over_limits();
    assert!(over.reflected && !over.swr, "{over:?}");
    assert!(screen(&app, 100, 30)[1].contains("HIGH REFLECTED POWER"));
}

#[test]
fn the_offset_key_is_refused_in_a_coupler_run() {
    let mut app = coupled_app();
    pair(&mut app, 0.0, 50.0, 36.0);
    let offset = app.calibration().offset_db();
    let commands = keys(&mut app, "o");
    assert!(commands.is_empty());
    assert_eq!(app.mode, Mode::Normal);
    assert_eq!(app.notice.as_deref(), Some(COUPLER_OFFSET_REFUSED));
    assert_eq!(app.calibration().offset_db(), offset);
    let lines = screen(&app, 100, 30);
    assert!(
        words(&lines).contains("coupler set-up file holds"),
        "{lines:#?}"
    );
}

// Source: docs/screen.md (zero): in a coupler run `z` is refused with a notice and
// nothing changes; each arm's zero is its profile's.
#[test]
fn the_zero_key_is_refused_in_a_coupler_run() {
    let mut app = coupled_app();
    pair(&mut app, 0.0, 50.0, 36.0);
    let zero = app.calibration().adc().zero_counts();
    let commands = keys(&mut app, "z");
    assert!(commands.is_empty());
    assert_eq!(app.mode, Mode::Normal);
    assert_eq!(app.calibration().adc().zero_counts(), zero);
    let lines = screen(&app, 100, 30);
    assert!(
        words(&lines).contains("no zero in a coupler run"),
        "{lines:#?}"
    );
    assert!(
        !words(&lines).contains("board"),
        "no board line: {lines:#?}"
    );
}

#[test]
fn a_new_frequency_rebuilds_both_arms_and_the_match() {
    let mut app = coupled_app();
    let counts = counts_for(&app, 50.0, 36.0);
    let feed = |app: &mut App| {
        for i in 0..16 {
            app.update(AppEvent::Samples(vec![Event::sample(
                f64::from(i) * 0.05,
                &counts,
            )]));
        }
    };
    feed(&mut app);
    assert_eq!(keys(&mut app, "f435MHz\n"), [Command::Recalibrated]);
    let fresh = CouplerCalibration::new(&demo_coupler(), 435e6);
    let cal = app.coupler_calibration().unwrap();
    assert_eq!(cal.forward.freq_hz(), 435e6);
    assert_eq!(cal.leakage, fresh.leakage);
    assert_eq!(
        app.calibration().correction_db(),
        fresh.forward.correction_db()
    );
    assert_eq!(app.calibration().offset_db(), fresh.forward.offset_db());
    // The same counts read at the new frequency from the start give the same match.
    let mut started_there = App::coupled(Arc::new(demo_coupler()), 435e6, "bench".into());
    feed(&mut started_there);
    assert_eq!(live(&app).interval, live(&started_there).interval);
}

#[test]
fn a_stream_with_too_few_channels_is_named_not_a_panic() {
    let mut app = coupled_app();
    app.update(AppEvent::Samples(vec![Event::sample(0.0, &[1500])]));
    assert_eq!(app.shown(), Shown::Waiting);
    let notice = app.notice.clone().unwrap();
    assert!(
        notice.contains("stream sends 1 channel(s), set-up reads forward on 1, reflected on 2"),
        "{notice}"
    );
}

// The edge states in words: reflected below its detector's span makes the return loss a
// floor (−40.1 dBm is the span's bottom here, so with +35 dBm forward at least 75.1 dB,
// SWR at most 1.0004);
// reflected above forward is reversed, no SWR, and taken as a high SWR for safety; a
// reflection within the coupler's leakage (|Γ| 0.018 under Γd 0.050) is past what it
// resolves.
#[test]
fn the_edge_states_say_what_they_are_in_plain_words() {
    let mut app = coupled_app();
    steady(&mut app, 0.0, 1.0, 35.0, -50.0);
    keys(&mut app, "m");
    assert_eq!(live(&app).interval.state, MatchState::ReturnLossAtLeast);
    let ceiling = number_after(&screen(&app, 60, 20), "≤");
    // A bound is rounded the way that keeps it true: at most 1.0004 shows as at most 1.01.
    assert_eq!(ceiling, 1.01);
    keys(&mut app, "u");
    let floor = number_after(&screen(&app, 60, 20), "≥");
    assert!((floor - (35.0 + 40.096)).abs() < 0.05, "{floor}");
    let text = words(&screen(&app, 100, 30));
    assert!(
        text.contains("reflected power is below what its detector reads: the return loss is at"),
        "{text}"
    );
    assert!(text.contains("a bound, no ±"), "{text}");

    let mut app = coupled_app();
    let commands = steady(&mut app, 0.0, 1.0, 30.0, 33.0);
    assert_eq!(commands, [Command::Bell]);
    keys(&mut app, "m");
    assert_eq!(live(&app).interval.state, MatchState::Reversed);
    let text = words(&screen(&app, 100, 30));
    assert!(
        text.contains("channels swapped, or a calibration error"),
        "{text}"
    );
    assert!(text.contains("HIGH SWR"), "{text}");

    let mut app = coupled_app();
    steady(&mut app, 0.0, 1.0, 50.0, 15.0);
    keys(&mut app, "m");
    assert_eq!(live(&app).interval.state, MatchState::Unresolved);
    let text = words(&screen(&app, 100, 30));
    assert!(
        text.contains("better than the coupler can resolve"),
        "{text}"
    );
}

#[test]
fn the_help_of_a_coupler_run_lists_the_matching_key_and_keeps_the_cautions() {
    let mut app = coupled_app();
    keys(&mut app, "?");
    for (width, height) in [(80, 24), (100, 30)] {
        let text = words(&screen(&app, width, height));
        assert!(text.contains("m matching view and back"), "{text}");
        assert!(text.contains("u picks SWR or return loss"), "{text}");
        assert!(
            text.contains("RF burns") && text.contains("licensed practice come first"),
            "{text}"
        );
    }
}

/// The matching view, exactly, at the two sizes it is laid out for: a plain value, a
/// reflected power below its detector's span, and reflected above forward.
#[test]
fn the_matching_view_at_80_by_24_and_100_by_30() {
    type Setup = fn(&mut App);
    let views: [(&str, Setup); 3] = [
        ("matching-value", |app| {
            steady(app, 0.0, 2.0, 40.0, reflected_for_swr(40.0, 2.0));
            steady(app, 2.0, 2.0, 40.0, reflected_for_swr(40.0, 1.5));
        }),
        ("matching-rl-at-least", |app| {
            steady(app, 0.0, 1.0, 35.0, -50.0);
        }),
        ("matching-reversed", |app| {
            steady(app, 0.0, 1.0, 30.0, 33.0);
        }),
    ];
    for (name, setup) in views {
        for (width, height) in [(80, 24), (100, 30)] {
            let mut app = coupled_app().with_color(false);
            setup(&mut app);
            keys(&mut app, "m");
            insta::assert_snapshot!(
                format!("{name}-{width}x{height}"),
                screen(&app, width, height).join("\n")
            );
        }
    }
}

// A window by time keeps its tallies in slices, moved by each arm's own change when the
// frequency changes: the match must read as one started at the new frequency would.
#[test]
fn a_time_window_after_a_new_frequency_reads_as_one_started_there() {
    let two_seconds = |hz: f64| {
        let mut app = App::coupled(Arc::new(demo_coupler()), hz, "bench".into());
        keys(&mut app, "a2s\n");
        app
    };
    let mut app = two_seconds(FREQ_HZ);
    let counts = counts_for(&app, 40.0, 26.0);
    let feed = |app: &mut App| {
        for i in 0..30 {
            let t = f64::from(i) * 0.05;
            app.update(AppEvent::Samples(vec![Event::sample(t, &counts)]));
            app.update(AppEvent::Tick { now: t });
        }
    };
    feed(&mut app);
    assert_eq!(
        app.coupled.as_ref().unwrap().best_db(),
        None,
        "1.5 s of a 2 s window is not a full one"
    );
    keys(&mut app, "f435MHz\n");
    let mut there = two_seconds(435e6);
    feed(&mut there);
    let (moved, fresh) = (live(&app).interval, live(&there).interval);
    assert_eq!(moved.state, fresh.state);
    let rl = |m: dbtrail::matching::MatchInterval| m.figures.unwrap().return_loss_db;
    assert!((rl(moved) - rl(fresh)).abs() < 1e-9, "{moved:?} {fresh:?}");
    steady(&mut app, 1.5, 1.0, 40.0, 26.0);
    assert!(
        app.coupled.as_ref().unwrap().best_db().is_some(),
        "full after 2 s"
    );
}

// Source: the demo reflected detector's safe input, +15 dBm at the detector
// (profiles/demo-coupler-reflected.toml), is +45 dBm on the line through its 30 dB arm:
// +46 dBm reflected is over it, whatever the forward arm reads.
#[test]
fn the_reflected_detector_over_its_safe_input_warns_as_the_forward_one_would() {
    let mut app = coupled_app();
    let commands = steady(&mut app, 0.0, 0.5, 50.0, 46.0);
    assert_eq!(commands, [Command::Bell]);
    let lines = screen(&app, 100, 30);
    assert!(lines[1].contains("OVER DETECTOR SAFE INPUT"), "{lines:#?}");
}

#[test]
fn the_key_bar_of_a_coupler_run_offers_the_matching_key_and_no_offset() {
    let mut app = coupled_app();
    pair(&mut app, 0.0, 40.0, 26.0);
    for view in ["", "m"] {
        keys(&mut app, view);
        for (width, height) in [(80, 24), (100, 30)] {
            let lines = screen(&app, width, height);
            let bar = key_bar(&lines);
            let (m, u) = if view.is_empty() {
                ("m match", "u units")
            } else {
                ("m power", "u SWR/RL")
            };
            assert!(bar.contains(&m) && bar.contains(&u), "{lines:#?}");
            assert!(!bar.contains(&"o offset"), "{lines:#?}");
        }
    }
}

// Source: the standard relations (as above): reflected power falling 2 dB a second
// at steady forward is return loss rising 2 dB a second, a match getting better.
#[test]
fn a_falling_reflected_power_is_a_match_getting_better() {
    let mut app = coupled_app();
    keys(&mut app, "aoff\n");
    for i in 0..60 {
        let t = f64::from(i) * 0.05;
        pair(&mut app, t, 40.0, 26.0 - 2.0 * t);
        app.update(AppEvent::Tick { now: t });
    }
    keys(&mut app, "m");
    let change = app
        .coupled
        .as_ref()
        .unwrap()
        .change_over_last_second(app.now);
    // The ADC's counts make each reading good to a few hundredths of a dB.
    assert!((change.unwrap() - 2.0).abs() < 0.1, "{change:?}");
    let lines = screen(&app, 100, 30);
    assert!(words(&lines).contains("getting better +2."), "{lines:#?}");
}

#[test]
fn the_freeze_key_holds_the_match_while_samples_go_on() {
    let mut app = coupled_app();
    steady(&mut app, 0.0, 1.0, 40.0, reflected_for_swr(40.0, 1.5));
    keys(&mut app, "m ");
    steady(&mut app, 1.0, 1.0, 40.0, reflected_for_swr(40.0, 3.0));
    let run = app.coupled.as_ref().unwrap();
    let held = run.shown().unwrap().interval.figures.unwrap().swr;
    let live = run.live().unwrap().interval.figures.unwrap().swr;
    assert!(
        (held - 1.5).abs() < 0.01 && (live - 3.0).abs() < 0.02,
        "{held} {live}"
    );
    assert!(words(&screen(&app, 100, 30)).contains("[frozen]"));
    keys(&mut app, " ");
    assert!(app.coupled.as_ref().unwrap().frozen.is_none());
}
