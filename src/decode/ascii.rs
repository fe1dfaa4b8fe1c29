//! The ASCII mode: lines of decimal counts, with a word-at-a-time path for the plain
//! one-number lines of fast streams.

use super::{DecodeStats, Frame, FrameSink, MAX_CHANNELS, MAX_LINE};

/// Decodes ASCII lines.
#[derive(Debug, Clone, Default)]
pub struct AsciiDecoder {
    line: Vec<u8>,
    discarding: bool,
    skip_partial: bool,
    channels: Option<usize>,
    /// True after a bad or over-long line: the stream may be noise (a wrong baud rate, a
    /// loose wire), where a short run of digits between two line ends happens by chance.
    suspect: bool,
    /// The first good line after a bad one, held until the next line shows the stream is
    /// sound again.
    held: Option<Frame>,
}

impl AsciiDecoder {
    /// A decoder for a stream read from its start.
    pub fn new() -> Self {
        AsciiDecoder {
            line: Vec::with_capacity(256),
            ..Default::default()
        }
    }

    /// Forgets any partial line and the channel count learned, and skips up to the next
    /// line end, as after joining a stream part-way (a reconnect, perhaps of a device now
    /// sending another number of channels).
    pub fn resync(&mut self) {
        self.line.clear();
        self.discarding = false;
        self.skip_partial = true;
        self.suspect = false;
        self.held = None;
        self.channels = None;
    }

    /// Decodes `bytes`, appending samples to `out`.
    pub fn feed(&mut self, mut bytes: &[u8], stats: &mut DecodeStats, out: &mut impl FrameSink) {
        while let Some(end) = self.next_line_end(&mut bytes, stats, out) {
            if self.line.is_empty() && !self.discarding && !self.skip_partial {
                // The same length rule as for a line gathered over several reads.
                if end > MAX_LINE {
                    stats.long_lines += 1;
                    self.distrust(stats);
                } else {
                    self.finish_line(&bytes[..end], stats, out);
                }
            } else {
                self.keep(&bytes[..end]);
                let line = std::mem::take(&mut self.line);
                self.end_line(&line, stats, out);
                self.line = line;
                self.line.clear();
            }
            bytes = &bytes[end + 1..];
        }
        self.keep(bytes);
    }

    /// Where the next line that needs the general path ends. On the way it takes, without
    /// copying or searching, the plain lines of one number and LF that make up most
    /// high-rate streams (the hot path: a few operations per sample).
    #[inline]
    fn next_line_end(
        &mut self,
        bytes: &mut &[u8],
        stats: &mut DecodeStats,
        out: &mut impl FrameSink,
    ) -> Option<usize> {
        if self.on_plain_path() {
            let (used, taken) = plain_lines(bytes, |v| out.push_singles(v));
            self.took_plain(taken, stats);
            *bytes = &bytes[used..];
        }
        memchr::memchr2(b'\n', b'\r', bytes)
    }

    /// True when the next line may be a plain one-number line read in place.
    fn on_plain_path(&self) -> bool {
        self.channels.is_none_or(|n| n == 1)
            && !self.suspect
            && self.line.is_empty()
            && !self.discarding
            && !self.skip_partial
    }

    fn took_plain(&mut self, lines: u64, stats: &mut DecodeStats) {
        if lines > 0 {
            self.channels = Some(1);
            stats.frames += lines;
        }
    }

    /// Ends the stream: a last line without a line end still counts.
    pub fn finish(&mut self, stats: &mut DecodeStats, out: &mut impl FrameSink) {
        if !self.line.is_empty() || self.discarding {
            let line = std::mem::take(&mut self.line);
            self.end_line(&line, stats, out);
        }
        // The stream ended cleanly after the held line: nothing says it is noise.
        if let Some(frame) = self.held.take() {
            self.emit(&frame, stats, out);
        }
    }

    fn keep(&mut self, part: &[u8]) {
        if self.discarding || self.skip_partial {
            return;
        }
        if self.line.len() + part.len() > MAX_LINE {
            self.discarding = true;
            self.line.clear();
        } else {
            self.line.extend_from_slice(part);
        }
    }

