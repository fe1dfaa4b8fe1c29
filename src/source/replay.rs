//! The replay source: a raw capture (either mode) read from a file, its samples stamped at
//! a stated rate, as fast as possible or paced in real time.

use std::fs::File;
use std::io::Read;
use std::path::PathBuf;
use std::time::{Duration, Instant};

#[cfg(test)]
use dbtrail::decode::DecodeStats;
use dbtrail::decode::{plain_prefix, Decoder, FlatCounts, Format};
use dbtrail::record::{Chunk, Event};

use super::{spawn, Running, Sink, WhenFull};

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

/// Seconds of samples per chunk when pacing in real time.
const PACED_CHUNK_S: f64 = 0.02;

impl ReplaySpec {
    /// Starts reading the already opened file on its own thread.
    pub fn start(self, file: File) -> Running {
        let description = format!(
            "replay {} at {} samples/s{}",
            self.path.display(),
            self.rate_hz,
            if self.realtime { ", real time" } else { "" }
        );
        spawn(description, false, WhenFull::Wait, move |sink, started| {
            replay(&self, file, sink, started)
        })
    }
}

/// Bytes read at a time.
const READ_BYTES: usize = 1 << 20;

fn replay(spec: &ReplaySpec, mut file: File, sink: &mut Sink, started: Instant) {
    let mut decoder = Decoder::new(spec.format);
    let (mut buf, mut spare) = (vec![0u8; READ_BYTES], vec![0u8; READ_BYTES]);
    let mut n = read_some(&mut file, &mut buf);
    let mut index: u64 = 0;
    let dt = 1.0 / spec.rate_hz;
    sink.counters.set_connected(true);
    loop {
        let before = decoder.stats();
        let last = n == 0;
        let parts = if last {
            let mut rest = FlatCounts::default();
            decoder.finish(&mut rest);
            vec![rest]
        } else {
            // The next read goes on while this one is decoded.
            let (next, parts) = rayon::join(
                || read_some(&mut file, &mut spare),
                || match spec.realtime {
                    true => vec![decode(&mut decoder, &buf[..n])],
                    false => decode_in_two(&mut decoder, &buf[..n]),
                },
            );
            std::mem::swap(&mut buf, &mut spare);
            n = next;
            parts
        };
        sink.counters.add_decoded(&before, &decoder.stats());
        for chunk in parts
            .into_iter()
            .flat_map(|part| split(part, spec, &mut index, dt))
        {
            if spec.realtime {
                pace(started, chunk.t0);
            }
            if !sink.send(Event::Samples(chunk)) {
                return;
            }
        }
        if last {
            break;
        }
    }
    sink.counters
        .set_last_sample((index as f64 * dt * 1e9) as u64);
    sink.counters.set_connected(false);
}

/// Bytes read into `buf`; 0 at the end of the file. A read error ends the replay as the
/// end of the file would: what was read before it is kept.
fn read_some(file: &mut File, buf: &mut [u8]) -> usize {
    file.read(buf).unwrap_or(0)
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

/// Decodes one read of an ASCII capture as two halves at once, on two cores: the halves
/// meet at a line end, and the second is read ahead as plain one-number lines, which the
/// decoder takes only when it reaches them in the state that would have read them so
/// (`Decoder::accept_plain`). Anything else in the second half it feeds as usual, so the
/// samples and counters are those of one sequential pass.
fn decode_in_two(decoder: &mut Decoder, bytes: &[u8]) -> Vec<FlatCounts> {
    let middle = bytes.len() / 2;
    let cut = memchr::memchr(b'\n', &bytes[middle..]).map(|at| middle + at + 1);
    let Some(cut) = cut.filter(|_| decoder.format() == Some(Format::Ascii)) else {
        return vec![decode(decoder, bytes)];
    };
    let (first, second) = bytes.split_at(cut);
    let (first_samples, (ahead, used, lines)) = rayon::join(
        || decode(decoder, first),
        || {
            let mut ahead = Vec::with_capacity(second.len() / 3 + 16);
            let (used, lines) = plain_prefix(second, &mut ahead);
            (ahead, used, lines)
        },
    );
    let second_samples = if lines > 0 && decoder.accept_plain(lines) {
        let mut samples = FlatCounts {
            channels: 1,
            counts: ahead,
        };
        decoder.feed(&second[used..], &mut samples);
        samples
    } else {
        decode(decoder, second)
    };
    vec![first_samples, second_samples]
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

/// Sleeps until `t` seconds after `started`.
pub fn pace(started: Instant, t: f64) {
    let due = started + Duration::from_secs_f64(t);
    let now = Instant::now();
    if due > now {
        std::thread::sleep(due - now);
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

    fn in_two(bytes: &[u8], read: usize) -> (Vec<u32>, DecodeStats) {
        let mut decoder = Decoder::new(Format::Auto);
        let mut counts = Vec::new();
        for part in bytes.chunks(read) {
            for samples in decode_in_two(&mut decoder, part) {
                counts.extend(samples.counts);
            }
        }
        let mut rest = FlatCounts::default();
        decoder.finish(&mut rest);
        counts.extend(rest.counts);
        (counts, decoder.stats())
    }

    proptest! {
        // Source: the sequential decoder is the reference; decoding each read in two
        // halves, the second read ahead, must give the same samples and counters.
        #[test]
        fn decoding_in_two_equals_one_pass(lines in proptest::collection::vec(line(), 1..400), read in 8usize..3000) {
            let bytes = lines.concat().into_bytes();
            let (want, want_stats) = one_pass(&bytes, read);
            let (got, got_stats) = in_two(&bytes, read);
            prop_assert_eq!(got, want);
            prop_assert_eq!(got_stats, want_stats);
        }
    }

    // The case the read-ahead is for: a plain capture, cut into halves of about equal
    // bytes (888 of the 2000 lines are the five-byte ones past the middle).
    #[test]
    fn a_plain_capture_is_decoded_in_halves_that_meet_at_a_line() {
        let bytes: Vec<u8> = (0..2000u32)
            .flat_map(|v| format!("{v}\n").into_bytes())
            .collect();
        let mut decoder = Decoder::new(Format::Ascii);
        let parts = decode_in_two(&mut decoder, &bytes);
        assert_eq!(parts.len(), 2);
        assert_eq!(parts[1].len(), 888);
        let all: Vec<u32> = parts.into_iter().flat_map(|p| p.counts).collect();
        assert_eq!(all, (0..2000).collect::<Vec<_>>());
        assert_eq!(decoder.stats().frames, 2000);
    }
}
