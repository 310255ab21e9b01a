//! SHA-256 of a file's bytes, in lowercase hex: the identity of every
//! recording, specification and calibration in the records.

use sha2::{Digest, Sha256};

/// SHA-256 of `bytes`, lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    let mut s = String::with_capacity(64);
    for b in digest {
        s.push_str(&format!("{b:02x}"));
    }
    s
}

#[cfg(test)]
mod tests {
    /// FIPS 180-2, Appendix B.1: SHA-256("abc").
    #[test]
    fn matches_the_standard_example() {
        assert_eq!(
            super::sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
