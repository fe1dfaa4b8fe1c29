//! The check both decoder targets make: any bytes, cut anywhere into two reads (the first
//! byte picks where), decode without a panic, one sample per counted frame, 1 to 8
//! channels, and the same samples however the reads are cut.

use dbtrail::decode::{Decoder, Format, Frame, MAX_CHANNELS};

fn decode(format: Format, parts: &[&[u8]]) -> (Vec<Frame>, u64) {
    let mut d = Decoder::new(format);
    let mut frames = Vec::new();
    for part in parts {
        d.feed(part, &mut frames);
    }
    d.finish(&mut frames);
    (frames, d.stats().frames)
}

pub fn check(format: Format, data: &[u8]) {
    let Some((&cut, bytes)) = data.split_first() else {
        return;
    };
    let cut = usize::from(cut) * bytes.len() / 256;
    let (whole, counted) = decode(format, &[bytes]);
    assert_eq!(whole.len() as u64, counted);
    assert!(whole
        .iter()
        .all(|f| (1..=MAX_CHANNELS).contains(&f.channels())));
    let (split, _) = decode(format, &[&bytes[..cut], &bytes[cut..]]);
    assert_eq!(whole, split, "cut at {cut}");
}
