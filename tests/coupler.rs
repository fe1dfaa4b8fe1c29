//! The coupler set-up through the real binary: `check --coupler` prints both arms and what
//! the pair can tell of a match; a set-up and a profile given in each other's place, and a
//! bad arm profile, are refused with exit 2 and the field to mend.

mod common;

use common::*;

fn stdout_of(args: &[&str]) -> String {
    String::from_utf8(succeeded(args).stdout).unwrap()
}

/// The standard relation SWR = (1 + |Γ|)/(1 − |Γ|).
fn swr(gamma: f64) -> f64 {
    (1.0 + gamma) / (1.0 - gamma)
}

#[test]
fn check_prints_each_arm_and_the_match_the_pair_can_tell() {
    let text = stdout_of(&[
        "check",
        "--coupler",
        "profiles/demo-coupler.toml",
        "--freq",
        "150MHz",
    ]);
    assert!(
        text.contains("forward arm: channel 1, profile demo-coupler-forward.toml"),
        "{text}"
    );
    assert!(
        text.contains("reflected arm: channel 2, profile demo-coupler-reflected.toml"),
        "{text}"
    );
    // At the load the forward reading has passed the 0.2 dB through-loss: 30.0 − 0.2.
    assert!(
        text.contains("30.00 dB less the through-loss 0.20 dB: +29.80 dB added"),
        "{text}"
    );
    // Source: Γd = 10^(−D/20) for a directivity D (common practice); at 150 MHz the demo
    // coupler's table gives D = 26.0 dB.
    let leakage = 10f64.powf(-26.0 / 20.0);
    assert!(text.contains(&format!("±{leakage:.4}")), "{text}");
    assert!(
        text.contains(&format!("SWR below {:.3}", swr(leakage))),
        "{text}"
    );
    // Source: the standard transmission-line relations: SWR 2.5 is |Γ| = 1.5/3.5, a return
    // loss of −20·log10|Γ| and a reflected share |Γ|² of the forward power.
    let gamma: f64 = 1.5 / 3.5;
    let limit = format!(
        "SWR 2.50: |Γ| {gamma:.3}, return loss {:.2} dB, reflected {:.1} %",
        -20.0 * gamma.log10(),
        100.0 * gamma * gamma
    );
    assert!(text.contains(&limit), "{limit}\n{text}");
    assert!(
        text.ends_with("profiles/demo-coupler.toml is valid.\n"),
        "{text}"
    );
}

#[test]
fn a_set_up_and_a_profile_given_in_each_others_place_are_named_for_what_they_are() {
    let as_profile = output(bin().args(["check", "profiles/demo-coupler.toml"]));
    assert_eq!(as_profile.status.code(), Some(2));
    let said = String::from_utf8_lossy(&as_profile.stderr);
    assert!(
        said.contains("this is a coupler set-up, not a detector profile: give it with --coupler"),
        "{said}"
    );
    let as_setup = output(bin().args(["check", "--coupler", "profiles/demo-diode.toml"]));
    assert_eq!(as_setup.status.code(), Some(2));
    let said = String::from_utf8_lossy(&as_setup.stderr);
    assert!(
        said.contains("this is a detector profile, not a coupler set-up"),
        "{said}"
    );
}

#[test]
fn a_missing_arm_profile_is_refused_naming_the_field_to_mend() {
    let dir = scratch("coupler-missing-arm");
    let setup = std::fs::read_to_string("profiles/demo-coupler.toml")
        .unwrap()
        .replace("demo-coupler-reflected.toml", "no-such-profile.toml");
    let path = dir.path().join("coupler.toml");
    std::fs::write(&path, setup).unwrap();
    std::fs::copy(
        "profiles/demo-coupler-forward.toml",
        dir.path().join("demo-coupler-forward.toml"),
    )
    .unwrap();
    let out = output(bin().args(["check", "--coupler", path.to_str().unwrap()]));
    assert_eq!(out.status.code(), Some(2));
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(
        said.contains("the reflected detector's profile, named in")
            && said.contains("(reflected.profile): cannot read profile")
            && said.contains("no-such-profile.toml"),
        "{said}"
    );
}

// A coupler run takes its arms' offsets from the set-up file; a one-detector demo cannot
// run a coupler set-up, nor the match demo one profile: each refused with exit 2 and what
// to give instead, before any file is written.
#[test]
fn coupler_runs_refuse_what_does_not_fit_them() {
    let dir = scratch("coupler-refusals");
    let out_path = dir.path().join("never.csv");
    let out = out_path.to_str().unwrap();
    for (args, said) in [
        (
            vec!["--demo", "soak", "--coupler", "profiles/demo-coupler.toml"],
            "a coupler set-up runs with --demo match",
        ),
        (
            vec!["--demo", "match", "--profile", "profiles/demo-diode.toml"],
            "give --coupler FILE instead of --profile",
        ),
        (
            vec!["--demo", "match", "--offset", "3dB"],
            "--offset does not apply to a coupler run",
        ),
    ] {
        let run = output(
            bin()
                .args(["record", "--fast", "--duration", "1s", "--out", out])
                .args(&args),
        );
        assert_eq!(run.status.code(), Some(2), "{args:?}");
        let stderr = String::from_utf8_lossy(&run.stderr);
        assert!(stderr.contains(said), "{args:?}: {stderr}");
        assert!(!out_path.exists(), "{args:?} left a file");
    }
}

// The match demo runs on the bundled set-up without files: its log names the set-up and
// holds both arms and the match.
#[test]
fn the_match_demo_records_both_arms_on_the_bundled_set_up() {
    let dir = scratch("coupler-demo");
    let log = dir.path().join("demo.csv");
    succeeded([
        "record",
        "--demo",
        "match",
        "--fast",
        "--duration",
        "3s",
        "--out",
        log.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(
        text.contains(
            "# profile: coupler set-up demo coupler (bundled profiles/demo-coupler.toml)"
        ),
        "{text}"
    );
    let (header, rows) = rows(&log);
    assert_eq!(rows.len(), 3);
    let swr = column(&header, "swr");
    for row in &rows {
        let swr: f64 = row[swr].parse().unwrap();
        // The bench's knob starts far from the match: SWR between 1 and 10 (common
        // practice: a mistuned network on an antenna).
        assert!((1.0..10.0).contains(&swr), "{row:?}");
    }
}