    fn end_line(&mut self, line: &[u8], stats: &mut DecodeStats, out: &mut impl FrameSink) {
        if self.skip_partial {
            self.skip_partial = false;
        } else if self.discarding {
            self.discarding = false;
            stats.long_lines += 1;
            self.distrust(stats);
        } else {
            self.finish_line(line, stats, out);
        }
    }

    fn finish_line(&mut self, line: &[u8], stats: &mut DecodeStats, out: &mut impl FrameSink) {
        let line = trim(line);
        if line.is_empty() {
            return;
        }
        if line[0] == b'#' {
            stats.comments += 1;
            return;
        }
        let expected = self.channels.or(self.held.map(|f| f.channels()));
        match parse_counts(line) {
            Some(frame) if expected.is_none_or(|n| n == frame.channels()) => {
                if !self.suspect {
                    self.emit(&frame, stats, out);
                } else if let Some(first) = self.held.take() {
                    self.suspect = false;
                    self.emit(&first, stats, out);
                    self.emit(&frame, stats, out);
                } else {
                    self.held = Some(frame);
                }
            }
            _ => {
                stats.bad_lines += 1;
                self.distrust(stats);
            }
        }
    }

    fn emit(&mut self, frame: &Frame, stats: &mut DecodeStats, out: &mut impl FrameSink) {
        self.channels = Some(frame.channels());
        stats.frames += 1;
        out.push_frame(frame);
    }

    /// After a bad line, a lone good-looking line is as likely chance as data: it is
    /// counted bad too, and the next good line is held.
    fn distrust(&mut self, stats: &mut DecodeStats) {
        if self.held.take().is_some() {
            stats.bad_lines += 1;
        }
        self.suspect = true;
    }
}

/// Takes the plain lines (digits, then LF or CRLF) at the start of `b`, handing the values
/// to `take` in batches, up to the first other line or cut line. Returns where it stopped and the
/// lines taken.
///
/// A fast stream's lines mostly have the same number of digits, so each batch first
/// checks the lines against the shape of the last one searched (masks over one word, and
/// the next line's start known at once); a line of another shape is searched and sets the
/// shape. Lines that keep changing shape finish the batch by search alone.
#[inline]
fn plain_lines(b: &[u8], mut take: impl FnMut(&[u32])) -> (usize, u64) {
    let mut at = 0;
    let mut taken = 0;
    let mut values = [0u32; BATCH];
    let mut shape: Option<LineShape> = None;
    loop {
        let mut n = 0;
        let mut ended = false;
        loop {
            if let Some(shape) = &shape {
                let from = n;
                (n, at) = shape.run(b, at, &mut values, n);
                if n == BATCH || n - from < STEADY_RUN {
                    break;
                }
            }
            let Some((value, used)) = searched_line(b, at) else {
                ended = true;
                break;
            };
            values[n] = value;
            n += 1;
            shape = LineShape::of(&b[at..at + used]);
            at += used;
            if n == BATCH {
                break;
            }
        }
        while !ended && n < BATCH {
            let Some((value, used)) = searched_line(b, at) else {
                break;
            };
            values[n] = value;
            n += 1;
            at += used;
        }
        take(&values[..n]);
        taken += n as u64;
        if n < BATCH {
            return (at, taken);
        }
    }
}

/// Lines in a row that show a stream's shape is steady enough to check lines against.
const STEADY_RUN: usize = 8;

#[inline]
fn searched_line(b: &[u8], at: usize) -> Option<(u32, usize)> {
    swar_line(b, at).or_else(|| short_line(b, at))
}

/// A plain line's layout in the word that starts it: `digits` digits, then LF or CRLF.
#[derive(Debug, Clone, Copy)]
struct LineShape {
    len: usize,
    /// The high nibble of each digit byte, to find a byte that is not a digit.
    digit_nibbles: u64,
    /// The line end's bytes and what they must hold.
    end_mask: u64,
    end_bytes: u64,
    /// Moves the digits to the top of the word.
    shift: u32,
    /// Four digits or fewer (a 12-bit ADC's counts): summed in half a word.
    short: bool,
    /// The same layout over a block of `BLOCK_LINES` lines, word by word.
    block: BlockMasks,
}

