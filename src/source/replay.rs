//! The replay source: a raw capture (either mode) read from a file, its samples stamped at
//! a stated rate, as fast as possible or paced in real time.

use std::fs::File;
use std::io::Read;
use std::path::PathBuf;
use std::time::{Duration, Instant};

#[cfg(test)]
use dbtrail::decode::DecodeStats;
use dbtrail::decode::{frame_grid, frames_ahead, Decoder, FlatCounts, Format};
use dbtrail::events::{Chunk, Event};
use rayon::prelude::*;

use super::{spawn, EventSender, Running, WhenFull};

/// A capture to replay.
pub struct ReplaySpec {
    /// The file.
    pub path: PathBuf,
    /// Samples per second used to stamp the samples.
    pub rate_hz: f64,
    /// Pace the samples to the wall clock.
    pub realtime: bool,
    /// Wire format.
    pub format: Format,
}

/// How a capture is read: a file ends and can be read ahead; a FIFO, terminal or device
/// may block or never end, so each read's samples go on before the next read starts.
fn reads_ahead(file: &File) -> bool {
    file.metadata().is_ok_and(|m| m.is_file())
}

/// Seconds of samples per chunk when pacing in real time.
const PACED_CHUNK_S: f64 = 0.02;

impl ReplaySpec {
    /// Starts reading the already opened file on its own thread.
    pub fn start(self, file: File) -> Running {
        let realtime = self.realtime;
        let description = format!(
            "replay {} at {} samples/s{}",
            self.path.display(),
            self.rate_hz,
            if self.realtime { ", real time" } else { "" }
        );
        let mut running = spawn(
            description,
            false,
            WhenFull::Wait(REPLAY_RING),
            move |sender, started| replay(&self, file, sender, started),
        );
        running.paced = realtime;
        running
    }
}

/// Bytes read at a time.
const READ_BYTES: usize = 1 << 20;
/// Parts a read is cut into (binary reads are scanned in parts on all cores): small
/// enough that the cores share them out evenly while the recorder takes its share.
const PARTS: usize = 8;
/// Bytes of a part of an ASCII read.
const PART_BYTES: usize = READ_BYTES / PARTS;
/// Events the ring holds for a replay: two reads' worth of parts (about 1.6 MB).
const REPLAY_RING: usize = 2 * PARTS;

fn replay(spec: &ReplaySpec, mut file: File, sender: &mut EventSender, started: Instant) {
    let mut decoder = Decoder::new(spec.format);
    let mut index: u64 = 0;
    let dt = 1.0 / spec.rate_hz;
    sender.counters.set_connected(true);
    let mut before = decoder.stats();
    // On a worker of the pool: each read's parts are shared out from inside it, not
    // handed in from outside and waited for.
    let one_read_at_a_time = spec.realtime || !reads_ahead(&file);
    let finished = rayon::scope(|_| {
        decode_reads(
            &mut file,
            &mut decoder,
            one_read_at_a_time,
            |parts, decoder| {
                if sender.stopped() {
                    return false;
                }
                sender.counters.add_decoded(&before, &decoder.stats());
                before = decoder.stats();
                for chunk in parts
                    .into_iter()
                    .flat_map(|part| split(part, spec, &mut index, dt))
                {
                    if spec.realtime && !pace(started, chunk.t0, || sender.stopped()) {
                        return false;
                    }
                    if !sender.send(Event::Samples(chunk)) {
                        return false;
                    }
                }
                true
            },
        )
    });
    if finished {
        sender
            .counters
            .set_last_sample((index as f64 * dt * 1e9) as u64);
        sender.counters.set_connected(false);
    }
}

/// Decodes `reader` to its end, handing each read's samples (and the decoder, for its
/// counters) to `take`; stops early, returning false, when `take` does. With
/// `one_at_a_time`, each read's samples are taken before the next read starts (a paced
/// replay, or a source that may block); otherwise binary reads are scanned in parts on all
/// cores while the next read goes on, and ASCII reads are decoded on this thread, read
/// after read (see `decode_block`).
fn decode_reads<R: Read + Send>(
    reader: &mut R,
    decoder: &mut Decoder,
    one_at_a_time: bool,
    mut take: impl FnMut(Vec<FlatCounts>, &Decoder) -> bool,
) -> bool {
    let (mut buf, mut spare) = (vec![0u8; READ_BYTES], vec![0u8; READ_BYTES]);
    let mut len = read_some(reader, &mut buf);
    loop {
        let ahead = len > 0 && !one_at_a_time && decoder.format() == Some(Format::Binary);
        let (next, mut parts) = if ahead {
            let (next, parts) = rayon::join(
                || read_some(reader, &mut spare),
                || decode_frames_ahead(decoder, &buf[..len]),
            );
            (Some(next), parts)
        } else {
            let parts = decode_block(decoder, &buf[..len]);
            let next = (len > 0 && !one_at_a_time).then(|| read_some(reader, &mut spare));
            (next, parts)
        };
        if len == 0 {
            let mut rest = FlatCounts::default();
            decoder.finish(&mut rest);
            parts.push(rest);
        }
        if !take(parts, decoder) {
            return false;
        }
        if len == 0 {
            return true;
        }
        len = match next {
            Some(next) => {
                std::mem::swap(&mut buf, &mut spare);
                next
            }
            None => read_some(reader, &mut buf),
        };
    }
}

