//! Where rows go: targets that cannot be synced, writers that must not replace a file,
//! and a standard error that cannot be written.
//!
//! Source of every expectation here: the rules in docs/reliability.md (an existing file is
//! never replaced without --force; bad input exits 2, a failure while running 1; nothing
//! panics) and the POSIX fsync(2) page, which lets a target that cannot be synced (a pipe,
//! a FIFO, a character device) refuse with EINVAL.

mod common;

use std::io::Read;
use std::process::Stdio;
use std::time::Duration;

use common::*;

/// Asserts a run succeeded, showing what it said if not.
fn succeeded(out: &std::process::Output) {
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{said}");
}

fn demo_record(out: &str, extra: &[&str]) -> std::process::Output {
    let mut command = bin();
    command
        .args(["record", "--demo", "--fast", "--duration", "3s"])
        .args(["--out", out])
        .args(extra);
    output(&mut command)
}

#[test]
fn outputs_that_cannot_be_synced_take_the_whole_run() {
    let out = demo_record("/dev/null", &["--force"]);
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "/dev/null: {said}");
    assert!(said.contains("3 rows to /dev/null"), "{said}");

    let mut command = bin();
    command
        .args(["record", "--demo", "--fast", "--duration", "3s", "--force"])
        .args(["--out", "/dev/stdout"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let piped = spawn(&mut command).wait_with_output().unwrap();
    succeeded(&piped);
    let text = String::from_utf8_lossy(&piped.stdout);
    assert_eq!(
        text.lines().filter(|l| l.starts_with("1.0")).count(),
        1,
        "{text}"
    );
}

#[test]
fn a_fifo_as_the_output_takes_every_row() {
    let tmp = scratch("fifo-out");
    let dir = tmp.path();
    let pipe = fifo(dir, "rows.fifo");
    let reader = {
        let pipe = pipe.clone();
        std::thread::spawn(move || {
            let mut text = String::new();
            std::fs::File::open(pipe)
                .unwrap()
                .read_to_string(&mut text)
                .unwrap();
            text
        })
    };
    let out = demo_record(pipe.to_str().unwrap(), &["--force"]);
    succeeded(&out);
    let text = reader.join().unwrap();
    let data = text.lines().filter(|l| !l.starts_with('#')).count();
    assert_eq!(data, 1 + 3, "header and three rows: {text}");
}

#[test]
fn fit_can_write_its_profile_to_dev_null() {
    let tmp = scratch("fit-null");
    let dir = tmp.path();
    let points = dir.join("points.csv");
    let mut csv = String::from("applied,counts\n");
    // Source: worked example by hand: a log detector of 25 counts per dB, -80 dBm at 0.
    for dbm in [-60, -45, -30, -15, 0] {
        csv.push_str(&format!("{dbm}dBm,{}\n", 25 * (dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let mut command = bin();
    command.args(["fit", points.to_str().unwrap(), "--model", "log"]);
    command.args(FIT_ADC_AND_FREQ);
    command.args(["--out", "/dev/null", "--force"]);
    let out = output(&mut command);
    succeeded(&out);
}

#[test]
fn sim_refuses_to_replace_a_file_without_force() {
    let tmp = scratch("sim-out");
    let dir = tmp.path();
    let path = dir.join("capture.txt");
    std::fs::write(&path, "keep me\n").unwrap();
    let sim = |extra: &[&str]| {
        let mut command = bin();
        command.args(["sim", "--seconds", "0.1", "--out", path.to_str().unwrap()]);
        output(command.args(extra))
    };
    let refused = sim(&[]);
    assert_eq!(refused.status.code(), Some(2));
    let said = String::from_utf8_lossy(&refused.stderr);
    assert!(
        said.contains("already exists") && said.contains("--force"),
        "{said}"
    );
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "keep me\n");
    let replaced = sim(&["--force"]);
    assert!(replaced.status.success());
    // 0.1 s at the default 1000 samples/s.
    assert_eq!(std::fs::read_to_string(&path).unwrap().lines().count(), 100);
}

/// Runs the binary with its standard error on /dev/full, where every write fails.
fn with_full_stderr(args: &[&str]) -> std::process::ExitStatus {
    let full = std::fs::OpenOptions::new()
        .write(true)
        .open("/dev/full")
        .unwrap();
    let mut command = bin();
    command.args(args).stdout(Stdio::null()).stderr(full);
    wait(spawn(&mut command), Duration::from_secs(60))
}

#[test]
fn an_unwritable_standard_error_never_panics() {
    let tmp = scratch("full-stderr");
    let dir = tmp.path();
    let log = dir.join("log.csv");
    let status = with_full_stderr(&["check", "no-such-profile.toml"]);
    assert_eq!(status.code(), Some(2), "check of a missing profile");
    let args = ["record", "--demo", "--fast", "--duration", "2s", "--out"];
    let status = with_full_stderr(&[&args[..], &[log.to_str().unwrap()]].concat());
    assert_eq!(
        status.code(),
        Some(0),
        "record, whose summary goes to stderr"
    );
    assert_eq!(rows(&log).1.len(), 2);
    let status = with_full_stderr(&["report", "no-such-log.csv"]);
    assert_eq!(status.code(), Some(2), "report of a missing log");
}

/// A three-row log of one channel, one row a second.
fn three_row_log(dir: &std::path::Path, name: &str) -> std::path::PathBuf {
    let path = dir.join(name);
    let out = demo_record(path.to_str().unwrap(), &[]);
    assert!(out.status.success());
    path
}

fn append(out: &std::path::Path, extra: &[&str]) -> std::process::Output {
    let mut command = bin();
    command
        .args(["record", "--append", "--out", out.to_str().unwrap()])
        .args(extra);
    output(&mut command)
}

fn refused_unchanged(out: &std::path::Path, extra: &[&str], words: &[&str]) {
    let before = std::fs::read(out).unwrap();
    let got = append(out, extra);
    let said = String::from_utf8_lossy(&got.stderr);
    assert_eq!(got.status.code(), Some(2), "{extra:?}: {said}");
    for word in words {
        assert!(said.contains(word), "{extra:?} says {word:?}: {said}");
    }
    assert_eq!(
        std::fs::read(out).unwrap(),
        before,
        "{extra:?} left the log as it was"
    );
}

#[test]
fn append_refuses_rows_that_would_not_fit_and_leaves_the_log_as_it_was() {
    let tmp = scratch("append-shapes");
    let dir = tmp.path();
    let demo = ["--demo", "--fast", "--duration", "2s"];
    let foreign = dir.join("foreign.csv");
    std::fs::write(&foreign, "a,b\n1,2\n").unwrap();
    refused_unchanged(&foreign, &demo, &["not a dbtrail log", "`a,b`"]);

    let intervals = three_row_log(dir, "intervals.csv");
    let per_sample = [&demo[..], &["--every", "0"]].concat();
    refused_unchanged(
        &intervals,
        &per_sample,
        &["rows per interval", "one row per sample"],
    );

    let samples = dir.join("samples.csv");
    let out = demo_record(samples.to_str().unwrap(), &["--every", "0"]);
    assert!(out.status.success());
    refused_unchanged(&samples, &demo, &["holds one row per sample"]);

    // Two channels onto a log of one: known at the first sample, refused before any row.
    let capture = dir.join("two.txt");
    let lines: String = (0..100)
        .map(|i| format!("{},{}\n", 1000 + i, 2000 + i))
        .collect();
    std::fs::write(&capture, lines).unwrap();
    let replay = [
        "--replay",
        capture.to_str().unwrap(),
        "--profile",
        "tests/profiles/good/hand-logamp.toml",
        "--every",
        "10ms",
    ];
    // The demo's log carries its board's temperature; a profile without one would not fit.
    refused_unchanged(
        &intervals,
        &replay,
        &[
            "with the board's temperature",
            "without a board temperature",
        ],
    );
    let single = dir.join("one.txt");
    let lines: String = (0..100).map(|i| format!("{}\n", 1000 + i)).collect();
    std::fs::write(&single, lines).unwrap();
    let one_channel = dir.join("one-channel.csv");
    let mut record = bin();
    record
        .args(["record", "--replay", single.to_str().unwrap(), "--out"])
        .arg(&one_channel)
        .args(&replay[2..]);
    assert!(output(&mut record).status.success());
    refused_unchanged(&one_channel, &replay, &["1 channel(s)", "sends 2"]);
}

// Source: the rule in docs/recording.md ("Bounds"): a log written before the `bound`
// column, or before the `u_db` column, is refused by `--append`, exit 2, naming its
// header line, and left as it was. The logs here are fresh ones with their rows cut back
// to the columns of those times (8 and 10 cells).
#[test]
fn append_refuses_a_log_of_earlier_columns() {
    let tmp = scratch("append-earlier-columns");
    let dir = tmp.path();
    for (cells, header) in [
        (
            8,
            "time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags",
        ),
        (
            10,
            "time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags,bound,averaged",
        ),
    ] {
        let log = three_row_log(dir, &format!("old-{cells}.csv"));
        let text = std::fs::read_to_string(&log).unwrap();
        let old: String = text
            .lines()
            .map(|line| match line.starts_with('#') {
                true => format!("{line}\n"),
                false => format!(
                    "{}\n",
                    line.split(',').take(cells).collect::<Vec<_>>().join(",")
                ),
            })
            .collect();
        assert!(old.contains(&format!("\n{header}\n")), "{old}");
        std::fs::write(&log, old).unwrap();
        let header_line = text.lines().position(|l| l.starts_with("time_s")).unwrap() + 1;
        refused_unchanged(
            &log,
            &["--demo", "--fast", "--duration", "2s"],
            &[
                "written by an earlier dbtrail",
                &format!("line {header_line}"),
            ],
        );
    }
}

#[test]
fn a_run_made_another_way_is_appended_as_a_run_of_its_own() {
    let tmp = scratch("append-runs");
    let dir = tmp.path();
    let log = three_row_log(dir, "soak.csv");
    let got = append(
        &log,
        &["--demo", "--fast", "--duration", "4s", "--every", "2s"],
    );
    let said = String::from_utf8_lossy(&got.stderr);
    assert!(got.status.success(), "{said}");
    assert!(
        said.contains("rows differ") && said.contains("run of its own"),
        "{said}"
    );
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(text.contains("\n# resumed "), "{text}");
    assert!(
        text.contains("# rows: every 2s;"),
        "the new run's context: {text}"
    );
    let mut command = bin();
    let report = output(command.args(["report", log.to_str().unwrap()]));
    let shown = String::from_utf8_lossy(&report.stdout);
    succeeded(&report);
    assert!(
        shown.contains("Run 2 of 2") && shown.contains("2 rows of 2.000 s"),
        "{shown}"
    );
}

#[test]
fn a_row_cut_part_way_stays_on_its_own_line_when_a_run_is_appended() {
    let tmp = scratch("append-cut");
    let dir = tmp.path();
    let log = three_row_log(dir, "cut.csv");
    let text = std::fs::read_to_string(&log).unwrap();
    let cut_at = text.len() - 20;
    std::fs::write(&log, &text[..cut_at]).unwrap();
    // Rows of 2 s make a run of their own: the fast simulator's time is not the clock's,
    // so the same settings could not be placed after the first run in time.
    let got = append(
        &log,
        &["--demo", "--fast", "--duration", "2s", "--every", "2s"],
    );
    succeeded(&got);
    let after = std::fs::read_to_string(&log).unwrap();
    let cut_line = after
        .lines()
        .find(|l| text[..cut_at].ends_with(*l))
        .unwrap();
    let next = after.split(cut_line).nth(1).unwrap();
    assert!(next.starts_with("\n# resumed "), "set apart: {after}");
    let mut command = bin();
    let report = output(command.args(["report", log.to_str().unwrap()]));
    succeeded(&report);
}

#[test]
fn a_second_recorder_on_the_same_file_is_refused() {
    let tmp = scratch("append-lock");
    let dir = tmp.path();
    let log = dir.join("locked.csv");
    let first = recording(&log, &dir.join("first.txt"));
    let second = append(&log, &["--demo", "--fast", "--duration", "1s"]);
    let said = String::from_utf8_lossy(&second.stderr);
    assert_eq!(second.status.code(), Some(2), "{said}");
    assert!(said.contains("being written by another dbtrail") && said.contains("locked.csv"));
    let mut command = bin();
    let forced = output(
        command
            .args(["record", "--demo", "--fast", "--duration", "1s", "--force"])
            .args(["--out", log.to_str().unwrap()]),
    );
    assert_eq!(
        forced.status.code(),
        Some(2),
        "--force does not take a log in use either"
    );
    signal(&first, "INT");
    assert!(wait(first.release(), Duration::from_secs(10)).success());
    let (_, rows) = rows(&log);
    assert!(rows.len() >= 2, "the first recorder's rows are all there");
}

/// Starts a real-time recording into `log` (its messages into `err`) and waits for its
/// first rows.
fn recording(log: &std::path::Path, err: &std::path::Path) -> KillOnDrop {
    let mut command = bin();
    command
        .args([
            "record",
            "--demo",
            "--every",
            "100ms",
            "--out",
            log.to_str().unwrap(),
        ])
        .stderr(std::fs::File::create(err).unwrap());
    let child = KillOnDrop::new(spawn(&mut command));
    wait_for(Duration::from_secs(20), "the recorder's rows", || {
        row_count(log) >= 2
    });
    child
}

fn ended_with(child: KillOnDrop, err: &std::path::Path, code: i32, words: &str) {
    // A sync, and with it the check, comes every 2 s.
    let status = wait(child.release(), Duration::from_secs(20));
    let said = std::fs::read_to_string(err).unwrap();
    assert_eq!(status.code(), Some(code), "{said}");
    assert!(said.contains(words), "says {words:?}: {said}");
}

#[test]
fn a_log_truncated_or_deleted_while_recording_stops_the_run_with_exit_1() {
    let tmp = scratch("tampered");
    let dir = tmp.path();
    let err = dir.join("messages.txt");
    let log = dir.join("truncated.csv");
    let child = recording(&log, &err);
    std::fs::OpenOptions::new()
        .write(true)
        .open(&log)
        .unwrap()
        .set_len(10)
        .unwrap();
    ended_with(child, &err, 1, "was truncated while recording");

    let log = dir.join("deleted.csv");
    let child = recording(&log, &err);
    std::fs::remove_file(&log).unwrap();
    ended_with(child, &err, 1, "was deleted while recording");

    let log = dir.join("replaced.csv");
    let child = recording(&log, &err);
    std::fs::rename(&log, dir.join("elsewhere.csv")).unwrap();
    std::fs::write(&log, "another file\n").unwrap();
    ended_with(child, &err, 1, "was moved or replaced while recording");
}

#[test]
fn an_existing_output_is_refused_and_a_full_disk_is_an_error() {
    let tmp = scratch("outputs");
    let dir = tmp.path();
    let out = dir.join("exists.csv");
    std::fs::write(&out, "keep me\n").unwrap();
    let refused = &mut bin();
    refused
        .args([
            "record",
            "--demo",
            "--fast",
            "--duration",
            "1s",
            "--out",
            out.to_str().unwrap(),
        ])
        .stdin(Stdio::null());
    let refused = output(refused);
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stderr).contains("--append"));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "keep me\n");
    let full = &mut bin();
    full.args([
        "record",
        "--demo",
        "--fast",
        "--duration",
        "30s",
        "--force",
        "--out",
        "/dev/full",
    ]);
    let full = output(full);
    assert_eq!(
        full.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&full.stderr)
    );
    assert!(String::from_utf8_lossy(&full.stderr).contains("cannot write to /dev/full"));
}