/// Lines checked at once by `LineShape::run_blocks`: their bytes fill whole words.
const BLOCK_LINES: usize = 8;

/// Which bytes of each word of a block of lines are digits and which are line ends (and
/// what those hold); a block of lines of at most eight bytes is at most eight words.
#[derive(Debug, Clone, Copy, Default)]
struct BlockMasks {
    digits: [u64; 8],
    ends: [u64; 8],
    end_bytes: [u64; 8],
}

impl BlockMasks {
    fn of(digits: usize, ending: &[u8]) -> BlockMasks {
        let len = digits + ending.len();
        let mut masks = BlockMasks::default();
        for at in 0..BLOCK_LINES * len {
            let (word, byte) = (at / 8, 8 * (at % 8));
            match (at % len).checked_sub(digits) {
                None => masks.digits[word] |= 0xFF << byte,
                Some(k) => {
                    masks.ends[word] |= 0xFF << byte;
                    masks.end_bytes[word] |= u64::from(ending[k]) << byte;
                }
            }
        }
        masks
    }
}

impl LineShape {
    /// The shape of `line` (digits and its line end), when it fits one word.
    fn of(line: &[u8]) -> Option<LineShape> {
        let end = if line.ends_with(b"\r\n") { 2 } else { 1 };
        let digits = line.len() - end;
        if line.len() > 8 {
            return None;
        }
        let low_bytes = |n: usize| u64::MAX.checked_shr(64 - 8 * n as u32).unwrap_or(0);
        let ending_bytes: &[u8] = if end == 2 { b"\r\n" } else { b"\n" };
        let ending = ending_bytes
            .iter()
            .rev()
            .fold(0u64, |word, &byte| word << 8 | u64::from(byte));
        Some(LineShape {
            len: line.len(),
            digit_nibbles: low_bytes(digits) & 0xF0F0_F0F0_F0F0_F0F0,
            end_mask: low_bytes(line.len()) & !low_bytes(digits),
            end_bytes: ending << (8 * digits),
            shift: 8 * (8 - digits as u32),
            short: digits <= 4,
            block: BlockMasks::of(digits, ending_bytes),
        })
    }

    /// Takes the lines of this shape from `at` on into `values[n..]`, up to the first
    /// other line or a full batch; returns the new count and position.
    #[inline(always)]
    fn run(
        &self,
        b: &[u8],
        mut at: usize,
        values: &mut [u32; BATCH],
        mut n: usize,
    ) -> (usize, usize) {
        loop {
            (n, at) = self.run_blocks(b, at, values, n);
            // A block that holds another line, or the last bytes: a line at a time, up
            // to the other line or a block's worth.
            let from = n;
            let limit = (n + BLOCK_LINES).min(BATCH);
            (n, at) = match self.short {
                true => self.run_summing(b, at, values, n, limit, |digits| {
                    sum_four_digits((digits >> 32) as u32)
                }),
                false => self.run_summing(b, at, values, n, limit, sum_digits),
            };
            if n != from + BLOCK_LINES || n == BATCH {
                return (n, at);
            }
        }
    }

