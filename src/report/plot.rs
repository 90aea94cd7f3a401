//! A small SVG writer for line plots: panels side by side, each with axes, ticks, labels,
//! series, vertical markers and point markers. Output is plain SVG 1.1, no scripts, so any
//! browser or vector editor opens it.

use crate::report::numfmt::tick;
use std::fmt::Write as _;

/// One line on a panel.
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend text.
    pub name: String,
    /// (x, y) points; non-finite points break the line.
    pub points: Vec<(f64, f64)>,
    /// A CSS colour.
    pub color: String,
    /// Dashed line.
    pub dashed: bool,
}

/// A labelled vertical line.
#[derive(Debug, Clone)]
pub struct VLine {
    /// Where.
    pub x: f64,
    /// Label at the top.
    pub label: String,
    /// A CSS colour.
    pub color: String,
}

/// A labelled point.
#[derive(Debug, Clone)]
pub struct Marker {
    /// Where.
    pub x: f64,
    /// Where.
    pub y: f64,
    /// Label beside it.
    pub label: String,
    /// A CSS colour.
    pub color: String,
}

/// A shaded rectangle in data coordinates (infinite ends reach the axes); `y: None` spans the
/// whole height.
#[derive(Debug, Clone)]
pub struct Region {
    /// x extent.
    pub x: (f64, f64),
    /// y extent, if not the whole height.
    pub y: Option<(f64, f64)>,
    /// A CSS colour.
    pub color: String,
    /// Fill opacity.
    pub opacity: f64,
    /// Label, drawn at its top left inside the axes.
    pub label: String,
}

/// A line in data coordinates drawn under the series and left out of the legend and of the
/// label placement: a contour line, say.
#[derive(Debug, Clone)]
pub struct Shape {
    /// (x, y) points; non-finite points break the line.
    pub points: Vec<(f64, f64)>,
    /// A CSS colour.
    pub color: String,
    /// Stroke width in layout units.
    pub width: f64,
}

/// One set of axes.
#[derive(Debug, Clone, Default)]
pub struct Panel {
    /// Title above the axes.
    pub title: String,
    /// x-axis label.
    pub x_label: String,
    /// y-axis label.
    pub y_label: String,
    /// Logarithmic y axis.
    pub log_y: bool,
    /// The lines.
    pub series: Vec<Series>,
    /// Vertical markers.
    pub vlines: Vec<VLine>,
    /// Point markers.
    pub markers: Vec<Marker>,
    /// Shaded regions, drawn under the series.
    pub regions: Vec<Region>,
    /// The colour bar of a colour-coded quantity, right of the axes.
    pub colorbar: Option<ColorBar>,
    /// Lines under the series (contours), in no legend.
    pub shapes: Vec<Shape>,
}

/// A colour scale: `colors` spaced evenly from `lo` (first) to `hi` (last), linearly or in the
/// logarithm.
#[derive(Debug, Clone)]
pub struct ColorBar {
    /// The quantity (markup).
    pub label: String,
    /// The value of the first colour.
    pub lo: f64,
    /// The value of the last colour.
    pub hi: f64,
    /// Logarithmic scale.
    pub log: bool,
    /// CSS colours, low to high.
    pub colors: Vec<String>,
}

/// Layout units per point: text of 12 units (ticks, axis labels) is 9.6 pt on paper, labels
/// of 10 units are 8 pt.
const PT_PER_UNIT: f64 = 0.8;
/// A panel narrower than this (in layout units) is stacked under its neighbour instead.
const MIN_PANEL_W: f64 = 280.0;
/// Axes-box height over panel width.
const ASPECT: f64 = 0.74;
/// The default panel width of the unit tests (a single-column figure).
#[cfg(test)]
const TEST_W: f64 = SINGLE_COLUMN_PT / PT_PER_UNIT;
#[cfg(test)]
const TEST_H: f64 = (TEST_W - ML - MR) * ASPECT + MT + MB;

/// A one-column figure: 8.6 cm.
pub const SINGLE_COLUMN_PT: f64 = 8.6 / 2.54 * 72.0;
/// A two-column figure: 17.8 cm.
pub const DOUBLE_COLUMN_PT: f64 = 17.8 / 2.54 * 72.0;

/// A `--figure-width` that is not `single`, `double` or centimetres from 3 to 60.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FigureWidthError {
    /// The value given.
    pub text: String,
}

impl std::fmt::Display for FigureWidthError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "`{}` is not a figure width: give single, double or centimetres from 3 to 60",
            self.text
        )
    }
}

impl std::error::Error for FigureWidthError {}

/// `single`, `double` or a width in centimetres, as points.
pub fn parse_figure_width(s: &str) -> Result<f64, FigureWidthError> {
    match s {
        "single" => Ok(SINGLE_COLUMN_PT),
        "double" => Ok(DOUBLE_COLUMN_PT),
        _ => match s.parse::<f64>() {
            Ok(cm) if (3.0..=60.0).contains(&cm) => Ok(cm / 2.54 * 72.0),
            _ => Err(FigureWidthError { text: s.to_string() }),
        },
    }
}
const ML: f64 = 70.0;
const MR: f64 = 20.0;
const MT: f64 = 40.0;
const MB: f64 = 50.0;

/// "Nice" tick positions covering [lo, hi].
pub fn ticks(lo: f64, hi: f64) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / 5.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() as i64;
    let end = (hi / step).floor() as i64;
    (start..=end).map(|k| k as f64 * step).collect()
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

