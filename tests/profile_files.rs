//! What the commands that load a profile do with a path that is no profile file (a FIFO,
//! a device, a file far over the size limit) and with a profile that would read wrong.
//! Each must be refused with exit 2 and a message, quickly and in little memory, before
//! anything is written.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

use common::{demo_diode_with_stale_fit, scratch, wait};

/// Address space the binary may use, KiB: a debug build runs every command here in well
/// under 64 MiB, and a read that grows without bound fails here instead of taking the
/// machine's memory.
const ADDRESS_SPACE_KIB: u32 = 128 * 1024;

/// The commands that load a profile, with `{}` where the profile's path goes.
fn commands(dir: &Path) -> Vec<Vec<String>> {
    let out = |name: &str| dir.join(name).display().to_string();
    let with = |args: &[&str]| args.iter().map(|a| a.to_string()).collect::<Vec<_>>();
    vec![
        with(&["check", "{}"]),
        with(&[
            "record",
            "--demo",
            "--fast",
            "--duration",
            "1s",
            "--profile",
            "{}",
            "--out",
            &out("record.csv"),
        ]),
        with(&["sim", "--profile", "{}", "--seconds", "0.1"]),
        with(&[
            "calibrate",
            "--demo",
            "--base",
            "{}",
            "--out",
            &out("cal.toml"),
        ]),
    ]
}

/// Runs the binary under the address-space limit with `profile` in place of `{}`, and
/// waits at most 30 s for it: a command that blocks on the path fails the test.
fn run_limited(dir: &Path, args: &[String], profile: &Path) -> (Option<i32>, String) {
    let args: Vec<String> = args
        .iter()
        .map(|a| a.replace("{}", &profile.display().to_string()))
        .collect();
    let stderr_path = dir.join("stderr.txt");
    let stderr = std::fs::File::create(&stderr_path).unwrap();
    let mut command = Command::new("sh");
    command
        .arg("-c")
        .arg(format!(
            "ulimit -v {ADDRESS_SPACE_KIB} && exec \"$0\" \"$@\""
        ))
        .arg(env!("CARGO_BIN_EXE_dbtrail"))
        .args(&args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(stderr);
    let status = wait(common::spawn(&mut command), Duration::from_secs(30));
    let message = std::fs::read_to_string(&stderr_path).unwrap();
    (status.code(), message)
}

fn assert_refused(dir: &Path, profile: &Path, says: &str) {
    for args in commands(dir) {
        let (code, message) = run_limited(dir, &args, profile);
        assert_eq!(code, Some(2), "{args:?}: {message}");
        assert!(
            message.contains(says),
            "{args:?}: `{message}` lacks `{says}`"
        );
        assert!(!message.contains("panicked"), "{args:?}: {message}");
        for written in ["record.csv", "cal.toml"] {
            assert!(!dir.join(written).exists(), "{args:?} wrote {written}");
        }
    }
}

// Source: the rule in docs/reliability.md: bad input exits 2 with a message naming the
// file and what to do; a profile is a regular file of at most 1 MiB.
#[test]
fn a_fifo_or_a_device_as_the_profile_is_refused_without_blocking() {
    let tmp = scratch("fifo-profile");
    let dir = tmp.path();
    let fifo = dir.join("profile.toml");
    nix::unistd::mkfifo(&fifo, nix::sys::stat::Mode::S_IRWXU).unwrap();
    assert_refused(
        dir,
        &fifo,
        "profile.toml is a FIFO (named pipe), not a regular file",
    );
    assert_refused(
        dir,
        Path::new("/dev/zero"),
        "/dev/zero is a character device, not a regular file",
    );
    assert_refused(dir, dir, "is a folder, not a regular file");
}

// Source: the rule in docs/reliability.md (a profile over 1 MiB is refused before
// parsing): a 200 MB file must be refused reading no more than the limit, so the command
// runs in an address space smaller than the file.
#[test]
fn a_huge_profile_is_refused_reading_no_more_than_the_limit() {
    let tmp = scratch("huge-profile");
    let dir = tmp.path();
    let huge: PathBuf = dir.join("huge.toml");
    let file = std::fs::File::create(&huge).unwrap();
    file.set_len(200 * 1000 * 1000).unwrap();
    assert_refused(
        dir,
        &huge,
        "huge.toml:1:1: (file): the file is 200000000 bytes; a profile is at most 1048576 bytes",
    );
}

// Source: the fit limit in src/detector/mod.rs (a model missing its own points by more
// than 2 dB RMS describes no detector) and the rule in docs/reliability.md (bad input
// exits 2): the demo diode's fitted n and vl kept with vref edited from 1.2 V to 0.6 V
// read every level about 4.4 dB wrong, so every command must refuse the profile.
#[test]
fn a_profile_whose_parameters_miss_its_points_is_refused_by_every_command() {
    let tmp = scratch("stale-fit");
    let dir = tmp.path();
    let stale = dir.join("stale.toml");
    std::fs::write(&stale, demo_diode_with_stale_fit(0.6)).unwrap();
    assert_refused(dir, &stale, "model.n: with n = 1.05");
    let (_, message) = run_limited(dir, &["check".into(), "{}".into()], &stale);
    assert!(
        message.contains("misses its own calibration points by 4.")
            && message.contains("Delete n and vl to fit them again"),
        "{message}"
    );
}