    /// Takes whole blocks of `BLOCK_LINES` lines of this shape: each block checked word
    /// by word, then its numbers read (two at a time in a word when short).
    #[inline(always)]
    fn run_blocks(
        &self,
        b: &[u8],
        mut at: usize,
        values: &mut [u32; BATCH],
        mut n: usize,
    ) -> (usize, usize) {
        let len = self.len;
        // The block's words, and the word that starts its last line.
        let span = (BLOCK_LINES - 1) * len + 8;
        while n + BLOCK_LINES <= BATCH {
            let Some(block) = b.get(at..at + span) else {
                break;
            };
            if !self.block_fits(block) {
                break;
            }
            let digits_at = |line: usize| word_at(block, line * len).wrapping_sub(ZEROS);
            let out = &mut values[n..n + BLOCK_LINES];
            if self.short {
                for (pair, out) in out.chunks_exact_mut(2).enumerate() {
                    let [first, second] = [2 * pair, 2 * pair + 1]
                        .map(|line| ((digits_at(line) as u32) << (self.shift - 32)) as u64);
                    let both = sum_two_four_digits(first | second << 32);
                    out[0] = both as u32;
                    out[1] = (both >> 32) as u32;
                }
            } else {
                for (line, out) in out.iter_mut().enumerate() {
                    *out = sum_digits(digits_at(line) << self.shift);
                }
            }
            n += BLOCK_LINES;
            at += BLOCK_LINES * len;
        }
        (n, at)
    }

    /// True when every line of the block has this shape: digits where digits belong and
    /// the line end where it belongs. Byte-wise checks that no carry or borrow crosses.
    #[inline(always)]
    fn block_fits(&self, block: &[u8]) -> bool {
        const HIGH: u64 = 0xF0F0_F0F0_F0F0_F0F0;
        const LOW: u64 = 0x0F0F_0F0F_0F0F_0F0F;
        let masks = &self.block;
        let mut bad = 0;
        for w in 0..self.len {
            let word = word_at(block, 8 * w);
            let not_digit = ((word & HIGH) ^ ZEROS)
                | (((word & LOW) + 0x0606_0606_0606_0606) & 0x1010_1010_1010_1010);
            bad |= (not_digit & masks.digits[w]) | ((word ^ masks.end_bytes[w]) & masks.ends[w]);
        }
        bad == 0
    }

    #[inline(always)]
    fn run_summing(
        &self,
        b: &[u8],
        mut at: usize,
        values: &mut [u32; BATCH],
        mut n: usize,
        limit: usize,
        sum: impl Fn(u64) -> u32,
    ) -> (usize, usize) {
        while n < limit {
            let Some(word) = b.get(at..at + 8) else {
                break;
            };
            let word = u64::from_le_bytes(word.try_into().unwrap_or([0; 8]));
            let digits = word.wrapping_sub(ZEROS);
            let not_digit =
                (digits | digits.wrapping_add(0x0606_0606_0606_0606)) & self.digit_nibbles;
            if not_digit | ((word & self.end_mask) ^ self.end_bytes) != 0 {
                break;
            }
            // The digits are the word's low bytes, 0 to 9 each once checked (no borrow
            // reaches them); the shift drops the bytes after them off the top.
            values[n] = sum(digits << self.shift);
            n += 1;
            at += self.len;
        }
        (n, at)
    }
}

/// Values gathered in a local array before they are handed on, so the hot loops keep
/// their counters in registers instead of a vector's length in memory.
const BATCH: usize = 128;

/// Reads `digits + LF` (or CRLF) at `b[at..]` a byte at a time, for lines near the end of
/// a read and numbers of eight or nine digits.
fn short_line(b: &[u8], at: usize) -> Option<(u32, usize)> {
    let mut i = at;
    let mut value: u32 = 0;
    // Nine digits always fit a u32; longer numbers take the general path.
    while i < b.len() && i - at < 9 {
        let d = b[i].wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        value = value * 10 + u32::from(d);
        i += 1;
    }
    if i == at {
        return None;
    }
    match (b.get(i), b.get(i + 1)) {
        (Some(b'\n'), _) => Some((value, i + 1 - at)),
        (Some(b'\r'), Some(b'\n')) => Some((value, i + 2 - at)),
        _ => None,
    }
}