/// The font family named in every figure: a sans with Greek glyphs that journals accept, then
/// fallbacks. The PDF is drawn with the bundled DejaVu Sans, so it never depends on system fonts.
pub const FONT_FAMILY: &str = "'DejaVu Sans', Helvetica, Arial, sans-serif";

const FONT_REGULAR: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");
const FONT_OBLIQUE: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans-Oblique.ttf");

/// Greek letters by name, for `\name` in labels and for field and parameter names.
const GREEK: [(&str, char); 27] = [
    ("alpha", 'α'),
    ("beta", 'β'),
    ("gamma", 'γ'),
    ("delta", 'δ'),
    ("epsilon", 'ε'),
    ("zeta", 'ζ'),
    ("eta", 'η'),
    ("theta", 'θ'),
    ("iota", 'ι'),
    ("kappa", 'κ'),
    ("lambda", 'λ'),
    ("mu", 'μ'),
    ("nu", 'ν'),
    ("xi", 'ξ'),
    ("pi", 'π'),
    ("rho", 'ρ'),
    ("sigma", 'σ'),
    ("tau", 'τ'),
    ("upsilon", 'υ'),
    ("phi", 'φ'),
    ("chi", 'χ'),
    ("psi", 'ψ'),
    ("omega", 'ω'),
    ("Delta", 'Δ'),
    ("Lambda", 'Λ'),
    ("Phi", 'Φ'),
    ("Omega", 'Ω'),
];

/// A name chosen by the user (a field, a parameter) as label markup: a Greek letter's name as
/// the letter (`phi` as φ, `chi` as χ, `rho` as ρ), anything else as written; in italics.
pub fn symbol(name: &str) -> String {
    if let Some((_, c)) = GREEK.iter().find(|(n, _)| *n == name) {
        return format!("${c}$");
    }
    format!("${}$", plain(name))
}

/// Text that is shown as written: the markup characters escaped.
pub fn plain(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        if matches!(c, '_' | '^' | '{' | '}' | '\\' | '$') {
            o.push('\\');
        }
        o.push(c);
    }
    o
}

/// One piece of a label: its text, italic or not, and its level (1 superscript, -1 subscript).
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// The characters.
    pub text: String,
    /// In italics.
    pub italic: bool,
    /// 1 superscript, -1 subscript, 0 on the baseline.
    pub level: i8,
}

/// Parses label markup: `$...$` in italics, `_x` / `_{...}` a subscript, `^x` / `^{...}` a
/// superscript, `\chi` (any Greek name) the letter, `\_` and the like the character itself, and
/// `-` before a digit as the minus sign.
pub fn parse_markup(s: &str) -> Vec<Run> {
    let chars: Vec<char> = s.chars().collect();
    let mut runs: Vec<Run> = Vec::new();
    let mut italic = false;
    let mut level: i8 = 0;
    // The level to return to when a group closes (or after one character).
    let mut stack: Vec<(i8, bool)> = Vec::new();
    let push = |runs: &mut Vec<Run>, c: char, italic: bool, level: i8| match runs.last_mut() {
        Some(r) if r.italic == italic && r.level == level => r.text.push(c),
        _ => runs.push(Run {
            text: c.to_string(),
            italic,
            level,
        }),
    };
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let single = stack.last().is_some_and(|(_, braced)| !braced);
        match c {
            '$' => italic = !italic,
            '_' | '^' if i + 1 < chars.len() => {
                let l = if c == '^' { 1 } else { -1 };
                if chars[i + 1] == '{' {
                    stack.push((level, true));
                    i += 1;
                } else {
                    stack.push((level, false));
                }
                level = l;
                i += 1;
                continue;
            }
            '}' if stack.last().is_some_and(|(_, braced)| *braced) => {
                level = stack.pop().map_or(0, |(l, _)| l);
            }
            '\\' => {
                let name: String = chars[i + 1..].iter().take_while(|c| c.is_ascii_alphabetic()).collect();
                if let Some((_, g)) = GREEK.iter().find(|(n, _)| *n == name) {
                    push(&mut runs, *g, italic, level);
                    i += 1 + name.chars().count();
                } else if let Some(&e) = chars.get(i + 1) {
                    push(&mut runs, e, italic, level);
                    i += 2;
                } else {
                    i += 1;
                }
                if single {
                    level = stack.pop().map_or(0, |(l, _)| l);
                }
                continue;
            }
            '-' if chars.get(i + 1).is_some_and(|d| d.is_ascii_digit())
                && (i == 0 || matches!(chars[i - 1], ' ' | '{' | '(' | '=')) =>
            {
                push(&mut runs, '\u{2212}', italic, level)
            }
            _ => push(&mut runs, c, italic, level),
        }
        if single && c != '$' {
            level = stack.pop().map_or(0, |(l, _)| l);
        }
        i += 1;
    }
    runs
}

/// Label markup as SVG text content: `<tspan>`s with a smaller size and a shifted baseline
/// (`dy`, which every SVG reader honours) for sub- and superscripts, italics for symbols.
pub fn rich(s: &str, size: f64) -> String {
    let mut o = String::new();
    let mut offset = 0.0;
    for r in parse_markup(s) {
        let target = match r.level {
            1 => -0.38 * size,
            -1 => 0.22 * size,
            _ => 0.0,
        };
        let mut attrs = String::new();
        if target != offset {
            let _ = write!(attrs, " dy=\"{:.2}\"", target - offset);
            offset = target;
        }
        if r.level != 0 {
            let _ = write!(attrs, " font-size=\"{:.1}\"", 0.7 * size);
        }
        if r.italic {
            attrs.push_str(" font-style=\"italic\"");
        }
        if attrs.is_empty() {
            o.push_str(&esc(&r.text));
        } else {
            let _ = write!(o, "<tspan{attrs}>{}</tspan>", esc(&r.text));
        }
    }
    if offset != 0.0 {
        // Back to the baseline for whatever follows in the same element.
        let _ = write!(o, "<tspan dy=\"{:.2}\"></tspan>", -offset);
    }
    o
}

