//! SHA-256 of the input, for the reproducibility records (JSON `input.sha256`,
//! the report's reproducibility block). One module for both the in-memory
//! and the streamed case.

use crate::error::{Error, Result};
use sha2::{Digest, Sha256};
use std::io::Read;

/// Lowercase hex of a digest.
fn hex(digest: &[u8]) -> String {
    let mut out = String::with_capacity(2 * digest.len());
    for b in digest {
        out.push_str(&format!("{b:02x}"));
    }
    out
}

/// SHA-256 of `bytes` as lowercase hex (FIPS 180-4, through the `sha2` crate).
///
/// # Examples
/// ```
/// // FIPS 180-2 appendix B.1: the message "abc".
/// assert_eq!(
///     pondus::support::hash::sha256_hex(b"abc"),
///     "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
/// );
/// ```
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// SHA-256 of a file, read in fixed-size blocks (memory does not grow with
/// the file), lowercase hex.
///
/// # Errors
/// [`Error::Io`] when the file cannot be read.
pub fn sha256_file(path: &std::path::Path) -> Result<String> {
    let io = |e: std::io::Error| Error::Io {
        action: "reading",
        path: path.display().to_string(),
        source: e,
    };
    let mut file = std::fs::File::open(path).map_err(io)?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = file.read(&mut buf).map_err(io)?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hex(&hasher.finalize()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_streamed_and_in_memory_digests_agree() {
        let dir = std::env::temp_dir().join(format!("pondus-hash-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("data.bin");
        let bytes: Vec<u8> = (0..200_000u32).map(|i| (i * 7 % 251) as u8).collect();
        std::fs::write(&path, &bytes).unwrap();
        let streamed = sha256_file(&path).unwrap();
        std::fs::remove_dir_all(&dir).unwrap();
        assert_eq!(streamed, sha256_hex(&bytes));
    }
}
