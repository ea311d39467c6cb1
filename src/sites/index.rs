//! Finding a row's site fast: a hash map of site ids with a fast hasher,
//! and the previous row's site tried first.

use std::collections::HashMap;

/// A fast multiplicative hash of site ids (the rotate-xor-multiply step of
/// the hash used inside the Rust compiler). Not collision-resistant against
/// crafted ids, which can only slow a run down, never change its result.
#[derive(Default, Clone, Copy)]
struct IdHasher(u64);

impl std::hash::Hasher for IdHasher {
    #[inline]
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..chunk.len()].copy_from_slice(chunk);
            self.0 =
                (self.0.rotate_left(5) ^ u64::from_le_bytes(b)).wrapping_mul(0x517c_c1b7_2722_0a95);
        }
    }
    #[inline]
    fn write_usize(&mut self, n: usize) {
        self.0 = (self.0.rotate_left(5) ^ n as u64).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
    fn finish(&self) -> u64 {
        self.0
    }
}

type IdMap = HashMap<Vec<u8>, usize, std::hash::BuildHasherDefault<IdHasher>>;

/// Looks a site up, trying the previous row's site first (rows usually come in runs).
pub(super) struct SiteIndex {
    map: IdMap,
    last: Vec<u8>,
    last_ix: usize,
}

impl SiteIndex {
    pub(super) fn new() -> Self {
        SiteIndex {
            map: IdMap::default(),
            last: Vec::new(),
            last_ix: usize::MAX,
        }
    }

    #[inline]
    pub(super) fn find_or_insert(
        &mut self,
        id: &[u8],
        mut insert: impl FnMut(&[u8]) -> usize,
    ) -> usize {
        if self.last_ix != usize::MAX && self.last == id {
            return self.last_ix;
        }
        let ix = match self.map.get(id) {
            Some(&i) => i,
            None => {
                let i = insert(id);
                self.map.insert(id.to_vec(), i);
                i
            }
        };
        self.last.clear();
        self.last.extend_from_slice(id);
        self.last_ix = ix;
        ix
    }
}