/// Bytes read into `buf`; 0 at the end of the file. A read error ends the replay as the
/// end of the file would: what was read before it is kept.
fn read_some(reader: &mut impl Read, buf: &mut [u8]) -> usize {
    loop {
        match reader.read(buf) {
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            other => return other.unwrap_or(0),
        }
    }
}

fn decode(decoder: &mut Decoder, bytes: &[u8]) -> FlatCounts {
    // A short ASCII line is 3 to 6 bytes: room for the samples of these bytes at once.
    let mut samples = FlatCounts {
        channels: 0,
        counts: Vec::with_capacity(bytes.len() / 3 + 16),
    };
    decoder.feed(bytes, &mut samples);
    samples
}

/// Decodes one read on this thread, in parts of `PART_BYTES` (the decoder carries a line
/// or frame cut between them). For ASCII this beats reading ahead on both cores: a line
/// costs little more to decode than its bytes cost to copy in, so the decoder keeps pace
/// on the core whose cache the read just filled, while the recorder has the other core;
/// read ahead in parts, the two cores' caches passing the bytes and the recorder
/// competing for a core cost more than the decoding they share.
fn decode_block(decoder: &mut Decoder, bytes: &[u8]) -> Vec<FlatCounts> {
    bytes
        .chunks(PART_BYTES)
        .map(|part| decode(decoder, part))
        .collect()
}

/// Binary: the parts meet on the grid of the read's first frame, and all but the first
/// (which may finish a frame cut by the last read, and goes to the decoder meanwhile) are
/// scanned ahead (`Decoder::accept_ahead`).
fn decode_frames_ahead(decoder: &mut Decoder, bytes: &[u8]) -> Vec<FlatCounts> {
    let Some((start, frame)) = frame_grid(bytes) else {
        return vec![decode(decoder, bytes)];
    };
    let parts = grid_parts(bytes, start, frame, PARTS);
    let (first, ahead) = rayon::join(
        || decode(decoder, parts[0]),
        || {
            parts[1..]
                .par_iter()
                .map(|part| {
                    let mut samples = FlatCounts {
                        channels: 0,
                        counts: Vec::with_capacity(part.len() / 4 + 16),
                    };
                    let ahead = frames_ahead(part, &mut samples);
                    (samples, ahead)
                })
                .collect::<Vec<_>>()
        },
    );
    let rest = parts[1..]
        .iter()
        .zip(ahead)
        .map(|(part, (samples, ahead))| {
            if decoder.accept_ahead(&ahead, part) {
                samples
            } else {
                decode(decoder, part)
            }
        });
    std::iter::once(first).chain(rest).collect()
}

/// `bytes` cut into up to `parts` pieces of about equal length, the cuts on the grid of
/// frames of `frame` bytes from `start`.
fn grid_parts(bytes: &[u8], start: usize, frame: usize, parts: usize) -> Vec<&[u8]> {
    let mut pieces = Vec::with_capacity(parts);
    let mut from = 0;
    for k in 1..parts {
        let target = (bytes.len() * k / parts).saturating_sub(start);
        let cut = start + target / frame * frame;
        if cut > from && cut < bytes.len() {
            pieces.push(&bytes[from..cut]);
            from = cut;
        }
    }
    pieces.push(&bytes[from..]);
    pieces
}

/// The decoded samples as chunks, numbered on from `index`: all in one when running flat
/// out, in short slices when paced so the screen sees them arrive steadily.
fn split(samples: FlatCounts, spec: &ReplaySpec, index: &mut u64, dt: f64) -> Vec<Chunk> {
    if samples.is_empty() {
        return Vec::new();
    }
    let first = *index;
    *index += samples.len() as u64;
    if !spec.realtime {
        return vec![Chunk {
            t0: first as f64 * dt,
            dt,
            samples,
        }];
    }
    let per_chunk = (spec.rate_hz * PACED_CHUNK_S).ceil().max(1.0) as usize * samples.channels;
    samples
        .counts
        .chunks(per_chunk)
        .scan(first, |index, counts| {
            let chunk = Chunk {
                t0: *index as f64 * dt,
                dt,
                samples: FlatCounts {
                    channels: samples.channels,
                    counts: counts.to_vec(),
                },
            };
            *index += (counts.len() / samples.channels) as u64;
            Some(chunk)
        })
        .collect()
}

/// The longest a paced source sleeps before it looks whether it was told to stop.
const PACE_SLICE: Duration = Duration::from_millis(20);