/// The label's characters as a reader sees them (sub- and superscripts inline).
pub fn plain_text(s: &str) -> String {
    parse_markup(s).into_iter().map(|r| r.text).collect()
}

/// Converts a figure (the SVG this module writes) to PDF, with the bundled fonts embedded
/// (subset), independent of the fonts installed on the machine.
pub fn to_pdf(svg: &str) -> Result<Vec<u8>, PdfError> {
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(FONT_REGULAR.to_vec());
    db.load_font_data(FONT_OBLIQUE.to_vec());
    db.set_sans_serif_family("DejaVu Sans");
    let opt = usvg::Options {
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(svg, &opt).map_err(|e| PdfError::Svg(e.to_string()))?;
    // usvg measures in CSS pixels (96 per inch); the page keeps the figure's physical size.
    let page = svg2pdf::PageOptions { dpi: 96.0 };
    svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page).map_err(|e| PdfError::Conversion(e.to_string()))
}

/// Why a figure could not become a PDF (the converter's message).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum PdfError {
    /// The figure is not valid SVG.
    Svg(String),
    /// The conversion failed.
    Conversion(String),
}

impl std::fmt::Display for PdfError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PdfError::Svg(e) => write!(f, "the figure is not valid SVG: {e}"),
            PdfError::Conversion(e) => write!(f, "cannot convert the figure to PDF: {e}"),
        }
    }
}

impl std::error::Error for PdfError {}

/// Renders panels into one SVG document `width_pt` points wide: side by side where each is wide
/// enough for its text, stacked otherwise; each panel's height follows from its width.
pub fn render(title: &str, panels: &[Panel], width_pt: f64) -> String {
    let total_w = width_pt / PT_PER_UNIT;
    let n = panels.len().max(1);
    let cols = if total_w / n as f64 >= MIN_PANEL_W { n } else { 1 };
    let rows = n.div_ceil(cols);
    let w = total_w / cols as f64;
    let legend = panels.iter().map(|p| legend_height(p, w)).fold(0.0, f64::max);
    let h = (w - ML - MR) * ASPECT + MT + MB + legend;
    let total_h = h * rows as f64 + 24.0;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{:.2}pt\" height=\"{:.2}pt\" viewBox=\"0 0 {total_w:.2} {total_h:.2}\" font-family=\"{FONT_FAMILY}\" font-size=\"12\">",
        width_pt,
        total_h * PT_PER_UNIT,
    );
    let _ = writeln!(out, "<title>{}</title>", esc(title));
    let _ = writeln!(out, "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>");
    let _ = writeln!(
        out,
        "<text x=\"{}\" y=\"16\" text-anchor=\"middle\" font-size=\"14\">{}</text>",
        total_w / 2.0,
        rich(&plain(title), 14.0)
    );
    for (i, p) in panels.iter().enumerate() {
        let _ = writeln!(
            out,
            "<g class=\"panel\" transform=\"translate({:.2},{:.2})\">",
            w * (i % cols) as f64,
            24.0 + h * (i / cols) as f64
        );
        panel(&mut out, p, i, w, h);
        let _ = writeln!(out, "</g>");
    }
    out.push_str("</svg>\n");
    out
}

/// A panel's data coordinates mapped onto its axes box: the data range (y as plotted, so
/// log10 y on a log axis) and the box's size.
struct Frame {
    log_y: bool,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    pw: f64,
    ph: f64,
}

impl Frame {
    /// The range of everything the panel draws, y padded by 5%, in a box of the panel's size
    /// less margins, colour bar and legend.
    #[allow(non_snake_case)]
    fn new(p: &Panel, W: f64, H: f64) -> Frame {
        let ty = |y: f64| if p.log_y { y.log10() } else { y };
        let mut xs: Vec<f64> = Vec::new();
        let mut ys: Vec<f64> = Vec::new();
        for s in &p.series {
            for &(x, y) in &s.points {
                if x.is_finite() && ty(y).is_finite() {
                    xs.push(x);
                    ys.push(ty(y));
                }
            }
        }
        for m in &p.markers {
            if m.x.is_finite() && ty(m.y).is_finite() {
                xs.push(m.x);
                ys.push(ty(m.y));
            }
        }
        xs.extend(p.vlines.iter().map(|v| v.x).filter(|x| x.is_finite()));
        for &(x, y) in p.shapes.iter().flat_map(|s| s.points.iter()) {
            if x.is_finite() && ty(y).is_finite() {
                xs.push(x);
                ys.push(ty(y));
            }
        }
        for g in &p.regions {
            xs.extend([g.x.0, g.x.1].into_iter().filter(|x| x.is_finite()));
            if let Some((lo, hi)) = g.y {
                ys.extend([ty(lo), ty(hi)].into_iter().filter(|y| y.is_finite()));
            }
        }
        let (mut x0, mut x1) = min_max(&xs);
        let (mut y0, mut y1) = min_max(&ys);
        if x1 <= x0 {
            x0 -= 1.0;
            x1 += 1.0;
        }
        if y1 <= y0 {
            y0 -= 1.0;
            y1 += 1.0;
        }
        let pad = 0.05 * (y1 - y0);
        Frame {
            log_y: p.log_y,
            x0,
            x1,
            y0: y0 - pad,
            y1: y1 + pad,
            pw: W - ML - MR - if p.colorbar.is_some() { 70.0 } else { 0.0 },
            ph: H - MT - MB - legend_height(p, W),
        }
    }

