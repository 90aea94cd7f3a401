//! Spans and the one renderer that draws every error efold reports.
//!
//! Each stage has its own error type; each converts itself into a [`Diagnostic`] (a message, an
//! optional span with a label, and hints). [`Diagnostic::render`] draws the source line with
//! carets under the span. Nothing else in efold formats an error for people.

use std::fmt;

/// A byte range `start..end` in a source text.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub struct Span {
    /// First byte.
    pub start: usize,
    /// One past the last byte.
    pub end: usize,
}

impl Span {
    /// A span from `start` to `end` (bytes).
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }

    /// The smallest span covering both.
    pub fn join(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }

    /// The same span moved `by` bytes to the right (an expression inside a larger file).
    pub fn shift(self, by: usize) -> Span {
        Span::new(self.start + by, self.end + by)
    }
}

/// Where a source text came from: `potential`, `--kinetic`, `models/x.toml`, ...
/// `offset` is added to every span (an expression embedded at that byte of `text`).
#[derive(Debug, Clone)]
pub struct Source<'a> {
    /// A name for the text, shown before the line number.
    pub origin: &'a str,
    /// The whole text that spans point into.
    pub text: &'a str,
    /// Added to every span before drawing.
    pub offset: usize,
}

impl<'a> Source<'a> {
    /// A source whose spans point straight into `text`.
    pub fn new(origin: &'a str, text: &'a str) -> Source<'a> {
        Source {
            origin,
            text,
            offset: 0,
        }
    }
}

/// A user-facing error or warning: what went wrong, where, and how to fix it.
#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostic {
    /// One line saying what went wrong.
    pub message: String,
    /// Where, if the error points into an expression or a file.
    pub span: Option<Span>,
    /// A few words printed beside the carets.
    pub label: String,
    /// How to fix it; one line each.
    pub hints: Vec<String>,
}

impl Diagnostic {
    /// A diagnostic with a message and nothing else.
    pub fn new(message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            message: message.into(),
            span: None,
            label: String::new(),
            hints: Vec::new(),
        }
    }

    /// Points the diagnostic at `span`, with a label under the carets.
    pub fn with_span(mut self, span: Span, label: impl Into<String>) -> Diagnostic {
        self.span = Some(span);
        self.label = label.into();
        self
    }

    /// Adds a hint line.
    pub fn with_hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hints.push(hint.into());
        self
    }

    /// Draws the diagnostic against its source text.
    ///
    /// ```
    /// use efold::diag::{Diagnostic, Source, Span};
    /// let d = Diagnostic::new("unknown function `tanhh`")
    ///     .with_span(Span::new(4, 9), "not a built-in function")
    ///     .with_hint("did you mean `tanh`?");
    /// let text = d.render(Some(&Source::new("potential", "1 - tanhh(phi)^2")));
    /// assert!(text.contains("    ^^^^^ not a built-in function"));
    /// ```
    pub fn render(&self, source: Option<&Source<'_>>) -> String {
        let mut out = format!("error: {}\n", self.message);
        if let (Some(span), Some(src)) = (self.span, source) {
            out.push_str(&draw_span(src, span.shift(src.offset), &self.label));
        }
        for hint in &self.hints {
            out.push_str(&format!("  hint: {hint}\n"));
        }
        out
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// Longest stretch of a source line drawn; longer lines are cut around the span.
const MAX_LINE: usize = 100;

/// The source line holding `span.start`, with carets under the span (clipped to that line).
fn draw_span(src: &Source<'_>, span: Span, label: &str) -> String {
    let text = src.text;
    let start = floor_char_boundary(text, span.start.min(text.len()));
    let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
    let line_end = text[start..].find('\n').map_or(text.len(), |i| start + i);
    let line = &text[line_start..line_end];
    let line_no = text[..line_start].matches('\n').count() + 1;
    let col = text[line_start..start].chars().count();
    let end = floor_char_boundary(text, span.end.clamp(start, line_end));
    let width = text[start..end].chars().count().max(1);
    let gutter = line_no.to_string();
    let pad = " ".repeat(gutter.len());
    let mut out = format!("  {pad} --> {}:{}:{}\n", src.origin, line_no, col + 1);
    // Long lines are cut to a window around the span, marked with `...` where cut.
    let chars: Vec<char> = line.chars().map(|c| if c == '\t' { ' ' } else { c }).collect();
    let (from, to) = if chars.len() <= MAX_LINE {
        (0, chars.len())
    } else {
        let from = col
            .saturating_sub(MAX_LINE / 2)
            .min(chars.len().saturating_sub(MAX_LINE));
        (from, (from + MAX_LINE).min(chars.len()))
    };
    let lead = if from > 0 { "..." } else { "" };
    let tail = if to < chars.len() { "..." } else { "" };
    let shown: String = chars[from..to].iter().collect();
    out.push_str(&format!("  {gutter} | {lead}{shown}{tail}\n"));
    let width = width.min(to.saturating_sub(col)).max(1);
    let col = col - from + lead.len();
    let carets = "^".repeat(width);
    let label = if label.is_empty() {
        String::new()
    } else {
        format!(" {label}")
    };
    out.push_str(&format!("  {pad} | {}{carets}{label}\n", " ".repeat(col)));
    out
}

fn floor_char_boundary(text: &str, mut i: usize) -> usize {
    while i > 0 && !text.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Edit distance between two short words, a swap of neighbours counting as one edit (for "did
/// you mean" hints).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for j in 0..=b.len() {
        d[0][j] = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j - 1] + cost).min(d[i - 1][j] + 1).min(d[i][j - 1] + 1);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}

/// The closest candidate to `word`, if it is close enough to be a plausible typo.
pub fn closest<'c>(word: &str, candidates: impl IntoIterator<Item = &'c str>) -> Option<&'c str> {
    let limit = (word.chars().count() / 3).max(1);
    candidates
        .into_iter()
        .map(|c| (edit_distance(word, c), c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn carets_sit_under_the_span_on_a_later_line() {
        let text = "first line\nsecond line here";
        let d = Diagnostic::new("bad").with_span(Span::new(18, 22), "this");
        let out = d.render(Some(&Source::new("f", text)));
        assert_eq!(
            out,
            "error: bad\n    --> f:2:8\n  2 | second line here\n    |        ^^^^ this\n"
        );
    }

    #[test]
    fn suggestions() {
        assert_eq!(closest("tanhh", ["tanh", "sinh", "exp"]), Some("tanh"));
        assert_eq!(closest("qqq", ["tanh", "exp"]), None);
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("alhpa", "alpha"), 1);
    }
}
