//! Quantities and conversions checked against published tables and trade facts.

// The handbook table quotes 707.1 mV at +10 dBm, which clippy takes for 1/√2.
#![allow(clippy::approx_constant)]

use dbtrail::units::{
    parse_db, parse_duration, parse_frequency, parse_level, Level, Power, Si, UnitError,
    VoltageForm,
};
use proptest::prelude::*;
use std::time::Duration;

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

// Source: ../shared/REFERENCES.md, "Power and voltage in a resistive system" (common
// practice; the same figures appear in the dBm-to-voltage tables of radio handbooks, from
// memory). Columns: dBm, watts, Vrms, Vpk, Vpp in 50 Ω, at the table's four figures.
const HANDBOOK_50_OHM: [(f64, f64, f64, f64, f64); 9] = [
    (-30.0, 1.000e-6, 7.071e-3, 10.00e-3, 20.00e-3),
    (-20.0, 10.00e-6, 22.36e-3, 31.62e-3, 63.25e-3),
    (-10.0, 100.0e-6, 70.71e-3, 100.0e-3, 200.0e-3),
    (0.0, 1.000e-3, 223.6e-3, 316.2e-3, 632.5e-3),
    (10.0, 10.00e-3, 707.1e-3, 1.000, 2.000),
    (13.0, 19.95e-3, 998.8e-3, 1.413, 2.825),
    (20.0, 100.0e-3, 2.236, 3.162, 6.325),
    (30.0, 1.000, 7.071, 10.00, 20.00),
    (40.0, 10.00, 22.36, 31.62, 63.25),
];

#[test]
fn dbm_to_voltage_matches_the_handbook_table_in_50_ohms() {
    for (dbm, watts, vrms, vpk, vpp) in HANDBOOK_50_OHM {
        let p = Power::from_dbm(dbm);
        // Four significant figures in the table: half a unit in the last place is < 5e-4.
        assert!(rel(p.watts(), watts) < 5e-4, "{dbm} dBm: {} W", p.watts());
        assert!(
            rel(p.volts(50.0, VoltageForm::Rms), vrms) < 5e-4,
            "{dbm} dBm Vrms"
        );
        assert!(
            rel(p.volts(50.0, VoltageForm::Peak), vpk) < 5e-4,
            "{dbm} dBm Vpk"
        );
        assert!(
            rel(p.volts(50.0, VoltageForm::PeakToPeak), vpp) < 5e-4,
            "{dbm} dBm Vpp"
        );
        for (form, volts) in [
            (VoltageForm::Rms, vrms),
            (VoltageForm::Peak, vpk),
            (VoltageForm::PeakToPeak, vpp),
        ] {
            let back = Level::Volts { volts, form }.power(50.0).dbm();
            assert!(
                (back - dbm).abs() < 5e-3,
                "{volts} V{} -> {back} dBm",
                form.suffix()
            );
        }
    }
}

// Source: ../shared/REFERENCES.md: at 75 Ω, 0 dBm is 273.9 mVrms, 387.3 mVpk, 774.6 mVpp.
#[test]
fn zero_dbm_in_75_ohms() {
    let p = Power::from_dbm(0.0);
    assert!(rel(p.volts(75.0, VoltageForm::Rms), 0.2739) < 2e-4);
    assert!(rel(p.volts(75.0, VoltageForm::Peak), 0.3873) < 2e-4);
    assert!(rel(p.volts(75.0, VoltageForm::PeakToPeak), 0.7746) < 2e-4);
}

// Source: common practice — dBW = dBm − 30; +3 dB is about twice the power.
#[test]
fn dbw_and_the_three_db_rule() {
    assert_eq!(parse_level("0dBW", false).unwrap().power(50.0).dbm(), 30.0);
    let double = Power::from_dbm(3.0).watts() / Power::from_dbm(0.0).watts();
    assert!((double - 2.0).abs() < 0.01);
}

#[test]
fn levels_parse_in_every_accepted_spelling() {
    let dbm = |text: &str| parse_level(text, true).unwrap().power(50.0).dbm();
    for (text, want) in [
        ("-10dBm", -10.0),
        ("-10 dbm", -10.0),
        ("-10DBM", -10.0),
        ("\u{2212}10dBm", -10.0),
        ("-40dBW", -10.0),
        ("100uW", -10.0),
        ("100µW", -10.0),
        ("100μW", -10.0),
        ("0.1 mW", -10.0),
        ("1e-4W", -10.0),
        ("100000nW", -10.0),
        ("100000000pW", -10.0),
        ("100mVpk", -10.0),
        ("200mVpp", -10.0),
        ("0.1Vdc", -10.0),
        ("70710.678uVrms", -10.0),
        ("0.1 VPK", -10.0),
    ] {
        assert!((dbm(text) - want).abs() < 1e-6, "{text}: {}", dbm(text));
    }
}

