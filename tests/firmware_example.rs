//! The example firmware in docs/firmware/ must speak the protocol dbtrail decodes: it is
//! built with the C compiler for each mode and channel count, run on a stand-in board,
//! and its output decoded.

mod common;

use std::path::Path;
use std::process::Command;

use dbtrail::decode::{Decoder, Format};

fn build_and_run(binary_mode: bool, channels: u8) -> Vec<u8> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let firmware =
        std::fs::read_to_string(root.join("docs/firmware/example_detector_board.c")).unwrap();
    let firmware = firmware
        .replace(
            "#define CHANNELS      1",
            &format!("#define CHANNELS      {channels}"),
        )
        .replace(
            "#define BINARY_MODE   0",
            &format!("#define BINARY_MODE   {}", u8::from(binary_mode)),
        );
    let tmp = common::scratch(&format!("firmware-{binary_mode}-{channels}"));
    let dir = tmp.path();
    let source = dir.join("example_detector_board.c");
    std::fs::write(&source, firmware).unwrap();
    let exe = dir.join("example_detector_board");
    let built = Command::new("cc")
        .args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-o"])
        .arg(&exe)
        .arg(&source)
        .arg(root.join("tests/firmware/board_stub.c"))
        .output()
        .expect("a C compiler (cc) is installed");
    assert!(
        built.status.success(),
        "{}",
        String::from_utf8_lossy(&built.stderr)
    );
    let run = Command::new(&exe).output().unwrap();
    assert!(run.status.success());
    run.stdout
}

#[test]
fn the_example_firmware_speaks_both_modes() {
    for (binary, channels) in [(false, 1), (false, 2), (true, 1), (true, 2)] {
        let bytes = build_and_run(binary, channels);
        let mut decoder = Decoder::new(Format::Auto);
        let mut frames = Vec::new();
        decoder.feed(&bytes, &mut frames);
        decoder.finish(&mut frames);
        let want_format = if binary {
            Format::Binary
        } else {
            Format::Ascii
        };
        assert_eq!(decoder.format(), Some(want_format));
        let stats = decoder.stats();
        assert_eq!(
            (stats.bad_lines, stats.crc_errors, stats.dropped_frames),
            (0, 0, 0)
        );
        assert_eq!(frames.len(), 6, "binary {binary}, {channels} channels");
        for (i, frame) in frames.iter().enumerate() {
            let want: Vec<u32> = (0..u32::from(channels))
                .map(|ch| 1001 + 100 * ch + i as u32)
                .collect();
            assert_eq!(frame.counts(), want);
        }
    }
}
