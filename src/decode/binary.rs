//! The binary mode: CRC-checked frames read in place, resynchronising on damage.

use super::{
    DecodeStats, Frame, FrameSink, FRAME_CRC, FRAME_OVERHEAD, MAX_CHANNELS, MAX_FRAME, SYNC,
};

/// Decodes binary frames.
#[derive(Debug, Clone, Default)]
pub struct BinaryDecoder {
    pending: Vec<u8>,
    next_seq: Option<u16>,
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
        if self.pending.is_empty() {
            // Frames are read where they lie; only a cut frame at the end is kept.
            let used = scan_frames(bytes, &mut self.next_seq, stats, out);
            self.pending.extend_from_slice(&bytes[used..]);
            return;
        }
        self.pending.extend_from_slice(bytes);
        let pending = std::mem::take(&mut self.pending);
        let used = scan_frames(&pending, &mut self.next_seq, stats, out);
        self.pending = pending;
        self.pending.drain(..used);
    }
}

/// Decodes the frames in `buf`; returns how many bytes are done with (the rest may be the
/// start of a frame cut by the read).
fn scan_frames(
    buf: &[u8],
    next_seq: &mut Option<u16>,
    stats: &mut DecodeStats,
    out: &mut impl FrameSink,
) -> usize {
    let mut at = 0;
    loop {
        // In a clean stream the next frame starts where the last ended: no search needed.
        if !buf[at..].starts_with(&SYNC) {
            let Some(found) = find_sync(&buf[at..]) else {
                break;
            };
            stats.skipped_bytes += found as u64;
            at += found;
        }
        match check_frame(&buf[at..]) {
            FrameCheck::Incomplete => return at,
            FrameCheck::Bad => {
                stats.crc_errors += 1;
                stats.skipped_bytes += 1;
                at += 1;
            }
            FrameCheck::Good { seq, frame, len } => {
                count_sequence(next_seq, seq, stats);
                stats.frames += 1;
                out.push_frame(&frame);
                at += len;
            }
        }
    }
    // With no sync pattern left (not even a lone first byte at the end), nothing here can
    // start a frame.
    stats.skipped_bytes += (buf.len() - at) as u64;
    buf.len()
}

fn count_sequence(next_seq: &mut Option<u16>, seq: u16, stats: &mut DecodeStats) {
    {
        if let Some(expected) = *next_seq {
            let missing = seq.wrapping_sub(expected);
            // A jump backwards (more than half the counter) is a device restart, not a loss.
            if missing > 0 && missing < 0x8000 {
                stats.dropped_frames += u64::from(missing);
            }
        }
        *next_seq = Some(seq.wrapping_add(1));
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

enum FrameCheck {
    Incomplete,
    Bad,
    Good { seq: u16, frame: Frame, len: usize },
}

/// Checks the frame that starts at the sync pattern at `bytes[0]`.
fn check_frame(bytes: &[u8]) -> FrameCheck {
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
    if FRAME_CRC.checksum(body) != sent {
        return FrameCheck::Bad;
    }
    let mut frame = Frame {
        counts: [0; MAX_CHANNELS],
        channels: n as u8,
    };
    for (slot, pair) in frame.counts.iter_mut().zip(body[3..].chunks_exact(2)) {
        *slot = u32::from(u16::from_le_bytes([pair[0], pair[1]]));
    }
    FrameCheck::Good {
        seq: u16::from_le_bytes([body[0], body[1]]),
        frame,
        len,
    }
}
