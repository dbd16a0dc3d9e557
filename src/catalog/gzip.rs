//! Gzip input shared by the readers that accept it (CSV and FITS).
//!
//! Files are decoded with flate2's [`MultiGzDecoder`], which reads every member
//! of a multi-member file (RFC 1952, section 2.2: a gzip file is a series of
//! members, as block-gzip tools write) and checks each member's CRC-32 and
//! length trailer when the member ends. A reader must therefore read a gzip
//! stream to its end for the trailer to be checked; [`drain`] does that.

use std::io::{self, BufRead, Read};

pub use flate2::bufread::MultiGzDecoder;

/// The two magic bytes that start every gzip member (RFC 1952, section 2.3.1).
pub const MAGIC: [u8; 2] = [0x1f, 0x8b];

/// Whether `head` starts with the gzip magic bytes.
pub fn is_gzip(head: &[u8]) -> bool {
    head.starts_with(&MAGIC)
}

/// A decoder over every member of the gzip stream `input`.
pub fn decoder<R: BufRead>(input: R) -> MultiGzDecoder<R> {
    MultiGzDecoder::new(input)
}

/// Reads `stream` to its end, so that the trailer of every gzip member is checked.
///
/// # Errors
/// The decoder's error for a bad checksum, a bad length or a truncated member.
pub fn drain(stream: &mut impl Read) -> io::Result<u64> {
    io::copy(stream, &mut io::sink())
}

/// The message for a gzip decoding error, which names what the decoder found.
pub fn describe(err: &io::Error) -> String {
    format!("broken or truncated compressed stream (gzip checksum, length or data): {err}")
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn member(text: &[u8]) -> Vec<u8> {
        let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        e.write_all(text).unwrap();
        e.finish().unwrap()
    }

    #[test]
    fn every_member_is_read() {
        let mut bytes = member(b"first ");
        bytes.extend(member(b"second"));
        let mut out = String::new();
        decoder(&bytes[..]).read_to_string(&mut out).unwrap();
        assert_eq!(out, "first second");
    }

    #[test]
    fn a_wrong_checksum_is_an_error() {
        let mut bytes = member(b"some text to check");
        let crc_at = bytes.len() - 8;
        bytes[crc_at] ^= 1;
        let err = drain(&mut decoder(&bytes[..])).unwrap_err();
        assert_eq!(
            err.to_string(),
            "corrupt gzip stream does not have a matching checksum"
        );
    }
}
