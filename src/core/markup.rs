//! Text inside HTML and SVG: the five characters that would be read as markup, escaped.
//!
//! Goes in: any text (a file name, a message). Comes out: text safe between tags and inside
//! quoted attribute values ([`escape`]).

/// `text` with `&`, `<`, `>`, `"` and `'` written as character references.
///
/// # Examples
/// ```
/// assert_eq!(beadline::core::markup::escape("a<b & 'c'"), "a&lt;b &amp; &#39;c&#39;");
/// ```
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}
