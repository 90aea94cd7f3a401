//! Stage 1: text to a spanned syntax tree that mirrors the source.
//!
//! The pest grammar in `grammar/expr.pest` does the tokenising and precedence; this module checks
//! the limits first (length, nesting depth, balanced parentheses, so that no input can exhaust the
//! stack), then folds pest's flat repetitions into an [`Expr`] tree without recursion over
//! unbounded input. Names are not resolved here (see [`crate::language::ir`]).
//!
//! ```
//! use efold::{config::Limits, syntax};
//! let e = syntax::parse("-2^-2", &Limits::default())?;
//! assert_eq!(e.to_string(), "-((2^-(2)))");
//! # Ok::<(), efold::syntax::SyntaxError>(())
//! ```

use crate::config::Limits;
use crate::diag::{Diagnostic, Span};
use pest::iterators::Pair;
use pest::Parser as _;
use std::fmt;

mod grammar {
    #![allow(missing_docs)]
    #[derive(pest_derive::Parser)]
    #[grammar = "../grammar/expr.pest"]
    pub struct ExprParser;
}
use grammar::{ExprParser, Rule};

/// A binary operator as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinOp {
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `^` or `**`
    Pow,
}

impl BinOp {
    /// The operator's symbol in the language.
    pub fn symbol(self) -> &'static str {
        match self {
            BinOp::Add => "+",
            BinOp::Sub => "-",
            BinOp::Mul => "*",
            BinOp::Div => "/",
            BinOp::Pow => "^",
        }
    }
}

/// A node of the syntax tree, with the span of source it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    /// What the node is.
    pub kind: ExprKind,
    /// The source it covers.
    pub span: Span,
    /// Height of the subtree (a leaf is 1); bounded by [`Limits::max_depth`].
    pub depth: usize,
}

/// The kinds of syntax node.
#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind {
    /// A numeric literal, with its value.
    Number(f64),
    /// A name: a field, a parameter or a constant (resolved later, against the scope).
    Ident(String),
    /// Unary minus.
    Neg(Box<Expr>),
    /// A binary operation.
    Binary(BinOp, Box<Expr>, Box<Expr>),
    /// A function call `name(args)`; `name_span` covers the name alone.
    Call {
        /// The function's name as written.
        name: String,
        /// Where the name is.
        name_span: Span,
        /// The arguments.
        args: Vec<Expr>,
    },
}

/// What went wrong while parsing.
#[derive(Debug, Clone, PartialEq)]
pub enum SyntaxErrorKind {
    /// Nothing but white space.
    Empty,
    /// Longer than [`Limits::max_len`].
    TooLong {
        /// The expression's length in bytes.
        len: usize,
        /// The limit.
        limit: usize,
    },
    /// Nested deeper than [`Limits::max_depth`].
    TooDeep {
        /// The limit.
        limit: usize,
    },
    /// A `(` never closed.
    UnclosedParen,
    /// A `)` with no `(` before it.
    UnmatchedParen,
    /// Anything else the grammar rejects.
    Unexpected {
        /// What was found, in words.
        found: String,
        /// What would have fitted, in words.
        expected: String,
    },
    /// A literal that is not a finite number (`1e999`).
    BadNumber,
}

/// A parse error with the span it refers to.
#[derive(Debug, Clone, PartialEq)]
pub struct SyntaxError {
    /// What went wrong.
    pub kind: SyntaxErrorKind,
    /// Where.
    pub span: Span,
}

impl SyntaxError {
    fn new(kind: SyntaxErrorKind, span: Span) -> SyntaxError {
        SyntaxError { kind, span }
    }

