//! The binary mode: CRC-checked frames read in place, resynchronising on damage.

use std::sync::LazyLock;

use super::{DecodeStats, FrameSink, FRAME_CRC, FRAME_OVERHEAD, MAX_CHANNELS, MAX_FRAME, SYNC};

/// Bytes a frame's CRC covers at most: seq, n and the counts.
const MAX_BODY: usize = MAX_FRAME - 4;

/// The frame CRC for bodies of up to [`MAX_BODY`] bytes, by position.
///
/// A CRC is affine over GF(2) for a fixed length: `crc(x) = crc(0…0) ⊕ ⊕ᵢ L(xᵢ at i)`, and the
/// part a byte adds depends only on how many bytes follow it. Tabulating that part for every
/// byte value and distance turns the byte-after-byte chain into independent lookups, which
/// the processor overlaps. Every entry is computed with [`FRAME_CRC`] itself, so the two
/// cannot disagree on the algorithm.
struct PositionalCrc {
    /// `by_distance[k][b]`: what byte `b` followed by `k` bytes adds.
    by_distance: [[u16; 256]; MAX_BODY],
    /// The CRC of `len` zero bytes.
    of_zeros: [u16; MAX_BODY + 1],
}

static POSITIONAL_CRC: LazyLock<Box<PositionalCrc>> = LazyLock::new(|| {
    let zeros = [0u8; MAX_BODY + 1];
    let mut table = Box::new(PositionalCrc {
        by_distance: [[0; 256]; MAX_BODY],
        of_zeros: [0; MAX_BODY + 1],
    });
    for (len, slot) in table.of_zeros.iter_mut().enumerate() {
        *slot = FRAME_CRC.checksum(&zeros[..len]);
    }
    let mut message = [0u8; MAX_BODY];
    for k in 0..MAX_BODY {
        for b in 0..=255u8 {
            message[0] = b;
            table.by_distance[k][usize::from(b)] =
                FRAME_CRC.checksum(&message[..=k]) ^ table.of_zeros[k + 1];
        }
    }
    table
});

impl PositionalCrc {
    #[inline]
    fn checksum(&self, body: &[u8]) -> u16 {
        // The one-channel frame's body, the common case, with its length known to the
        // compiler so the look-ups unroll.
        if let Ok(one_channel) = <&[u8; 5]>::try_from(body) {
            return self.fixed(one_channel);
        }
        self.any_length(body)
    }

    #[inline(always)]
    fn fixed<const N: usize>(&self, body: &[u8; N]) -> u16 {
        let mut crc = self.of_zeros[N];
        for (k, &b) in body.iter().enumerate() {
            crc ^= self.by_distance[N - 1 - k][usize::from(b)];
        }
        crc
    }

    #[inline]
    fn any_length(&self, body: &[u8]) -> u16 {
        let tables = &self.by_distance[..body.len()];
        tables
            .iter()
            .rev()
            .zip(body)
            .fold(self.of_zeros[body.len()], |crc, (table, &b)| {
                crc ^ table[usize::from(b)]
            })
    }
}

/// Decodes binary frames.
#[derive(Debug, Clone, Default)]
pub struct BinaryDecoder {
    pending: Vec<u8>,
    next_seq: Option<u16>,
}

/// A frame that passed its check, as it lies in the buffer.
struct GoodFrame<'a> {
    seq: u16,
    /// The counts, two bytes each, little-endian.
    counts: &'a [u8],
    len: usize,
}

impl BinaryDecoder {
    /// A decoder for a stream read from its start.
    pub fn new() -> Self {
        BinaryDecoder {
            pending: Vec::with_capacity(4 * MAX_FRAME),
            next_seq: None,
        }
    }

    /// Forgets partial frames and the sequence, as after a reconnect.
    pub fn resync(&mut self) {
        self.pending.clear();
        self.next_seq = None;
    }

    /// Decodes `bytes`, appending samples to `out`.
    pub fn feed(&mut self, bytes: &[u8], stats: &mut DecodeStats, out: &mut impl FrameSink) {
        let mut first = None;
        if self.pending.is_empty() {
            // Frames are read where they lie; only a cut frame at the end is kept.
            let used = scan_frames(bytes, &mut self.next_seq, &mut first, stats, out);
            self.pending.extend_from_slice(&bytes[used..]);
            return;
        }
        self.pending.extend_from_slice(bytes);
        let pending = std::mem::take(&mut self.pending);
        let used = scan_frames(&pending, &mut self.next_seq, &mut first, stats, out);
        self.pending = pending;
        self.pending.drain(..used);
    }

    /// Takes the frames [`frames_ahead`] scanned from `part`, the bytes that come next in
    /// the stream, when feeding them would have done just that: no cut frame is held.
    /// False, and nothing changed, otherwise.
    pub(super) fn accept_ahead(
        &mut self,
        ahead: &FramesAhead,
        part: &[u8],
        stats: &mut DecodeStats,
    ) -> bool {
        if !self.pending.is_empty() || ahead.used > part.len() {
            return false;
        }
        let mut tally = ahead.stats;
        if let Some(first) = ahead.first_seq {
            tally.dropped_frames += frames_missing(self.next_seq, first);
            self.next_seq = ahead.next_seq;
        }
        *stats += tally;
        self.pending.extend_from_slice(&part[ahead.used..]);
        true
    }
}

/// What [`frames_ahead`] found in one part of a binary stream.
#[derive(Debug, Clone, Copy, Default)]
pub struct FramesAhead {
    /// Counters, frames lost before the first good frame apart.
    stats: DecodeStats,
    first_seq: Option<u16>,
    next_seq: Option<u16>,
    /// Bytes done with; the rest may be the start of a frame cut at the part's end.
    used: usize,
}

