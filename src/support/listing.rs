//! Long lists in prose: the first few items named, the rest counted, so
//! that a message about a million studies stays a sentence.

/// The first `max` of `items` joined by ", ", followed by " and N more"
/// when `total` (the length of the whole list, which `items` may give only
/// in part) is larger than the number named.
///
/// # Examples
/// ```
/// use pondus::support::listing::first_of;
/// assert_eq!(first_of(["a", "b"], 2, 5), "a, b");
/// assert_eq!(first_of(["a", "b", "c"], 3, 2), "a, b and 1 more");
/// assert_eq!(first_of(["a", "b"], 10, 2), "a, b and 8 more");
/// ```
pub fn first_of<S: AsRef<str>>(
    items: impl IntoIterator<Item = S>,
    total: usize,
    max: usize,
) -> String {
    let mut s = String::new();
    let mut named = 0;
    for item in items.into_iter().take(max) {
        if named > 0 {
            s.push_str(", ");
        }
        s.push_str(item.as_ref());
        named += 1;
    }
    if total > named {
        s.push_str(&format!(" and {} more", total - named));
    }
    s
}