/// Reads `digits + LF` (or CRLF) at `b[at..]` eight bytes at a time: the leading digits
/// are found and summed with word arithmetic instead of a loop per byte. None when the
/// line is not 1 to 7 digits and a line end, or when fewer than eight bytes remain.
#[inline]
fn swar_line(b: &[u8], at: usize) -> Option<(u32, usize)> {
    let word = u64::from_le_bytes(b.get(at..at + 8)?.try_into().ok()?);
    let digits = word.wrapping_sub(0x3030_3030_3030_3030);
    // A byte is a digit exactly when it and it plus 6 both stay below 0x10. A borrow from
    // a byte below '0' only reaches the bytes after it, which are not used.
    let not_digit = (digits | digits.wrapping_add(0x0606_0606_0606_0606)) & 0xF0F0_F0F0_F0F0_F0F0;
    let len = (not_digit.trailing_zeros() / 8) as usize;
    if len.wrapping_sub(1) >= 7 {
        return None;
    }
    // The byte after the digits is in the word already.
    let end = match (word >> (8 * len)) as u8 {
        b'\n' => 1,
        b'\r' if b.get(at + len + 1) == Some(&b'\n') => 2,
        _ => return None,
    };
    // Move the digits to the top bytes (zeros before them add nothing).
    let top = (digits << (8 * (8 - len))) & 0x0F0F_0F0F_0F0F_0F0F;
    Some((sum_digits(top), len + end))
}

/// The number whose decimal digits (one a byte, the first lowest) fill a word: pairs,
/// quads and the eight summed with word arithmetic.
#[inline(always)]
fn sum_digits(digits: u64) -> u32 {
    let mut v = (digits.wrapping_mul(10) + (digits >> 8)) & 0x00FF_00FF_00FF_00FF;
    v = (v.wrapping_mul(100) + (v >> 16)) & 0x0000_FFFF_0000_FFFF;
    v = (v.wrapping_mul(10000) + (v >> 32)) & 0x0000_0000_FFFF_FFFF;
    v as u32
}

/// ASCII '0' in every byte.
const ZEROS: u64 = 0x3030_3030_3030_3030;

/// The little-endian word at `bytes[at..]`, which holds at least eight bytes there.
#[inline(always)]
fn word_at(bytes: &[u8], at: usize) -> u64 {
    let mut word = [0; 8];
    word.copy_from_slice(&bytes[at..at + 8]);
    u64::from_le_bytes(word)
}

/// `sum_four_digits` of each half of the word at once.
#[inline(always)]
fn sum_two_four_digits(digits: u64) -> u64 {
    let v = (digits.wrapping_mul(10) + (digits >> 8)) & 0x00FF_00FF_00FF_00FF;
    (v.wrapping_mul(100) + (v >> 16)) & 0x0000_FFFF_0000_FFFF
}

/// As `sum_digits` for a number of up to four digits in the four bytes of a u32.
#[inline(always)]
fn sum_four_digits(digits: u32) -> u32 {
    let v = (digits.wrapping_mul(10) + (digits >> 8)) & 0x00FF_00FF;
    (v.wrapping_mul(100) + (v >> 16)) & 0xFFFF
}

fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

fn trim(mut line: &[u8]) -> &[u8] {
    while let [first, rest @ ..] = line {
        if !is_blank(*first) {
            break;
        }
        line = rest;
    }
    while let [rest @ .., last] = line {
        if !is_blank(*last) {
            break;
        }
        line = rest;
    }
    line
}

