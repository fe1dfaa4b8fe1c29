//! Any bytes, cut anywhere into two reads, through the ascii decoder: no panic, one sample per
//! frame counted, the same samples however the reads are cut, and never more channels
//! than a frame can carry.
#![no_main]

use dbtrail::decode::{Decoder, Format, Frame, MAX_CHANNELS};
use libfuzzer_sys::fuzz_target;

fn decode(parts: &[&[u8]]) -> (Vec<Frame>, u64) {
    let mut d = Decoder::new(Format::Ascii);
    let mut frames = Vec::new();
    for part in parts {
        d.feed(part, &mut frames);
    }
    d.finish(&mut frames);
    (frames, d.stats().frames)
}

fuzz_target!(|data: &[u8]| {
    let Some((&cut, bytes)) = data.split_first() else {
        return;
    };
    let cut = usize::from(cut) * bytes.len() / 256;
    let (whole, counted) = decode(&[bytes]);
    assert_eq!(whole.len() as u64, counted);
    assert!(whole
        .iter()
        .all(|f| (1..=MAX_CHANNELS).contains(&f.channels())));
    let (split, _) = decode(&[&bytes[..cut], &bytes[cut..]]);
    assert_eq!(whole, split, "cut at {cut}");
});