/// Sleeps until `t` seconds after `started`, in slices so that a stop is seen at once (a
/// slow rate paces samples minutes apart); false when `stopped` said so first.
pub fn pace(started: Instant, t: f64, stopped: impl Fn() -> bool) -> bool {
    let due = Duration::try_from_secs_f64(t)
        .ok()
        .and_then(|t| started.checked_add(t));
    loop {
        if stopped() {
            return false;
        }
        let now = Instant::now();
        let left = due.map_or(PACE_SLICE, |due| due.saturating_duration_since(now));
        if left.is_zero() {
            return true;
        }
        std::thread::sleep(left.min(PACE_SLICE));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Lines of every kind the decoder tells apart: plain, multi-channel, CRLF, comments,
    /// blanks, junk and over-long lines.
    fn line() -> impl Strategy<Value = String> {
        prop_oneof![
            6 => (0u32..5000).prop_map(|v| format!("{v}\n")),
            2 => (0u32..5000).prop_map(|v| format!("{v}\r\n")),
            1 => (0u32..5000, 0u32..5000).prop_map(|(a, b)| format!("{a},{b}\n")),
            1 => Just("# banner\n".to_string()),
            1 => Just("\n".to_string()),
            1 => "[ -~]{0,12}\n",
            1 => Just(format!("{}\n", "7".repeat(300))),
        ]
    }

    fn one_pass(bytes: &[u8], read: usize) -> (Vec<u32>, DecodeStats) {
        let mut decoder = Decoder::new(Format::Auto);
        let mut counts = Vec::new();
        for part in bytes.chunks(read) {
            counts.extend(decode(&mut decoder, part).counts);
        }
        let mut rest = FlatCounts::default();
        decoder.finish(&mut rest);
        counts.extend(rest.counts);
        (counts, decoder.stats())
    }

    /// A reader that hands its bytes out in reads of the given sizes, in turn.
    struct Uneven<'a> {
        bytes: &'a [u8],
        sizes: Vec<usize>,
        next: usize,
    }

    impl Read for Uneven<'_> {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let want = self.sizes[self.next % self.sizes.len()];
            self.next += 1;
            let n = want.min(buf.len()).min(self.bytes.len());
            buf[..n].copy_from_slice(&self.bytes[..n]);
            self.bytes = &self.bytes[n..];
            Ok(n)
        }
    }

    fn in_parts(bytes: &[u8], sizes: Vec<usize>, one_at_a_time: bool) -> (Vec<u32>, DecodeStats) {
        let mut decoder = Decoder::new(Format::Auto);
        let mut counts = Vec::new();
        let mut reader = Uneven {
            bytes,
            sizes,
            next: 0,
        };
        let finished = decode_reads(&mut reader, &mut decoder, one_at_a_time, |parts, _| {
            counts.extend(parts.into_iter().flat_map(|p| p.counts));
            true
        });
        assert!(finished);
        (counts, decoder.stats())
    }

    proptest! {
        // Source: the decoder fed the whole stream in fixed reads is the reference; the
        // replay's loop, with reads cut anywhere and lines carried across them, must give
        // the same samples and counters.
        #[test]
        fn decoding_in_parts_equals_one_pass(
            lines in proptest::collection::vec(line(), 1..400),
            read in 8usize..3000,
            sizes in proptest::collection::vec(1usize..5000, 1..6),
            one_at_a_time in any::<bool>(),
        ) {
            let bytes = lines.concat().into_bytes();
            let (want, want_stats) = one_pass(&bytes, read);
            let (got, got_stats) = in_parts(&bytes, sizes, one_at_a_time);
            prop_assert_eq!(got, want);
            prop_assert_eq!(got_stats, want_stats);
        }
    }

    /// Binary frames of one channel, with sequence gaps, a restart, damaged bytes and junk
    /// between frames. (A stream whose channel count changes is cut or padded to its
    /// first frame's count chunk by chunk, so it has no one-pass answer to compare with.)
    fn frames() -> impl Strategy<Value = Vec<u8>> {
        let frame = (0u8..30, any::<u16>(), any::<u16>()).prop_map(|(kind, a, b)| (kind, a, b));
        proptest::collection::vec(frame, 1..300).prop_map(|frames| {
            let mut bytes = Vec::new();
            let mut seq = 0u16;
            for (kind, a, b) in frames {
                match kind {
                    0 => seq = seq.wrapping_add(3),
                    1 => seq = 0,
                    2 => bytes.extend_from_slice(&[0xA5, 0x5A, 7]),
                    3 => bytes.extend_from_slice(&b.to_le_bytes()),
                    _ => {}
                }
                let at = bytes.len();
                dbtrail::decode::encode_binary(seq, &[a], &mut bytes);
                if kind == 4 {
                    bytes[at + 5] ^= 0x10;
                }
                seq = seq.wrapping_add(1);
            }
            bytes
        })
    }

    proptest! {
        // Source: the sequential decoder is the reference, as above, for binary frames
        // scanned ahead in parts on the grid of each read's first frame.
        #[test]
        fn binary_in_parts_equals_one_pass(
            bytes in frames(),
            read in 8usize..3000,
            sizes in proptest::collection::vec(1usize..5000, 1..6),
            one_at_a_time in any::<bool>(),
        ) {
            let (want, want_stats) = one_pass(&bytes, read);
            let (got, got_stats) = in_parts(&bytes, sizes, one_at_a_time);
            prop_assert_eq!(got, want);
            prop_assert_eq!(got_stats, want_stats);
        }
    }
}
