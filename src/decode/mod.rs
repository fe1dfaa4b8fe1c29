//! The wire protocol between a detector's microcontroller and dbtrail: decoders for the
//! ASCII and binary modes, recognition of which one a stream uses, and the matching
//! encoders (for the simulator and for tests). The byte layout is in docs/protocol.md.
//!
//! ASCII: one sample per line, one or more channels as decimal integers separated by comma,
//! space or tab; CR, LF or CRLF ends a line; `#` starts a comment line. Anything else is a
//! bad line, counted and never turned into a reading. A line longer than [`MAX_LINE`] bytes
//! is discarded and counted, so memory stays bounded.
//!
//! Binary frame: `A5 5A | seq u16 | n u8 | n × count u16 | crc u16`, little-endian, the CRC
//! being CRC-16/CCITT-FALSE over `seq`, `n` and the counts. A damaged frame is counted and
//! the decoder resynchronises on the next sync pattern; gaps in `seq` count dropped frames.

use std::ops::AddAssign;

use crc::{Crc, CRC_16_IBM_3740};

/// The most channels one sample carries.
pub const MAX_CHANNELS: usize = 8;
/// The longest ASCII line kept; longer lines are discarded.
pub const MAX_LINE: usize = 4096;
/// The two bytes that open a binary frame.
pub const SYNC: [u8; 2] = [0xA5, 0x5A];
/// Bytes in a binary frame besides its counts: sync, seq, n, crc.
const FRAME_OVERHEAD: usize = 7;
/// The longest binary frame.
pub const MAX_FRAME: usize = FRAME_OVERHEAD + 2 * MAX_CHANNELS;
/// How many bytes `Format::Auto` looks at before it must decide.
pub const AUTO_PROBE: usize = 512;

/// CRC-16/CCITT-FALSE (poly 0x1021, init 0xFFFF), named CRC-16/IBM-3740 in the catalogue.
pub const FRAME_CRC: Crc<u16> = Crc::<u16>::new(&CRC_16_IBM_3740);

/// One sample of raw ADC counts, one per channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Frame {
    counts: [u32; MAX_CHANNELS],
    channels: u8,
}

impl Frame {
    /// A frame from counts; None when there are none or more than [`MAX_CHANNELS`].
    pub fn new(counts: &[u32]) -> Option<Self> {
        if counts.is_empty() || counts.len() > MAX_CHANNELS {
            return None;
        }
        let mut frame = Frame {
            counts: [0; MAX_CHANNELS],
            channels: counts.len() as u8,
        };
        frame.counts[..counts.len()].copy_from_slice(counts);
        Some(frame)
    }

    /// The counts, one per channel.
    pub fn counts(&self) -> &[u32] {
        &self.counts[..usize::from(self.channels)]
    }

    /// How many channels.
    pub fn channels(&self) -> usize {
        usize::from(self.channels)
    }
}

/// What a decoder has seen, as counters that add.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct DecodeStats {
    /// Samples decoded.
    pub frames: u64,
    /// ASCII lines that were not a sample or a comment.
    pub bad_lines: u64,
    /// ASCII lines discarded for being longer than [`MAX_LINE`].
    pub long_lines: u64,
    /// ASCII comment or banner lines.
    pub comments: u64,
    /// Binary frames whose CRC did not match.
    pub crc_errors: u64,
    /// Binary frames missing according to the sequence counter.
    pub dropped_frames: u64,
    /// Bytes skipped while looking for a binary frame's sync pattern.
    pub skipped_bytes: u64,
}

impl DecodeStats {
    /// Lines and frames refused: bad lines, over-long lines and frames with a bad CRC.
    pub fn rejected(&self) -> u64 {
        self.bad_lines + self.long_lines + self.crc_errors
    }
}

impl AddAssign for DecodeStats {
    fn add_assign(&mut self, o: Self) {
        self.frames += o.frames;
        self.bad_lines += o.bad_lines;
        self.long_lines += o.long_lines;
        self.comments += o.comments;
        self.crc_errors += o.crc_errors;
        self.dropped_frames += o.dropped_frames;
        self.skipped_bytes += o.skipped_bytes;
    }
}

