//! Byte spans inside JSON text, so that problems found in a parsed JSON document (a plan, a
//! counts file) can be shown with line, column and a caret.
//!
//! In: the JSON source and a path of object keys and array indices from the top. Out: the
//! byte spans of the member's key (for object members) and of its value, or `None` when the
//! path does not exist or the text is not well-formed along the way. Invariant: never panics,
//! whatever the text; the walk only skips over values, so it costs one pass over the prefix of
//! the text that precedes the target.

/// One step of a path: an object key (its `nth` occurrence, counted from 0, for files that
/// repeat a key) or an array index.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Step<'a> {
    Key(&'a str),
    /// The `n`-th member named so (0 = the first), for diagnostics about repeated keys.
    KeyNth(&'a str, usize),
    Index(usize),
}

/// Byte spans `(offset, len)` of a member's key (quotes included; `None` for array elements)
/// and of its value.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Span {
    pub key: Option<(usize, usize)>,
    pub value: (usize, usize),
}

impl Span {
    /// The key's span if there is one, else the value's.
    pub fn key_or_value(&self) -> (usize, usize) {
        self.key.unwrap_or(self.value)
    }
}

/// The start of the token that ends at byte `offset`: serde_json reports a problem with a
/// string (an unknown key or variant, a duplicate key) at its closing quote; this steps back
/// to the opening quote so the caret sits under the whole string. Other offsets are returned
/// unchanged.
pub fn token_start(src: &str, offset: usize) -> usize {
    let b = src.as_bytes();
    if offset == 0 || b.get(offset) != Some(&b'"') {
        return offset;
    }
    let mut i = offset;
    while i > 0 {
        i -= 1;
        if b[i] == b'"' && (i == 0 || b[i - 1] != b'\\') {
            return i;
        }
        if b[i] == b'\n' {
            break;
        }
    }
    offset
}

/// Finds the member at `path` in `src`. An empty path gives the whole top-level value.
pub fn locate(src: &str, path: &[Step]) -> Option<Span> {
    let b = src.as_bytes();
    let mut i = skip_ws(b, 0);
    let mut span = Span {
        key: None,
        value: (i, skip_value(b, i)?.checked_sub(i)?),
    };
    for step in path {
        span = match *step {
            Step::Key(k) => member(src, i, k, 0)?,
            Step::KeyNth(k, n) => member(src, i, k, n)?,
            Step::Index(n) => element(b, i, n)?,
        };
        i = span.value.0;
    }
    Some(span)
}

/// The `nth` member named `want` of the object starting at `i`.
fn member(src: &str, mut i: usize, want: &str, nth: usize) -> Option<Span> {
    let b = src.as_bytes();
    if b.get(i) != Some(&b'{') {
        return None;
    }
    i = skip_ws(b, i + 1);
    let mut seen = 0usize;
    loop {
        if b.get(i) == Some(&b'}') {
            return None;
        }
        let kstart = i;
        let kend = skip_string(b, i)?;
        let key: String = serde_json::from_str(src.get(kstart..kend)?).ok()?;
        i = skip_ws(b, kend);
        if b.get(i) != Some(&b':') {
            return None;
        }
        i = skip_ws(b, i + 1);
        let vstart = i;
        let vend = skip_value(b, i)?;
        if key == want {
            if seen == nth {
                return Some(Span {
                    key: Some((kstart, kend - kstart)),
                    value: (vstart, vend - vstart),
                });
            }
            seen += 1;
        }
        i = skip_ws(b, vend);
        match b.get(i) {
            Some(b',') => i = skip_ws(b, i + 1),
            _ => return None,
        }
    }
}

