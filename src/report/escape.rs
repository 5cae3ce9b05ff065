//! Escaping user-supplied text (column names, level labels, file names, and messages
//! that quote them) for every markup format quorum writes: HTML, XML/SVG and Markdown.
//!
//! One module for all renderers so that no renderer invents its own rules. Every
//! function maps any Unicode string to text that the target format shows literally:
//!
//! * [`html`]: the five characters with meaning in HTML text and quoted attribute values
//!   (`& < > " '`) become character references; characters that XML 1.0 forbids (C0
//!   controls other than tab, newline and carriage return, U+FFFE, U+FFFF, lone
//!   surrogates cannot occur in Rust strings) become U+FFFD, so the same output is
//!   also well-formed XML (quorum's HTML is written to parse as XML too).
//! * [`xml`]: the same as [`html`]; named separately so that SVG code says what it means.
//! * [`xml_chars`]: only the forbidden-character replacement, for text handed to a
//!   library that escapes markup itself (the plotters SVG backend escapes `& < > " '`
//!   but passes control characters through, which would make the SVG ill-formed).
//! * [`markdown`]: a backslash before every ASCII punctuation character that Markdown
//!   (CommonMark and GitHub tables) can read as syntax, `<`/`>`/`&` as character
//!   references so that no raw HTML survives, and line breaks as spaces so a label can
//!   never start a new block or break a table row.

/// Whether XML 1.0 allows `c` in a document (§2.2 `Char`; Rust `char`s are never
/// surrogates).
fn xml_allowed(c: char) -> bool {
    matches!(c, '\t' | '\n' | '\r') || (c >= ' ' && c != '\u{FFFE}' && c != '\u{FFFF}')
}

/// `s` with every character XML 1.0 forbids replaced by U+FFFD (no markup escaping).
pub fn xml_chars(s: &str) -> String {
    s.chars().map(|c| if xml_allowed(c) { c } else { '\u{FFFD}' }).collect()
}

/// `s` as HTML text or as the value of a quoted attribute: `&amp; &lt; &gt; &quot; &#39;`,
/// forbidden characters as U+FFFD.
pub fn html(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c if xml_allowed(c) => out.push(c),
            _ => out.push('\u{FFFD}'),
        }
    }
    out
}

/// `s` as XML (SVG) character data or a quoted attribute value; the same rules as [`html`].
pub fn xml(s: &str) -> String {
    html(s)
}

/// `s` as literal Markdown text (CommonMark with the GitHub extensions: tables,
/// strikethrough, math, footnotes, definition lists), also safe inside a table cell,
/// while staying readable as plain text: a backslash goes before the characters that
/// can open inline syntax anywhere (`` \ ` * _ [ ] < > | ~ & $ ^ ``) and before the
/// block markers that only count at the start of a line (`#`, `-`, `+`, `=`, `:` first;
/// `.` or `)` after leading digits) when `at_line_start`, where leading blanks are
/// dropped; line breaks become spaces and
/// characters XML forbids become U+FFFD. Checked with a CommonMark parser in
/// `tests/checks/report.rs`.
pub fn markdown(s: &str, at_line_start: bool) -> String {
    // Leading blanks at the start of a line would indent (four make a code block, fewer
    // still let a marker count); a rendered paragraph drops them anyway.
    let s = if at_line_start { s.trim_start_matches([' ', '\t']) } else { s };
    let chars: Vec<char> = s.chars().collect();
    let leading_digits = if at_line_start { chars.iter().take_while(|c| c.is_ascii_digit()).count() } else { 0 };
    let mut out = String::with_capacity(s.len() + 8);
    for (i, &ch) in chars.iter().enumerate() {
        let start_marker = at_line_start
            && ((i == 0 && matches!(ch, '#' | '-' | '+' | '=' | ':'))
                || (leading_digits > 0 && i == leading_digits && matches!(ch, '.' | ')')));
        if matches!(ch, '\\' | '`' | '*' | '_' | '[' | ']' | '<' | '>' | '|' | '~' | '&' | '$' | '^') || start_marker {
            out.push('\\');
        }
        match ch {
            '\n' | '\r' => out.push(' '),
            c if xml_allowed(c) => out.push(c),
            _ => out.push('\u{FFFD}'),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const HOSTILE: &[&str] = &[
        "<script>alert('x')</script>",
        "a & b",
        "\"quoted\" 'single'",
        "]]><!--",
        "tab\there\u{1}\u{7}\u{1b}[31m",
        "Ünïcödé ✓ 日本語 🙂",
        "**bold** _it_ [link](http://x) `code` | pipe # head",
    ];

    #[test]
    fn html_leaves_no_markup() {
        for s in HOSTILE {
            let e = html(s);
            assert!(!e.contains('<') && !e.contains('>'), "{e}");
            assert!(!e.contains('"') && !e.contains('\''), "{e}");
            // Every & starts a reference we wrote.
            for (i, _) in e.match_indices('&') {
                let rest = &e[i..];
                assert!(["&amp;", "&lt;", "&gt;", "&quot;", "&#39;"].iter().any(|r| rest.starts_with(r)), "{e}");
            }
            assert!(e.chars().all(xml_allowed), "{e:?}");
        }
        assert_eq!(html("<b>&\"'"), "&lt;b&gt;&amp;&quot;&#39;");
        assert_eq!(html("Ünïcödé ✓"), "Ünïcödé ✓");
        assert_eq!(html("a\u{1}b"), "a\u{FFFD}b");
        assert_eq!(xml("]]>"), "]]&gt;");
    }

    #[test]
    fn xml_chars_only_replaces_forbidden_characters() {
        assert_eq!(xml_chars("a<b>&\u{0}\u{1f}\t\n\u{FFFF}"), "a<b>&\u{FFFD}\u{FFFD}\t\n\u{FFFD}");
    }

    #[test]
    fn markdown_escapes_syntax_but_stays_readable() {
        assert_eq!(markdown("a*b_c", false), "a\\*b\\_c");
        assert_eq!(markdown("<script>", false), "\\<script\\>");
        assert_eq!(markdown("x|y\nz", false), "x\\|y z");
        assert_eq!(markdown("[l](u)", false), "\\[l\\](u)");
        assert_eq!(markdown("p = .05, F(2, 51)", true), "p = .05, F(2, 51)");
        assert_eq!(markdown("# h", true), "\\# h");
        assert_eq!(markdown("# h", false), "# h");
        assert_eq!(markdown("12. x", true), "12\\. x");
        assert_eq!(markdown("    # h", true), "\\# h");
        assert_eq!(markdown("a\u{1}b", false), "a\u{FFFD}b");
    }
}