    /// The error in words, pointing at its span.
    pub fn diagnostic(&self) -> Diagnostic {
        use SyntaxErrorKind::*;
        let s = self.span;
        match &self.kind {
            Empty => Diagnostic::new("empty expression")
                .with_span(s, "nothing here")
                .with_hint("write an expression such as `phi^2` or `1 - exp(-phi)`"),
            TooLong { len, limit } => {
                Diagnostic::new(format!("expression is {len} bytes long, over the limit of {limit}"))
                    .with_span(s, "the limit ends here")
                    .with_hint("shorten the expression, or raise the length limit in the configuration")
            }
            TooDeep { limit } => Diagnostic::new(format!("expression nested deeper than {limit} levels"))
                .with_span(s, "too deep from here")
                .with_hint("simplify the nesting, or raise the depth limit in the configuration"),
            UnclosedParen => Diagnostic::new("unbalanced parenthesis: this `(` is never closed")
                .with_span(s, "opened here")
                .with_hint("add a `)` where the group should end"),
            UnmatchedParen => Diagnostic::new("unbalanced parenthesis: this `)` has no matching `(`")
                .with_span(s, "closes nothing")
                .with_hint("remove it, or add the `(` that it closes"),
            Unexpected { found, expected } => Diagnostic::new(format!("unexpected {found}"))
                .with_span(s, format!("expected {expected}"))
                .with_hint("operators are + - * / ^ (or **); multiplication must be written out, as in `2*phi`"),
            BadNumber => Diagnostic::new("number out of range")
                .with_span(s, "not a finite double-precision number")
                .with_hint("numbers must lie within about 1e-308 to 1e308"),
        }
    }
}

impl fmt::Display for SyntaxError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.diagnostic().message)
    }
}

impl std::error::Error for SyntaxError {}

/// Parses one expression.
pub fn parse(src: &str, limits: &Limits) -> Result<Expr, SyntaxError> {
    prescan(src, limits)?;
    if let Some(e) = bare_number(src, limits) {
        return Ok(e);
    }
    parse_with_grammar(src, limits)
}

/// A whole expression that is one number literal (the usual kinetic term `1`, a parameter's
/// value) becomes the tree the grammar would give, without running the parser. Anything else,
/// including a literal that overflows (an error the grammar path reports), returns `None`.
fn bare_number(src: &str, limits: &Limits) -> Option<Expr> {
    let t = src.trim_start_matches([' ', '\t', '\r', '\n']);
    let start = src.len() - t.len();
    let t = t.trim_end_matches([' ', '\t', '\r', '\n']);
    if !is_number_literal(t) {
        return None;
    }
    let v: f64 = t.parse().ok().filter(|v: &f64| v.is_finite())?;
    Builder { limits }
        .node(ExprKind::Number(v), Span::new(start, start + t.len()))
        .ok()
}

/// The grammar's `number` rule: `digits+ ("." digits*)? | "." digits+`, then an optional
/// exponent `e [+-] digits+` (either case of e).
fn is_number_literal(t: &str) -> bool {
    let b = t.as_bytes();
    let mut i = 0;
    let digits = |i: &mut usize| {
        let s = *i;
        while *i < b.len() && b[*i].is_ascii_digit() {
            *i += 1;
        }
        *i - s
    };
    let int = digits(&mut i);
    let mut frac = 0;
    if i < b.len() && b[i] == b'.' {
        i += 1;
        frac = digits(&mut i);
    }
    if int == 0 && frac == 0 {
        return false;
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        i += 1;
        if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
            i += 1;
        }
        if digits(&mut i) == 0 {
            return false;
        }
    }
    i == b.len()
}

/// [`parse`] through the pest grammar.
fn parse_with_grammar(src: &str, limits: &Limits) -> Result<Expr, SyntaxError> {
    let mut pairs = ExprParser::parse(Rule::input, src).map_err(|e| from_pest(src, e))?;
    let input = pairs.next().expect("grammar: input has one pair");
    let sum = input.into_inner().next().expect("grammar: input holds a sum");
    Builder { limits }.sum(sum)
}