/// Where a decoder puts the samples it finds.
pub trait FrameSink {
    /// Takes one sample.
    fn push_frame(&mut self, frame: &Frame);

    /// Takes one sample of one channel.
    #[inline]
    fn push_single(&mut self, count: u32) {
        if let Some(frame) = Frame::new(&[count]) {
            self.push_frame(&frame);
        }
    }

    /// Takes one sample of one channel per count.
    #[inline]
    fn push_singles(&mut self, counts: &[u32]) {
        for &count in counts {
            self.push_single(count);
        }
    }

    /// Takes one sample as it lies in a binary frame: 1 to [`MAX_CHANNELS`] counts, two
    /// bytes each, little-endian.
    #[inline]
    fn push_le_counts(&mut self, bytes: &[u8]) {
        let mut frame = Frame {
            counts: [0; MAX_CHANNELS],
            channels: (bytes.len() / 2) as u8,
        };
        for (slot, pair) in frame.counts.iter_mut().zip(bytes.chunks_exact(2)) {
            *slot = u32::from(u16::from_le_bytes([pair[0], pair[1]]));
        }
        self.push_frame(&frame);
    }
}

impl FrameSink for Vec<Frame> {
    fn push_frame(&mut self, frame: &Frame) {
        self.push(*frame);
    }
}

/// Samples laid end to end, channel by channel: compact for fast paths. Every sample takes
/// the channel count of the first; a later sample with more channels is cut to it, one
/// with fewer is padded with zeros (ASCII decoding already refuses such lines).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FlatCounts {
    /// Channels per sample (0 before the first).
    pub channels: usize,
    /// The counts, `channels` per sample.
    pub counts: Vec<u32>,
}

impl FlatCounts {
    /// Samples held.
    pub fn len(&self) -> usize {
        self.counts.len().checked_div(self.channels).unwrap_or(0)
    }

    /// True when no sample is held.
    pub fn is_empty(&self) -> bool {
        self.counts.is_empty()
    }
}

impl FrameSink for FlatCounts {
    #[inline]
    fn push_singles(&mut self, counts: &[u32]) {
        if self.channels == 1 {
            self.counts.extend_from_slice(counts);
        } else {
            counts.iter().for_each(|&count| self.push_single(count));
        }
    }

    #[inline]
    fn push_single(&mut self, count: u32) {
        if self.channels == 1 {
            self.counts.push(count);
        } else if let Some(frame) = Frame::new(&[count]) {
            self.push_frame(&frame);
        }
    }

    #[inline]
    fn push_le_counts(&mut self, bytes: &[u8]) {
        if let (1, &[lo, hi]) = (self.channels, bytes) {
            self.counts.push(u32::from(u16::from_le_bytes([lo, hi])));
            return;
        }
        if self.counts.is_empty() {
            self.channels = bytes.len() / 2;
        }
        let have = bytes.len() / 2;
        for pair in bytes.chunks_exact(2).take(self.channels) {
            self.counts
                .push(u32::from(u16::from_le_bytes([pair[0], pair[1]])));
        }
        for _ in have..self.channels {
            self.counts.push(0);
        }
    }

    fn push_frame(&mut self, frame: &Frame) {
        if self.counts.is_empty() {
            self.channels = frame.channels();
        }
        let counts = frame.counts();
        for ch in 0..self.channels {
            self.counts.push(counts.get(ch).copied().unwrap_or(0));
        }
    }
}

/// Which mode a stream uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Recognise it from the first bytes.
    Auto,
    /// Text lines.
    Ascii,
    /// Binary frames.
    Binary,
}

impl Format {
    /// The format for a name: `auto`, `ascii` or `binary`.
    pub fn from_name(name: &str) -> Option<Self> {
        match name {
            "auto" => Some(Format::Auto),
            "ascii" => Some(Format::Ascii),
            "binary" => Some(Format::Binary),
            _ => None,
        }
    }
}

