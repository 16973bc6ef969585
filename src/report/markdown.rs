//! The report as Markdown, with each plot in its own SVG file beside it (Markdown cannot hold
//! SVG inline portably). Plot files are named `<stem>-<plot id>.svg` after the report's stem.

use super::document::{Document, Table};
use std::fmt::Write as _;

/// Whether `&` followed by `rest` would start a character reference (`&amp;`, `&#38;`, `&#x26;`):
/// `#`, or a letter then letters and digits up to a `;` (CommonMark 0.31, 2.5 "Entity and
/// numeric character references"). Only HTML5 entity names count there, a list we do not
/// carry, so any such name is escaped: `R&D;` gets a backslash it does not strictly need.
fn starts_reference(rest: &str) -> bool {
    if rest.starts_with('#') {
        return true;
    }
    let name: String = rest
        .chars()
        .take_while(char::is_ascii_alphanumeric)
        .collect();
    name.starts_with(|c: char| c.is_ascii_alphabetic()) && rest[name.len()..].starts_with(';')
}

/// Text from the document as Markdown inline content: the characters that would start markup
/// are backslash-escaped (CommonMark 0.31, 2.4 "Backslash escapes": any ASCII punctuation may
/// be), the rest is left as typed so the raw file reads like the HTML page.
///
/// - `*`, `` ` ``, `[`, `]` and `~` always (emphasis, code, links and images, GFM
///   strikethrough); a `]` would also end an image's alt text early.
/// - `_` unless between two letters or digits, where it cannot open or close emphasis
///   (CommonMark 0.31, 6.2 "Emphasis and strong emphasis", rules 2 and 4): `x_1` stays.
/// - `&` only before a character reference (see [`starts_reference`]): `Kataja & Timonen` stays.
/// - `<` only before a letter, `/`, `!` or `?`, which could open a raw HTML tag, comment,
///   processing instruction, declaration or an autolink (CommonMark 0.31, 6.5 "Autolinks" and
///   6.6 "Raw HTML"): `value < 20000` stays.
/// - `\` only before ASCII punctuation or at the end (where the caller's next character, such
///   as the `]` of an image, follows it); elsewhere it is literal.
/// - Line breaks become spaces, so the text stays one line, table row or list item.
fn inline(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    let mut prev = None;
    for (i, c) in s.char_indices() {
        let rest = &s[i + c.len_utf8()..];
        let next = rest.chars().next();
        let escape = match c {
            '*' | '`' | '[' | ']' | '~' => true,
            '_' => {
                !(prev.is_some_and(char::is_alphanumeric)
                    && next.is_some_and(char::is_alphanumeric))
            }
            '&' => starts_reference(rest),
            '<' => next.is_some_and(|n| n.is_ascii_alphabetic() || matches!(n, '/' | '!' | '?')),
            '\\' => next.is_none_or(|n| n.is_ascii_punctuation()),
            _ => false,
        };
        if escape {
            out.push('\\');
        }
        out.push(if matches!(c, '\n' | '\r') { ' ' } else { c });
        prev = Some(c);
    }
    out
}

/// [`inline`] text for a table cell: `|` would end the cell (GFM 0.29, 4.10 "Tables").
fn cell(s: &str) -> String {
    inline(s).replace('|', "\\|")
}

/// [`inline`] text that starts a line (a paragraph, list item or quoted line): a leading `#`,
/// `>`, `-`, `+`, `=` or `1.`/`1)` would make it a heading, quote, list or setext underline
/// (CommonMark 0.31, sections 4 and 5), so that one character is escaped; leading spaces
/// (an indented code block from four) are dropped.
fn line(s: &str) -> String {
    let t = inline(s.trim_start());
    let digits = t.chars().take_while(char::is_ascii_digit).count();
    if t.starts_with(['#', '>', '-', '+', '=']) {
        format!("\\{t}")
    } else if digits > 0 && t[digits..].starts_with(['.', ')']) {
        format!("{}\\{}", &t[..digits], &t[digits..])
    } else {
        t
    }
}

/// [`inline`] text of an ATX heading: a trailing run of `#` after a space would be read as the
/// optional closing sequence and dropped (CommonMark 0.31, 4.2 "ATX headings"), so its first
/// `#` is escaped.
fn heading(s: &str) -> String {
    let t = inline(s.trim());
    let body = t.trim_end_matches('#');
    if body.len() < t.len() && (body.is_empty() || body.ends_with(' ')) {
        format!("{body}\\{}", &t[body.len()..])
    } else {
        t
    }
}

fn table(t: &Table, o: &mut String) {
    let head: Vec<String> = t.headers.iter().map(|h| cell(h)).collect();
    let _ = writeln!(o, "| {} |", head.join(" | "));
    let _ = writeln!(o, "|{}", "---|".repeat(t.headers.len()));
    for row in &t.rows {
        let cells: Vec<String> = row
            .iter()
            .map(|c| c.iter().map(|l| cell(l)).collect::<Vec<_>>().join("; "))
            .collect();
        let _ = writeln!(o, "| {} |", cells.join(" | "));
    }
    o.push('\n');
}

