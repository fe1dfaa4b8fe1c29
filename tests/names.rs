//! Profile names with control characters in them (valid TOML: `name = "a\nb"`): wherever a
//! name is written or shown it goes out escaped, so a line break cannot split a log's `#`
//! lines and an escape sequence cannot reach the terminal; `fit` refuses such a name.

mod common;

use std::path::{Path, PathBuf};

use common::{bin, output, scratch, FIT_ADC_AND_FREQ};

/// A name with a line break and the terminal's clear-screen sequence, as TOML writes it,
/// and as dbtrail must show it.
const NAME_TOML: &str = r#"name = "bench\nrig\u001b[2J""#;
const NAME_SHOWN: &str = r"bench\nrig\u{1b}[2J";

fn named_profile(dir: &Path) -> PathBuf {
    let text = include_str!("../profiles/demo-diode.toml").replacen(
        r#"name = "demo-diode""#,
        NAME_TOML,
        1,
    );
    let path = dir.join("named.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

// Source: the rule in docs/recording.md that a log opens with `#` context lines and then
// the column header; `report` must read such a log, whatever the profile's name.
#[test]
fn a_name_with_a_line_break_keeps_the_logs_context_lines_whole() {
    let tmp = scratch("named-log");
    let dir = tmp.path();
    let profile = named_profile(dir);
    let log = dir.join("log.csv");
    let out = output(
        bin()
            .args(["record", "--demo", "--fast", "--duration", "2s"])
            .args([
                "--profile".as_ref(),
                profile.as_os_str(),
                "--out".as_ref(),
                log.as_os_str(),
            ]),
    );
    assert!(out.status.success(), "{}", text(&out.stderr));
    let written = std::fs::read_to_string(&log).unwrap();
    let context: Vec<&str> = written.lines().take_while(|l| l.starts_with('#')).collect();
    let first_other = written.lines().nth(context.len()).unwrap();
    assert!(first_other.starts_with("time_s,"), "{written}");
    assert!(
        context
            .iter()
            .any(|l| l.starts_with(&format!("# profile: {NAME_SHOWN} ("))),
        "{written}"
    );
    assert!(!written.contains('\u{1b}'), "{written}");
    let report = output(bin().arg("report").arg(&log));
    assert!(report.status.success(), "{}", text(&report.stderr));
    assert!(text(&report.stdout).contains(NAME_SHOWN));
}

// Source: the rule above (control characters never reach the terminal raw).
#[test]
fn check_shows_a_name_with_its_control_characters_escaped() {
    let tmp = scratch("named-check");
    let dir = tmp.path();
    let profile = named_profile(dir);
    let out = output(bin().arg("check").arg(&profile));
    assert!(out.status.success(), "{}", text(&out.stderr));
    let shown = text(&out.stdout);
    assert!(!shown.contains('\u{1b}'), "{shown:?}");
    assert!(
        shown.lines().next() == Some(&format!("{NAME_SHOWN}: {}", demo_description())),
        "{shown}"
    );
}

fn demo_description() -> &'static str {
    "Invented demo: Schottky peak detector behind a 20 dB / 5 W attenuator"
}

// Source: the rule in docs/reliability.md (bad input exits 2 with a message naming the
// option and writes nothing).
#[test]
fn fit_refuses_a_name_with_control_characters() {
    let tmp = scratch("named-fit");
    let dir = tmp.path();
    let points = dir.join("points.csv");
    std::fs::write(
        &points,
        "applied,counts\n-40dBm,1000\n-20dBm,1500\n0dBm,2000\n",
    )
    .unwrap();
    let plain_out = dir.join("plain.toml");
    let stem_out = dir.join("stem\u{1b}[2J.toml");
    let cases = [
        (
            Some("bench\nrig"),
            &plain_out,
            r"--name `bench\nrig` holds a control character",
        ),
        (
            None,
            &stem_out,
            r"the name taken from --out's file name `stem\u{1b}[2J` holds",
        ),
    ];
    for (name, out_path, says) in cases {
        let mut command = bin();
        command.arg("fit").arg(&points).args(["--model", "log"]);
        command.args(FIT_ADC_AND_FREQ);
        command.arg("--out").arg(out_path);
        if let Some(name) = name {
            command.args(["--name", name]);
        }
        let out = output(&mut command);
        assert_eq!(out.status.code(), Some(2), "{}", text(&out.stderr));
        assert!(text(&out.stderr).contains(says), "{}", text(&out.stderr));
        assert!(!text(&out.stderr).contains('\u{1b}'));
        assert!(!out_path.exists(), "nothing may be written on failure");
    }
}