    /// y as plotted.
    fn ty(&self, y: f64) -> f64 {
        if self.log_y {
            y.log10()
        } else {
            y
        }
    }

    fn sx(&self, x: f64) -> f64 {
        ML + (x - self.x0) / (self.x1 - self.x0) * self.pw
    }

    /// From y as plotted.
    fn sy(&self, y: f64) -> f64 {
        MT + (1.0 - (y - self.y0) / (self.y1 - self.y0)) * self.ph
    }

    /// A data point's place in the box, if it can be drawn.
    fn place(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let y = self.ty(y);
        (x.is_finite() && y.is_finite()).then(|| (self.sx(x), self.sy(y)))
    }
}

/// One panel at the origin, `W` by `H`: axes, regions, curves, labels, colour bar and legend.
/// Returns the labels' boxes.
#[allow(non_snake_case)]
fn panel(out: &mut String, p: &Panel, index: usize, W: f64, H: f64) -> Vec<Rect> {
    let fr = Frame::new(p, W, H);
    axes(out, p, &fr, W, H);
    let _ = writeln!(
        out,
        "<clipPath id=\"clip{}\"><rect x=\"{ML}\" y=\"{MT}\" width=\"{}\" height=\"{}\"/></clipPath>",
        index, fr.pw, fr.ph
    );
    regions(out, p, &fr);
    shapes(out, p, &fr, index);
    curves(out, p, &fr, index);
    let placed = labels(out, p, &fr);
    if let Some(cb) = &p.colorbar {
        colorbar(out, cb, ML + fr.pw + 14.0, MT, fr.ph, index);
    }
    legend(out, p, W, H);
    placed
}

/// The title, the box, the ticks and the axis labels.
#[allow(non_snake_case)]
fn axes(out: &mut String, p: &Panel, fr: &Frame, W: f64, H: f64) {
    let (pw, ph) = (fr.pw, fr.ph);
    let _ = writeln!(
        out,
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"13\">{}</text>",
        ML + pw / 2.0,
        MT - 14.0,
        rich(&p.title, 13.0)
    );
    let _ = writeln!(
        out,
        "<rect class=\"axes\" x=\"{ML}\" y=\"{MT}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"black\"/>"
    );
    for t in ticks(fr.x0, fr.x1) {
        let x = fr.sx(t);
        let _ = writeln!(
            out,
            "<line x1=\"{x:.2}\" y1=\"{}\" x2=\"{x:.2}\" y2=\"{}\" stroke=\"black\"/><text class=\"xtick\" x=\"{x:.2}\" y=\"{}\" text-anchor=\"middle\">{}</text>",
            MT + ph,
            MT + ph + 5.0,
            MT + ph + 18.0,
            rich(&tick(t), 12.0)
        );
    }
    for t in ticks(fr.y0, fr.y1) {
        let y = fr.sy(t);
        let label = if p.log_y {
            format!("10^{{{}}}", tick(t))
        } else {
            tick(t)
        };
        let _ = writeln!(
            out,
            "<line x1=\"{}\" y1=\"{y:.2}\" x2=\"{ML}\" y2=\"{y:.2}\" stroke=\"black\"/><text class=\"ytick\" x=\"{}\" y=\"{:.2}\" text-anchor=\"end\">{}</text>",
            ML - 5.0,
            ML - 8.0,
            y + 4.0,
            rich(&label, 12.0)
        );
    }
    let _ = writeln!(
        out,
        "<text class=\"xlabel\" x=\"{}\" y=\"{}\" text-anchor=\"middle\">{}</text>",
        ML + pw / 2.0,
        H - legend_height(p, W) - 12.0,
        rich(&p.x_label, 12.0)
    );
    let _ = writeln!(
        out,
        "<text class=\"ylabel\" x=\"16\" y=\"{}\" text-anchor=\"middle\" transform=\"rotate(-90 16 {})\">{}</text>",
        MT + ph / 2.0,
        MT + ph / 2.0,
        rich(&p.y_label, 12.0)
    );
}

/// The shaded regions, clipped to the box.
fn regions(out: &mut String, p: &Panel, fr: &Frame) {
    for g in &p.regions {
        let cx = |x: f64| fr.sx(x.clamp(fr.x0, fr.x1));
        let cy = |y: f64| {
            let t = fr.ty(y);
            let t = if t.is_nan() { fr.y0 } else { t };
            fr.sy(t.clamp(fr.y0, fr.y1))
        };
        let (xa, xb) = (cx(g.x.0), cx(g.x.1));
        let (ya, yb) = match g.y {
            Some((lo, hi)) => (cy(hi), cy(lo)),
            None => (MT, MT + fr.ph),
        };
        if xb <= xa || yb <= ya {
            continue;
        }
        let _ = writeln!(
            out,
            "<rect class=\"region\" x=\"{xa:.2}\" y=\"{ya:.2}\" width=\"{:.2}\" height=\"{:.2}\" fill=\"{}\" fill-opacity=\"{}\"/>",
            xb - xa,
            yb - ya,
            g.color,
            g.opacity,
        );
    }
}