/// Parses `12, 340\t5 6`: integers separated by a comma (with optional blanks around it)
/// or by blanks alone.
fn parse_counts(line: &[u8]) -> Option<Frame> {
    let mut frame = Frame::default();
    let mut i = 0;
    loop {
        let start = i;
        let mut value: u32 = 0;
        while let Some(&b) = line.get(i).filter(|b| b.is_ascii_digit()) {
            value = value.checked_mul(10)?.checked_add(u32::from(b - b'0'))?;
            i += 1;
        }
        if i == start || usize::from(frame.channels) == MAX_CHANNELS {
            return None;
        }
        frame.counts[usize::from(frame.channels)] = value;
        frame.channels += 1;
        while line.get(i).copied().is_some_and(is_blank) {
            i += 1;
        }
        if line.get(i) == Some(&b',') {
            i += 1;
            while line.get(i).copied().is_some_and(is_blank) {
                i += 1;
            }
            if i == line.len() {
                return None;
            }
        }
        if i == line.len() {
            return Some(frame);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn counts(frames: &[Frame]) -> Vec<Vec<u32>> {
        frames.iter().map(|f| f.counts().to_vec()).collect()
    }

    #[test]
    fn word_at_a_time_lines_agree_with_the_plain_parser() {
        for value in [0u32, 7, 42, 999, 4095, 65535, 1_234_567] {
            for end in ["\n", "\r\n"] {
                let line = format!("{value}{end}XXXXXXXX");
                let got = swar_line(line.as_bytes(), 0);
                let want =
                    (value < 10_000_000).then(|| (value, value.to_string().len() + end.len()));
                assert_eq!(got, want, "{line:?}");
            }
        }
        assert_eq!(swar_line(b"12a\n5678", 0), None);
        assert_eq!(swar_line(b"12,3\n567", 0), None);
        assert_eq!(swar_line(b"#12\n5678", 0), None);
        assert_eq!(swar_line(b"12\n", 0), None, "fewer than eight bytes left");
    }

    #[test]
    fn ascii_long_line_is_discarded_with_bounded_memory() {
        let mut d = AsciiDecoder::new();
        let mut stats = DecodeStats::default();
        let mut out = Vec::new();
        d.feed(b"7\n", &mut stats, &mut out);
        for _ in 0..1000 {
            d.feed(&[b'1'; 1024], &mut stats, &mut out);
            assert!(d.line.capacity() <= MAX_LINE.max(256) * 2);
        }
        d.feed(b"\n8\n", &mut stats, &mut out);
        assert_eq!(
            counts(&out),
            [[7]],
            "the line after a discarded one is held"
        );
        d.feed(b"9\n", &mut stats, &mut out);
        assert_eq!(counts(&out), [[7], [8], [9]]);
        assert_eq!(stats.long_lines, 1);
    }

    #[test]
    fn a_lone_number_between_bad_lines_is_not_read() {
        let mut d = AsciiDecoder::new();
        let mut stats = DecodeStats::default();
        let mut out = Vec::new();
        d.feed(
            b"100
\x93\x01z\n42\n\xfe\xff\n\n# note\n200\n201\n",
            &mut stats,
            &mut out,
        );
        d.finish(&mut stats, &mut out);
        assert_eq!(counts(&out), [[100], [200], [201]]);
        // The two junk lines and the lone 42 between them; the blank line and the comment
        // neither break nor confirm a run.
        assert_eq!(stats.bad_lines, 3);
        assert_eq!(stats.comments, 1);
    }
}

/// Each word-at-a-time helper against the plain reading of the same bytes through
/// `str::parse`, over random lines (proptest, its fixed default seed per case).
#[cfg(test)]
mod helper_props {
    use super::*;
    use proptest::prelude::*;

    /// The plain reading: `digits` then LF or CRLF at the start of `b`, as (value, bytes
    /// used), when the digits number from 1 to `most`.
    fn plain(b: &[u8], most: usize) -> Option<(u32, usize)> {
        let digits = b.iter().take_while(|c| c.is_ascii_digit()).count();
        if digits == 0 || digits > most {
            return None;
        }
        let end = match (b.get(digits), b.get(digits + 1)) {
            (Some(b'\n'), _) => 1,
            (Some(b'\r'), Some(b'\n')) => 2,
            _ => return None,
        };
        let text = std::str::from_utf8(&b[..digits]).ok()?;
        Some((text.parse().ok()?, digits + end))
    }

    /// Bytes that are mostly digits and line ends, with now and then anything else.
    fn bytes_like_lines(len: std::ops::Range<usize>) -> impl Strategy<Value = Vec<u8>> {
        let byte = prop_oneof![
            8 => b'0'..=b'9',
            2 => Just(b'\n'),
            1 => Just(b'\r'),
            1 => any::<u8>(),
        ];
        proptest::collection::vec(byte, len)
    }

    /// A digit string of 1 to `most` digits.
    fn digit_string(most: usize) -> impl Strategy<Value = String> {
        proptest::collection::vec(b'0'..=b'9', 1..=most)
            .prop_map(|d| String::from_utf8(d).unwrap_or_default())
    }

    /// `text`'s digits one a byte, the first lowest, at the top of a word of `width`.
    fn digit_bytes(text: &str, width: usize) -> u64 {
        text.bytes().enumerate().fold(0u64, |word, (i, c)| {
            word | u64::from(c - b'0') << (8 * (width - text.len() + i))
        })
    }

    proptest! {
        // Source: `str::parse` (the standard library) as the reference reading.
        #[test]
        fn swar_line_reads_what_parse_reads(b in bytes_like_lines(8..24)) {
            let want = plain(&b, 7);
            prop_assert_eq!(swar_line(&b, 0), want);
        }

        #[test]
        fn short_line_reads_what_parse_reads(b in bytes_like_lines(0..16)) {
            prop_assert_eq!(short_line(&b, 0), plain(&b, 9));
        }

        #[test]
        fn the_digit_summers_agree_with_parse(text in digit_string(8)) {
            let want: u32 = text.parse().unwrap_or(0);
            prop_assert_eq!(sum_digits(digit_bytes(&text, 8)), want);
            if text.len() <= 4 {
                let four = digit_bytes(&text, 4) as u32;
                prop_assert_eq!(sum_four_digits(four), want);
                let both = sum_two_four_digits(u64::from(four) << 32 | u64::from(four));
                prop_assert_eq!(both, u64::from(want) << 32 | u64::from(want));
            }
        }

        // Source: the definition in `BlockMasks`' doc: byte p of a block of lines of
        // `digits` digits and `ending` is a digit byte when p mod len < digits, else the
        // ending's byte p mod len − digits.
        #[test]
        fn block_masks_mark_each_byte_of_the_block(digits in 1usize..=6, crlf in any::<bool>()) {
            let ending: &[u8] = if crlf { b"\r\n" } else { b"\n" };
            let len = digits + ending.len();
            prop_assume!(len <= 8);
            let masks = BlockMasks::of(digits, ending);
            for p in 0..BLOCK_LINES * len {
                let (word, byte) = (p / 8, 8 * (p % 8));
                let digit = (masks.digits[word] >> byte) & 0xFF == 0xFF;
                let end = (masks.ends[word] >> byte) & 0xFF == 0xFF;
                prop_assert_eq!(digit, p % len < digits);
                prop_assert_eq!(end, p % len >= digits);
                if end {
                    let held = ((masks.end_bytes[word] >> byte) & 0xFF) as u8;
                    prop_assert_eq!(held, ending[p % len - digits]);
                }
            }
        }

        // Source: `plain` above, line by line: a block fits the shape exactly when each of
        // its lines is that many digits and that line end.
        #[test]
        fn block_fits_exactly_when_every_line_has_the_shape(
            digits in 1usize..=6,
            crlf in any::<bool>(),
            noise in proptest::collection::vec((0usize..64, any::<u8>()), 0..3),
            seed_digits in proptest::collection::vec(b'0'..=b'9', 64),
        ) {
            let ending: &[u8] = if crlf { b"\r\n" } else { b"\n" };
            let len = digits + ending.len();
            prop_assume!(len <= 8);
            let mut line = seed_digits[..digits].to_vec();
            line.extend_from_slice(ending);
            let shape = LineShape::of(&line).unwrap();
            let mut block: Vec<u8> = (0..BLOCK_LINES)
                .flat_map(|i| {
                    let mut l = seed_digits[i..i + digits].to_vec();
                    l.extend_from_slice(ending);
                    l
                })
                .collect();
            for (at, byte) in noise {
                let at = at % block.len();
                block[at] = byte;
            }
            let every_line_fits = block
                .chunks(len)
                .all(|l| plain(l, digits).is_some_and(|(_, used)| used == len)
                    && l[..digits].iter().all(u8::is_ascii_digit));
            prop_assert_eq!(shape.block_fits(&block), every_line_fits);
        }
    }
}
