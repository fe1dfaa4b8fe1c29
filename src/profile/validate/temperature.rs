//! The `[temperature]` table checked (the sensor kind, the keys that belong to it, each
//! value in its range) and the points' `temp_c`: in range, on every point or on none.

use super::{shown, suggestion, Bounds, Checker};
use crate::decode::MAX_CHANNELS;
use crate::profile::locate::FieldPath;
use crate::profile::raw::{RawPoint, RawTemperature};
use crate::thermal::{
    Ntc, NtcLaw, NtcPlacement, Sensor, TemperatureChannel, PLAUSIBLE_C, SENSOR_NAMES,
};

/// The 1-based stream channel when the table does not say: the one after the detector's.
const DEFAULT_CHANNEL: i64 = 2;
const DEFAULT_WINDOW_S: f64 = 5.0;
const DEFAULT_U_C: f64 = 0.5;
const DEFAULT_T0_C: f64 = 25.0;
const DEFAULT_C_PER_COUNT: f64 = 0.01;
const DEFAULT_C_AT_ZERO: f64 = -273.15;

const PLACEMENTS: [(&str, NtcPlacement); 2] = [
    ("to-ground", NtcPlacement::ToGround),
    ("to-supply", NtcPlacement::ToSupply),
];

/// A board temperature, °C.
pub(super) const BOARD_C: Bounds = Bounds {
    lo: PLAUSIBLE_C.0,
    hi: PLAUSIBLE_C.1,
    what: "a board temperature lies from -55 to 150 °C",
};
const T0_C: Bounds = Bounds {
    lo: PLAUSIBLE_C.0,
    hi: PLAUSIBLE_C.1,
    what: "the temperature r0_ohms is given at lies from -55 to 150 °C (default 25)",
};
const THERMISTOR_OHMS: Bounds = Bounds {
    lo: 1.0,
    hi: 1e8,
    what: "a resistance lies from 1 Ω to 100 MΩ, in ohms (10000 for 10 kΩ)",
};
const BETA_K: Bounds = Bounds {
    lo: 500.0,
    hi: 20_000.0,
    what: "β lies from 500 to 20000 K (most thermistors give 3000 to 4500 K)",
};
const VOLTS_AT_0C: Bounds = Bounds {
    lo: -100.0,
    hi: 100.0,
    what: "the output at 0 °C lies from -100 to +100 V",
};
const C_AT_ZERO: Bounds = Bounds {
    lo: -1000.0,
    hi: 1000.0,
    what: "the temperature at count 0 lies from -1000 to +1000 °C (-273.15 for hundredths \
           of a kelvin)",
};
const WINDOW_S: &str = "the averaging window is above 0 s, up to 600 s (default 5)";
const U_C: &str = "the standard uncertainty of the board temperature is 0 °C or more, up \
                   to 100 °C (default 0.5)";

