//! Many short texts in one allocation: the cells of a table's column, the
//! labels of a million studies. One `String` holds them back to back and
//! one list holds where each ends (4 bytes a text while the whole is under
//! 4 GiB, 8 bytes beyond), instead of a `String` of its own per text (24
//! bytes plus a heap block each).

use std::ops::Index;

/// Texts stored back to back; `get(i)` is the `i`-th pushed.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Texts {
    text: String,
    ends: Ends,
}

/// Where each text ends in [`Texts::text`].
#[derive(Debug, Clone, PartialEq, Eq)]
enum Ends {
    /// While the text is under 4 GiB.
    Narrow(Vec<u32>),
    /// Beyond.
    Wide(Vec<usize>),
}

impl Default for Ends {
    fn default() -> Self {
        Ends::Narrow(Vec::new())
    }
}

impl Texts {
    /// An empty list with room for `n` texts.
    pub fn with_capacity(n: usize) -> Self {
        Texts {
            text: String::new(),
            ends: Ends::Narrow(Vec::with_capacity(n)),
        }
    }

    /// An empty list with room for `n` texts of `bytes` bytes in all (a
    /// list filled to a known size is then allocated once, without the
    /// blocks that growing by doubling leaves behind).
    pub fn with_capacity_bytes(n: usize, bytes: usize) -> Self {
        Texts {
            text: String::with_capacity(bytes),
            ends: Ends::Narrow(Vec::with_capacity(n)),
        }
    }

    /// The total length of the texts, in bytes.
    pub fn byte_len(&self) -> usize {
        self.text.len()
    }

    /// Appends `s`.
    pub fn push(&mut self, s: &str) {
        self.text.push_str(s);
        let end = self.text.len();
        match &mut self.ends {
            Ends::Narrow(e) => match u32::try_from(end) {
                Ok(end) => e.push(end),
                Err(_) => {
                    let mut wide: Vec<usize> = e.iter().map(|&x| x as usize).collect();
                    wide.push(end);
                    self.ends = Ends::Wide(wide);
                }
            },
            Ends::Wide(e) => e.push(end),
        }
    }

    /// Appends the texts of `other`, in order (one copy of its text and
    /// of its ends, moved by the text already here).
    pub fn append(&mut self, other: &Texts) {
        let shift = self.text.len();
        self.text.push_str(&other.text);
        let wide = |e: &[u32]| e.iter().map(|&x| x as usize + shift).collect::<Vec<_>>();
        match (&mut self.ends, &other.ends) {
            (Ends::Narrow(e), Ends::Narrow(o)) if u32::try_from(self.text.len()).is_ok() => {
                // Every moved end is at most the new length, which fits.
                e.extend(o.iter().map(|&x| x + shift as u32));
            }
            (Ends::Wide(e), Ends::Narrow(o)) => e.extend(wide(o)),
            (Ends::Wide(e), Ends::Wide(o)) => e.extend(o.iter().map(|&x| x + shift)),
            (Ends::Narrow(e), o) => {
                let mut all: Vec<usize> = e.iter().map(|&x| x as usize).collect();
                match o {
                    Ends::Narrow(o) => all.extend(wide(o)),
                    Ends::Wide(o) => all.extend(o.iter().map(|&x| x + shift)),
                }
                self.ends = Ends::Wide(all);
            }
        }
    }

    /// Removes every text, keeping the room they took (for a list that is
    /// filled again).
    pub fn clear(&mut self) {
        self.text.clear();
        match &mut self.ends {
            Ends::Narrow(e) => e.clear(),
            Ends::Wide(_) => self.ends = Ends::default(),
        }
    }

    /// Number of texts.
    pub fn len(&self) -> usize {
        match &self.ends {
            Ends::Narrow(e) => e.len(),
            Ends::Wide(e) => e.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The `i`-th text.
    ///
    /// # Panics
    /// When `i` is not below [`Texts::len`].
    pub fn get(&self, i: usize) -> &str {
        let (start, end) = match &self.ends {
            Ends::Narrow(e) => (if i == 0 { 0 } else { e[i - 1] as usize }, e[i] as usize),
            Ends::Wide(e) => (if i == 0 { 0 } else { e[i - 1] }, e[i]),
        };
        &self.text[start..end]
    }

    /// Whether any text is empty: a text ends where the one before it
    /// ended (the first at 0), found from the ends alone, without a branch
    /// per text.
    pub fn any_empty(&self) -> bool {
        fn any<T: Copy + PartialEq + Default>(ends: &[T]) -> bool {
            ends.first().is_some_and(|&e| e == T::default())
                || ends.windows(2).fold(false, |any, w| any | (w[0] == w[1]))
        }
        match &self.ends {
            Ends::Narrow(e) => any(e),
            Ends::Wide(e) => any(e),
        }
    }

    /// The texts in order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = &str> + Clone + '_ {
        (0..self.len()).map(|i| self.get(i))
    }

    /// The texts as owned strings (for callers that need a slice of them).
    pub fn to_vec(&self) -> Vec<String> {
        self.iter().map(String::from).collect()
    }

    /// Frees the spare capacity.
    pub fn shrink_to_fit(&mut self) {
        self.text.shrink_to_fit();
        match &mut self.ends {
            Ends::Narrow(e) => e.shrink_to_fit(),
            Ends::Wide(e) => e.shrink_to_fit(),
        }
    }
}

impl Index<usize> for Texts {
    type Output = str;

