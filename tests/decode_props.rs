//! Property tests of the wire decoders: no input panics them, valid data after garbage is
//! recovered, and how the bytes are split across reads never changes what is decoded.

use dbtrail::decode::{encode_ascii, encode_binary, Decoder, Format, Frame};
use proptest::prelude::*;

fn decode_chunks(format: Format, chunks: &[&[u8]]) -> (Vec<Frame>, dbtrail::decode::DecodeStats) {
    let mut d = Decoder::new(format);
    let mut out = Vec::new();
    for c in chunks {
        d.feed(c, &mut out);
    }
    d.finish(&mut out);
    (out, d.stats())
}

fn ascii_stream(samples: &[Vec<u32>]) -> Vec<u8> {
    let mut bytes = b"# board banner\r\n".to_vec();
    for s in samples {
        encode_ascii(s, &mut bytes);
    }
    bytes
}

fn binary_stream(samples: &[Vec<u16>]) -> Vec<u8> {
    let mut bytes = Vec::new();
    for (seq, s) in samples.iter().enumerate() {
        encode_binary(seq as u16, s, &mut bytes);
    }
    bytes
}

fn samples_u32(channels: usize) -> impl Strategy<Value = Vec<Vec<u32>>> {
    proptest::collection::vec(proptest::collection::vec(0u32..1_000_000, channels), 1..40)
}

fn samples_u16(channels: usize) -> impl Strategy<Value = Vec<Vec<u16>>> {
    proptest::collection::vec(proptest::collection::vec(any::<u16>(), channels), 1..40)
}