#[test]
fn mistakes_are_refused_with_hints_and_the_accepted_list() {
    let err = |text: &str| parse_level(text, false).unwrap_err();
    let message = err("10MW").to_string();
    assert!(
        message.contains("for milli write `mW`") && message.contains("accepted: dBm"),
        "{message}"
    );
    assert!(err("3V").to_string().contains("Vrms, Vpk or Vpp"));
    assert!(err("1Vdc")
        .to_string()
        .contains("Vdc names a calibration point"));
    assert!(matches!(err("0W"), UnitError::NotPositive { .. }));
    assert!(matches!(err("-2mW"), UnitError::NotPositive { .. }));
    assert!(matches!(err("-1Vrms"), UnitError::NotPositive { .. }));
    assert!(matches!(err("NaN dBm"), UnitError::NotFinite { .. }));
    assert!(matches!(err("inf W"), UnitError::NotFinite { .. }));
    assert!(matches!(err("12"), UnitError::NoUnit { .. }));
    assert!(matches!(err("dBm"), UnitError::NotANumber { .. }));
    assert!(matches!(err(""), UnitError::Empty { .. }));
    assert!(err("5 furlongs")
        .to_string()
        .contains("accepted: dBm, dBW, W, mW"));
}

#[test]
fn frequencies_parse_with_their_units_and_never_without() {
    for (text, hz) in [
        ("14.2MHz", 14.2e6),
        ("433 MHz", 433e6),
        ("2.4GHz", 2.4e9),
        ("10k", 10e3),
        ("10kHz", 10e3),
        ("145.5mhz", 145.5e6),
        ("7M", 7e6),
        ("50Hz", 50.0),
    ] {
        assert!(rel(parse_frequency(text).unwrap(), hz) < 1e-15, "{text}");
    }
    // Source: the rule in docs/profiles.md ("Frequencies"): every frequency carries its
    // unit; `435` could be hertz, kilohertz or megahertz, so it is refused with the fix.
    for bare in ["435", " 1000 ", "14.2", "1e6"] {
        let e = parse_frequency(bare).unwrap_err();
        assert!(
            matches!(e, UnitError::FrequencyWithoutUnit { .. }),
            "{bare}"
        );
        assert!(e.to_string().contains("add MHz or kHz"), "{e}");
    }
    assert!(parse_frequency("10m")
        .unwrap_err()
        .to_string()
        .contains("wavelength band"));
    assert!(parse_frequency("0Hz").is_err());
    assert!(parse_frequency("-5MHz").is_err());
    assert!(parse_frequency("5 parsecs")
        .unwrap_err()
        .to_string()
        .contains("accepted: Hz, kHz"));
}

#[test]
fn durations_and_db_offsets() {
    assert_eq!(parse_duration("90s").unwrap(), Duration::from_secs(90));
    assert_eq!(parse_duration("5m").unwrap(), Duration::from_secs(300));
    assert_eq!(parse_duration("2h").unwrap(), Duration::from_secs(7200));
    assert_eq!(parse_duration("1h30m").unwrap(), Duration::from_secs(5400));
    assert_eq!(
        parse_duration("1h 30m 15s").unwrap(),
        Duration::from_secs(5415)
    );
    assert_eq!(parse_duration("250ms").unwrap(), Duration::from_millis(250));
    assert_eq!(parse_duration("0").unwrap(), Duration::ZERO);
    assert!(parse_duration("-5s").is_err());
    assert!(parse_duration("5 fortnights").is_err());
    assert_eq!(parse_db("40dB").unwrap(), 40.0);
    assert_eq!(parse_db("-0.5 db").unwrap(), -0.5);
    assert_eq!(parse_db("20").unwrap(), 20.0);
    assert!(parse_db("20dBm").is_err());
}

#[test]
fn si_formatting_picks_a_readable_prefix() {
    assert_eq!(Si::new(1e-4, "W").to_string(), "100.0 µW");
    assert_eq!(Si::new(0.01995, "W").to_string(), "19.95 mW");
    assert_eq!(Si::new(1.0, "W").to_string(), "1.000 W");
    assert_eq!(Si::new(2.5e-12, "W").to_string(), "2.500 pW");
    assert_eq!(Si::new(1500.0, "W").to_string(), "1.500 kW");
    assert_eq!(Si::new(0.9999999, "V").to_string(), "1.000 V");
}

proptest! {
    // Source: common practice — P = Vrms²/R = Vpk²/(2R) = Vpp²/(8R), so every form of a
    // level must convert to every other and back at any impedance.
    #[test]
    fn every_form_round_trips_through_every_other(dbm in -120.0f64..70.0, ohms in 1.0f64..600.0) {
        let p = Power::from_dbm(dbm);
        let forms = [VoltageForm::Rms, VoltageForm::Peak, VoltageForm::PeakToPeak, VoltageForm::DcEquivalent];
        let levels = [
            Level::Dbm(dbm),
            Level::Dbw(p.dbw()),
            Level::Watts(p.watts()),
        ]
        .into_iter()
        .chain(forms.iter().map(|&form| Level::Volts { volts: p.volts(ohms, form), form }));
        for level in levels {
            let back = level.power(ohms).dbm();
            prop_assert!((back - dbm).abs() < 1e-9, "{level:?} -> {back}");
        }
    }

    #[test]
    fn formatted_levels_parse_back(dbm in -100.0f64..60.0) {
        let text = format!("{dbm}dBm");
        prop_assert_eq!(parse_level(&text, false).unwrap(), Level::Dbm(dbm));
        let watts = Power::from_dbm(dbm).watts();
        let parsed = parse_level(&format!("{watts:e} W"), false).unwrap().power(50.0).dbm();
        prop_assert!((parsed - dbm).abs() < 1e-9);
    }

    #[test]
    fn arbitrary_text_never_panics(text in "\\PC{0,24}") {
        let _ = parse_level(&text, true);
        let _ = parse_frequency(&text);
        let _ = parse_duration(&text);
        let _ = parse_db(&text);
    }
}