/// The shapes as paths, clipped to the box.
fn shapes(out: &mut String, p: &Panel, fr: &Frame, index: usize) {
    for s in &p.shapes {
        let mut d = String::new();
        let mut pen_up = true;
        for &(x, y) in &s.points {
            let Some((px, py)) = fr.place(x, y) else {
                pen_up = true;
                continue;
            };
            let _ = write!(d, "{}{px:.2},{py:.2} ", if pen_up { "M" } else { "L" });
            pen_up = false;
        }
        let _ = writeln!(
            out,
            "<path class=\"shape\" d=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{}\" clip-path=\"url(#clip{index})\"/>",
            d.trim_end(),
            s.color,
            s.width
        );
    }
}

/// A sequential colour scale from dark blue (t = 0) through teal and green to yellow (t = 1),
/// readable in grey as it darkens monotonically.
pub fn sequential(t: f64) -> String {
    const STOPS: [(f64, f64, f64); 5] = [
        (48.0, 18.0, 110.0),
        (38.0, 90.0, 160.0),
        (30.0, 150.0, 140.0),
        (120.0, 195.0, 80.0),
        (245.0, 225.0, 40.0),
    ];
    let t = if t.is_finite() { t.clamp(0.0, 1.0) } else { 0.0 };
    let x = t * (STOPS.len() - 1) as f64;
    let k = (x.floor() as usize).min(STOPS.len() - 2);
    let f = x - k as f64;
    let (a, b) = (STOPS[k], STOPS[k + 1]);
    let c = |u: f64, v: f64| (u + f * (v - u)).round() as u8;
    format!("#{:02x}{:02x}{:02x}", c(a.0, b.0), c(a.1, b.1), c(a.2, b.2))
}

/// The series as paths, the pen lifted over points that cannot be drawn.
fn curves(out: &mut String, p: &Panel, fr: &Frame, index: usize) {
    for s in &p.series {
        let mut d = String::new();
        let mut pen_up = true;
        for &(x, y) in &s.points {
            let y = fr.ty(y);
            if !(x.is_finite() && y.is_finite()) {
                pen_up = true;
                continue;
            }
            let _ = write!(d, "{}{:.2},{:.2} ", if pen_up { "M" } else { "L" }, fr.sx(x), fr.sy(y));
            pen_up = false;
        }
        let dash = if s.dashed { " stroke-dasharray=\"6,4\"" } else { "" };
        let _ = writeln!(
            out,
            "<path class=\"series\" data-name=\"{}\" d=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.6\"{dash} clip-path=\"url(#clip{})\"/>",
            esc(&s.name),
            d.trim_end(),
            s.color,
            index
        );
    }
}

/// Where labels may go: the axes box, what is taken (markers, labels placed so far), and the
/// curves to keep off.
struct Placement {
    bounds: Rect,
    curve: Vec<(f64, f64)>,
    ndots: usize,
    taken: Vec<Rect>,
    placed: Vec<Rect>,
}

impl Placement {
    /// The best of `cands`, now taken.
    fn take(&mut self, cands: &[Rect]) -> Rect {
        let b = choose_label(cands, &self.taken, self.ndots, &self.bounds, &self.curve);
        self.taken.push(b);
        self.placed.push(b);
        b
    }
}

/// The vertical lines and the markers with their labels. Labels are placed one by one where
/// they overlap no label placed before, no marker and no legend, inside the axes, preferring
/// spots near their anchor and off the curves. Returns the labels' boxes.
fn labels(out: &mut String, p: &Panel, fr: &Frame) -> Vec<Rect> {
    let curve: Vec<(f64, f64)> = p
        .series
        .iter()
        .flat_map(|s| s.points.iter())
        .filter_map(|&(x, y)| fr.place(x, y))
        .collect();
    let dots: Vec<(f64, f64)> = p.markers.iter().filter_map(|m| fr.place(m.x, m.y)).collect();
    let mut at = Placement {
        bounds: Rect {
            x: ML,
            y: MT,
            w: fr.pw,
            h: fr.ph,
        },
        curve,
        ndots: dots.len(),
        taken: dots
            .iter()
            .map(|&(x, y)| Rect {
                x: x - 4.0,
                y: y - 4.0,
                w: 8.0,
                h: 8.0,
            })
            .collect(),
        placed: Vec::new(),
    };
    for v in &p.vlines {
        if v.x >= fr.x0 && v.x <= fr.x1 {
            vline(out, v, fr, &mut at);
        }
    }
    for m in &p.markers {
        if let Some(xy) = fr.place(m.x, m.y) {
            marker(out, m, xy, &mut at);
        }
    }
    at.placed
}

/// One vertical line, its label beside it at the first free height.
fn vline(out: &mut String, v: &VLine, fr: &Frame, at: &mut Placement) {
    let x = fr.sx(v.x);
    let (w, h) = (text_width(&v.label, 10.0), 12.5);
    let mut cands = Vec::new();
    let mut top = MT + 2.0;
    while top + h <= MT + fr.ph {
        cands.push(Rect {
            x: x + 3.0,
            y: top,
            w,
            h,
        });
        cands.push(Rect {
            x: x - 3.0 - w,
            y: top,
            w,
            h,
        });
        top += h + 1.0;
    }
    let b = at.take(&cands);
    let _ = writeln!(
        out,
        "<line class=\"vline\" x1=\"{x:.2}\" y1=\"{MT}\" x2=\"{x:.2}\" y2=\"{}\" stroke=\"{}\" stroke-dasharray=\"3,3\"/><text x=\"{:.2}\" y=\"{:.2}\" font-size=\"10\" fill=\"{}\">{}</text>",
        MT + fr.ph,
        v.color,
        b.x,
        b.y + 9.5,
        v.color,
        rich(&v.label, 10.0)
    );
}