/// Scans the frames of `bytes` as the binary decoder does from a frame boundary with
/// nothing held, appending their samples to `out`: for decoding one part of a file while
/// another thread decodes the part before it. `Decoder::accept_ahead` takes the result.
pub fn frames_ahead(bytes: &[u8], out: &mut impl FrameSink) -> FramesAhead {
    let mut ahead = FramesAhead::default();
    ahead.used = scan_frames(
        bytes,
        &mut ahead.next_seq,
        &mut ahead.first_seq,
        &mut ahead.stats,
        out,
    );
    ahead
}

/// Where the first frame of `bytes` starts and how long frames like it are, when a frame
/// header is there: the grid a clean stream's frames lie on.
pub fn frame_grid(bytes: &[u8]) -> Option<(usize, usize)> {
    let start = find_sync(bytes)?;
    let n = usize::from(*bytes.get(start + 4)?);
    (1..=MAX_CHANNELS)
        .contains(&n)
        .then_some((start, FRAME_OVERHEAD + 2 * n))
}

/// Decodes the frames in `buf`; returns how many bytes are done with (the rest may be the
/// start of a frame cut by the read).
fn scan_frames(
    buf: &[u8],
    next_seq: &mut Option<u16>,
    first_seq: &mut Option<u16>,
    stats: &mut DecodeStats,
    out: &mut impl FrameSink,
) -> usize {
    let crc = &**POSITIONAL_CRC;
    // Counted in locals, which stay in registers, and stored once at the end.
    let mut tally = DecodeStats::default();
    let mut expected = *next_seq;
    let mut first = *first_seq;
    let mut at = 0;
    let used = loop {
        // In a clean stream the next frame starts where the last ended: no search needed.
        if !buf[at..].starts_with(&SYNC) {
            let Some(found) = find_sync(&buf[at..]) else {
                // With no sync pattern left (not even a lone first byte at the end), nothing
                // here can start a frame.
                tally.skipped_bytes += (buf.len() - at) as u64;
                break buf.len();
            };
            tally.skipped_bytes += found as u64;
            at += found;
        }
        match check_frame(&buf[at..], crc) {
            FrameCheck::Incomplete => break at,
            FrameCheck::Bad => {
                tally.crc_errors += 1;
                tally.skipped_bytes += 1;
                at += 1;
            }
            FrameCheck::Good(frame) => {
                if first.is_none() {
                    first = Some(frame.seq);
                }
                tally.dropped_frames += frames_missing(expected, frame.seq);
                expected = Some(frame.seq.wrapping_add(1));
                tally.frames += 1;
                out.push_le_counts(frame.counts);
                at += frame.len;
            }
        }
    };
    *next_seq = expected;
    *first_seq = first;
    *stats += tally;
    used
}

/// Frames lost between the one expected and the one that came.
#[inline]
fn frames_missing(expected: Option<u16>, seq: u16) -> u64 {
    let Some(expected) = expected else {
        return 0;
    };
    let missing = seq.wrapping_sub(expected);
    // A jump backwards (more than half the counter) is a device restart, not a loss.
    if missing < 0x8000 {
        u64::from(missing)
    } else {
        0
    }
}

impl BinaryDecoder {
    /// Ends the stream: bytes left over are counted as skipped.
    pub fn finish(&mut self, stats: &mut DecodeStats) {
        stats.skipped_bytes += self.pending.len() as u64;
        self.pending.clear();
    }
}

fn find_sync(bytes: &[u8]) -> Option<usize> {
    let mut from = 0;
    while let Some(i) = memchr::memchr(SYNC[0], &bytes[from..]) {
        let at = from + i;
        match bytes.get(at + 1) {
            Some(&b) if b == SYNC[1] => return Some(at),
            None => return Some(at),
            Some(_) => from = at + 1,
        }
    }
    None
}

enum FrameCheck<'a> {
    Incomplete,
    Bad,
    Good(GoodFrame<'a>),
}

/// Checks the frame that starts at the sync pattern at `bytes[0]`.
#[inline]
fn check_frame<'a>(bytes: &'a [u8], crc: &PositionalCrc) -> FrameCheck<'a> {
    if bytes.len() < 5 {
        return FrameCheck::Incomplete;
    }
    let n = usize::from(bytes[4]);
    if n == 0 || n > MAX_CHANNELS {
        return FrameCheck::Bad;
    }
    let len = FRAME_OVERHEAD + 2 * n;
    if bytes.len() < len {
        return FrameCheck::Incomplete;
    }
    let body = &bytes[2..len - 2];
    let sent = u16::from_le_bytes([bytes[len - 2], bytes[len - 1]]);
    if crc.checksum(body) != sent {
        return FrameCheck::Bad;
    }
    FrameCheck::Good(GoodFrame {
        seq: u16::from_le_bytes([body[0], body[1]]),
        counts: &body[3..],
        len,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        // Source: the crc crate's CRC-16/IBM-3740 (= CCITT-FALSE), whose check value the
        // parent module's test pins to the catalogue's 0x29B1.
        #[test]
        fn positional_crc_agrees_with_the_crate(body in proptest::collection::vec(any::<u8>(), 1..=MAX_BODY)) {
            prop_assert_eq!(POSITIONAL_CRC.checksum(&body), FRAME_CRC.checksum(&body));
        }
    }

    // Source: the CRC catalogue (../shared/REFERENCES.md): CRC-16/CCITT-FALSE of
    // "123456789" is 0x29B1, here through the positional tables.
    #[test]
    fn positional_crc_check_value() {
        assert_eq!(POSITIONAL_CRC.checksum(b"123456789"), 0x29B1);
    }
}