/// Length, emptiness, balance and depth of parentheses, before the grammar recurses.
fn prescan(src: &str, limits: &Limits) -> Result<(), SyntaxError> {
    if src.len() > limits.max_len {
        let at = floor_boundary(src, limits.max_len);
        return Err(SyntaxError::new(
            SyntaxErrorKind::TooLong {
                len: src.len(),
                limit: limits.max_len,
            },
            Span::new(at, at + 1),
        ));
    }
    if src.trim().is_empty() {
        return Err(SyntaxError::new(SyntaxErrorKind::Empty, Span::new(0, src.len())));
    }
    let mut open: Vec<usize> = Vec::new();
    for (i, c) in src.char_indices() {
        match c {
            '(' => {
                open.push(i);
                if open.len() > limits.max_nesting {
                    return Err(SyntaxError::new(
                        SyntaxErrorKind::TooDeep {
                            limit: limits.max_nesting,
                        },
                        Span::new(i, i + 1),
                    ));
                }
            }
            ')' if open.pop().is_none() => {
                return Err(SyntaxError::new(SyntaxErrorKind::UnmatchedParen, Span::new(i, i + 1)));
            }
            _ => {}
        }
    }
    if let Some(&i) = open.last() {
        return Err(SyntaxError::new(SyntaxErrorKind::UnclosedParen, Span::new(i, i + 1)));
    }
    Ok(())
}

fn floor_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Turns pest's error into ours: the offending token and what would have fitted, in words.
fn from_pest(src: &str, e: pest::error::Error<Rule>) -> SyntaxError {
    let pos = match e.location {
        pest::error::InputLocation::Pos(p) => p,
        pest::error::InputLocation::Span((s, _)) => s,
    };
    let rest = &src[pos..];
    let (found, len) = describe_token(rest);
    let expected = match &e.variant {
        pest::error::ErrorVariant::ParsingError { positives, .. } => expected_words(positives),
        pest::error::ErrorVariant::CustomError { message } => message.clone(),
    };
    SyntaxError::new(
        SyntaxErrorKind::Unexpected { found, expected },
        Span::new(pos, pos + len.max(1)),
    )
}

fn describe_token(rest: &str) -> (String, usize) {
    let Some(c) = rest.chars().next() else {
        return ("end of expression".to_string(), 0);
    };
    if c.is_ascii_alphabetic() || c == '_' {
        let n = rest
            .find(|ch: char| !(ch.is_ascii_alphanumeric() || ch == '_'))
            .unwrap_or(rest.len());
        return (format!("name `{}`", &rest[..n]), n);
    }
    if c.is_ascii_digit() || c == '.' {
        let n = rest
            .find(|ch: char| !(ch.is_ascii_alphanumeric() || ch == '.'))
            .unwrap_or(rest.len());
        return (format!("`{}`", &rest[..n]), n);
    }
    (format!("`{c}`"), c.len_utf8())
}

fn expected_words(rules: &[Rule]) -> String {
    let mut words: Vec<&str> = Vec::new();
    for r in rules {
        let w = match r {
            Rule::EOI => "the end of the expression",
            Rule::add_op | Rule::mul_op | Rule::pow_op => "an operator",
            Rule::number | Rule::ident | Rule::primary | Rule::name | Rule::args | Rule::group => {
                "a number, a name or `(`"
            }
            Rule::sum | Rule::product | Rule::factor | Rule::power | Rule::exponent | Rule::sign => "an operand",
            _ => "something else",
        };
        if !words.contains(&w) {
            words.push(w);
        }
    }
    words.sort_by_key(|w| *w == "the end of the expression");
    if words.is_empty() {
        "an expression".to_string()
    } else {
        words.join(", or ")
    }
}

fn span_of(p: &Pair<'_, Rule>) -> Span {
    Span::new(p.as_span().start(), p.as_span().end())
}

/// Folds pest pairs into the tree, checking the depth of every node it makes.
struct Builder<'l> {
    limits: &'l Limits,
}