/// One marker at (ax, ay) in the box, and its label (if any) at the nearest free spot, with a
/// leader line when it had to move away.
fn marker(out: &mut String, m: &Marker, (ax, ay): (f64, f64), at: &mut Placement) {
    let _ = writeln!(
        out,
        "<circle class=\"marker\" cx=\"{ax:.2}\" cy=\"{ay:.2}\" r=\"2.6\" fill=\"{}\"/>",
        m.color,
    );
    if m.label.is_empty() {
        return;
    }
    let (w, h) = (text_width(&m.label, 10.0), 12.5);
    let mut cands = Vec::new();
    for d in [5.0, 12.0, 22.0, 34.0, 48.0, 64.0, 84.0, 110.0, 140.0] {
        for (dx, dy) in [(1, -1), (1, 0), (0, -1), (-1, -1), (-1, 0), (1, 1), (0, 1), (-1, 1)] {
            let bx = match dx {
                1 => ax + d,
                -1 => ax - d - w,
                _ => ax - w / 2.0,
            };
            let by = match dy {
                -1 => ay - d - h,
                1 => ay + d,
                _ => ay - h / 2.0,
            };
            cands.push(Rect { x: bx, y: by, w, h });
        }
    }
    let b = at.take(&cands);
    let (lx, ly) = (ax.clamp(b.x, b.x + b.w), ay.clamp(b.y, b.y + b.h));
    if (lx - ax).hypot(ly - ay) > 8.0 {
        // Moved away from its point: a leader line shows which point it names.
        let _ = writeln!(
            out,
            "<line class=\"leader\" x1=\"{ax:.2}\" y1=\"{ay:.2}\" x2=\"{lx:.2}\" y2=\"{ly:.2}\" stroke=\"{}\" stroke-width=\"0.6\"/>",
            m.color
        );
    }
    let _ = writeln!(
        out,
        "<text class=\"label\" x=\"{:.2}\" y=\"{:.2}\" font-size=\"10\" fill=\"{}\">{}</text>",
        b.x,
        b.y + 9.5,
        m.color,
        rich(&m.label, 10.0)
    );
}

/// The legend, below the axes where it covers nothing: the lines (where there are several to
/// tell apart), each sample drawn as its line is, and the shaded regions as swatches.
#[allow(non_snake_case)]
fn legend(out: &mut String, p: &Panel, W: f64, H: f64) {
    let lx0 = ML;
    for (x, y, e) in legend_layout(p, W) {
        let y = H - legend_height(p, W) + 6.0 + y;
        let x = lx0 + x;
        let label = match e {
            Entry::Line(s) => {
                let dash = if s.dashed { " stroke-dasharray=\"6,4\"" } else { "" };
                let _ = writeln!(
                    out,
                    "<line x1=\"{x:.2}\" y1=\"{:.2}\" x2=\"{:.2}\" y2=\"{:.2}\" stroke=\"{}\" stroke-width=\"1.6\"{dash}/>",
                    y - 3.5,
                    x + 20.0,
                    y - 3.5,
                    s.color
                );
                &s.name
            }
            Entry::Swatch(g) => {
                let _ = writeln!(
                    out,
                    "<rect x=\"{x:.2}\" y=\"{:.2}\" width=\"20\" height=\"8\" fill=\"{}\" fill-opacity=\"{}\" stroke=\"{}\" stroke-width=\"0.5\"/>",
                    y - 7.5,
                    g.color,
                    (g.opacity * 2.0).min(1.0),
                    g.color
                );
                &g.label
            }
        };
        let _ = writeln!(
            out,
            "<text class=\"legend\" x=\"{:.2}\" y=\"{y:.2}\" font-size=\"10\">{}</text>",
            x + 24.0,
            rich(label, 10.0)
        );
    }
}

