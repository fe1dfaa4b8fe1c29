//! Runs tests/tui_smoke.sh (the live screen in tmux: a reading and its ±, the quit key,
//! the terminal restored). Part of the real-time group
//! (`cargo test --features realtime-tests --test 'realtime_*'`). Without tmux it skips on
//! a developer's machine, and fails in CI (CI=true), where .ci/run installs tmux: a
//! missing tool must not pass unseen.

use std::process::Command;

#[test]
fn watch_in_tmux_shows_a_reading_with_its_uncertainty_quits_and_restores_the_terminal() {
    if Command::new("tmux").arg("-V").output().is_err() {
        assert!(
            std::env::var("CI").as_deref() != Ok("true"),
            "tmux is not installed, and in CI the live-screen smoke test may not skip: \
             install tmux (.ci/run does, with apt-get)"
        );
        eprintln!("tmux is not installed: skipping the live-screen smoke test");
        return;
    }
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/tui_smoke.sh");
    let out = Command::new("bash")
        .arg(script)
        .arg(env!("CARGO_BIN_EXE_dbtrail"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}
