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
            let mut cursor = Cursor::new(bytes);
            let taken = plain_lines(&mut cursor, |v| out.push_singles(v));
            self.took_plain(taken, stats);
            *bytes = &bytes[cursor.at..];
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

/// The bytes of one feed and where the next line starts in them: what the plain-line
/// readers below move along.
#[derive(Debug, Clone, Copy)]
struct Cursor<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Cursor<'a> {
    fn new(bytes: &'a [u8]) -> Self {
        Cursor { bytes, at: 0 }
    }

    /// The `len` bytes from the cursor on, when there are that many.
    #[inline(always)]
    fn ahead(&self, len: usize) -> Option<&'a [u8]> {
        self.bytes.get(self.at..self.at + len)
    }

    /// The little-endian word of the eight bytes from the cursor on, when there are eight.
    #[inline(always)]
    fn word(&self) -> Option<u64> {
        let bytes = self.ahead(8)?;
        Some(u64::from_le_bytes(bytes.try_into().ok()?))
    }

    /// Reads a plain line, `digits + LF` (or CRLF), a byte at a time and moves past it;
    /// None, not moving, for any other line or one cut by the end of the bytes. Up to
    /// nine digits, which always fit a u32; longer numbers take the general path.
    fn plain_line(&mut self) -> Option<u32> {
        let (b, at) = (self.bytes, self.at);
        let mut i = at;
        let mut value: u32 = 0;
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
        self.at = match (b.get(i), b.get(i + 1)) {
            (Some(b'\n'), _) => i + 1,
            (Some(b'\r'), Some(b'\n')) => i + 2,
            _ => return None,
        };
        Some(value)
    }
}

/// Values gathered in a local array before they are handed on, so the hot loops keep
/// their counters in registers instead of a vector's length in memory.
struct Batch {
    values: [u32; BATCH],
    len: usize,
}

const BATCH: usize = 128;

impl Batch {
    fn new() -> Self {
        Batch {
            values: [0; BATCH],
            len: 0,
        }
    }

    #[inline(always)]
    fn push(&mut self, value: u32) {
        self.values[self.len] = value;
        self.len += 1;
    }

    #[inline(always)]
    fn is_full(&self) -> bool {
        self.len == BATCH
    }
}

/// Takes the plain lines (digits, then LF or CRLF) from the cursor on, handing the values
/// to `take` in batches, up to the first other line or cut line, and leaves the cursor
/// there. Returns the lines taken.
#[inline]
fn plain_lines(cursor: &mut Cursor, mut take: impl FnMut(&[u32])) -> u64 {
    let mut taken = 0;
    let mut shape = None;
    loop {
        let mut batch = Batch::new();
        fill_batch(cursor, &mut shape, &mut batch);
        take(&batch.values[..batch.len]);
        taken += batch.len as u64;
        if !batch.is_full() {
            return taken;
        }
    }
}

/// Lines in a row that show a stream's shape is steady enough to check lines against.
const STEADY_RUN: usize = 8;