fn as_counts(frames: &[Frame]) -> Vec<Vec<u32>> {
    frames.iter().map(|f| f.counts().to_vec()).collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    // The word-at-a-time path for one-number lines must agree with plain parsing, for any
    // number of digits and either line end, wherever the reads are cut.
    #[test]
    fn single_channel_lines_decode_exactly(values in proptest::collection::vec(any::<u32>(), 1..300), crlf in any::<bool>(), cut in 0usize..4000) {
        let end = if crlf { "\r\n" } else { "\n" };
        let text: String = values.iter().map(|v| format!("{v}{end}")).collect();
        let bytes = text.as_bytes();
        let cut = cut.min(bytes.len());
        let (frames, stats) = decode_chunks(Format::Ascii, &[&bytes[..cut], &bytes[cut..]]);
        let want: Vec<Vec<u32>> = values.iter().map(|v| vec![*v]).collect();
        prop_assert_eq!(as_counts(&frames), want);
        prop_assert_eq!(stats.bad_lines, 0);
        let mut flat = dbtrail::decode::FlatCounts::default();
        let mut d = Decoder::new(Format::Ascii);
        d.feed(bytes, &mut flat);
        d.finish(&mut flat);
        prop_assert_eq!(flat.counts, values);
    }

    #[test]
    fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..4096), cut in 0usize..4096) {
        let cut = cut.min(bytes.len());
        for format in [Format::Auto, Format::Ascii, Format::Binary] {
            let (frames, stats) = decode_chunks(format, &[&bytes[..cut], &bytes[cut..]]);
            prop_assert_eq!(frames.len() as u64, stats.frames);
        }
    }

    #[test]
    fn ascii_samples_after_garbage_are_recovered(
        garbage in proptest::collection::vec(any::<u8>().prop_map(|b| if b == b'\n' || b == b'\r' { b'x' } else { b }), 0..6000),
        junk_at in any::<usize>(), channels in 1usize..4, samples in samples_u32(2),
    ) {
        let samples: Vec<Vec<u32>> = samples.iter().map(|s| s.iter().cycle().take(channels).copied().collect()).collect();
        // Random bytes can spell a valid line ("0"); one letter somewhere makes the line garbage.
        let mut bytes = garbage;
        bytes.insert(junk_at % (bytes.len() + 1), b'x');
        bytes.push(b'\n');
        bytes.extend(ascii_stream(&samples));
        let (frames, _) = decode_chunks(Format::Ascii, &[&bytes]);
        prop_assert_eq!(as_counts(&frames), samples);
    }

    #[test]
    fn binary_frames_after_garbage_are_recovered(
        garbage in proptest::collection::vec(any::<u8>().prop_filter("no sync byte", |b| *b != 0xA5), 0..600),
        samples in samples_u16(2),
    ) {
        let mut bytes = garbage;
        bytes.extend(binary_stream(&samples));
        let (frames, stats) = decode_chunks(Format::Binary, &[&bytes]);
        let want: Vec<Vec<u32>> = samples.iter().map(|s| s.iter().map(|&c| u32::from(c)).collect()).collect();
        prop_assert_eq!(as_counts(&frames), want);
        prop_assert_eq!(stats.crc_errors, 0);
    }

    #[test]
    fn flipped_bits_lose_only_the_damaged_frames(samples in samples_u16(1), flips in proptest::collection::vec((any::<usize>(), 0u8..8), 1..4)) {
        let clean = binary_stream(&samples);
        let mut bytes = clean.clone();
        let frame_len = clean.len() / samples.len();
        for (at, bit) in flips {
            let at = at % bytes.len();
            bytes[at] ^= 1 << bit;
        }
        // Two flips of the same bit undo each other: a frame is damaged when its bytes differ.
        let damaged: std::collections::BTreeSet<usize> =
            (0..bytes.len()).filter(|&i| bytes[i] != clean[i]).map(|i| i / frame_len).collect();
        let (frames, _) = decode_chunks(Format::Binary, &[&bytes]);
        let kept: Vec<Vec<u32>> = samples
            .iter()
            .enumerate()
            .filter(|(i, _)| !damaged.contains(i))
            .map(|(_, s)| s.iter().map(|&c| u32::from(c)).collect())
            .collect();
        // Every undamaged frame survives; a damaged one is never read as a wrong value
        // (a flip that still passes the CRC is vanishingly rare and would show up here).
        let got = as_counts(&frames);
        prop_assert_eq!(got, kept);
    }

    // Source: the decoder's own general path is the reference: fed a byte at a time, no
    // word-at-a-time reading can happen. Runs of lines of one shape (the fast path checks
    // lines against the last shape, a line or a block of lines at a time) broken, often
    // or rarely, by lines of other lengths and line ends, junk, comments and numbers too
    // long for a word must decode the same when fed whole.
    #[test]
    fn lines_of_a_steady_shape_with_odd_ones_decode_as_the_general_path(
        digits in 1usize..9, crlf in any::<bool>(), kinds in 20u8..255,
        lines in proptest::collection::vec((any::<u8>(), any::<u32>()), 1..600),
    ) {
        let end = if crlf { "\r\n" } else { "\n" };
        let text: String = lines.iter().map(|&(kind, v)| match kind % kinds {
            0 => format!("{}\n", v % 100),
            1 => format!("{v}\r\n"),
            2 => format!("{}a\n", v % 1000),
            3 => "# note\n".to_string(),
            4 => format!("{:0w$}\r", v % 10, w = digits),
            5 => format!("{v}{v}\n"),
            _ => format!("{:0w$}{end}", u64::from(v) % 10u64.pow(digits as u32), w = digits),
        }).collect();
        let bytes = text.as_bytes();
        let (whole, whole_stats) = decode_chunks(Format::Ascii, &[bytes]);
        let single: Vec<&[u8]> = bytes.chunks(1).collect();
        let (by_byte, by_byte_stats) = decode_chunks(Format::Ascii, &single);
        prop_assert_eq!(as_counts(&whole), as_counts(&by_byte));
        prop_assert_eq!(whole_stats, by_byte_stats);
    }

    #[test]
    fn split_points_never_change_the_result(samples in samples_u32(2), binary in any::<bool>(), auto in any::<bool>()) {
        let bytes = if binary {
            binary_stream(&samples.iter().map(|s| s.iter().map(|&c| (c % 65536) as u16).collect()).collect::<Vec<_>>())
        } else {
            ascii_stream(&samples)
        };
        let format = match (auto, binary) {
            (true, _) => Format::Auto,
            (false, true) => Format::Binary,
            (false, false) => Format::Ascii,
        };
        let (whole, whole_stats) = decode_chunks(format, &[&bytes]);
        prop_assert_eq!(whole.len(), samples.len());
        for cut in 0..=bytes.len() {
            let (split, stats) = decode_chunks(format, &[&bytes[..cut], &bytes[cut..]]);
            prop_assert_eq!(&split, &whole, "cut at {}", cut);
            prop_assert_eq!(stats, whole_stats);
        }
        let single: Vec<&[u8]> = bytes.chunks(1).collect();
        prop_assert_eq!(decode_chunks(format, &single).0, whole);
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    // Lines near the length limit, junk and numbers mixed: wherever the reads are cut, the
    // same samples come out (a case the fuzz campaign found: a line just over the limit
    // was read whole in one read and discarded when cut).
    #[test]
    fn lines_near_the_length_limit_decode_the_same_however_cut(
        parts in proptest::collection::vec(0u8..4, 1..8),
        extra in 0usize..4,
        cut in any::<prop::sample::Index>(),
    ) {
        let limit = dbtrail::decode::MAX_LINE;
        let mut bytes = Vec::new();
        for (i, kind) in parts.iter().enumerate() {
            match kind {
                0 => bytes.extend(std::iter::repeat_n(b'#', limit - 2 + extra)),
                1 => bytes.extend_from_slice(format!("{}", 1000 + i).as_bytes()),
                2 => bytes.extend_from_slice(b"\xff\xfe junk"),
                _ => bytes.extend_from_slice(format!("{i}, {i}").as_bytes()),
            }
            bytes.push(b'\n');
        }
        let cut = cut.index(bytes.len() + 1);
        let (whole, _) = decode_chunks(Format::Ascii, &[&bytes]);
        let (split, _) = decode_chunks(Format::Ascii, &[&bytes[..cut], &bytes[cut..]]);
        prop_assert_eq!(whole, split);
    }
}

/// Inputs the fuzz campaigns (fuzz/) found, kept so they stay fixed.
mod fuzz_regressions {
    use super::*;

    /// The cut rule of the decode fuzz targets: the first byte picks where the rest is cut.
    fn whole_and_split(data: &[u8], format: Format) -> (Vec<Frame>, Vec<Frame>) {
        let (&cut, bytes) = data.split_first().unwrap();
        let cut = usize::from(cut) * bytes.len() / 256;
        let (whole, _) = decode_chunks(format, &[bytes]);
        let (split, _) = decode_chunks(format, &[&bytes[..cut], &bytes[cut..]]);
        (whole, split)
    }

    #[test]
    fn a_held_line_is_the_same_however_the_reads_are_cut() {
        let data = include_bytes!("fuzz_regressions/decode_ascii_held_line_split.bin");
        let (whole, split) = whole_and_split(data, Format::Ascii);
        assert_eq!(whole, split);
    }
}