/// The table's keys that only some sensors take, with those sensors.
fn owned_keys(raw: &RawTemperature) -> [(&'static str, bool, &'static [&'static str]); 12] {
    const BETA: &[&str] = &["ntc-beta"];
    const SH: &[&str] = &["ntc-steinhart-hart"];
    const NTC: &[&str] = &["ntc-beta", "ntc-steinhart-hart"];
    [
        ("r0_ohms", raw.r0_ohms.is_some(), BETA),
        ("t0_c", raw.t0_c.is_some(), BETA),
        ("beta_k", raw.beta_k.is_some(), BETA),
        ("a", raw.a.is_some(), SH),
        ("b", raw.b.is_some(), SH),
        ("c", raw.c.is_some(), SH),
        ("fixed_ohms", raw.fixed_ohms.is_some(), NTC),
        ("placement", raw.placement.is_some(), NTC),
        ("volts_per_c", raw.volts_per_c.is_some(), &["linear"]),
        ("volts_at_0c", raw.volts_at_0c.is_some(), &["linear"]),
        ("c_per_count", raw.c_per_count.is_some(), &["degrees"]),
        ("c_at_zero", raw.c_at_zero.is_some(), &["degrees"]),
    ]
}

/// The temperature channel a `[temperature]` table describes.
pub(super) fn check_temperature_channel(
    check: &mut Checker,
    raw: &RawTemperature,
) -> Option<TemperatureChannel> {
    let path = FieldPath::key("temperature");
    let channel = check_channel(check, &path, raw.channel);
    let window_s = check.number(
        path.then("window_s"),
        raw.window_s.unwrap_or(DEFAULT_WINDOW_S),
        |v| v > 0.0 && v <= 600.0,
        WINDOW_S,
    );
    let u_c = check.number(
        path.then("u_c"),
        raw.u_c.unwrap_or(DEFAULT_U_C),
        |v| (0.0..=100.0).contains(&v),
        U_C,
    );
    let sensor = check_sensor(check, &path, raw);
    Some(TemperatureChannel {
        channel: channel?,
        sensor: sensor?,
        window_s: window_s?,
        u_c: u_c?,
    })
}

/// The 0-based frame index of the 1-based channel written.
fn check_channel(check: &mut Checker, path: &FieldPath, channel: Option<i64>) -> Option<usize> {
    let channel = channel.unwrap_or(DEFAULT_CHANNEL);
    let max = MAX_CHANNELS as i64;
    if (1..=max).contains(&channel) {
        return Some(channel as usize - 1);
    }
    check.fail(
        path.then("channel"),
        format!(
            "channel {channel} is out of range; channels are counted from 1 (the first \
             number of a sample) up to {max}, the most a sample carries (default 2)"
        ),
    );
    None
}

fn check_sensor(check: &mut Checker, path: &FieldPath, raw: &RawTemperature) -> Option<Sensor> {
    let kind = raw.sensor.as_str();
    if !SENSOR_NAMES.contains(&kind) {
        check.fail(
            path.then("sensor"),
            format!(
                "unknown sensor `{kind}`; {}choose ntc-beta or ntc-steinhart-hart (a \
                 thermistor in a divider), linear (volts against °C) or degrees (a digital \
                 sensor that sends degrees as a count)",
                suggestion(kind, &SENSOR_NAMES)
            ),
        );
        return None;
    }
    check_keys_belong(check, path, raw, kind);
    let mut needed = |key: &str, value: Option<f64>, what: &str| {
        if value.is_none() {
            check.fail(
                path.then(key),
                format!("the {kind} sensor needs `{key}` ({what}); add it"),
            );
        }
        value
    };
    match kind {
        "ntc-beta" => {
            let r0 = needed("r0_ohms", raw.r0_ohms, "its resistance at t0_c, ohms");
            let beta = needed("beta_k", raw.beta_k, "β in kelvin, from its datasheet");
            let fixed = needed("fixed_ohms", raw.fixed_ohms, "the divider's fixed resistor");
            let law = beta_law(check, path, raw, r0, beta);
            check_ntc(check, path, raw, law, fixed)
        }
        "ntc-steinhart-hart" => {
            let a = needed("a", raw.a, "the Steinhart–Hart a, 1/K");
            let b = needed("b", raw.b, "the Steinhart–Hart b, 1/K");
            let c = needed("c", raw.c, "the Steinhart–Hart c, 1/K");
            let fixed = needed("fixed_ohms", raw.fixed_ohms, "the divider's fixed resistor");
            let law = steinhart_hart_law(check, path, a, b, c);
            check_ntc(check, path, raw, law, fixed)
        }
        "linear" => {
            let slope = needed("volts_per_c", raw.volts_per_c, "the output's volts per °C");
            let at_0c = needed("volts_at_0c", raw.volts_at_0c, "the output volts at 0 °C");
            linear(check, path, slope, at_0c)
        }
        _ => degrees(check, path, raw),
    }
}

/// Keys that only other sensors take must not appear.
fn check_keys_belong(check: &mut Checker, path: &FieldPath, raw: &RawTemperature, kind: &str) {
    for (key, present, owners) in owned_keys(raw) {
        if present && !owners.contains(&kind) {
            let plural = if owners.len() == 1 { "" } else { "s" };
            check.fail(
                path.then(key),
                format!(
                    "`{key}` belongs to the {} sensor{plural}, but this table's sensor is \
                     {kind}; remove it",
                    owners.join(" and ")
                ),
            );
        }
    }
}

fn beta_law(
    check: &mut Checker,
    path: &FieldPath,
    raw: &RawTemperature,
    r0_ohms: Option<f64>,
    beta_k: Option<f64>,
) -> Option<NtcLaw> {
    let r0_ohms = r0_ohms.and_then(|v| check.within(path.then("r0_ohms"), v, &THERMISTOR_OHMS));
    let t0_c = check.within(path.then("t0_c"), raw.t0_c.unwrap_or(DEFAULT_T0_C), &T0_C);
    let beta_k = beta_k.and_then(|v| check.within(path.then("beta_k"), v, &BETA_K));
    Some(NtcLaw::Beta {
        r0_ohms: r0_ohms?,
        t0_c: t0_c?,
        beta_k: beta_k?,
    })
}

/// b > 0 and c ≥ 0 keep 1/T rising with ln R: one temperature for each resistance.
fn steinhart_hart_law(
    check: &mut Checker,
    path: &FieldPath,
    a: Option<f64>,
    b: Option<f64>,
    c: Option<f64>,
) -> Option<NtcLaw> {
    let mut coefficient = |key: &str, value: Option<f64>, ok: fn(f64) -> bool, want: &str| {
        value.and_then(|v| check.number(path.then(key), v, ok, want))
    };
    let a = coefficient(
        "a",
        a,
        |v| v.abs() <= 1.0,
        "a is in 1/K, from -1 to 1 (about 1e-3 for a 10 kΩ thermistor)",
    );
    let b = coefficient(
        "b",
        b,
        |v| v > 0.0 && v <= 1.0,
        "b is in 1/K, above 0 and up to 1 (about 2.4e-4 for a 10 kΩ thermistor), so that \
         the resistance falls as the board warms",
    );
    let c = coefficient(
        "c",
        c,
        |v| (0.0..=1.0).contains(&v),
        "c is in 1/K, 0 or more and up to 1 (about 1e-7 for a 10 kΩ thermistor; 0 is the \
         β law), so that each resistance has one temperature",
    );
    Some(NtcLaw::SteinhartHart {
        a: a?,
        b: b?,
        c: c?,
    })
}

/// The thermistor with its divider. Mid-scale (the thermistor equal to the fixed
/// resistor) must read a board temperature: a divider is built to read around the middle
/// of its range, so a law that reads no temperature there has coefficients in the wrong
/// units or the wrong fixed resistor.
fn check_ntc(
    check: &mut Checker,
    path: &FieldPath,
    raw: &RawTemperature,
    law: Option<NtcLaw>,
    fixed_ohms: Option<f64>,
) -> Option<Sensor> {
    let fixed_ohms =
        fixed_ohms.and_then(|v| check.within(path.then("fixed_ohms"), v, &THERMISTOR_OHMS));
    let placement = match raw.placement.as_deref() {
        None => Some(NtcPlacement::ToGround),
        Some(name) => placement(check, path, name),
    };
    let (law, fixed_ohms) = (law?, fixed_ohms?);
    let mid_scale = law.celsius_at(fixed_ohms);
    if !(BOARD_C.lo..=BOARD_C.hi).contains(&mid_scale) {
        check.fail(
            path.then("fixed_ohms"),
            format!(
                "with these coefficients a thermistor equal to fixed_ohms ({}) reads \
                 {mid_scale:.1} °C, outside -55 to 150 °C, so mid-scale reads no board \
                 temperature: check the coefficients' units and fixed_ohms",
                shown(fixed_ohms),
            ),
        );
        return None;
    }
    Some(Sensor::Ntc(Ntc {
        law,
        fixed_ohms,
        placement: placement?,
    }))
}

fn placement(check: &mut Checker, path: &FieldPath, name: &str) -> Option<NtcPlacement> {
    let found = PLACEMENTS.iter().find(|(n, _)| *n == name).map(|(_, p)| *p);
    if found.is_none() {
        let names = PLACEMENTS.map(|(n, _)| n);
        check.fail(
            path.then("placement"),
            format!(
                "unknown placement `{name}`; {}choose to-ground (the thermistor between the \
                 ADC pin and ground) or to-supply (between the supply and the pin)",
                suggestion(name, &names)
            ),
        );
    }
    found
}

fn linear(
    check: &mut Checker,
    path: &FieldPath,
    slope: Option<f64>,
    at_0c: Option<f64>,
) -> Option<Sensor> {
    let volts_per_c = slope.and_then(|v| {
        check.number(
            path.then("volts_per_c"),
            v,
            |v| (1e-6..=10.0).contains(&v.abs()),
            "the output's slope is not zero: its size lies from 1 µV/°C to 10 V/°C, in \
             volts (0.01 for 10 mV/°C), either sign",
        )
    });
    let volts_at_0c = at_0c.and_then(|v| check.within(path.then("volts_at_0c"), v, &VOLTS_AT_0C));
    Some(Sensor::Linear {
        volts_per_c: volts_per_c?,
        volts_at_0c: volts_at_0c?,
    })
}

fn degrees(check: &mut Checker, path: &FieldPath, raw: &RawTemperature) -> Option<Sensor> {
    let c_per_count = check.number(
        path.then("c_per_count"),
        raw.c_per_count.unwrap_or(DEFAULT_C_PER_COUNT),
        |v| (1e-6..=100.0).contains(&v),
        "the scale is above 0, from 1e-6 to 100 °C per count (default 0.01)",
    );
    let c_at_zero = check.within(
        path.then("c_at_zero"),
        raw.c_at_zero.unwrap_or(DEFAULT_C_AT_ZERO),
        &C_AT_ZERO,
    );
    Some(Sensor::Degrees {
        c_per_count: c_per_count?,
        c_at_zero: c_at_zero?,
    })
}

/// Each point's `temp_c` within [`BOARD_C`], and on every point or on none: a temperature
/// model needs the temperature of each point it is built from.
pub(super) fn check_point_temperatures(check: &mut Checker, path: &FieldPath, points: &[RawPoint]) {
    for (i, point) in points.iter().enumerate() {
        if let Some(celsius) = point.temp_c {
            check.within(path.at(i).then("temp_c"), celsius, &BOARD_C);
        }
    }
    let Some(with) = points.iter().position(|p| p.temp_c.is_some()) else {
        return;
    };
    if let Some(without) = points.iter().position(|p| p.temp_c.is_none()) {
        check.fail(
            path.at(without).then("temp_c"),
            format!(
                "this point has no `temp_c` but model.points[{with}] has one; give the board \
                 temperature on every point, or on none"
            ),
        );
    }
}

#[cfg(test)]
mod tests {
    use crate::profile::parse_profile;
    use crate::thermal::{NtcLaw, NtcPlacement, Sensor, TemperatureChannel};

    const BASE: &str = "name = \"t\"\nreference_frequency = \"10MHz\"\n[adc]\nbits = 12\n\
                        vref = 3.3\n[model]\nkind = \"table\"\npoints = [\n\
                        { applied = \"-20dBm\", counts = 100 },\n\
                        { applied = \"0dBm\", counts = 1500 },\n]\n";

    fn channel(table: &str) -> TemperatureChannel {
        let text = format!("{BASE}[temperature]\n{table}");
        parse_profile(&text, "t.toml")
            .unwrap_or_else(|e| panic!("{e}"))
            .temperature
            .expect("a temperature channel")
    }

    // Source: hundredths of a kelvin (common practice for digital board sensors), the
    // default of docs/profiles.md: 29 815 counts is 298.15 K, 25 °C.
    #[test]
    fn a_digital_sensor_defaults_to_hundredths_of_a_kelvin() {
        let got = channel("sensor = \"degrees\"\nchannel = 3\nwindow_s = 0.5\nu_c = 0\n");
        assert_eq!((got.channel, got.window_s, got.u_c), (2, 0.5, 0.0));
        let adc = crate::adc::Adc::new(12, 3.3, 1.0, 0.0, 0.005);
        assert!((got.celsius(&adc, 29_815).unwrap() - 25.0).abs() < 1e-9);
    }

    // Source: a TMP36-like part (10 mV/°C, 500 mV at 0 °C; datasheet figures from memory):
    // 750 mV is 25 °C, here 750/3300·4095 = 930.68 counts.
    #[test]
    fn a_linear_sensor_reads_pin_volts() {
        let got = channel("sensor = \"linear\"\nvolts_per_c = 0.01\nvolts_at_0c = 0.5\n");
        let adc = crate::adc::Adc::new(12, 3.3, 2.0, 5.0, 0.005);
        assert!((got.counts_for(&adc, 25.0) - 930.68).abs() < 0.005);
    }

    // Source: the Steinhart–Hart form 1/T = a + b·ln R + c·(ln R)³ as written in the table,
    // and the placement as named.
    #[test]
    fn steinhart_hart_coefficients_and_placement_are_taken_as_written() {
        let got = channel(
            "sensor = \"ntc-steinhart-hart\"\na = 1.1e-3\nb = 2.4e-4\nc = 1e-7\n\
             fixed_ohms = 4700\nplacement = \"to-supply\"\n",
        );
        let Sensor::Ntc(ntc) = got.sensor else {
            panic!("{:?}", got.sensor)
        };
        let law = NtcLaw::SteinhartHart {
            a: 1.1e-3,
            b: 2.4e-4,
            c: 1e-7,
        };
        assert_eq!((ntc.law, ntc.fixed_ohms), (law, 4700.0));
        assert_eq!(ntc.placement, NtcPlacement::ToSupply);
    }
}