mod ascii;
mod binary;

pub use ascii::AsciiDecoder;
pub use binary::{frame_grid, frames_ahead, BinaryDecoder, FramesAhead};

/// A decoder for either mode, recognising the mode first when asked to.
#[derive(Debug, Clone)]
pub struct Decoder {
    /// The mode asked for: `Auto` goes back to recognising it on a resync.
    format: Format,
    state: State,
    stats: DecodeStats,
    joined_midway: bool,
}

#[derive(Debug, Clone)]
enum State {
    Probing(Vec<u8>),
    Ascii(AsciiDecoder),
    Binary(BinaryDecoder),
}

impl Decoder {
    /// A decoder for `format`.
    pub fn new(format: Format) -> Self {
        let state = match format {
            Format::Auto => State::Probing(Vec::with_capacity(AUTO_PROBE)),
            Format::Ascii => State::Ascii(AsciiDecoder::new()),
            Format::Binary => State::Binary(BinaryDecoder::new()),
        };
        Decoder {
            format,
            state,
            stats: DecodeStats::default(),
            joined_midway: false,
        }
    }

    /// The mode in use, once known.
    pub fn format(&self) -> Option<Format> {
        match self.state {
            State::Probing(_) => None,
            State::Ascii(_) => Some(Format::Ascii),
            State::Binary(_) => Some(Format::Binary),
        }
    }

    /// Counters so far.
    pub fn stats(&self) -> DecodeStats {
        self.stats
    }

    /// Decodes `bytes`, appending samples to `out`.
    pub fn feed(&mut self, bytes: &[u8], out: &mut impl FrameSink) {
        match &mut self.state {
            State::Ascii(d) => d.feed(bytes, &mut self.stats, out),
            State::Binary(d) => d.feed(bytes, &mut self.stats, out),
            State::Probing(probe) => {
                probe.extend_from_slice(bytes);
                if let Some(format) = recognise(probe, false) {
                    self.adopt_format(format, out);
                }
            }
        }
    }

    /// Takes the frames [`frames_ahead`] scanned from `part`, the bytes that come next in
    /// the stream, when feeding them would have done just that: the decoder is in binary
    /// mode and holds no cut frame. Otherwise it returns false, changes nothing, and the
    /// bytes must be fed. Frames lost between the last frame and the part's first are
    /// counted here, where the last sequence number is known.
    pub fn accept_ahead(&mut self, ahead: &FramesAhead, part: &[u8]) -> bool {
        match &mut self.state {
            State::Binary(d) => d.accept_ahead(ahead, part, &mut self.stats),
            _ => false,
        }
    }

    /// Ends the stream, decoding whatever is left.
    pub fn finish(&mut self, out: &mut impl FrameSink) {
        if let State::Probing(probe) = &self.state {
            let format = recognise(probe, true).unwrap_or(Format::Ascii);
            self.adopt_format(format, out);
        }
        match &mut self.state {
            State::Ascii(d) => d.finish(&mut self.stats, out),
            State::Binary(d) => d.finish(&mut self.stats),
            State::Probing(_) => {}
        }
    }

    /// Starts again on a stream joined part-way (a port just opened or reopened): partial
    /// data is dropped and, in ASCII, the first line, probably cut, is skipped. What was
    /// learned from the stream is forgotten, for the device may have been replugged or
    /// set up anew: under `auto` the mode is recognised again, and ASCII lines may bring
    /// another channel count.
    pub fn resync(&mut self) {
        match (&mut self.state, self.format) {
            (State::Ascii(d), Format::Ascii) => d.resync(),
            (State::Binary(d), Format::Binary) => d.resync(),
            (state, _) => *state = State::Probing(Vec::with_capacity(AUTO_PROBE)),
        }
        self.joined_midway = true;
    }

