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

    /// Appends `s`.
    pub fn push(&mut self, s: &str) {
        self.text.push_str(s);
        self.push_end(self.text.len());
    }

    /// Appends every text of `other`, in order.
    pub fn append(&mut self, other: &Texts) {
        let offset = self.text.len();
        self.text.push_str(&other.text);
        match (&mut self.ends, &other.ends) {
            // Both narrow and the joined text still under 4 GiB: every end
            // moves by the same offset, which fits in 4 bytes.
            (Ends::Narrow(mine), Ends::Narrow(theirs))
                if u32::try_from(self.text.len()).is_ok() =>
            {
                let offset = offset as u32;
                mine.extend(theirs.iter().map(|&end| end + offset));
            }
            (_, Ends::Narrow(e)) => e
                .iter()
                .for_each(|&end| self.push_end(offset + end as usize)),
            (_, Ends::Wide(e)) => e.iter().for_each(|&end| self.push_end(offset + end)),
        }
    }

    /// Makes room for `texts` more texts of `bytes` bytes in all.
    pub fn reserve(&mut self, texts: usize, bytes: usize) {
        self.text.reserve(bytes);
        match &mut self.ends {
            Ends::Narrow(e) => e.reserve(texts),
            Ends::Wide(e) => e.reserve(texts),
        }
    }

    /// The bytes of all the texts together.
    pub fn bytes(&self) -> usize {
        self.text.len()
    }

    /// Records the end of the text just appended.
    fn push_end(&mut self, end: usize) {
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
    fn texts_serialise_as_a_vector_of_strings() {
        let v = ["a", "", "b\"c", "é"];
        let t: Texts = v.into_iter().collect();
        assert_eq!(
            serde_json::to_string(&t).unwrap(),
            serde_json::to_string(&v).unwrap()
        );
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
    fn wide_ends_keep_the_texts() {
        // The switch from 4-byte to 8-byte ends, forced on a small list.
        let mut t: Texts = ["ab", "c"].into_iter().collect();
        if let Ends::Narrow(e) = &t.ends {
            t.ends = Ends::Wide(e.iter().map(|&x| x as usize).collect());
        }
        t.push("de");
        assert_eq!(t.iter().collect::<Vec<_>>(), ["ab", "c", "de"]);
    }

    #[test]
    fn appended_texts_equal_the_texts_pushed_one_by_one() {
        let (a, b) = (["x", "", "yz"], ["é", "", "uvw", "q"]);
        let mut joined: Texts = a.into_iter().collect();
        let second: Texts = b.into_iter().collect();
        joined.reserve(second.len(), second.bytes());
        joined.append(&second);
        let pushed: Texts = a.into_iter().chain(b).collect();
        assert_eq!(joined, pushed);
        assert_eq!(joined.bytes(), 3 + 2 + 3 + 1);
        // Wide ends on either side.
        let mut wide = second.clone();
        if let Ends::Narrow(e) = &wide.ends {
            wide.ends = Ends::Wide(e.iter().map(|&x| x as usize).collect());
        }
        let mut joined: Texts = a.into_iter().collect();
        joined.append(&wide);
        assert_eq!(
            joined.iter().collect::<Vec<_>>(),
            pushed.iter().collect::<Vec<_>>()
        );
        wide.append(&second);
        assert_eq!(wide.len(), 8);
        assert_eq!(&wide[7], "q");
    }
}