    fn index(&self, i: usize) -> &str {
        self.get(i)
    }
}

impl<S: AsRef<str>> FromIterator<S> for Texts {
    fn from_iter<I: IntoIterator<Item = S>>(iter: I) -> Self {
        let iter = iter.into_iter();
        let mut t = Texts::with_capacity(iter.size_hint().0);
        for s in iter {
            t.push(s.as_ref());
        }
        t
    }
}

/// Written as a JSON array of strings, exactly as a `Vec<String>` of the
/// same texts.
impl serde::Serialize for Texts {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.collect_seq(self.iter())
    }
}

/// The schema of a `Vec<String>`, which is what the JSON holds.
impl schemars::JsonSchema for Texts {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        <Vec<String> as schemars::JsonSchema>::schema_name()
    }

    fn inline_schema() -> bool {
        <Vec<String> as schemars::JsonSchema>::inline_schema()
    }

    fn json_schema(generator: &mut schemars::SchemaGenerator) -> schemars::Schema {
        <Vec<String> as schemars::JsonSchema>::json_schema(generator)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn empty_texts_are_found_from_the_ends() {
        let cases: [&[&str]; 6] = [
            &[],
            &["a"],
            &[""],
            &["a", "bc", "d"],
            &["a", "", "d"],
            &["a", "b", ""],
        ];
        for texts in cases {
            let t: Texts = texts.iter().copied().collect();
            assert_eq!(
                t.any_empty(),
                texts.iter().any(|s| s.is_empty()),
                "{texts:?}"
            );
        }
        // Past 4 GiB of text the ends are held wide; the same answers.
        let wide = |ends: Vec<usize>| Texts {
            text: "abc".into(),
            ends: Ends::Wide(ends),
        };
        assert!(wide(vec![1, 3, 3]).any_empty());
        assert!(wide(vec![0, 2, 3]).any_empty());
        assert!(!wide(vec![1, 2, 3]).any_empty());
    }

    #[test]
    fn texts_serialise_as_a_vector_of_strings() {
        let v = ["a", "", "b\"c", "é"];
        let t: Texts = v.into_iter().collect();
        assert_eq!(
            serde_json::to_string(&t).unwrap(),
            serde_json::to_string(&v).unwrap()
        );
    }

    #[test]
    fn texts_with_room_come_back_as_pushed() {
        let v = ["ab", "", "cde"];
        let mut t = Texts::with_capacity_bytes(3, 5);
        for s in v {
            t.push(s);
        }
        assert_eq!(t, v.into_iter().collect::<Texts>());
        assert_eq!(t.byte_len(), 5);
    }

    #[test]
    fn texts_come_back_as_pushed() {
        let t: Texts = ["a", "", "ccc", "é"].into_iter().collect();
        assert_eq!(t.len(), 4);
        assert_eq!(t.iter().collect::<Vec<_>>(), ["a", "", "ccc", "é"]);
        assert_eq!(&t[2], "ccc");
        assert_eq!(t.to_vec()[3], "é");
        assert!(Texts::default().is_empty());
    }

    #[test]
    fn appended_texts_come_back_as_pushed() {
        let a = ["ab", "", "c"];
        let b = ["", "dé", "f", ""];
        let mut t: Texts = a.into_iter().collect();
        t.append(&b.into_iter().collect());
        t.append(&Texts::default());
        let pushed: Texts = a.into_iter().chain(b).collect();
        assert_eq!(t, pushed);
        // Appending to and from wide ends.
        let mut wide: Texts = a.into_iter().collect();
        if let Ends::Narrow(e) = &wide.ends {
            wide.ends = Ends::Wide(e.iter().map(|&x| x as usize).collect());
        }
        let mut narrow: Texts = b.into_iter().collect();
        narrow.append(&wide);
        wide.append(&b.into_iter().collect());
        assert_eq!(
            wide.iter().collect::<Vec<_>>(),
            pushed.iter().collect::<Vec<_>>()
        );
        let back: Vec<&str> = b.into_iter().chain(a).collect();
        assert_eq!(narrow.iter().collect::<Vec<_>>(), back);
        // Cleared lists are empty, and filled again as new ones.
        for mut t in [wide, narrow] {
            t.clear();
            assert!(t.is_empty());
            t.append(&b.into_iter().collect());
            assert_eq!(t, b.into_iter().collect());
        }
    }

    #[test]
    fn wide_ends_keep_the_texts() {
        // The switch from 4-byte to 8-byte ends, forced on a small list.
        let mut t: Texts = ["ab", "c"].into_iter().collect();
        if let Ends::Narrow(e) = &t.ends {
            t.ends = Ends::Wide(e.iter().map(|&x| x as usize).collect());
        }
        t.push("de");
        assert_eq!(t.iter().collect::<Vec<_>>(), ["ab", "c", "de"]);
    }
}