    fn adopt_format(&mut self, format: Format, out: &mut impl FrameSink) {
        let State::Probing(probe) =
            std::mem::replace(&mut self.state, State::Ascii(AsciiDecoder::new()))
        else {
            return;
        };
        self.state = match format {
            Format::Binary => State::Binary(BinaryDecoder::new()),
            _ => {
                let mut ascii = AsciiDecoder::new();
                if self.joined_midway {
                    ascii.resync();
                }
                State::Ascii(ascii)
            }
        };
        self.feed(&probe, out);
    }
}

/// Which mode `probe` is in, if it can be told yet (or must be, at the end of a stream).
/// Text never holds the byte 0xA5, so one frame with a good CRC settles it as binary.
fn recognise(probe: &[u8], at_end: bool) -> Option<Format> {
    let mut scratch = BinaryDecoder::new();
    let mut stats = DecodeStats::default();
    let mut frames = Vec::new();
    scratch.feed(probe, &mut stats, &mut frames);
    let line_ends = probe.iter().filter(|&&b| b == b'\n' || b == b'\r').count();
    if frames.len() >= 2 {
        Some(Format::Binary)
    } else if frames.is_empty() && line_ends >= 3 && !probe.contains(&SYNC[0]) {
        Some(Format::Ascii)
    } else if probe.len() >= AUTO_PROBE || at_end {
        Some(if frames.is_empty() {
            Format::Ascii
        } else {
            Format::Binary
        })
    } else {
        None
    }
}

/// Appends one ASCII sample line (`12,340\n`) to `out`.
pub fn encode_ascii(counts: &[u32], out: &mut Vec<u8>) {
    for (i, c) in counts.iter().enumerate() {
        if i > 0 {
            out.push(b',');
        }
        out.extend_from_slice(c.to_string().as_bytes());
    }
    out.push(b'\n');
}

/// Appends one binary frame to `out`. Counts above 65535 are clamped to 65535.
pub fn encode_binary(seq: u16, counts: &[u16], out: &mut Vec<u8>) {
    let start = out.len();
    out.extend_from_slice(&SYNC);
    out.extend_from_slice(&seq.to_le_bytes());
    out.push(counts.len() as u8);
    for c in counts {
        out.extend_from_slice(&c.to_le_bytes());
    }
    let crc = FRAME_CRC.checksum(&out[start + 2..]);
    out.extend_from_slice(&crc.to_le_bytes());
}

#[cfg(test)]
mod tests {
    use super::*;

    fn decode(format: Format, bytes: &[u8]) -> (Vec<Frame>, DecodeStats) {
        let mut d = Decoder::new(format);
        let mut out = Vec::new();
        d.feed(bytes, &mut out);
        d.finish(&mut out);
        (out, d.stats())
    }

    fn counts(frames: &[Frame]) -> Vec<Vec<u32>> {
        frames.iter().map(|f| f.counts().to_vec()).collect()
    }

    // Source: the CRC catalogue (../shared/REFERENCES.md): CRC-16/CCITT-FALSE of "123456789"
    // is 0x29B1.
    #[test]
    fn crc_check_value() {
        assert_eq!(FRAME_CRC.checksum(b"123456789"), 0x29B1);
    }

    // Source: docs/protocol.md's worked example, its CRC computed independently by the
    // bitwise CRC-16/CCITT-FALSE algorithm (poly 0x1021, init 0xFFFF) in Python.
    #[test]
    fn protocol_document_example() {
        let mut frame = Vec::new();
        encode_binary(7, &[1234, 567], &mut frame);
        assert_eq!(
            frame,
            [0xA5, 0x5A, 0x07, 0x00, 0x02, 0xD2, 0x04, 0x37, 0x02, 0xE2, 0x89]
        );
    }

    #[test]
    fn ascii_separators_line_ends_and_comments() {
        let text = b"# dbtrail example board v1\r\n12,340\r\n13 341\n14\t342\r15 , 343\n\n16,344";
        let (frames, stats) = decode(Format::Ascii, text);
        assert_eq!(
            counts(&frames),
            [[12, 340], [13, 341], [14, 342], [15, 343], [16, 344]]
        );
        assert_eq!(stats.comments, 1);
        assert_eq!(stats.bad_lines, 0);
    }