/// Fills `batch` with plain lines, up to the first other line. A fast stream's lines
/// mostly have the same number of digits, so the lines are first checked against the
/// shape of the last one read (masks over one word, and the next line's start known at
/// once); a line of another shape is read a byte at a time and sets the shape. Lines that
/// keep changing shape fill the batch a byte at a time.
#[inline(always)]
fn fill_batch(cursor: &mut Cursor, shape: &mut Option<LineShape>, batch: &mut Batch) {
    loop {
        if let Some(shape) = shape {
            let from = batch.len;
            shape.take_lines(cursor, batch);
            if batch.is_full() || batch.len - from < STEADY_RUN {
                break;
            }
        }
        let start = cursor.at;
        let Some(value) = cursor.plain_line() else {
            return;
        };
        batch.push(value);
        *shape = LineShape::of(&cursor.bytes[start..cursor.at]);
        if batch.is_full() {
            return;
        }
    }
    while !batch.is_full() {
        let Some(value) = cursor.plain_line() else {
            return;
        };
        batch.push(value);
    }
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

/// Lines checked at once by `LineShape::take_blocks`: their bytes fill whole words.
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

    /// Takes the lines of this shape from the cursor on, up to the first other line or a
    /// full batch.
    #[inline(always)]
    fn take_lines(&self, cursor: &mut Cursor, batch: &mut Batch) {
        loop {
            self.take_blocks(cursor, batch);
            // A block that holds another line, or the last bytes: a line at a time, up
            // to the other line or a block's worth.
            let from = batch.len;
            let limit = (from + BLOCK_LINES).min(BATCH);
            match self.short {
                true => self.take_each(cursor, batch, limit, |digits| {
                    sum_two_fours(digits >> 32) as u32
                }),
                false => self.take_each(cursor, batch, limit, sum_eight),
            }
            if batch.len != from + BLOCK_LINES || batch.is_full() {
                return;
            }
        }
    }

    /// Takes whole blocks of `BLOCK_LINES` lines of this shape: each block checked word
    /// by word, then its numbers read (two at a time in a word when short).
    #[inline(always)]
    fn take_blocks(&self, cursor: &mut Cursor, batch: &mut Batch) {
        let len = self.len;
        // The block's words, and the word that starts its last line.
        let span = (BLOCK_LINES - 1) * len + 8;
        while batch.len + BLOCK_LINES <= BATCH {
            let Some(block) = cursor.ahead(span) else {
                break;
            };
            if !self.block_fits(block) {
                break;
            }
            let digits_at = |line: usize| word_at(block, line * len).wrapping_sub(ZEROS);
            let out = &mut batch.values[batch.len..batch.len + BLOCK_LINES];
            if self.short {
                for (pair, out) in out.chunks_exact_mut(2).enumerate() {
                    let [first, second] = [2 * pair, 2 * pair + 1]
                        .map(|line| ((digits_at(line) as u32) << (self.shift - 32)) as u64);
                    let both = sum_two_fours(first | second << 32);
                    out[0] = both as u32;
                    out[1] = (both >> 32) as u32;
                }
            } else {
                for (line, out) in out.iter_mut().enumerate() {
                    *out = sum_eight(digits_at(line) << self.shift);
                }
            }
            batch.len += BLOCK_LINES;
            cursor.at += BLOCK_LINES * len;
        }
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

    /// Takes lines of this shape one word each, up to `limit` values in the batch, their
    /// digits summed by `sum`.
    #[inline(always)]
    fn take_each(
        &self,
        cursor: &mut Cursor,
        batch: &mut Batch,
        limit: usize,
        sum: impl Fn(u64) -> u32,
    ) {
        while batch.len < limit {
            let Some(word) = cursor.word() else {
                break;
            };
            let digits = word.wrapping_sub(ZEROS);
            // A byte is a digit exactly when it and it plus 6 both stay below 0x10; a
            // borrow only reaches later bytes: the line end, checked on the word itself,
            // or bytes past the line.
            let not_digit =
                (digits | digits.wrapping_add(0x0606_0606_0606_0606)) & self.digit_nibbles;
            if not_digit | ((word & self.end_mask) ^ self.end_bytes) != 0 {
                break;
            }
            // The digits are the word's low bytes, 0 to 9 each once checked (no borrow
            // reaches them); the shift drops the bytes after them off the top.
            batch.push(sum(digits << self.shift));
            cursor.at += self.len;
        }
    }
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

/// The numbers whose decimal digits (one a byte, the first lowest) fill each half of the
/// word, up to four digits each: pairs, then quads, with word arithmetic.
#[inline(always)]
fn sum_two_fours(digits: u64) -> u64 {
    let v = (digits.wrapping_mul(10) + (digits >> 8)) & 0x00FF_00FF_00FF_00FF;
    (v.wrapping_mul(100) + (v >> 16)) & 0x0000_FFFF_0000_FFFF
}

/// The number whose decimal digits fill the word: its two halves' numbers joined.
#[inline(always)]
fn sum_eight(digits: u64) -> u32 {
    let v = sum_two_fours(digits);
    ((v.wrapping_mul(10000) + (v >> 32)) & 0xFFFF_FFFF) as u32
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

    /// The value and the bytes used of the plain line at the start of `b`.
    fn read_line(b: &[u8]) -> Option<(u32, usize)> {
        let mut cursor = Cursor::new(b);
        cursor.plain_line().map(|v| (v, cursor.at))
    }

    #[test]
    fn plain_lines_agree_with_the_plain_parser() {
        for value in [0u32, 7, 42, 999, 4095, 65535, 1_234_567, 999_999_999] {
            for end in ["\n", "\r\n"] {
                let line = format!("{value}{end}XXXXXXXX");
                let want = Some((value, value.to_string().len() + end.len()));
                assert_eq!(read_line(line.as_bytes()), want, "{line:?}");
            }
        }
        assert_eq!(read_line(b"12a\n5678"), None);
        assert_eq!(read_line(b"12,3\n567"), None);
        assert_eq!(read_line(b"#12\n5678"), None);
        assert_eq!(
            read_line(b"1234567890\n"),
            None,
            "ten digits: the general path"
        );
        assert_eq!(read_line(b"12\r"), None, "a line end cut by the read");
        assert_eq!(read_line(b"12\n"), Some((12, 3)));
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
        fn plain_line_reads_what_parse_reads(b in bytes_like_lines(0..16)) {
            let mut cursor = Cursor::new(&b);
            let got = cursor.plain_line().map(|v| (v, cursor.at));
            prop_assert_eq!(got, plain(&b, 9));
            if got.is_none() {
                prop_assert_eq!(cursor.at, 0, "a line not read leaves the cursor");
            }
        }

        #[test]
        fn the_digit_summers_agree_with_parse(text in digit_string(8)) {
            let want: u32 = text.parse().unwrap_or(0);
            prop_assert_eq!(sum_eight(digit_bytes(&text, 8)), want);
            if text.len() <= 4 {
                let four = digit_bytes(&text, 4);
                prop_assert_eq!(sum_two_fours(four), u64::from(want));
                let both = sum_two_fours(four << 32 | four);
                prop_assert_eq!(both, u64::from(want) << 32 | u64::from(want));
            }
        }

        // Source: `plain` above, line after line: the lines taken through a shape, by
        // blocks and one by one, are those read one at a time.
        #[test]
        fn plain_lines_take_what_parse_reads(lines in proptest::collection::vec((0u32..200_000, any::<bool>()), 0..300), noise in proptest::collection::vec((0usize..4000, any::<u8>()), 0..3)) {
            let mut b: Vec<u8> = lines
                .iter()
                .flat_map(|&(v, crlf)| format!("{v}{}", if crlf { "\r\n" } else { "\n" }).into_bytes())
                .collect();
            for (at, byte) in noise {
                if !b.is_empty() {
                    let at = at % b.len();
                    b[at] = byte;
                }
            }
            let mut want = Vec::new();
            let mut at = 0;
            while let Some((v, used)) = plain(&b[at..], 9) {
                want.push(v);
                at += used;
            }
            let mut cursor = Cursor::new(&b);
            let mut got = Vec::new();
            let taken = plain_lines(&mut cursor, |v| got.extend_from_slice(v));
            prop_assert_eq!(&got, &want);
            prop_assert_eq!(taken, want.len() as u64);
            prop_assert_eq!(cursor.at, at);
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