/// Element `n` of the array starting at `i`.
fn element(b: &[u8], mut i: usize, n: usize) -> Option<Span> {
    if b.get(i) != Some(&b'[') {
        return None;
    }
    i = skip_ws(b, i + 1);
    let mut idx = 0usize;
    loop {
        if b.get(i) == Some(&b']') {
            return None;
        }
        let vstart = i;
        let vend = skip_value(b, i)?;
        if idx == n {
            return Some(Span {
                key: None,
                value: (vstart, vend - vstart),
            });
        }
        idx += 1;
        i = skip_ws(b, vend);
        match b.get(i) {
            Some(b',') => i = skip_ws(b, i + 1),
            _ => return None,
        }
    }
}

fn skip_ws(b: &[u8], mut i: usize) -> usize {
    while i < b.len() && b[i].is_ascii_whitespace() {
        i += 1;
    }
    i
}

fn skip_string(b: &[u8], i: usize) -> Option<usize> {
    if b.get(i) != Some(&b'"') {
        return None;
    }
    let mut j = i + 1;
    while j < b.len() {
        match b[j] {
            b'\\' => j += 2,
            b'"' => return Some(j + 1),
            _ => j += 1,
        }
    }
    None
}

fn skip_value(b: &[u8], i: usize) -> Option<usize> {
    match b.get(i)? {
        b'"' => skip_string(b, i),
        b'{' | b'[' => {
            let mut depth = 0usize;
            let mut j = i;
            while j < b.len() {
                match b[j] {
                    b'"' => {
                        j = skip_string(b, j)?;
                        continue;
                    }
                    b'{' | b'[' => depth += 1,
                    b'}' | b']' => {
                        depth = depth.checked_sub(1)?;
                        if depth == 0 {
                            return Some(j + 1);
                        }
                    }
                    _ => {}
                }
                j += 1;
            }
            None
        }
        _ => {
            let mut j = i;
            while j < b.len() && !matches!(b[j], b',' | b'}' | b']') && !b[j].is_ascii_whitespace()
            {
                j += 1;
            }
            (j > i).then_some(j)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const DOC: &str =
        "{\n  \"a\": 1,\n  \"list\": [10, {\"x\": \"y\"}, [3]],\n  \"a\": {\"b\": true}\n}";

    fn text(src: &str, s: (usize, usize)) -> &str {
        &src[s.0..s.0 + s.1]
    }

    #[test]
    fn keys_indices_and_repeated_keys() {
        let s = locate(DOC, &[Step::Key("a")]).unwrap();
        assert_eq!(text(DOC, s.key.unwrap()), "\"a\"");
        assert_eq!(text(DOC, s.value), "1");
        let s = locate(DOC, &[Step::KeyNth("a", 1), Step::Key("b")]).unwrap();
        assert_eq!(text(DOC, s.value), "true");
        let s = locate(DOC, &[Step::Key("list"), Step::Index(1), Step::Key("x")]).unwrap();
        assert_eq!(text(DOC, s.value), "\"y\"");
        let s = locate(DOC, &[Step::Key("list"), Step::Index(2)]).unwrap();
        assert_eq!((text(DOC, s.value), s.key), ("[3]", None));
        assert!(locate(DOC, &[Step::Key("list"), Step::Index(3)]).is_none());
        assert!(locate(DOC, &[Step::KeyNth("a", 2)]).is_none());
        assert!(locate(DOC, &[Step::Key("a"), Step::Key("b")]).is_none());
    }

    #[test]
    fn token_start_steps_back_over_a_string() {
        let src = "{\"a\": \"xy\\\"z\"}";
        let close = src.rfind('"').unwrap();
        assert_eq!(token_start(src, close), 6);
        assert_eq!(token_start(src, 1), 1, "an opening quote stays");
        assert_eq!(token_start("{ 12 }", 3), 3);
    }

    #[test]
    fn broken_text_gives_none_not_a_panic() {
        for src in [
            "",
            "{",
            "{\"a\"",
            "{\"a\": [1, }",
            "]]]",
            "{\"a\": \"\\",
            "\"é",
        ] {
            let _ = locate(src, &[Step::Key("a"), Step::Index(0)]);
            let _ = locate(src, &[]);
        }
    }
}