impl Builder<'_> {
    fn node(&self, kind: ExprKind, span: Span) -> Result<Expr, SyntaxError> {
        let depth = 1 + match &kind {
            ExprKind::Number(_) | ExprKind::Ident(_) => 0,
            ExprKind::Neg(a) => a.depth,
            ExprKind::Binary(_, a, b) => a.depth.max(b.depth),
            ExprKind::Call { args, .. } => args.iter().map(|a| a.depth).max().unwrap_or(0),
        };
        if depth > self.limits.max_depth {
            return Err(SyntaxError::new(
                SyntaxErrorKind::TooDeep {
                    limit: self.limits.max_depth,
                },
                span,
            ));
        }
        Ok(Expr { kind, span, depth })
    }

    fn binary(&self, op: BinOp, a: Expr, b: Expr) -> Result<Expr, SyntaxError> {
        let span = a.span.join(b.span);
        self.node(ExprKind::Binary(op, Box::new(a), Box::new(b)), span)
    }

    /// sum and product: left-associative chains.
    fn sum(&self, pair: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let mut it = pair.into_inner();
        let mut acc = self.product(it.next().expect("grammar: sum starts with a product"))?;
        while let Some(op) = it.next() {
            let rhs = self.product(it.next().expect("grammar: operator then operand"))?;
            let op = if op.as_str() == "+" { BinOp::Add } else { BinOp::Sub };
            acc = self.binary(op, acc, rhs)?;
        }
        Ok(acc)
    }

    fn product(&self, pair: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let mut it = pair.into_inner();
        let mut acc = self.factor(it.next().expect("grammar: product starts with a factor"))?;
        while let Some(op) = it.next() {
            let rhs = self.factor(it.next().expect("grammar: operator then operand"))?;
            let op = if op.as_str() == "/" { BinOp::Div } else { BinOp::Mul };
            acc = self.binary(op, acc, rhs)?;
        }
        Ok(acc)
    }

    /// Signs before a power chain; `signs` in source order, applied innermost last-written first.
    fn apply_signs(&self, signs: &[Span], mut e: Expr) -> Result<Expr, SyntaxError> {
        for s in signs.iter().rev() {
            let span = s.join(e.span);
            e = self.node(ExprKind::Neg(Box::new(e)), span)?;
        }
        Ok(e)
    }

    /// Splits `sign* X` into the spans of the minus signs (unary plus is dropped) and X.
    fn signs<'i>(&self, pair: Pair<'i, Rule>) -> (Vec<Span>, Pair<'i, Rule>) {
        let mut signs = Vec::new();
        for p in pair.into_inner() {
            if p.as_rule() == Rule::sign {
                if p.as_str() == "-" {
                    signs.push(span_of(&p));
                }
            } else {
                return (signs, p);
            }
        }
        unreachable!("grammar: signs are followed by an operand")
    }

    fn factor(&self, pair: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let (signs, power) = self.signs(pair);
        let e = self.power(power)?;
        self.apply_signs(&signs, e)
    }

    /// `p0 ^ s1 p1 ^ s2 p2 ...` folded from the right without recursion.
    fn power(&self, pair: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let mut base = None;
        let mut links: Vec<(Vec<Span>, Expr)> = Vec::new();
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::pow_op => {}
                Rule::exponent => {
                    let (signs, prim) = self.signs(p);
                    links.push((signs, self.primary(prim)?));
                }
                _ => base = Some(self.primary(p)?),
            }
        }
        let base = base.expect("grammar: power starts with a primary");
        let Some((last_signs, mut acc)) = links.pop() else {
            return Ok(base);
        };
        let mut signs = last_signs;
        while let Some((prev_signs, prim)) = links.pop() {
            let exp = self.apply_signs(&signs, acc)?;
            acc = self.binary(BinOp::Pow, prim, exp)?;
            signs = prev_signs;
        }
        let exp = self.apply_signs(&signs, acc)?;
        self.binary(BinOp::Pow, base, exp)
    }

    fn primary(&self, inner: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let span = span_of(&inner);
        match inner.as_rule() {
            Rule::number => {
                let v: f64 = inner
                    .as_str()
                    .parse()
                    .map_err(|_| SyntaxError::new(SyntaxErrorKind::BadNumber, span))?;
                if !v.is_finite() {
                    return Err(SyntaxError::new(SyntaxErrorKind::BadNumber, span));
                }
                self.node(ExprKind::Number(v), span)
            }
            Rule::name => {
                let mut it = inner.into_inner();
                let name = it.next().expect("grammar: a name starts with an identifier");
                let Some(args) = it.next() else {
                    return self.node(ExprKind::Ident(name.as_str().to_string()), span);
                };
                let name_span = span_of(&name);
                let args = args.into_inner().map(|a| self.sum(a)).collect::<Result<Vec<_>, _>>()?;
                let kind = ExprKind::Call {
                    name: name.as_str().to_string(),
                    name_span,
                    args,
                };
                self.node(kind, span)
            }
            Rule::group => {
                let sum = inner.into_inner().next().expect("grammar: group holds a sum");
                let mut e = self.sum(sum)?;
                e.span = span;
                Ok(e)
            }
            r => unreachable!("grammar: unexpected primary {r:?}"),
        }
    }
}

