//! Text files' bytes → text (SPEC §15): UTF-8 with or without a byte-order mark, UTF-16 LE/BE
//! recognised by their byte-order mark, and any other encoding by its WHATWG label
//! (`encoding = "windows-1252"`) through `encoding_rs`.
//!
//! A byte-order mark wins over `encoding`: it is written by the program that wrote the file.
//! Bytes that are not valid in the encoding are an error at their line, never silently
//! replaced, and so are NUL characters (UTF-16 text without a byte-order mark).

use std::path::Path;

use encoding_rs::{Encoding, UTF_8};

use crate::error::{Error, Result};
use crate::source::locate_in;

/// Decode a text data file.
pub fn decode(bytes: &[u8], path: &Path, encoding: Option<&'static Encoding>) -> Result<String> {
    let (encoding, body, from_bom) = match Encoding::for_bom(bytes) {
        Some((enc, bom_len)) => (enc, bytes.get(bom_len..).unwrap_or(&[]), true),
        None => (encoding.unwrap_or(UTF_8), bytes, false),
    };
    let text = if encoding == UTF_8 {
        decode_utf8(body, path, from_bom)?
    } else {
        let (text, had_errors) = encoding.decode_without_bom_handling(body);
        if had_errors {
            let at = text.find('\u{fffd}').unwrap_or(0);
            return Err(Error::input(format!(
                "the data file is not valid {} text",
                encoding.name()
            ))
            .at(locate_in(path, &text, at..at + 3))
            .help(if from_bom {
                "the file starts with a byte-order mark but is damaged at the marked place; export it again"
            } else {
                "check `encoding` in [data]: the marked bytes do not exist in that encoding"
            }));
        }
        text.into_owned()
    };
    if let Some(at) = text.find('\0') {
        return Err(Error::input("the data file contains NUL characters")
            .at(locate_in(path, &text, at..at + 1))
            .help(
                "this looks like UTF-16 text without a byte-order mark: set `encoding = \"utf-16le\"` (or \"utf-16be\") in [data]",
            ));
    }
    Ok(text)
}

/// Bodies from this size on are checked and copied in parallel pieces.
const PARALLEL_FROM: usize = 1 << 20;

/// `body` as a String when it is valid UTF-8: for large bodies, pieces cut before a byte that
/// starts a character are checked and copied on the rayon pool. Valid pieces concatenate to
/// valid text (a piece cut inside a character would itself be invalid), so this is exactly
/// `str::from_utf8` and a copy; None when any piece is invalid.
fn utf8_copy(body: &[u8]) -> Option<String> {
    use rayon::prelude::*;
    if body.len() < PARALLEL_FROM {
        return std::str::from_utf8(body).ok().map(str::to_string);
    }
    let parts = rayon::current_num_threads().max(1) * 4;
    let mut cuts = vec![0];
    for k in 1..parts {
        let mut at = (body.len() / parts * k).max(*cuts.last().unwrap_or(&0));
        // Back to a byte that is not a continuation byte (10xxxxxx): at most 3 steps in UTF-8.
        while at > 0 && body.get(at).is_some_and(|b| (b & 0xC0) == 0x80) {
            at -= 1;
        }
        cuts.push(at);
    }
    cuts.push(body.len());
    let mut out = vec![0u8; body.len()];
    let mut jobs = Vec::with_capacity(parts);
    let mut rest = &mut out[..];
    for (&lo, &hi) in cuts.iter().zip(cuts.iter().skip(1)) {
        let (mine, tail) = rest.split_at_mut(hi - lo);
        jobs.push((mine, body.get(lo..hi).unwrap_or_default()));
        rest = tail;
    }
    let valid = jobs.into_par_iter().all(|(dest, src)| {
        let ok = std::str::from_utf8(src).is_ok();
        if ok {
            dest.copy_from_slice(src);
        }
        ok
    });
    // SAFETY: every byte of `out` is a copy of a piece that `str::from_utf8` accepted, and
    // the pieces, in order, are all of `out`: a concatenation of valid UTF-8 is valid UTF-8.
    valid.then(|| unsafe { String::from_utf8_unchecked(out) })
}

