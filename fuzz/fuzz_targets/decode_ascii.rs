//! Any bytes through the ascii decoder; the checks are in decode_check.rs.
#![no_main]

#[path = "decode_check.rs"]
mod decode_check;

use dbtrail::decode::Format;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| decode_check::check(Format::Ascii, data));