    #[test]
    fn ascii_bad_lines_are_counted_not_read() {
        let text = b"100\n-5\n12a\n1,,2\n3,\n99999999999\nhello\n1,2\n101\n";
        let (frames, stats) = decode(Format::Ascii, text);
        assert_eq!(counts(&frames), [[100], [101]]);
        // -5, 12a, 1,,2, 3, (trailing comma), overflow, hello, and 1,2 (channel count changed)
        assert_eq!(stats.bad_lines, 7);
    }

    #[test]
    fn binary_frames_sequence_gaps_and_corruption() {
        let mut bytes = Vec::new();
        encode_binary(0, &[100, 200], &mut bytes);
        encode_binary(1, &[101, 201], &mut bytes);
        let damaged = bytes.len();
        encode_binary(2, &[102, 202], &mut bytes);
        bytes[damaged + 6] ^= 0x10;
        encode_binary(5, &[105, 205], &mut bytes);
        let (frames, stats) = decode(Format::Binary, &bytes);
        assert_eq!(counts(&frames), [[100, 200], [101, 201], [105, 205]]);
        assert_eq!(stats.crc_errors, 1);
        // Frames 2 (damaged), 3 and 4 are missing from the sequence.
        assert_eq!(stats.dropped_frames, 3);
    }

    #[test]
    fn a_stream_joined_midway_skips_its_cut_first_line() {
        for format in [Format::Auto, Format::Ascii] {
            let mut d = Decoder::new(format);
            d.resync();
            let mut out = Vec::new();
            d.feed(b"23\n1024\n1025\n1026\n", &mut out);
            d.finish(&mut out);
            assert_eq!(counts(&out), [[1024], [1025], [1026]], "{format:?}");
        }
    }

    // Source: the rule in docs/protocol.md ("Joining a stream"): a port opened again learns
    // the stream afresh, so a device replugged with another channel count, or another
    // mode under `auto`, is read rather than refused line by line.
    #[test]
    fn a_rejoined_stream_learns_its_channel_count_and_mode_again() {
        for format in [Format::Auto, Format::Ascii] {
            let mut d = Decoder::new(format);
            let mut out = Vec::new();
            d.resync();
            d.feed(b"# one channel\n1000\n1001\n1002\n", &mut out);
            d.resync();
            d.feed(b"# two channels\n812,40\n813,41\n814,42\n", &mut out);
            d.finish(&mut out);
            assert_eq!(
                counts(&out),
                [
                    vec![1000],
                    vec![1001],
                    vec![1002],
                    vec![812, 40],
                    vec![813, 41],
                    vec![814, 42]
                ],
                "{format:?}"
            );
            assert_eq!(d.stats().bad_lines, 0, "{format:?}");
        }
        let mut d = Decoder::new(Format::Auto);
        let mut out = Vec::new();
        d.feed(b"# text first\n1000\n1001\n1002\n", &mut out);
        d.resync();
        let mut frames = Vec::new();
        for seq in 0..4 {
            encode_binary(seq, &[2000 + seq], &mut frames);
        }
        d.feed(&frames, &mut out);
        d.finish(&mut out);
        assert_eq!(
            counts(&out),
            [[1000], [1001], [1002], [2000], [2001], [2002], [2003]]
        );
        assert_eq!(d.format(), Some(Format::Binary));
    }

    #[test]
    fn auto_recognises_each_mode() {
        let mut bin = Vec::new();
        for i in 0..10 {
            encode_binary(i, &[i * 3], &mut bin);
        }
        let (frames, _) = decode(Format::Auto, &bin);
        assert_eq!(frames.len(), 10);
        let (frames, _) = decode(Format::Auto, b"1\n2\n3\n4\n");
        assert_eq!(counts(&frames), [[1], [2], [3], [4]]);
    }
}