fn decode_utf8(body: &[u8], path: &Path, from_bom: bool) -> Result<String> {
    if let Some(text) = utf8_copy(body) {
        return Ok(text);
    }
    match std::str::from_utf8(body) {
        Ok(t) => Ok(t.to_string()),
        Err(e) => {
            let lossy = String::from_utf8_lossy(body);
            let at = e.valid_up_to();
            Err(Error::input("the data file is not valid UTF-8 text")
                .at(locate_in(path, &lossy, at..at + 1))
                .help(if from_bom {
                    "the file starts with a UTF-8 byte-order mark but is damaged at the marked place; export it again"
                } else {
                    "old exports are often Windows-1252 (° and µ as single bytes): set `encoding = \"windows-1252\"` in [data], or save the file as UTF-8"
                }))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p() -> &'static Path {
        Path::new("d.csv")
    }

    #[test]
    fn large_texts_are_checked_in_pieces_exactly_as_whole() {
        // Above the parallel size, multi-byte characters straddling every possible cut (a
        // 2-, 3- and 4-byte character in turn), valid and with one damaged byte at the end,
        // in the middle and at the start: the same verdict and text as str::from_utf8.
        let unit = "t,°C,µS,𝜃\n1.5,20.1,3.3,x\n";
        let text: String = unit.repeat(PARALLEL_FROM / unit.len() + 7);
        for shift in 0..4 {
            let body = &text.as_bytes()[shift..];
            let expected = std::str::from_utf8(body).ok().map(str::to_string);
            assert_eq!(utf8_copy(body), expected, "shift {shift}");
        }
        for at in [text.len() - 1, text.len() / 2, 0] {
            let mut bad = text.clone().into_bytes();
            bad[at] = 0xFF;
            assert_eq!(utf8_copy(&bad), None, "damaged at {at}");
            assert!(decode_utf8(&bad, p(), false).is_err());
        }
        assert_eq!(utf8_copy(text.as_bytes()).as_deref(), Some(text.as_str()));
    }

    #[test]
    fn utf8_with_and_without_bom() {
        assert_eq!(
            decode(b"\xEF\xBB\xBFT,R\n", p(), None).ok().as_deref(),
            Some("T,R\n")
        );
        assert_eq!(
            decode("°C".as_bytes(), p(), None).ok().as_deref(),
            Some("°C")
        );
    }

    #[test]
    fn utf16_is_recognised_by_its_bom() {
        let le: Vec<u8> = [0xFF, 0xFE]
            .into_iter()
            .chain("T,Ω\n".encode_utf16().flat_map(u16::to_le_bytes))
            .collect();
        let be: Vec<u8> = [0xFE, 0xFF]
            .into_iter()
            .chain("T,Ω\n".encode_utf16().flat_map(u16::to_be_bytes))
            .collect();
        assert_eq!(decode(&le, p(), None).ok().as_deref(), Some("T,Ω\n"));
        // The BOM wins over a label.
        assert_eq!(
            decode(&be, p(), Some(encoding_rs::WINDOWS_1252))
                .ok()
                .as_deref(),
            Some("T,Ω\n")
        );
    }

    #[test]
    fn windows_1252_by_label() {
        // 0xB0 is ° and 0xB5 is µ in Windows-1252 (WHATWG Encoding Standard, index windows-1252).
        let bytes = b"unit;\xB0C;\xB5A\n";
        let enc = Encoding::for_label(b"windows-1252");
        assert_eq!(
            decode(bytes, p(), enc).ok().as_deref(),
            Some("unit;°C;µA\n")
        );
        // Without the label the same bytes are not UTF-8, and the hint names the label.
        let err = decode(bytes, p(), None)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(
            err.contains("d.csv:1:6") && err.contains("windows-1252"),
            "{err}"
        );
    }

    #[test]
    fn utf16_without_bom_is_refused_with_a_hint() {
        let bytes: Vec<u8> = "T,R\n".encode_utf16().flat_map(u16::to_le_bytes).collect();
        let err = decode(&bytes, p(), None)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(err.contains("NUL") && err.contains("utf-16le"), "{err}");
    }

    #[test]
    fn malformed_bytes_in_a_labelled_encoding_are_located() {
        // Shift_JIS lead byte 0x81 followed by a byte that cannot trail it.
        let enc = Encoding::for_label(b"shift_jis");
        let err = decode(b"T,R\n1,\x81\x20\n", p(), enc)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(
            err.contains("d.csv:2:3") && err.contains("Shift_JIS"),
            "{err}"
        );
    }
}