// Source: the rule of issue 16 and record's own (src/cli/files.rs `refuse_existing`):
// an existing log is refused with exit 2 unless --append or --force, and `watch` checks
// it before the screen opens. Run without a terminal, watch would otherwise stop at
// "watch needs a terminal", so the message shows which check came first.
#[test]
fn watch_refuses_an_existing_log_before_the_screen_opens() {
    let tmp = scratch("watch-existing-log");
    let dir = tmp.path();
    let log = dir.join("kept.csv");
    std::fs::write(&log, "earlier rows\n").unwrap();
    let out = output(bin().args(["watch", "--demo", "--log", log.to_str().unwrap()]));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("kept.csv already exists; add --append to add to it or --force"),
        "{stderr}"
    );
    assert_eq!(std::fs::read_to_string(&log).unwrap(), "earlier rows\n");
    // With either flag the log is let through, to the terminal check.
    for flag in ["--append", "--force"] {
        let out = output(bin().args(["watch", "--demo", "--log", log.to_str().unwrap(), flag]));
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            stderr.contains("watch needs a terminal"),
            "{flag}: {stderr}"
        );
    }
    assert_eq!(std::fs::read_to_string(&log).unwrap(), "earlier rows\n");
}

#[test]
fn unwritable_outputs_fail_with_exit_1_and_a_clear_message() {
    let tmp = scratch("unwritable");
    let dir = tmp.path();
    let cases = [
        ("/dev/full".to_string(), 1, "cannot write to /dev/full"),
        (
            dir.join("no/such/dir/out.csv").display().to_string(),
            1,
            "no/such/dir/out.csv",
        ),
    ];
    for (path, code, want) in cases {
        let out = output(
            bin()
                .args(["record", "--demo", "--fast", "--duration", "30s", "--force"])
                .args(["--out", &path]),
        );
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{path}: {stderr}");
        assert!(stderr.contains(want), "{path}: `{stderr}` lacks `{want}`");
    }
}