/// Fully parenthesised form: shows exactly how the source was grouped.
impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.kind {
            ExprKind::Number(v) => write!(f, "{v}"),
            ExprKind::Ident(n) => f.write_str(n),
            ExprKind::Neg(a) => write!(f, "-({a})"),
            ExprKind::Binary(op, a, b) => write!(f, "({a}{}{b})", op.symbol()),
            ExprKind::Call { name, args, .. } => {
                write!(f, "{name}(")?;
                for (i, a) in args.iter().enumerate() {
                    if i > 0 {
                        f.write_str(", ")?;
                    }
                    write!(f, "{a}")?;
                }
                f.write_str(")")
            }
        }
    }
}

impl Expr {
    /// The names used as values (not called as functions), each once, in the order they first
    /// appear in the source.
    pub fn names(&self) -> Vec<&str> {
        let mut out: Vec<&str> = Vec::new();
        let mut stack: Vec<&Expr> = vec![self];
        while let Some(e) = stack.pop() {
            match &e.kind {
                ExprKind::Ident(n) if !out.contains(&n.as_str()) => out.push(n),
                ExprKind::Neg(a) => stack.push(a),
                ExprKind::Binary(_, a, b) => {
                    stack.push(b);
                    stack.push(a);
                }
                ExprKind::Call { args, .. } => stack.extend(args.iter().rev()),
                _ => {}
            }
        }
        out
    }