/// Renders the Markdown text and the plot files `(file name, SVG text)` it links to.
pub fn render(d: &Document, stem: &str) -> (String, Vec<(String, String)>) {
    let mut o = String::new();
    let mut files = Vec::new();
    let mut image = |o: &mut String, id: &str, caption: &str, svg: &str| {
        let file = format!("{stem}-{id}.svg");
        let _ = writeln!(
            o,
            "![{}]({file})\n\n*{}*\n",
            inline(caption),
            inline(caption)
        );
        files.push((file, svg.to_string()));
    };
    let _ = writeln!(o, "# {}\n", heading(&d.title));
    let _ = writeln!(
        o,
        "Generated by voxperm {} from {} result file(s).\n",
        crate::VERSION,
        d.comparison.rows.len()
    );
    o.push_str("## Comparison of samples\n\n");
    table(&d.comparison, &mut o);
    for n in &d.table_notes {
        let _ = writeln!(o, "{}\n", line(n));
    }
    if !d.failed.is_empty() {
        o.push_str("### Samples without a result (failed, not run yet, or no percolating path: k = 0 at this resolution)\n\n");
        for (name, err) in &d.failed {
            let _ = writeln!(o, "- **{}**: {}", inline(name), inline(err));
        }
        o.push('\n');
    }
    if !d.plots.is_empty() {
        o.push_str("## Plots\n\n");
        for p in &d.plots {
            image(&mut o, &p.id, &p.caption, &p.svg);
        }
    }
    o.push_str("## Flow in each sample\n\n");
    for s in &d.samples {
        let _ = writeln!(o, "### {}\n", heading(&s.name));
        if s.plots.is_empty() {
            o.push_str("No flow snapshot in this result file.\n\n");
        }
        for p in &s.plots {
            image(&mut o, &p.id, &p.caption, &p.svg);
        }
        for w in &s.warnings {
            let _ = writeln!(o, "- warning: {}", inline(w));
        }
        if !s.warnings.is_empty() {
            o.push('\n');
        }
    }
    o.push_str("## Methods\n\n");
    for m in &d.methods {
        let _ = writeln!(o, "{}\n", line(m));
    }
    o.push_str("### Inputs\n\n");
    table(&d.inputs, &mut o);
    o.push_str("## Cautions\n\n");
    for c in &d.cautions {
        let _ = writeln!(o, "> {}\n>", line(c));
    }
    (o, files)
}

#[cfg(test)]
mod tests {
    use super::{cell, heading, inline, line};

    /// Text from users (a title, sample names, errors) cannot start markup or break a table.
    #[test]
    fn user_text_is_escaped() {
        assert_eq!(
            cell("<b>Lab & \"Co\"</b> | _x *a* [l](u) `c` ~~s~~ &amp; &#38;\nnext"),
            "\\<b>Lab & \"Co\"\\</b> \\| \\_x \\*a\\* \\[l\\](u) \\`c\\` \\~\\~s\\~\\~ \\&amp; \\&#38; next"
        );
        // An image's alt text keeps its closing bracket; a trailing backslash cannot escape it.
        assert_eq!(inline("a]b\\"), "a\\]b\\\\");
        assert_eq!(inline("\\* \\|"), "\\\\\\* \\\\|");
    }

    /// What cannot start markup is left as typed, so the raw file reads like the page.
    #[test]
    fn plain_text_stays_readable() {
        for s in [
            "Koponen, Kataja & Timonen 1996",
            "pore where value < 20000",
            "k < 1 & φ > 0.3; R&D, AT&T",
            "Σ|u|/Σu_axis, c_K = 5, foam_R2",
            "C:\\data\\scan 1",
            "1 < 2 <= 3 <3 <- a",
        ] {
            assert_eq!(inline(s), s);
        }
        assert!(!cell("a | b").contains(" | "));
    }

    /// Text that starts a line cannot turn into a heading, quote, list or code block.
    #[test]
    fn line_starts_are_escaped() {
        assert_eq!(line("# 1, b: Lattice"), "\\# 1, b: Lattice");
        assert_eq!(line("- x"), "\\- x");
        assert_eq!(line("> x"), "\\> x");
        assert_eq!(line("12. x"), "12\\. x");
        assert_eq!(line("3) x"), "3\\) x");
        assert_eq!(line("    code"), "code");
        assert_eq!(line("2 samples. x"), "2 samples. x");
        assert_eq!(heading("Core #"), "Core \\#");
        assert_eq!(heading("##"), "\\##");
        assert_eq!(heading("Core #3"), "Core #3");
    }
}