/// Draws a vertical colour bar at (x, top), `h` tall, with ticks in the quantity's units (decades
/// on a log scale) and its label.
fn colorbar(out: &mut String, cb: &ColorBar, x: f64, top: f64, h: f64, index: usize) {
    let n = cb.colors.len().max(2) - 1;
    let _ = write!(
        out,
        "<linearGradient id=\"cbar{index}\" x1=\"0\" y1=\"1\" x2=\"0\" y2=\"0\">"
    );
    for (i, c) in cb.colors.iter().enumerate() {
        let _ = write!(out, "<stop offset=\"{:.4}\" stop-color=\"{c}\"/>", i as f64 / n as f64);
    }
    let _ = writeln!(out, "</linearGradient>");
    let bw = 9.0;
    let _ = writeln!(
        out,
        "<rect class=\"colorbar\" x=\"{x:.2}\" y=\"{top:.2}\" width=\"{bw}\" height=\"{h:.2}\" fill=\"url(#cbar{index})\" stroke=\"black\" stroke-width=\"0.6\"/>"
    );
    let (a, b) = if cb.log {
        (cb.lo.log10(), cb.hi.log10())
    } else {
        (cb.lo, cb.hi)
    };
    if !(a.is_finite() && b.is_finite() && b > a) {
        return;
    }
    let ts: Vec<(f64, String)> = if cb.log {
        let mut d: Vec<f64> = (((a - 1e-9).ceil() as i64)..=((b + 1e-9).floor() as i64))
            .map(|k| k as f64)
            .collect();
        if d.len() < 2 {
            d = ticks(a, b);
        }
        d.into_iter()
            .map(|t| {
                let label = if t.fract() == 0.0 {
                    format!("10^{{{}}}", tick(t))
                } else {
                    tick(10f64.powf(t))
                };
                (t, label)
            })
            .collect()
    } else {
        ticks(a, b).into_iter().map(|t| (t, tick(t))).collect()
    };
    for (t, label) in ts {
        let y = top + (1.0 - (t - a) / (b - a)) * h;
        let _ = writeln!(
            out,
            "<line x1=\"{:.2}\" y1=\"{y:.2}\" x2=\"{:.2}\" y2=\"{y:.2}\" stroke=\"black\" stroke-width=\"0.6\"/><text class=\"cbtick\" x=\"{:.2}\" y=\"{:.2}\" font-size=\"10\">{}</text>",
            x + bw,
            x + bw + 3.0,
            x + bw + 5.0,
            y + 3.5,
            rich(&label, 10.0)
        );
    }
    let lx = x + bw + 48.0;
    let _ = writeln!(
        out,
        "<text class=\"cblabel\" x=\"{lx:.2}\" y=\"{:.2}\" text-anchor=\"middle\" transform=\"rotate(-90 {lx:.2} {:.2})\">{}</text>",
        top + h / 2.0,
        top + h / 2.0,
        rich(&cb.label, 12.0)
    );
}

/// One entry of a legend.
enum Entry<'a> {
    Line(&'a Series),
    Swatch(&'a Region),
}

/// The legend's entries at (x, baseline y) relative to its top left, in rows that fit the panel.
#[allow(non_snake_case)]
fn legend_layout(p: &Panel, W: f64) -> Vec<(f64, f64, Entry<'_>)> {
    let mut entries: Vec<Entry> = Vec::new();
    if p.series.len() > 1 {
        entries.extend(p.series.iter().map(Entry::Line));
    }
    entries.extend(p.regions.iter().filter(|g| !g.label.is_empty()).map(Entry::Swatch));
    let room = W - ML - MR;
    let (mut x, mut y) = (0.0, 10.0);
    let mut out = Vec::new();
    for e in entries {
        let label = match &e {
            Entry::Line(s) => &s.name,
            Entry::Swatch(g) => &g.label,
        };
        let w = 24.0 + text_width(label, 10.0) + 10.0;
        if x > 0.0 && x + w > room {
            x = 0.0;
            y += 13.0;
        }
        out.push((x, y, e));
        x += w;
    }
    out
}

/// The height the legend takes below the axes (0 without one).
#[allow(non_snake_case)]
fn legend_height(p: &Panel, W: f64) -> f64 {
    legend_layout(p, W).last().map_or(0.0, |(_, y, _)| y + 14.0)
}

/// A box in figure coordinates (y down, `y` its top).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// Left.
    pub x: f64,
    /// Top.
    pub y: f64,
    /// Width.
    pub w: f64,
    /// Height.
    pub h: f64,
}

impl Rect {
    /// Whether two boxes share more than a touching edge.
    pub fn overlaps(&self, o: &Rect) -> bool {
        self.x < o.x + o.w && o.x < self.x + self.w && self.y < o.y + o.h && o.y < self.y + self.h
    }
    fn inside(&self, b: &Rect) -> bool {
        self.x >= b.x && self.y >= b.y && self.x + self.w <= b.x + b.w && self.y + self.h <= b.y + b.h
    }
}

/// The estimated advance width of label markup at a font size: DejaVu Sans's widths, rounded
/// up (digits and most lowercase letters about 0.62 em, capitals 0.72 em), sub- and
/// superscripts at 0.7 of the size.
pub fn text_width(label: &str, size: f64) -> f64 {
    parse_markup(label)
        .iter()
        .map(|r| {
            let s = if r.level == 0 { size } else { 0.7 * size };
            r.text
                .chars()
                .map(|c| match c {
                    ' ' | '.' | ',' | ':' | 'i' | 'l' | 'j' | '(' | ')' | '[' | ']' => 0.36,
                    'A'..='Z' | 'm' | 'w' | '=' | '>' | '<' | '+' | '\u{2212}' => 0.86,
                    _ => 0.64,
                } * s)
                .sum::<f64>()
        })
        .sum()
}

/// The first best candidate: inside `bounds`, over no taken box, fewest curve points covered,
/// nearest first. Where no spot is free of markers a label may cover a marker, never
/// another label: `ndots` is the number of marker boxes at the start of `taken`.
fn choose_label(cands: &[Rect], taken: &[Rect], ndots: usize, bounds: &Rect, curve: &[(f64, f64)]) -> Rect {
    choose_among(cands, taken, bounds, curve)
        .or_else(|| choose_among(cands, &taken[ndots..], bounds, curve))
        .unwrap_or(cands[0])
}