    /// An indented tree, one node a line, with spans: the `--emit ast` view.
    pub fn tree(&self) -> String {
        let mut out = String::new();
        let mut stack: Vec<(&Expr, usize)> = vec![(self, 0)];
        while let Some((e, indent)) = stack.pop() {
            let pad = "  ".repeat(indent);
            let head = match &e.kind {
                ExprKind::Number(v) => format!("number {v}"),
                ExprKind::Ident(n) => format!("name {n}"),
                ExprKind::Neg(_) => "negate".to_string(),
                ExprKind::Binary(op, _, _) => format!("binary {}", op.symbol()),
                ExprKind::Call { name, .. } => format!("call {name}"),
            };
            out.push_str(&format!("{pad}{head} @{}..{}\n", e.span.start, e.span.end));
            match &e.kind {
                ExprKind::Neg(a) => stack.push((a, indent + 1)),
                ExprKind::Binary(_, a, b) => {
                    stack.push((b, indent + 1));
                    stack.push((a, indent + 1));
                }
                ExprKind::Call { args, .. } => {
                    for a in args.iter().rev() {
                        stack.push((a, indent + 1));
                    }
                }
                _ => {}
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(s: &str) -> String {
        parse(s, &Limits::default()).unwrap().to_string()
    }

    #[test]
    fn names_in_order_of_first_use_without_function_names() {
        let e = parse("beta*sin(phi/f) + phi^2*alpha - beta", &Limits::default()).unwrap();
        assert_eq!(e.names(), ["beta", "phi", "f", "alpha"]);
        assert!(parse("2 + 3", &Limits::default()).unwrap().names().is_empty());
    }

    fn err(s: &str) -> SyntaxErrorKind {
        parse(s, &Limits::default()).unwrap_err().kind
    }

    /// The bare-number shortcut gives exactly the grammar's tree (value, span, depth), and
    /// leaves everything that is not one plain literal to the grammar.
    #[test]
    fn bare_numbers_match_the_grammar() {
        let l = Limits::default();
        for src in [
            "1",
            "  1 ",
            "0.5",
            "\t.5\n",
            "1.",
            "6e-6",
            "2.5E+4",
            "007",
            "1.e3",
            "123456789.125",
        ] {
            let fast = bare_number(src, &l).unwrap_or_else(|| panic!("{src:?} is a literal"));
            assert_eq!(fast, parse_with_grammar(src, &l).unwrap(), "{src:?}");
        }
        for src in [
            "-1", "1 2", ".", "e5", "1e", "1e+", "1..2", "1e999", "pi", "1+1", "+1", "0x10",
        ] {
            assert!(bare_number(src, &l).is_none(), "{src:?} is not a plain literal");
        }
        assert_eq!(err("1e999"), SyntaxErrorKind::BadNumber);
    }

    #[test]
    fn precedence_and_associativity() {
        // Operator conventions of the language (pinned against meval in tests/oracle.rs).
        let cases = [
            ("-2^2", "-((2^2))"),
            ("2^3^2", "(2^(3^2))"),
            ("2^-1", "(2^-(1))"),
            ("-2^-2", "-((2^-(2)))"),
            ("2**3", "(2^3)"),
            ("1-2-3", "((1-2)-3)"),
            ("8/4/2", "((8/4)/2)"),
            ("a*b^c", "(a*(b^c))"),
            ("--x", "-(-(x))"),
            ("+x", "x"),
            ("2*-x", "(2*-(x))"),
            ("1e-3 + 2.5E+4 + .5 + 3.", "(((0.001+25000)+0.5)+3)"),
            ("pow(x, 2)", "pow(x, 2)"),
            ("2^-x^2", "(2^-((x^2)))"),
        ];
        for (src, want) in cases {
            assert_eq!(p(src), want, "{src}");
        }
    }

    #[test]
    fn errors() {
        assert_eq!(err("   "), SyntaxErrorKind::Empty);
        assert_eq!(err("(phi"), SyntaxErrorKind::UnclosedParen);
        assert_eq!(err("phi)"), SyntaxErrorKind::UnmatchedParen);
        assert_eq!(err("1e999"), SyntaxErrorKind::BadNumber);
        assert!(matches!(err("2 phi"), SyntaxErrorKind::Unexpected { .. }));
        assert!(matches!(err("phi +"), SyntaxErrorKind::Unexpected { .. }));
    }

    #[test]
    fn hostile_nesting_is_an_error_not_a_crash() {
        let limits = Limits {
            max_len: 1_000_000,
            ..Limits::default()
        };
        let deep = "(".repeat(100_000) + "1" + &")".repeat(100_000);
        assert_eq!(
            parse(&deep, &limits).unwrap_err().kind,
            SyntaxErrorKind::TooDeep { limit: 64 }
        );
        let chain = vec!["2"; 50_000].join("^");
        assert!(matches!(
            parse(&chain, &limits).unwrap_err().kind,
            SyntaxErrorKind::TooDeep { .. }
        ));
        let minus = "-".repeat(50_000) + "x";
        assert!(matches!(
            parse(&minus, &limits).unwrap_err().kind,
            SyntaxErrorKind::TooDeep { .. }
        ));
        let sum = vec!["x"; 50_000].join("+");
        assert!(matches!(
            parse(&sum, &limits).unwrap_err().kind,
            SyntaxErrorKind::TooDeep { .. }
        ));
        // At the limit itself the parser must not run out of stack in a test thread.
        let at_limit = "(".repeat(64) + "1" + &")".repeat(64);
        assert!(parse(&at_limit, &limits).is_ok());
        let calls = "sin(".repeat(64) + "x" + &")".repeat(64);
        assert!(parse(&calls, &limits).is_ok());
    }

    #[test]
    fn length_limit() {
        let long = "x+".repeat(6000) + "x";
        assert!(matches!(err(&long), SyntaxErrorKind::TooLong { .. }));
    }
}
