//! Finding a row's site fast: a hash map of site ids with a fast hasher
//! (short ids packed into one number), and the previous row's site tried
//! first.

use std::collections::HashMap;

/// A fast multiplicative hash of site ids (the rotate-xor-multiply step of
/// the hash used inside the Rust compiler, with its final rotation). Not
/// collision-resistant against crafted ids, which can only slow a run down,
/// never change its result.
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
    #[inline]
    fn write_u64(&mut self, n: u64) {
        self.0 = (self.0.rotate_left(5) ^ n).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
    /// The state rotated so that its well-mixed high bits become the low
    /// bits the hash table indexes by (a product's low bits depend only on
    /// the low bits of the id: the first byte or two).
    fn finish(&self) -> u64 {
        self.0.rotate_left(26)
    }
}

type IdMap = HashMap<Vec<u8>, usize, std::hash::BuildHasherDefault<IdHasher>>;
type ShortMap = HashMap<u64, usize, std::hash::BuildHasherDefault<IdHasher>>;

/// An id of at most 7 bytes as one number: its bytes, and its length in the
/// top byte (so `a` and `a\0` differ). None for longer ids.
#[inline]
fn pack(id: &[u8]) -> Option<u64> {
    if id.len() > 7 {
        return None;
    }
    let mut k = (id.len() as u64) << 56;
    for (i, &b) in id.iter().enumerate() {
        k |= u64::from(b) << (8 * i);
    }
    Some(k)
}

/// Looks a site up, trying the previous row's site first (rows usually come
/// in runs). Ids of up to 7 bytes (most site codes) are looked up as one
/// number, longer ones by their bytes.
pub(super) struct SiteIndex {
    short: ShortMap,
    map: IdMap,
    /// The previous row's id, packed (u64::MAX: none or a long id).
    last_short: u64,
    last: Vec<u8>,
    last_ix: usize,
}

impl SiteIndex {
    pub(super) fn new() -> Self {
        SiteIndex {
            short: ShortMap::default(),
            map: IdMap::default(),
            last_short: u64::MAX,
            last: Vec::new(),
            last_ix: usize::MAX,
        }
    }

    /// The index of site `id`; `insert` gives the index of a new site.
    #[inline]
    pub(super) fn find_or_insert(
        &mut self,
        id: &[u8],
        mut insert: impl FnMut(&[u8]) -> usize,
    ) -> usize {
        if let Some(k) = pack(id) {
            if k == self.last_short {
                return self.last_ix;
            }
            let ix = *self.short.entry(k).or_insert_with(|| insert(id));
            self.last_short = k;
            self.last_ix = ix;
            return ix;
        }
        if self.last_short == u64::MAX && self.last_ix != usize::MAX && self.last == id {
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
        self.last_short = u64::MAX;
        self.last.clear();
        self.last.extend_from_slice(id);
        self.last_ix = ix;
        ix
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_and_long_ids_are_told_apart() {
        let mut ix = SiteIndex::new();
        let mut n = 0;
        let ids: [&[u8]; 8] = [
            b"a",
            b"a\0",
            b"",
            b"abcdefg",
            b"abcdefgh",
            b"abcdefgh-long",
            b"b",
            b"\xff\xff",
        ];
        let mut got = Vec::new();
        for round in 0..3 {
            for id in ids.iter().chain(ids.iter().rev()) {
                let i = ix.find_or_insert(id, |_| {
                    n += 1;
                    n - 1
                });
                if round == 0 && got.len() < ids.len() {
                    got.push(i);
                }
                let want = ids.iter().position(|x| x == id).unwrap();
                assert_eq!(i, want, "{id:?}");
            }
        }
        assert_eq!(n, ids.len());
        assert_eq!(got, (0..ids.len()).collect::<Vec<_>>());
    }
}