fn choose_among(cands: &[Rect], taken: &[Rect], bounds: &Rect, curve: &[(f64, f64)]) -> Option<Rect> {
    let mut best: Option<(f64, Rect)> = None;
    for (i, c) in cands.iter().enumerate() {
        let pad = Rect {
            x: c.x - 1.0,
            y: c.y - 1.0,
            w: c.w + 2.0,
            h: c.h + 2.0,
        };
        if !c.inside(bounds) || taken.iter().any(|t| t.overlaps(&pad)) {
            continue;
        }
        let hits = curve
            .iter()
            .filter(|&&(x, y)| x >= pad.x && x <= pad.x + pad.w && y >= pad.y && y <= pad.y + pad.h)
            .count();
        let cost = i as f64 + 40.0 * hits.min(1) as f64 + hits as f64;
        if best.is_none_or(|(b, _)| cost < b) {
            best = Some((cost, *c));
        }
    }
    best.map(|(_, r)| r)
}

fn min_max(v: &[f64]) -> (f64, f64) {
    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if lo.is_finite() {
        (lo, hi)
    } else {
        (0.0, 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_ticks() {
        assert_eq!(ticks(0.0, 1.0), vec![0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0]);
        assert_eq!(ticks(-3.0, 7.0), vec![-2.0, 0.0, 2.0, 4.0, 6.0]);
        assert_eq!(tick(0.00012), "1.2e-4");
    }

    #[test]
    fn markup_gives_symbols() {
        let runs = parse_markup("$n$_s");
        assert_eq!(runs.len(), 2);
        assert!(runs[0].italic && runs[0].text == "n" && runs[0].level == 0);
        assert!(!runs[1].italic && runs[1].text == "s" && runs[1].level == -1);
        assert_eq!(plain_text("10^{-3}"), "10\u{2212}3");
        assert_eq!(parse_markup("10^{-3}")[1].level, 1);
        assert_eq!(plain_text("$P$_$\\zeta$ [Mpc^{-1}]"), "Pζ [Mpc\u{2212}1]");
        // A hyphen inside a word stays a hyphen.
        assert_eq!(plain_text("pole-order-2"), "pole-order-2");
        // User names: Greek names as letters, others as written (markup escaped), in italics.
        assert_eq!(symbol("phi"), "$φ$");
        assert_eq!(symbol("chi"), "$χ$");
        assert_eq!(symbol("rho"), "$ρ$");
        assert_eq!(plain_text(&symbol("x_1")), "x_1");
        assert!(parse_markup(&symbol("x")).iter().all(|r| r.italic));
        // tspans return to the baseline.
        let t = rich("$M$_p^4", 10.0);
        assert!(
            t.contains("dy=\"2.20\"") && t.contains("dy=\"-6.00\"") && t.ends_with("<tspan dy=\"3.80\"></tspan>"),
            "{t}"
        );
    }

    #[test]
    fn figure_widths_in_points() {
        assert!((parse_figure_width("single").unwrap() - 243.78).abs() < 0.01);
        assert!((parse_figure_width("double").unwrap() - 504.57).abs() < 0.01);
        assert!((parse_figure_width("12").unwrap() - 340.16).abs() < 0.01);
        for bad in ["0", "-3", "wide", "nan", "1e9"] {
            assert!(parse_figure_width(bad).is_err(), "{bad}");
        }
        let p = Panel::default();
        let one = render("t", &[p.clone(), p.clone()], SINGLE_COLUMN_PT);
        let two = render("t", &[p.clone(), p], DOUBLE_COLUMN_PT);
        assert!(one.contains("width=\"243.78pt\"") && two.contains("width=\"504.57pt\""));
        // One column stacks the two panels; two columns put them side by side.
        assert_eq!(one.matches("class=\"panel\" transform=\"translate(0.00,").count(), 2);
        assert_eq!(two.matches(",24.00)\">").count(), 2);
    }

    #[test]
    fn labels_never_overlap() {
        // Three labelled points almost on top of each other at the corner by a pole line, two
        // more lines beside it, and a curve through them: the case of the pivot points.
        let curve: Vec<(f64, f64)> = (0..200)
            .map(|i| {
                let x = -2.45 + 4.9 * i as f64 / 199.0;
                (x, x * x / 6.0)
            })
            .collect();
        let mut p = Panel {
            series: vec![Series {
                name: "V".into(),
                points: curve,
                color: "black".into(),
                dashed: false,
            }],
            ..Panel::default()
        };
        for (k, x) in [2.413, 2.417, 2.4196, 2.42, 1.119, 0.0].iter().enumerate() {
            p.markers.push(Marker {
                x: *x,
                y: x * x / 6.0,
                label: format!("$N$ = {}", 50 + 5 * k),
                color: "red".into(),
            });
        }
        for x in [2.449, 2.44, -2.449] {
            p.vlines.push(VLine {
                x,
                label: "pole, $p$ = 2".into(),
                color: "red".into(),
            });
        }
        let mut out = String::new();
        let boxes = panel(&mut out, &p, 0, TEST_W, TEST_H);
        assert_eq!(boxes.len(), 9);
        for (i, a) in boxes.iter().enumerate() {
            assert!(
                a.x >= ML && a.x + a.w <= TEST_W - MR && a.y >= MT && a.y + a.h <= TEST_H - MB,
                "{a:?} outside the axes"
            );
            for b in &boxes[i + 1..] {
                assert!(!a.overlaps(b), "{a:?} overlaps {b:?}");
            }
        }
        // Labels moved away from their points get leader lines.
        assert!(out.contains("class=\"leader\""));
        // The estimate is not below the true advance (DejaVu Sans: "N = 55" is about 3.5 em).
        assert!(text_width("N = 55", 10.0) >= 35.0);
    }
}
