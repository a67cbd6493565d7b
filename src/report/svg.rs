//! Self-contained SVG 1.1 plots: line plots, heatmaps and histograms.
//!
//! Everything here uses only the standard library and returns the whole document as a `String`.
//! The output never contains `NaN` or `inf`: non-finite data points are skipped (breaking the
//! line), degenerate ranges are widened, and every coordinate is checked before it is written.

use std::fmt::Write as _;
use std::path::Path;

/// Series longer than this many points are reduced to first/min/max/last per pixel column.
pub const DOWNSAMPLE_THRESHOLD: usize = 20_000;

/// Qualitative colour palette (CSS hex strings) used for series whose `color` is empty.
pub const PALETTE: [&str; 8] = [ALIGNMENT, PROJECTED, VIOLET, ORIENTATION, "#e3a0b8", PULSE, TEAL, OCHRE];

// kicktrain's colours, defined here and nowhere else. Neighbours in `PALETTE` stay at least 29 ΔE00
// apart for normal vision and simulated protanopia, deuteranopia and tritanopia
// (`tools/palette_check.py`: Machado et al. 2009 simulation, CIEDE2000).
/// ⟨cos²θ⟩ of the alignment axis.
pub const ALIGNMENT: &str = "#1f5fa8";
/// ⟨cos²θ_2D⟩, the detector-plane alignment.
pub const PROJECTED: &str = "#d9622b";
/// ⟨cosθ⟩ (orientation), the optimum marker and "no orientation".
pub const ORIENTATION: &str = "#2a7f3f";
/// The three-axis goal and two-colour pulses.
pub const VIOLET: &str = "#6a3d9a";
/// Laser pulse markers and the nominal value of a tolerance histogram.
pub const PULSE: &str = "#a8324e";
/// Terahertz pulse markers and a second axis held along X.
pub const TEAL: &str = "#3fa7b5";
/// Spare palette colour.
pub const OCHRE: &str = "#c9a227";
/// The other body axes of a top (lighter than the alignment axis) and baselines.
pub const AXIS_A: &str = "#6f9bd6";
/// Body axis b of a top and single-pulse baselines.
pub const NEUTRAL: &str = "#7a7a7a";
/// Body axis c of a top.
pub const NEUTRAL_LIGHT: &str = "#a3a3a3";

/// Near-black for reference lines (full-solver stage of the convergence plot).
pub const INK: &str = "#222222";

/// Fill colour (CSS hex) of heatmap cells whose value is not finite.
pub const MISSING_COLOR: &str = "#d9d9d9";

const FONT: &str = "sans-serif";
const GRID_COLOR: &str = "#e6e6e6";
const AXIS_COLOR: &str = "#333333";
const TEXT_COLOR: &str = "#222222";
const SUBTLE_COLOR: &str = "#555555";
const MARKER_DEFAULT: &str = "#888888";
const TICK_FONT: f64 = 12.0;
const LABEL_FONT: f64 = 14.0;
const TITLE_FONT: f64 = 18.0;
const SUBTITLE_FONT: f64 = 13.0;
const LEGEND_FONT: f64 = 12.0;
const MARKER_FONT: f64 = 10.0;
const MARKER_ROW_H: f64 = 13.0;
const MAX_MARKER_ROWS: usize = 3;
const BOTTOM_MARGIN: f64 = 58.0;
/// Pixel coordinates are clamped to ±this so far-off-scale points stay finite and short.
const PX_LIMIT: f64 = 1.0e5;

// ---------------------------------------------------------------------------------------------
// Public data types
// ---------------------------------------------------------------------------------------------

/// One line series: paired `x`/`y` samples drawn as a polyline (non-finite points break the line).
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text; may be empty.
    pub label: String,
    /// Abscissae, in the plot's x units.
    pub x: Vec<f64>,
    /// Ordinates, in the plot's y units (only the first `min(x.len(), y.len())` pairs are used).
    pub y: Vec<f64>,
    /// CSS stroke colour, e.g. `"#1f5fa8"`; empty picks a palette colour.
    pub color: String,
    /// Draw with a dashed stroke.
    pub dashed: bool,
    /// Stroke width in pixels (non-positive or non-finite falls back to 1.5).
    pub width: f64,
}

impl Series {
    /// A solid 1.5 px series with an automatic palette colour.
    pub fn new(label: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Series { label: label.into(), x, y, color: String::new(), dashed: false, width: 1.5 }
    }

    /// The same series with the given CSS colour.
    pub fn with_color(mut self, color: impl Into<String>) -> Self {
        self.color = color.into();
        self
    }

    /// The same series drawn dashed (or solid when `dashed` is false).
    pub fn with_dashed(mut self, dashed: bool) -> Self {
        self.dashed = dashed;
        self
    }

    /// The same series with the given stroke width in pixels.
    pub fn with_width(mut self, width: f64) -> Self {
        self.width = width;
        self
    }
}

/// A vertical marker at `x0` (e.g. a laser pulse centre), or a shaded span `[x0, x1]` when `x1 > x0`.
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// Position (or span start), in x units.
    pub x0: f64,
    /// Span end, in x units; `x1 <= x0` means a single vertical line at `x0`.
    pub x1: f64,
    /// Small text drawn above the plot area; may be empty.
    pub label: String,
    /// CSS colour; empty picks grey.
    pub color: String,
}

impl Marker {
    /// A thin dashed vertical line at `x` (x units).
    pub fn line(x: f64, label: impl Into<String>, color: impl Into<String>) -> Self {
        Marker { x0: x, x1: x, label: label.into(), color: color.into() }
    }

    /// A light shaded span from `x0` to `x1` (x units).
    pub fn span(x0: f64, x1: f64, label: impl Into<String>, color: impl Into<String>) -> Self {
        Marker { x0, x1, label: label.into(), color: color.into() }
    }
}

/// A horizontal dotted reference line (e.g. the isotropic value 1/3) labelled at the right.
#[derive(Debug, Clone, PartialEq)]
pub struct HLine {
    /// Height, in y units.
    pub y: f64,
    /// Text drawn near the right end of the line; may be empty.
    pub label: String,
    /// CSS colour; empty picks grey.
    pub color: String,
}

impl HLine {
    /// A reference line at `y` (y units).
    pub fn new(y: f64, label: impl Into<String>, color: impl Into<String>) -> Self {
        HLine { y, label: label.into(), color: color.into() }
    }
}

/// A 2D line plot with optional markers, reference lines and legend.
#[derive(Debug, Clone, PartialEq)]
pub struct LinePlot {
    /// Title drawn at the top.
    pub title: String,
    /// Optional smaller second line under the title.
    pub subtitle: Option<String>,
    /// Text under the x axis (include units, e.g. "time (ps)").
    pub x_label: String,
    /// Text beside the y axis, drawn rotated.
    pub y_label: String,
    /// The line series, drawn in order.
    pub series: Vec<Series>,
    /// Vertical markers and shaded spans.
    pub markers: Vec<Marker>,
    /// Horizontal reference lines.
    pub hlines: Vec<HLine>,
    /// Fixed x range in x units; `None` fits the data with 3 % padding.
    pub x_range: Option<(f64, f64)>,
    /// Fixed y range in y units; `None` fits the data (and reference lines) with 3 % padding.
    pub y_range: Option<(f64, f64)>,
    /// Image width in pixels.
    pub width: f64,
    /// Image height in pixels.
    pub height: f64,
}

/// A heatmap of `z` over a regular grid (for 2D parameter scans), with a labelled colour bar.
#[derive(Debug, Clone, PartialEq)]
pub struct Heatmap {
    /// Title drawn at the top.
    pub title: String,
    /// Optional second line under the title.
    pub subtitle: Option<String>,
    /// Text under the x axis.
    pub x_label: String,
    /// Text beside the y axis, drawn rotated.
    pub y_label: String,
    /// Text beside the colour bar, drawn rotated.
    pub z_label: String,
    /// Column centres, ascending, in x units.
    pub x: Vec<f64>,
    /// Row centres, monotonic, in y units.
    pub y: Vec<f64>,
    /// Values as `z[row][col]`; non-finite or missing cells are drawn light grey.
    pub z: Vec<Vec<f64>>,
    /// Image width in pixels.
    pub width: f64,
    /// Image height in pixels.
    pub height: f64,
}

/// A histogram of `values` (e.g. Monte Carlo scores) with counts on the y axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Histogram {
    /// Title drawn at the top.
    pub title: String,
    /// Text under the x axis.
    pub x_label: String,
    /// The samples; non-finite ones are skipped (and counted in the subtitle).
    pub values: Vec<f64>,
    /// Number of equal-width bins; 0 picks about √n (at most 100).
    pub bins: usize,
    /// Vertical markers and shaded spans (e.g. a reference score).
    pub markers: Vec<Marker>,
    /// Image width in pixels.
    pub width: f64,
    /// Image height in pixels.
    pub height: f64,
}

// ---------------------------------------------------------------------------------------------
// Ticks and number formatting
// ---------------------------------------------------------------------------------------------

/// "Nice" axis ticks (1, 2, 5 × 10^k steps) lying in [lo, hi], about `target` of them.
///
/// Tick values are the nearest doubles to the decimal multiples of the step (so 0.6 rather than
/// 0.6000000000000001). Returns `[lo]` when `lo == hi` and nothing for non-finite input.
pub fn nice_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if !lo.is_finite() || !hi.is_finite() {
        return Vec::new();
    }
    let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    let span = hi - lo;
    if span == 0.0 {
        return vec![lo];
    }
    if !span.is_finite() {
        return Vec::new();
    }
    let (mult, exp) = nice_step(span / target.max(1) as f64);
    let step = mult * pow10(exp);
    if step.is_nan() || step <= 0.0 || !step.is_finite() {
        return vec![lo, hi];
    }
    let k0 = (lo / step - 1e-9).ceil();
    let k1 = (hi / step + 1e-9).floor();
    if k1.is_nan() || k0.is_nan() || k1 < k0 || k1 - k0 > 10_000.0 {
        return vec![lo, hi];
    }
    let mut out = Vec::with_capacity((k1 - k0) as usize + 1);
    let mut k = k0;
    while k <= k1 {
        let units = k * mult; // an exact integer for any realistic axis
        let v = if (-22..0).contains(&exp) { units / 10f64.powi(-exp) } else { units * pow10(exp) };
        out.push(if v == 0.0 { 0.0 } else { v });
        k += 1.0;
    }
    out
}

/// The step for a raw spacing as (multiplier in {1, 2, 5, 10}, decimal exponent).
fn nice_step(raw: f64) -> (f64, i32) {
    let exp = raw.log10().floor() as i32;
    let f = raw / pow10(exp);
    let mult = if f < 1.5 {
        1.0
    } else if f < 3.0 {
        2.0
    } else if f < 7.0 {
        5.0
    } else {
        10.0
    };
    (mult, exp)
}

fn pow10(e: i32) -> f64 {
    10f64.powi(e)
}

/// Compact labels for a set of axis ticks: fixed decimals where sensible, otherwise `m×10ᵏ`.
///
/// All labels share the number of decimals needed to tell neighbouring ticks apart; magnitudes
/// of at least 1e5 or below 1e-3 use scientific notation with superscript exponents.
pub fn format_ticks(ticks: &[f64]) -> Vec<String> {
    let finite: Vec<f64> = ticks.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.is_empty() {
        return ticks.iter().map(|_| String::new()).collect();
    }
    let mut step = f64::INFINITY;
    for w in finite.windows(2) {
        let d = (w[1] - w[0]).abs();
        if d > 0.0 {
            step = step.min(d);
        }
    }
    let max_abs = finite.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if !step.is_finite() {
        step = if max_abs > 0.0 { max_abs } else { 1.0 };
    }
    let tol = step * 1e-6;
    let sci = max_abs >= 1e5 || (max_abs > 0.0 && max_abs < 1e-3);
    if !sci {
        let mut d = 0usize;
        while d < 15 && !finite.iter().all(|&v| (round_to(v, d) - v).abs() <= tol) {
            d += 1;
        }
        return ticks.iter().map(|&v| if v.is_finite() { fixed(v, d) } else { String::new() }).collect();
    }
    // Scientific: shared mantissa decimals, per-tick exponent.
    let mut d = 0usize;
    for &v in &finite {
        if v.abs() <= step * 1e-9 {
            continue;
        }
        let (m, e) = split_sci(v);
        while d < 15 && (round_to(m, d) - m).abs() * pow10(e) > tol {
            d += 1;
        }
    }
    ticks
        .iter()
        .map(|&v| {
            if !v.is_finite() {
                String::new()
            } else if v.abs() <= step * 1e-9 {
                "0".to_string()
            } else {
                sci_label(v, d)
            }
        })
        .collect()
}

/// A single number formatted compactly with about four significant digits (e.g. for annotations).
pub fn format_number(v: f64) -> String {
    if !v.is_finite() {
        return "–".to_string();
    }
    if v == 0.0 {
        return "0".to_string();
    }
    let a = v.abs();
    if !(1e-3..1e5).contains(&a) {
        let (m, _) = split_sci(v);
        let mut d = 3usize;
        while d > 0 && (round_to(m, d - 1) - m).abs() < 1e-9 {
            d -= 1;
        }
        sci_label(v, d)
    } else {
        let mag = a.log10().floor() as i32;
        let d = (3 - mag).clamp(0, 8) as usize;
        let s = fixed(v, d);
        if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
    }
}

fn split_sci(v: f64) -> (f64, i32) {
    let e = v.abs().log10().floor() as i32;
    (v / pow10(e), e)
}

fn sci_label(v: f64, d: usize) -> String {
    let (mut m, mut e) = split_sci(v);
    if round_to(m, d).abs() >= 10.0 {
        m /= 10.0;
        e += 1;
    }
    if round_to(m, d).abs() < 1.0 {
        m *= 10.0;
        e -= 1;
    }
    format!("{}×10{}", fixed(m, d), superscript(e))
}

fn round_to(v: f64, d: usize) -> f64 {
    format!("{:.*}", d, v).parse().unwrap_or(v)
}

fn fixed(v: f64, d: usize) -> String {
    let s = format!("{:.*}", d, v);
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') { s[1..].to_string() } else { s }
}

fn superscript(e: i32) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if e < 0 {
        s.push('⁻');
    }
    for c in e.unsigned_abs().to_string().chars() {
        s.push(DIGITS[c.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Colour map
// ---------------------------------------------------------------------------------------------

/// Anchors (CIE L*, a*, b*) of the sequential heat-map colours: deep indigo, teal, pale straw. The map
/// runs linearly in CIELAB between them, so lightness rises steadily from 18 to 93 and equal steps of the
/// value are close to equal perceived steps (the principle of maps uniform in a perceptual colour space,
/// e.g. Kovesi, "Good colour maps: how to design them", arXiv:1509.03700 (2015)). Checked in
/// `tools/palette_check.py`; every colour on the path lies inside the sRGB gamut, so none is clipped.
const MAP_LAB: [(f64, f64, f64); 3] = [(18.0, 18.0, -42.0), (55.5, -26.0, -10.0), (93.0, -10.0, 62.0)];

/// CIELAB (D65) to 8-bit sRGB (CIE 15:2004; IEC 61966-2-1), clipped to the gamut.
fn lab_to_srgb(l: f64, a: f64, b: f64) -> (u8, u8, u8) {
    let fy = (l + 16.0) / 116.0;
    let (fx, fz) = (fy + a / 500.0, fy - b / 200.0);
    let d = 6.0 / 29.0;
    let inv = |t: f64| if t > d { t * t * t } else { 3.0 * d * d * (t - 4.0 / 29.0) };
    let (x, y, z) = (0.95047 * inv(fx), inv(fy), 1.08883 * inv(fz));
    let lin = [3.2404542 * x - 1.5371385 * y - 0.4985314 * z, -0.9692660 * x + 1.8760108 * y + 0.0415560 * z, 0.0556434 * x - 0.2040259 * y + 1.0572252 * z];
    let gamma = |c: f64| {
        let c = c.clamp(0.0, 1.0);
        let v = if c <= 0.0031308 { 12.92 * c } else { 1.055 * c.powf(1.0 / 2.4) - 0.055 };
        (v * 255.0).round().clamp(0.0, 255.0) as u8
    };
    (gamma(lin[0]), gamma(lin[1]), gamma(lin[2]))
}

/// kicktrain's sequential colour for `t` in [0, 1] (clamped; non-finite gives the low end) as RGB.
pub fn colormap(t: f64) -> (u8, u8, u8) {
    let t = if t.is_finite() { t.clamp(0.0, 1.0) } else { 0.0 };
    let pos = t * (MAP_LAB.len() - 1) as f64;
    let i = (pos.floor() as usize).min(MAP_LAB.len() - 2);
    let f = pos - i as f64;
    let (a, b) = (MAP_LAB[i], MAP_LAB[i + 1]);
    lab_to_srgb(a.0 + (b.0 - a.0) * f, a.1 + (b.1 - a.1) * f, a.2 + (b.2 - a.2) * f)
}

/// [`colormap`] as a CSS hex colour string such as `"#1f5fa8"`.
pub fn colormap_hex(t: f64) -> String {
    let (r, g, b) = colormap(t);
    format!("#{r:02x}{g:02x}{b:02x}")
}

// ---------------------------------------------------------------------------------------------
// Low-level SVG writing
// ---------------------------------------------------------------------------------------------

/// Escape `&`, `<`, `>`, `"` and `'` for XML text or attributes, dropping characters XML forbids.
pub fn escape_xml(s: &str) -> String {
    let mut o = String::with_capacity(s.len() + 8);
    for ch in s.chars() {
        match ch {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            '\t' | '\n' | '\r' => o.push(' '),
            c if (c as u32) < 0x20 || c == '\u{FFFE}' || c == '\u{FFFF}' => {}
            c => o.push(c),
        }
    }
    o
}

/// Write an SVG document to `path`.
pub fn write_svg(path: &Path, svg: &str) -> std::io::Result<()> {
    std::fs::write(path, svg)
}

/// A coordinate or length for an attribute: two decimals, trailing zeros trimmed, never NaN.
/// Several SVG documents made by this module, one under the other in one document (each keeps its own
/// coordinates inside a nested `<svg>`; the width is the widest one's).
pub fn stack_vertically(docs: &[String]) -> String {
    let size = |doc: &str, key: &str| -> f64 {
        let root = doc.find("<svg ").map(|i| &doc[i..]).unwrap_or("");
        let end = root.find('>').unwrap_or(root.len());
        let pat = format!(" {key}=\"");
        root[..end].find(&pat).and_then(|i| root[i + pat.len()..end].split('"').next()).and_then(|v| v.parse().ok()).unwrap_or(0.0)
    };
    let width = docs.iter().map(|d| size(d, "width")).fold(0.0, f64::max);
    let height: f64 = docs.iter().map(|d| size(d, "height")).sum();
    let mut out = Svg::new(width.max(1.0), height.max(1.0));
    let mut y = 0.0;
    for d in docs {
        let body = d.find("<svg ").map(|i| &d[i..]).unwrap_or("");
        out.raw(&body.replacen("<svg ", &format!("<svg x=\"0\" y=\"{}\" ", N(y)), 1));
        y += size(d, "height");
    }
    out.finish()
}

struct N(f64);

impl std::fmt::Display for N {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let v = if self.0.is_finite() { self.0 } else { 0.0 };
        let s = format!("{v:.2}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        f.write_str(if s == "-0" || s.is_empty() { "0" } else { s })
    }
}

/// How a line is drawn: colour, width (px) and an optional dash pattern.
#[derive(Clone, Copy)]
struct Pen<'a> {
    color: &'a str,
    width: f64,
    dash: Option<&'a str>,
}

/// How a text is set: size (px), anchor, colour and extra attributes.
#[derive(Clone, Copy)]
struct Font<'a> {
    size: f64,
    anchor: &'a str,
    fill: &'a str,
    extra: &'a str,
}

fn text_width(s: &str, size: f64) -> f64 {
    s.chars().map(|c| if c.is_ascii_uppercase() || c == 'm' || c == 'w' { 0.75 } else { 0.58 }).sum::<f64>() * size
}

fn truncate(s: &str, max_chars: usize) -> String {
    let max_chars = max_chars.max(2);
    if s.chars().count() <= max_chars {
        s.to_string()
    } else {
        let mut t: String = s.chars().take(max_chars - 1).collect();
        t.push('…');
        t
    }
}

fn or_default<'a>(c: &'a str, default: &'a str) -> &'a str {
    if c.trim().is_empty() { default } else { c.trim() }
}

fn sane_dim(v: f64, default: f64, min: f64) -> f64 {
    if v.is_finite() && v > 0.0 { v.max(min) } else { default }
}

fn clamp_px(v: f64) -> f64 {
    v.clamp(-PX_LIMIT, PX_LIMIT)
}

/// FNV-1a hash used to make element ids unique per figure but deterministic.
fn fnv(parts: &[&str]) -> u32 {
    let mut h: u32 = 0x811c_9dc5;
    for p in parts {
        for b in p.bytes().chain(std::iter::once(0xff)) {
            h ^= b as u32;
            h = h.wrapping_mul(0x0100_0193);
        }
    }
    h
}

struct Svg {
    buf: String,
}

impl Svg {
    fn new(w: f64, h: f64) -> Self {
        let mut buf = String::with_capacity(32 * 1024);
        let _ = writeln!(buf, "<?xml version=\"1.0\" encoding=\"UTF-8\" standalone=\"no\"?>");
        let _ = writeln!(
            buf,
            "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"{}\" height=\"{}\" viewBox=\"0 0 {} {}\" font-family=\"{}\">",
            N(w),
            N(h),
            N(w),
            N(h),
            FONT
        );
        let _ = writeln!(buf, "<rect x=\"0\" y=\"0\" width=\"{}\" height=\"{}\" fill=\"#ffffff\"/>", N(w), N(h));
        Svg { buf }
    }

    fn raw(&mut self, s: &str) {
        self.buf.push_str(s);
    }

    fn line(&mut self, (x1, y1): (f64, f64), (x2, y2): (f64, f64), pen: Pen) {
        let Pen { color: stroke, width, dash } = pen;
        let _ = write!(
            self.buf,
            "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"{}\"",
            N(x1),
            N(y1),
            N(x2),
            N(y2),
            escape_xml(stroke),
            N(width)
        );
        if let Some(d) = dash {
            let _ = write!(self.buf, " stroke-dasharray=\"{}\"", escape_xml(d));
        }
        self.buf.push_str("/>\n");
    }

    fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: &str, extra: &str) {
        let _ = writeln!(
            self.buf,
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"{}/>",
            N(x),
            N(y),
            N(w.max(0.0)),
            N(h.max(0.0)),
            escape_xml(fill),
            extra
        );
    }

    fn text(&mut self, (x, y): (f64, f64), font: Font, content: &str) {
        let Font { size, anchor, fill, extra } = font;
        if content.is_empty() {
            return;
        }
        let _ = writeln!(
            self.buf,
            "<text x=\"{}\" y=\"{}\" font-size=\"{}\" text-anchor=\"{}\" fill=\"{}\"{}>{}</text>",
            N(x),
            N(y),
            N(size),
            anchor,
            escape_xml(fill),
            extra,
            escape_xml(content)
        );
    }

    fn finish(mut self) -> String {
        self.buf.push_str("</svg>\n");
        self.buf
    }
}

// ---------------------------------------------------------------------------------------------
// Ranges, layout and axes shared by the plot kinds
// ---------------------------------------------------------------------------------------------

/// Make a finite, strictly increasing range out of `lo..hi`.
fn widen(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    let big = f64::MAX / 8.0;
    let (lo, hi) = (lo.clamp(-big, big), hi.clamp(-big, big));
    let scale = lo.abs().max(hi.abs());
    if hi - lo > scale * 1e-12 && hi > lo {
        return (lo, hi);
    }
    let c = 0.5 * (lo + hi);
    let d = if c == 0.0 { 1.0 } else { c.abs() * 0.1 };
    (c - d, c + d)
}

/// A fixed range if usable, otherwise the data extent padded by `pad` (fraction) on each side.
fn resolve_range(fixed: Option<(f64, f64)>, data: impl Iterator<Item = f64>, pad: f64) -> (f64, f64) {
    if let Some((a, b)) = fixed
        && a.is_finite()
        && b.is_finite()
    {
        return widen(a, b);
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in data {
        if v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if lo > hi {
        return (0.0, 1.0);
    }
    let (lo, hi) = widen(lo, hi);
    let span = hi - lo;
    widen(lo - pad * span, hi + pad * span)
}

#[derive(Debug, Clone, Copy)]
struct Frame {
    left: f64,
    top: f64,
    w: f64,
    h: f64,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

impl Frame {
    fn px(&self, x: f64) -> f64 {
        clamp_px(self.left + (x - self.x0) / (self.x1 - self.x0) * self.w)
    }
    fn py(&self, y: f64) -> f64 {
        clamp_px(self.top + self.h - (y - self.y0) / (self.y1 - self.y0) * self.h)
    }
    fn right(&self) -> f64 {
        self.left + self.w
    }
    fn bottom(&self) -> f64 {
        self.top + self.h
    }
    fn x_in(&self, x: f64) -> bool {
        let eps = (self.x1 - self.x0) * 1e-9;
        x >= self.x0 - eps && x <= self.x1 + eps
    }
    fn y_in(&self, y: f64) -> bool {
        let eps = (self.y1 - self.y0) * 1e-9;
        y >= self.y0 - eps && y <= self.y1 + eps
    }
}

struct LayoutSpec {
    width: f64,
    height: f64,
    content_top: f64,
    marker_rows: usize,
    right: f64,
    xr: (f64, f64),
    yr: (f64, f64),
    y_integer: bool,
}

struct Layout {
    frame: Frame,
    xt: Vec<f64>,
    xl: Vec<String>,
    yt: Vec<f64>,
    yl: Vec<String>,
}

fn content_top(title: &str, subtitle: Option<&str>) -> f64 {
    if subtitle.is_some_and(|s| !s.trim().is_empty()) {
        56.0
    } else if !title.trim().is_empty() {
        38.0
    } else {
        14.0
    }
}

fn y_ticks(lo: f64, hi: f64, plot_h: f64, integer: bool) -> (Vec<f64>, Vec<String>) {
    let target = ((plot_h / 45.0).round() as usize).clamp(2, 10);
    let mut t = nice_ticks(lo, hi, target);
    if integer {
        t.retain(|v| v.fract() == 0.0);
    }
    let l = format_ticks(&t);
    (t, l)
}

fn x_ticks(lo: f64, hi: f64, plot_w: f64) -> (Vec<f64>, Vec<String>) {
    let mut target = ((plot_w / 80.0).round() as usize).clamp(2, 12);
    loop {
        let t = nice_ticks(lo, hi, target);
        let l = format_ticks(&t);
        let widest = l.iter().map(|s| text_width(s, TICK_FONT)).fold(0.0, f64::max);
        let spacing = if t.len() > 1 { plot_w * (t[1] - t[0]) / (hi - lo) } else { f64::INFINITY };
        if spacing >= widest + 14.0 || target <= 2 {
            return (t, l);
        }
        target -= 1;
    }
}

fn layout(s: &LayoutSpec) -> Layout {
    let top = s.content_top + s.marker_rows as f64 * MARKER_ROW_H + if s.marker_rows > 0 { 6.0 } else { 8.0 };
    let plot_h = (s.height - top - BOTTOM_MARGIN).max(40.0);
    let (yt, yl) = y_ticks(s.yr.0, s.yr.1, plot_h, s.y_integer);
    let widest = yl.iter().map(|l| text_width(l, TICK_FONT)).fold(0.0, f64::max);
    let left = (38.0 + widest).max(56.0);
    let plot_w = (s.width - left - s.right).max(40.0);
    let (xt, xl) = x_ticks(s.xr.0, s.xr.1, plot_w);
    Layout { frame: Frame { left, top, w: plot_w, h: plot_h, x0: s.xr.0, x1: s.xr.1, y0: s.yr.0, y1: s.yr.1 }, xt, xl, yt, yl }
}

fn draw_titles(svg: &mut Svg, f: &Frame, width: f64, title: &str, subtitle: Option<&str>) {
    let cx = (f.left + 0.5 * f.w).clamp(0.35 * width, 0.65 * width);
    let avail = (2.0 * cx.min(width - cx) - 16.0).max(60.0);
    let max_t = (avail / (TITLE_FONT * 0.62)) as usize;
    svg.text((cx, 28.0), Font { size: TITLE_FONT, anchor: "middle", fill: TEXT_COLOR, extra: " font-weight=\"bold\"" }, &truncate(title.trim(), max_t));
    if let Some(sub) = subtitle {
        let max_s = (avail / (SUBTITLE_FONT * 0.58)) as usize;
        svg.text((cx, 48.0), Font { size: SUBTITLE_FONT, anchor: "middle", fill: SUBTLE_COLOR, extra: "" }, &truncate(sub.trim(), max_s));
    }
}

fn draw_grid(svg: &mut Svg, l: &Layout) {
    let f = &l.frame;
    for &t in &l.xt {
        let x = f.px(t);
        svg.line((x, f.top), (x, f.bottom()), Pen { color: GRID_COLOR, width: 0.8, dash: None });
    }
    for &t in &l.yt {
        let y = f.py(t);
        svg.line((f.left, y), (f.right(), y), Pen { color: GRID_COLOR, width: 0.8, dash: None });
    }
}

fn draw_frame(svg: &mut Svg, l: &Layout, height: f64, x_label: &str, y_label: &str) {
    let f = &l.frame;
    svg.rect(f.left, f.top, f.w, f.h, "none", &format!(" stroke=\"{AXIS_COLOR}\" stroke-width=\"1\""));
    for (&t, lab) in l.xt.iter().zip(&l.xl) {
        let x = f.px(t);
        svg.line((x, f.bottom()), (x, f.bottom() + 5.0), Pen { color: AXIS_COLOR, width: 1.0, dash: None });
        svg.text((x, f.bottom() + 19.0), Font { size: TICK_FONT, anchor: "middle", fill: TEXT_COLOR, extra: "" }, lab);
    }
    for (&t, lab) in l.yt.iter().zip(&l.yl) {
        let y = f.py(t);
        svg.line((f.left - 5.0, y), (f.left, y), Pen { color: AXIS_COLOR, width: 1.0, dash: None });
        svg.text((f.left - 8.0, y + 4.0), Font { size: TICK_FONT, anchor: "end", fill: TEXT_COLOR, extra: "" }, lab);
    }
    let max_x = (f.w / (LABEL_FONT * 0.6)) as usize;
    svg.text((f.left + 0.5 * f.w, height - 14.0), Font { size: LABEL_FONT, anchor: "middle", fill: TEXT_COLOR, extra: "" }, &truncate(x_label.trim(), max_x));
    let cy = f.top + 0.5 * f.h;
    let max_y = (f.h / (LABEL_FONT * 0.6)) as usize;
    let rot = format!(" transform=\"rotate(-90 {} {})\"", N(20.0), N(cy));
    svg.text((20.0, cy), Font { size: LABEL_FONT, anchor: "middle", fill: TEXT_COLOR, extra: &rot }, &truncate(y_label.trim(), max_y));
}

/// Where each marker label goes: (marker index, row, centre x in pixels).
fn place_marker_labels(markers: &[Marker], f: &Frame, max_rows: usize) -> Vec<(usize, usize, f64)> {
    let mut items: Vec<(usize, f64, f64)> = Vec::new();
    for (i, m) in markers.iter().enumerate() {
        if m.label.trim().is_empty() || !m.x0.is_finite() {
            continue;
        }
        let (a, b) = if m.x1.is_finite() && m.x1 > m.x0 { (m.x0, m.x1) } else { (m.x0, m.x0) };
        if b < f.x0 || a > f.x1 {
            continue;
        }
        let c = 0.5 * (a.max(f.x0) + b.min(f.x1));
        let w = text_width(&truncate(m.label.trim(), 30), MARKER_FONT);
        let cx = f.px(c).clamp(f.left + 0.5 * w, (f.right() - 0.5 * w).max(f.left + 0.5 * w));
        items.push((i, cx, w));
    }
    items.sort_by(|a, b| a.1.total_cmp(&b.1));
    let mut row_end: Vec<f64> = Vec::new();
    let mut out = Vec::new();
    for (i, cx, w) in items {
        let start = cx - 0.5 * w;
        let row = match row_end.iter().position(|&e| e + 6.0 <= start) {
            Some(r) => r,
            None if row_end.len() < max_rows.max(1) => {
                row_end.push(f64::NEG_INFINITY);
                row_end.len() - 1
            }
            None => (0..row_end.len()).min_by(|&a, &b| row_end[a].total_cmp(&row_end[b])).unwrap_or(0),
        };
        row_end[row] = row_end[row].max(cx + 0.5 * w);
        out.push((i, row, cx));
    }
    out
}

/// Layout of a plot, redone with room for marker labels when the markers need extra rows.
fn layout_with_markers(spec: &mut LayoutSpec, markers: &[Marker]) -> Layout {
    let lay = layout(spec);
    let rows = marker_rows_needed(markers, &lay.frame);
    if rows > 0 {
        spec.marker_rows = rows;
        return layout(spec);
    }
    lay
}

fn marker_rows_needed(markers: &[Marker], f: &Frame) -> usize {
    place_marker_labels(markers, f, MAX_MARKER_ROWS).iter().map(|p| p.1 + 1).max().unwrap_or(0)
}

fn draw_marker_spans(svg: &mut Svg, markers: &[Marker], f: &Frame) {
    for m in markers {
        if !(m.x0.is_finite() && m.x1.is_finite() && m.x1 > m.x0) || m.x1 < f.x0 || m.x0 > f.x1 {
            continue;
        }
        let a = f.px(m.x0.max(f.x0));
        let b = f.px(m.x1.min(f.x1));
        let c = or_default(&m.color, MARKER_DEFAULT);
        svg.rect(a, f.top, (b - a).max(1.0), f.h, c, " fill-opacity=\"0.15\"");
    }
}

fn draw_marker_lines(svg: &mut Svg, markers: &[Marker], f: &Frame, rows: usize, content_top: f64) {
    for m in markers {
        if !m.x0.is_finite() || (m.x1.is_finite() && m.x1 > m.x0) || !f.x_in(m.x0) {
            continue;
        }
        let x = f.px(m.x0);
        svg.line((x, f.top), (x, f.bottom()), Pen { color: or_default(&m.color, MARKER_DEFAULT), width: 1.0, dash: Some("4 3") });
    }
    for (i, row, cx) in place_marker_labels(markers, f, rows) {
        let m = &markers[i];
        let y = content_top + 10.0 + row as f64 * MARKER_ROW_H;
        svg.text((cx, y), Font { size: MARKER_FONT, anchor: "middle", fill: or_default(&m.color, MARKER_DEFAULT), extra: "" }, &truncate(m.label.trim(), 30));
    }
}

// ---------------------------------------------------------------------------------------------
// Line plot
// ---------------------------------------------------------------------------------------------

/// Reduce one unbroken run of pixel points to first/min/max/last per pixel column, in order.
fn downsample_columns(pts: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < pts.len() {
        let col = pts[i].0.floor();
        let (mut imin, mut imax) = (i, i);
        let mut j = i;
        while j < pts.len() && pts[j].0.floor() == col {
            if pts[j].1 < pts[imin].1 {
                imin = j;
            }
            if pts[j].1 > pts[imax].1 {
                imax = j;
            }
            j += 1;
        }
        let mut idx = [i, imin, imax, j - 1];
        idx.sort_unstable();
        let mut last = usize::MAX;
        for k in idx {
            if k != last {
                out.push(pts[k]);
                last = k;
            }
        }
        i = j;
    }
    out
}

/// Path data and isolated points (runs of length one) for a series in pixel space.
fn series_geometry(s: &Series, f: &Frame) -> (String, Vec<(f64, f64)>) {
    let n = s.x.len().min(s.y.len());
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    for i in 0..n {
        let (x, y) = (s.x[i], s.y[i]);
        if x.is_finite() && y.is_finite() {
            cur.push((f.px(x), f.py(y)));
        } else if !cur.is_empty() {
            runs.push(std::mem::take(&mut cur));
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    if n > DOWNSAMPLE_THRESHOLD {
        runs = runs.iter().map(|r| downsample_columns(r)).collect();
    }
    let mut d = String::new();
    let mut dots = Vec::new();
    for r in runs {
        if r.len() == 1 {
            dots.push(r[0]);
            continue;
        }
        let _ = write!(d, "M{},{}L", N(r[0].0), N(r[0].1));
        for (k, p) in r[1..].iter().enumerate() {
            if k > 0 {
                d.push(' ');
            }
            let _ = write!(d, "{},{}", N(p.0), N(p.1));
        }
    }
    (d, dots)
}

fn dash_for(width: f64) -> String {
    let s = (width / 1.5).max(1.0);
    format!("{} {}", N(6.0 * s), N(4.0 * s))
}

impl LinePlot {
    /// An empty 900×500 px plot with the given title and axis labels.
    pub fn new(title: impl Into<String>, x_label: impl Into<String>, y_label: impl Into<String>) -> Self {
        LinePlot {
            title: title.into(),
            subtitle: None,
            x_label: x_label.into(),
            y_label: y_label.into(),
            series: Vec::new(),
            markers: Vec::new(),
            hlines: Vec::new(),
            x_range: None,
            y_range: None,
            width: 900.0,
            height: 500.0,
        }
    }

    /// Append a series (builder style).
    pub fn with_series(mut self, s: Series) -> Self {
        self.series.push(s);
        self
    }

    /// Write the SVG document to `path`.
    pub fn save(&self, path: &Path) -> std::io::Result<()> {
        write_svg(path, &self.to_svg())
    }

    /// The plot as a self-contained SVG 1.1 document.
    pub fn to_svg(&self) -> String {
        let width = sane_dim(self.width, 900.0, 240.0);
        let height = sane_dim(self.height, 500.0, 180.0);
        let xr = resolve_range(self.x_range, self.series.iter().flat_map(|s| s.x.iter().copied()), 0.03);
        let in_x = |x: f64| self.x_range.is_none() || (x >= xr.0 && x <= xr.1);
        let ys = self.series.iter().flat_map(|s| s.x.iter().zip(&s.y).filter(|(x, _)| x.is_finite() && in_x(**x)).map(|(_, y)| *y));
        let yr = resolve_range(self.y_range, ys.chain(self.hlines.iter().map(|h| h.y)), 0.03);

        let colors: Vec<&str> = self.series.iter().enumerate().map(|(i, s)| or_default(&s.color, PALETTE[i % PALETTE.len()])).collect();
        let widths: Vec<f64> = self.series.iter().map(|s| if s.width.is_finite() && s.width > 0.0 { s.width.min(20.0) } else { 1.5 }).collect();

        // Legend entries and the right margin they need.
        let show_legend = self.series.len() > 1 || self.series.iter().any(|s| !s.label.trim().is_empty());
        let legend: Vec<String> = if show_legend {
            self.series
                .iter()
                .enumerate()
                .map(|(i, s)| if s.label.trim().is_empty() { format!("series {}", i + 1) } else { truncate(s.label.trim(), 28) })
                .collect()
        } else {
            Vec::new()
        };
        let legend_w = legend.iter().map(|l| text_width(l, LEGEND_FONT)).fold(0.0, f64::max) + 48.0;
        let right = if show_legend { legend_w + 26.0 } else { 26.0 };

        let top0 = content_top(&self.title, self.subtitle.as_deref());
        let mut spec = LayoutSpec { width, height, content_top: top0, marker_rows: 0, right, xr, yr, y_integer: false };
        let lay = layout_with_markers(&mut spec, &self.markers);
        let f = lay.frame;

        let mut svg = Svg::new(width, height);
        let clip = format!("kt-clip-{:08x}", fnv(&["line", &self.title, &N(width).to_string(), &N(height).to_string()]));
        let _ = writeln!(
            svg.buf,
            "<defs><clipPath id=\"{clip}\"><rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"/></clipPath></defs>",
            N(f.left),
            N(f.top),
            N(f.w),
            N(f.h)
        );
        draw_titles(&mut svg, &f, width, &self.title, self.subtitle.as_deref());
        draw_grid(&mut svg, &lay);
        draw_marker_spans(&mut svg, &self.markers, &f);

        // Reference lines.
        for h in &self.hlines {
            if !h.y.is_finite() || !f.y_in(h.y) {
                continue;
            }
            let y = f.py(h.y);
            let c = or_default(&h.color, MARKER_DEFAULT);
            svg.line((f.left, y), (f.right(), y), Pen { color: c, width: 1.0, dash: Some("2 3") });
            let ty = if y - 5.0 < f.top + 10.0 { y + 13.0 } else { y - 5.0 };
            svg.text((f.right() - 5.0, ty), Font { size: 11.0, anchor: "end", fill: c, extra: "" }, &truncate(h.label.trim(), 40));
        }

        // Series.
        let _ = writeln!(svg.buf, "<g clip-path=\"url(#{clip})\" fill=\"none\" stroke-linejoin=\"round\" stroke-linecap=\"round\">");
        for (i, s) in self.series.iter().enumerate() {
            let (d, dots) = series_geometry(s, &f);
            if !d.is_empty() {
                let dash = if s.dashed { format!(" stroke-dasharray=\"{}\"", dash_for(widths[i])) } else { String::new() };
                let _ = writeln!(svg.buf, "<path d=\"{d}\" stroke=\"{}\" stroke-width=\"{}\"{dash}/>", escape_xml(colors[i]), N(widths[i]));
            }
            for (x, y) in dots {
                let _ = writeln!(
                    svg.buf,
                    "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{}\" stroke=\"none\"/>",
                    N(x),
                    N(y),
                    N(widths[i] + 1.5),
                    escape_xml(colors[i])
                );
            }
        }
        svg.raw("</g>\n");

        draw_marker_lines(&mut svg, &self.markers, &f, spec.marker_rows, top0);
        draw_frame(&mut svg, &lay, height, &self.x_label, &self.y_label);

        // Legend, outside the plot area on the right.
        if show_legend {
            let lx = f.right() + 14.0;
            let ly = f.top;
            let lh = legend.len() as f64 * 20.0 + 8.0;
            svg.rect(lx, ly, legend_w, lh, "#ffffff", " stroke=\"#cccccc\" stroke-width=\"1\"");
            for (i, lab) in legend.iter().enumerate() {
                let y = ly + 18.0 + i as f64 * 20.0;
                let dash = if self.series[i].dashed { Some(dash_for(widths[i])) } else { None };
                svg.line((lx + 8.0, y - 4.0), (lx + 34.0, y - 4.0), Pen { color: colors[i], width: widths[i].max(1.5), dash: dash.as_deref() });
                svg.text((lx + 40.0, y), Font { size: LEGEND_FONT, anchor: "start", fill: TEXT_COLOR, extra: "" }, lab);
            }
        }
        svg.finish()
    }
}

// ---------------------------------------------------------------------------------------------
// Heatmap
// ---------------------------------------------------------------------------------------------

/// Cell edges from centres (midpoints between neighbours; end cells mirrored). Non-finite or
/// empty centres fall back to indices.
fn cell_edges(c: &[f64]) -> Vec<f64> {
    let n = c.len();
    if n == 0 {
        return vec![0.0, 1.0];
    }
    let idx: Vec<f64>;
    let c = if c.iter().all(|v| v.is_finite()) {
        c
    } else {
        idx = (0..n).map(|i| i as f64).collect();
        &idx
    };
    if n == 1 {
        let h = if c[0] == 0.0 { 0.5 } else { 0.5 * c[0].abs().clamp(1e-300, 1.0) };
        return vec![c[0] - h, c[0] + h];
    }
    let mut e = Vec::with_capacity(n + 1);
    e.push(c[0] - 0.5 * (c[1] - c[0]));
    for i in 1..n {
        e.push(0.5 * (c[i - 1] + c[i]));
    }
    e.push(c[n - 1] + 0.5 * (c[n - 1] - c[n - 2]));
    e
}

impl Heatmap {
    /// A heatmap of `z[row][col]` over column centres `x` and row centres `y`, 800×560 px.
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
        z_label: impl Into<String>,
        x: Vec<f64>,
        y: Vec<f64>,
        z: Vec<Vec<f64>>,
    ) -> Self {
        Heatmap {
            title: title.into(),
            subtitle: None,
            x_label: x_label.into(),
            y_label: y_label.into(),
            z_label: z_label.into(),
            x,
            y,
            z,
            width: 800.0,
            height: 560.0,
        }
    }

    /// Write the SVG document to `path`.
    pub fn save(&self, path: &Path) -> std::io::Result<()> {
        write_svg(path, &self.to_svg())
    }

    /// The heatmap as a self-contained SVG 1.1 document.
    pub fn to_svg(&self) -> String {
        let width = sane_dim(self.width, 800.0, 260.0);
        let height = sane_dim(self.height, 560.0, 180.0);
        let ncols = self.x.len();
        let nrows = self.y.len();
        let ex = cell_edges(&self.x);
        let ey = cell_edges(&self.y);
        let xr = resolve_range(None, ex.iter().copied(), 0.0);
        let yr = resolve_range(None, ey.iter().copied(), 0.0);
        let cell = |r: usize, c: usize| self.z.get(r).and_then(|row| row.get(c)).copied().unwrap_or(f64::NAN);
        let mut any_missing = false;
        let (mut zlo, mut zhi) = (f64::INFINITY, f64::NEG_INFINITY);
        for r in 0..nrows {
            for c in 0..ncols {
                let v = cell(r, c);
                if v.is_finite() {
                    zlo = zlo.min(v);
                    zhi = zhi.max(v);
                } else {
                    any_missing = true;
                }
            }
        }
        let zr = if zlo <= zhi { widen(zlo, zhi) } else { (0.0, 1.0) };

        // Colour bar ticks decide the right margin.
        let top0 = content_top(&self.title, self.subtitle.as_deref());
        let bar_h_guess = (height - top0 - 8.0 - BOTTOM_MARGIN).max(40.0);
        let (zt, zl) = y_ticks(zr.0, zr.1, bar_h_guess, false);
        let zw = zl.iter().map(|l| text_width(l, TICK_FONT)).fold(0.0, f64::max);
        let bar_gap = 18.0;
        let bar_w = 18.0;
        let right = bar_gap + bar_w + 8.0 + zw + 12.0 + LABEL_FONT + 14.0;
        let spec = LayoutSpec { width, height, content_top: top0, marker_rows: 0, right, xr, yr, y_integer: false };
        let lay = layout(&spec);
        let f = lay.frame;

        let mut svg = Svg::new(width, height);
        let gid = format!("kt-cmap-{:08x}", fnv(&["heat", &self.title, &self.z_label]));
        let _ = write!(svg.buf, "<defs><linearGradient id=\"{gid}\" x1=\"0\" y1=\"1\" x2=\"0\" y2=\"0\">");
        // Eight stops: the map is piecewise linear in CIELAB, close to linear in sRGB between stops.
        for i in 0..=8 {
            let t = i as f64 / 8.0;
            let _ = write!(svg.buf, "<stop offset=\"{}\" stop-color=\"{}\"/>", N(t), colormap_hex(t));
        }
        svg.raw("</linearGradient></defs>\n");
        draw_titles(&mut svg, &f, width, &self.title, self.subtitle.as_deref());

        // Cells, merging horizontal runs of identical colour.
        svg.raw("<g shape-rendering=\"crispEdges\" stroke=\"none\">\n");
        if nrows == 0 || ncols == 0 {
            svg.rect(f.left, f.top, f.w, f.h, MISSING_COLOR, "");
            svg.text((f.left + 0.5 * f.w, f.top + 0.5 * f.h), Font { size: LABEL_FONT, anchor: "middle", fill: SUBTLE_COLOR, extra: "" }, "no data");
        }
        let color_of = |v: f64| if v.is_finite() { colormap_hex((v - zr.0) / (zr.1 - zr.0)) } else { MISSING_COLOR.to_string() };
        for r in 0..nrows {
            let (ya, yb) = (f.py(ey[r]), f.py(ey[r + 1]));
            let (y0, y1) = (ya.min(yb), ya.max(yb));
            let mut c = 0;
            while c < ncols {
                let col = color_of(cell(r, c));
                let mut e = c + 1;
                while e < ncols && color_of(cell(r, e)) == col {
                    e += 1;
                }
                let (xa, xb) = (f.px(ex[c]), f.px(ex[e]));
                let (x0, x1) = (xa.min(xb), xa.max(xb));
                svg.rect(x0, y0, x1 - x0, y1 - y0, &col, "");
                c = e;
            }
        }
        svg.raw("</g>\n");
        draw_frame(&mut svg, &lay, height, &self.x_label, &self.y_label);

        // Colour bar (with a "no data" swatch underneath when some cells are missing).
        let bx = f.right() + bar_gap;
        let swatch = if any_missing { 26.0 } else { 0.0 };
        let bh = (f.h - swatch).max(20.0);
        svg.rect(bx, f.top, bar_w, bh, &format!("url(#{gid})"), &format!(" stroke=\"{AXIS_COLOR}\" stroke-width=\"1\""));
        let bar = Frame { left: bx, top: f.top, w: bar_w, h: bh, x0: 0.0, x1: 1.0, y0: zr.0, y1: zr.1 };
        let (zt, zl) = if bh < bar_h_guess * 0.9 { y_ticks(zr.0, zr.1, bh, false) } else { (zt, zl) };
        for (&t, l) in zt.iter().zip(&zl) {
            let y = bar.py(t);
            svg.line((bx + bar_w, y), (bx + bar_w + 5.0, y), Pen { color: AXIS_COLOR, width: 1.0, dash: None });
            svg.text((bx + bar_w + 8.0, y + 4.0), Font { size: TICK_FONT, anchor: "start", fill: TEXT_COLOR, extra: "" }, l);
        }
        if any_missing {
            let sy = f.top + bh + 10.0;
            svg.rect(bx, sy, bar_w, 14.0, MISSING_COLOR, &format!(" stroke=\"{AXIS_COLOR}\" stroke-width=\"1\""));
            svg.text((bx + bar_w + 8.0, sy + 11.0), Font { size: 11.0, anchor: "start", fill: TEXT_COLOR, extra: "" }, "no data");
        }
        let zx = bx + bar_w + 8.0 + zw + 12.0 + LABEL_FONT - 2.0;
        let cy = f.top + 0.5 * bh;
        let rot = format!(" transform=\"rotate(-90 {} {})\"", N(zx), N(cy));
        let max_z = (bh / (LABEL_FONT * 0.6)) as usize;
        svg.text((zx, cy), Font { size: LABEL_FONT, anchor: "middle", fill: TEXT_COLOR, extra: &rot }, &truncate(self.z_label.trim(), max_z));
        svg.finish()
    }
}

// ---------------------------------------------------------------------------------------------
// Histogram
// ---------------------------------------------------------------------------------------------

impl Histogram {
    /// A histogram of `values` with `bins` bins (0 = automatic), 800×450 px.
    pub fn new(title: impl Into<String>, x_label: impl Into<String>, values: Vec<f64>, bins: usize) -> Self {
        Histogram { title: title.into(), x_label: x_label.into(), values, bins, markers: Vec::new(), width: 800.0, height: 450.0 }
    }

    /// Bin edges (x units, length bins+1) and counts of the finite values.
    pub fn counts(&self) -> (Vec<f64>, Vec<usize>) {
        let vals: Vec<f64> = self.values.iter().copied().filter(|v| v.is_finite()).collect();
        let bins = if self.bins > 0 { self.bins.min(10_000) } else { ((vals.len() as f64).sqrt().ceil() as usize).clamp(1, 100) };
        let (lo, hi) = if vals.is_empty() {
            (0.0, 1.0)
        } else {
            let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            widen(lo, hi)
        };
        let w = (hi - lo) / bins as f64;
        let edges: Vec<f64> = (0..=bins).map(|i| if i == bins { hi } else { lo + w * i as f64 }).collect();
        let mut counts = vec![0usize; bins];
        for v in vals {
            let k = ((v - lo) / w).floor();
            let k = if k.is_finite() && k > 0.0 { (k as usize).min(bins - 1) } else { 0 };
            counts[k] += 1;
        }
        (edges, counts)
    }

    /// Write the SVG document to `path`.
    pub fn save(&self, path: &Path) -> std::io::Result<()> {
        write_svg(path, &self.to_svg())
    }

    /// The histogram as a self-contained SVG 1.1 document.
    pub fn to_svg(&self) -> String {
        let width = sane_dim(self.width, 800.0, 240.0);
        let height = sane_dim(self.height, 450.0, 180.0);
        let (edges, counts) = self.counts();
        let n_finite: usize = counts.iter().sum();
        let skipped = self.values.len() - n_finite;
        let max_c = counts.iter().copied().max().unwrap_or(0);
        let xr = resolve_range(None, edges.iter().copied(), 0.03);
        let yr = (0.0, if max_c > 0 { max_c as f64 * 1.08 } else { 1.0 });
        let mut subtitle = format!("n = {n_finite}, {} bins", counts.len());
        if skipped > 0 {
            subtitle.push_str(&format!(", {skipped} non-finite skipped"));
        }
        let top0 = content_top(&self.title, Some(&subtitle));
        let mut spec = LayoutSpec { width, height, content_top: top0, marker_rows: 0, right: 26.0, xr, yr, y_integer: true };
        let lay = layout_with_markers(&mut spec, &self.markers);
        let f = lay.frame;

        let mut svg = Svg::new(width, height);
        draw_titles(&mut svg, &f, width, &self.title, Some(&subtitle));
        draw_grid(&mut svg, &lay);
        draw_marker_spans(&mut svg, &self.markers, &f);
        svg.raw(&format!("<g fill=\"{ALIGNMENT}\" stroke=\"#ffffff\" stroke-width=\"0.5\">\n"));
        for (k, &c) in counts.iter().enumerate() {
            if c == 0 {
                continue;
            }
            let (a, b) = (f.px(edges[k]), f.px(edges[k + 1]));
            let top = f.py(c as f64);
            let _ = writeln!(svg.buf, "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"/>", N(a), N(top), N((b - a).max(0.5)), N(f.bottom() - top));
        }
        svg.raw("</g>\n");
        if n_finite == 0 {
            svg.text((f.left + 0.5 * f.w, f.top + 0.5 * f.h), Font { size: LABEL_FONT, anchor: "middle", fill: SUBTLE_COLOR, extra: "" }, "no finite values");
        }
        draw_marker_lines(&mut svg, &self.markers, &f, spec.marker_rows, top0);
        draw_frame(&mut svg, &lay, height, &self.x_label, "count");
        svg.finish()
    }
}

// ---------------------------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------------------------

#[cfg(test)]
mod tests {
    use super::*;

    /// Minimal well-formedness check: balanced tags, quoted attributes, valid entities, one root.
    fn check_xml(s: &str) -> Result<(), String> {
        let b = s.as_bytes();
        let mut i = 0;
        let mut stack: Vec<String> = Vec::new();
        let mut roots = 0;
        let check_entities = |t: &str| -> Result<(), String> {
            let mut rest = t;
            while let Some(p) = rest.find('&') {
                let after = &rest[p..];
                let end = after.find(';').ok_or_else(|| format!("bare & in {t:?}"))?;
                let ent = &after[..=end];
                let ok = matches!(ent, "&amp;" | "&lt;" | "&gt;" | "&quot;" | "&apos;") || (ent.starts_with("&#") && ent.len() > 3);
                if !ok {
                    return Err(format!("bad entity {ent}"));
                }
                rest = &after[end + 1..];
            }
            Ok(())
        };
        while i < b.len() {
            if b[i] != b'<' {
                let j = s[i..].find('<').map(|p| i + p).unwrap_or(b.len());
                let text = &s[i..j];
                if stack.is_empty() && !text.trim().is_empty() {
                    return Err(format!("text outside root: {text:?}"));
                }
                if text.contains('>') {
                    return Err(format!("unescaped > in text {text:?}"));
                }
                check_entities(text)?;
                i = j;
                continue;
            }
            if s[i..].starts_with("<?") {
                i += s[i..].find("?>").ok_or("unterminated PI")? + 2;
                continue;
            }
            if s[i..].starts_with("<!--") {
                i += s[i..].find("-->").ok_or("unterminated comment")? + 3;
                continue;
            }
            // Find the end of the tag, honouring quotes.
            let mut j = i + 1;
            let mut quote: Option<u8> = None;
            while j < b.len() {
                match (quote, b[j]) {
                    (None, b'"') | (None, b'\'') => quote = Some(b[j]),
                    (Some(q), c) if c == q => quote = None,
                    (Some(_), b'<') => return Err("< inside attribute".into()),
                    (None, b'>') => break,
                    _ => {}
                }
                j += 1;
            }
            if j >= b.len() {
                return Err("unterminated tag".into());
            }
            let inner = &s[i + 1..j];
            i = j + 1;
            if let Some(name) = inner.strip_prefix('/') {
                let top = stack.pop().ok_or(format!("unexpected </{name}>"))?;
                if top != name.trim() {
                    return Err(format!("</{name}> closes <{top}>"));
                }
                continue;
            }
            let self_closing = inner.ends_with('/');
            let body = inner.trim_end_matches('/');
            let name: String = body.chars().take_while(|c| !c.is_whitespace()).collect();
            if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == ':' || c == '-' || c == '_') {
                return Err(format!("bad tag name {name:?}"));
            }
            // Attributes: name="value" pairs.
            let mut rest = body[name.len()..].trim_start();
            let mut seen = Vec::new();
            while !rest.is_empty() {
                let eq = rest.find('=').ok_or(format!("attribute without value in <{name}>"))?;
                let an = rest[..eq].trim();
                if an.is_empty() || an.contains(char::is_whitespace) || seen.contains(&an.to_string()) {
                    return Err(format!("bad attribute {an:?} in <{name}>"));
                }
                seen.push(an.to_string());
                let after = rest[eq + 1..].trim_start();
                let q = after.chars().next().ok_or("missing quote")?;
                if q != '"' && q != '\'' {
                    return Err(format!("unquoted attribute {an} in <{name}>"));
                }
                let close = after[1..].find(q).ok_or("unterminated attribute")?;
                check_entities(&after[1..1 + close])?;
                rest = after[close + 2..].trim_start();
            }
            if stack.is_empty() {
                roots += 1;
            }
            if !self_closing {
                stack.push(name);
            }
        }
        if !stack.is_empty() {
            return Err(format!("unclosed {stack:?}"));
        }
        if roots != 1 {
            return Err(format!("{roots} root elements"));
        }
        Ok(())
    }

    fn assert_clean(svg: &str) {
        check_xml(svg).unwrap_or_else(|e| panic!("malformed SVG: {e}\n{svg}"));
        assert!(svg.contains("xmlns=\"http://www.w3.org/2000/svg\""));
        assert!(!svg.contains("NaN"), "NaN in output");
        assert!(!svg.contains("inf"), "inf in output");
    }

    fn close(a: &[f64], b: &[f64]) -> bool {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() < 1e-12)
    }

    #[test]
    fn ticks_unit_interval() {
        let t = nice_ticks(0.0, 1.0, 5);
        assert!(close(&t, &[0.0, 0.2, 0.4, 0.6, 0.8, 1.0]), "{t:?}");
        // The values are the nearest doubles to the decimals.
        assert_eq!(t[3], 0.6);
    }

    #[test]
    fn ticks_steps_of_two() {
        let t = nice_ticks(0.2, 12.0, 6);
        assert!(close(&t, &[2.0, 4.0, 6.0, 8.0, 10.0, 12.0]), "{t:?}");
    }

    #[test]
    fn ticks_other_cases() {
        assert!(close(&nice_ticks(-3.0, 3.0, 6), &[-3.0, -2.0, -1.0, 0.0, 1.0, 2.0, 3.0]));
        assert!(close(&nice_ticks(1.0, 0.0, 5), &[0.0, 0.2, 0.4, 0.6, 0.8, 1.0]), "reversed input");
        assert!(close(&nice_ticks(0.0, 100.0, 4), &[0.0, 20.0, 40.0, 60.0, 80.0, 100.0]));
        assert!(close(&nice_ticks(0.0, 1e13, 5), &[0.0, 2e12, 4e12, 6e12, 8e12, 1e13]));
        assert_eq!(nice_ticks(5.0, 5.0, 5), vec![5.0]);
        assert!(nice_ticks(f64::NAN, 1.0, 5).is_empty());
        assert!(nice_ticks(0.0, f64::INFINITY, 5).is_empty());
        assert!(!nice_ticks(0.0, 1.0, 0).is_empty());
        let tiny = nice_ticks(1e-9, 5e-9, 4);
        assert!(close(&tiny, &[1e-9, 2e-9, 3e-9, 4e-9, 5e-9]), "{tiny:?}");
        // No negative zero.
        assert!(nice_ticks(-1.0, 1.0, 4).iter().all(|v| *v != 0.0 || v.is_sign_positive()));
    }

    #[test]
    fn tick_labels_are_compact() {
        assert_eq!(format_ticks(&[0.0, 0.1, 0.2, 0.30000000000000004]), vec!["0.0", "0.1", "0.2", "0.3"]);
        assert_eq!(format_ticks(&[0.0, 2.0, 4.0]), vec!["0", "2", "4"]);
        assert_eq!(format_ticks(&[-0.5, 0.0, 0.5]), vec!["-0.5", "0.0", "0.5"]);
        assert_eq!(format_ticks(&[0.0, 1e13, 2e13]), vec!["0", "1×10¹³", "2×10¹³"]);
        assert_eq!(format_ticks(&[1e-4, 2e-4]), vec!["1×10⁻⁴", "2×10⁻⁴"]);
        assert_eq!(format_ticks(&[1.0e5, 1.5e5, 2.0e5]), vec!["1.0×10⁵", "1.5×10⁵", "2.0×10⁵"]);
        assert_eq!(format_number(0.30000000000000004), "0.3");
        assert_eq!(format_number(2.5e13), "2.5×10¹³");
        assert_eq!(format_number(f64::NAN), "–");
    }

    #[test]
    fn escapes_text() {
        assert_eq!(escape_xml("a<b & \"c\" > 'd'"), "a&lt;b &amp; &quot;c&quot; &gt; &apos;d&apos;");
        assert_eq!(escape_xml("bell\u{7}ok"), "bellok");
        let mut p = LinePlot::new("R&D <test> \"quoted\"", "x <ps>", "y & z");
        p.subtitle = Some("a < b".into());
        p.series.push(Series::new("α<β", vec![0.0, 1.0], vec![0.0, 1.0]).with_color("#123\"456"));
        p.markers.push(Marker::line(0.5, "m&m", "red"));
        p.hlines.push(HLine::new(0.5, "<1/2>", ""));
        let svg = p.to_svg();
        assert_clean(&svg);
        assert!(svg.contains("R&amp;D &lt;test&gt; &quot;quoted&quot;"));
        assert!(svg.contains("α&lt;β"));
        assert!(svg.contains("m&amp;m"));
        assert!(!svg.contains("<test>"));
    }

    #[test]
    fn line_plot_with_nan_and_inf_points() {
        let x: Vec<f64> = (0..50).map(|i| i as f64).collect();
        let mut y: Vec<f64> = x.iter().map(|v| (v * 0.3).sin()).collect();
        y[10] = f64::NAN;
        y[20] = f64::INFINITY;
        y[30] = f64::NEG_INFINITY;
        let mut p = LinePlot::new("gaps", "t", "y");
        p.series.push(Series::new("s", x.clone(), y));
        p.markers.push(Marker::span(5.0, 8.0, "pulse", "#c00"));
        p.markers.push(Marker::line(f64::NAN, "bad", ""));
        p.hlines.push(HLine::new(f64::NAN, "bad", ""));
        let svg = p.to_svg();
        assert_clean(&svg);
        // The line is broken at the bad points: four sub-paths.
        let d_start = svg.find(" d=\"").unwrap();
        let d = &svg[d_start..svg[d_start..].find("\" ").unwrap() + d_start];
        assert_eq!(d.matches('M').count(), 4, "{d}");
    }

    #[test]
    fn degenerate_inputs_do_not_break() {
        let cases: Vec<Vec<Series>> = vec![
            vec![],
            vec![Series::new("", vec![], vec![])],
            vec![Series::new("", vec![1.0], vec![2.0])],
            vec![Series::new("const", vec![0.0, 1.0, 2.0], vec![0.5, 0.5, 0.5])],
            vec![Series::new("zero", vec![3.0, 3.0], vec![0.0, 0.0])],
            vec![Series::new("all missing", vec![f64::NAN; 3], vec![f64::NAN; 3])],
            vec![Series::new("huge", vec![0.0, 1.0], vec![-1e308, 1e308])],
            vec![Series::new("mismatch", vec![0.0, 1.0, 2.0], vec![1.0])],
        ];
        for series in cases {
            let mut p = LinePlot::new("degenerate", "x", "y");
            p.series = series;
            assert_clean(&p.to_svg());
        }
        let mut p = LinePlot::new("ranges", "x", "y");
        p.series.push(Series::new("a", vec![0.0, 1.0], vec![0.0, 1.0]));
        p.x_range = Some((2.0, 2.0));
        p.y_range = Some((f64::NAN, 1.0));
        p.width = f64::NAN;
        p.height = -3.0;
        assert_clean(&p.to_svg());
    }

    #[test]
    fn constant_series_has_clean_ticks() {
        let mut p = LinePlot::new("flat", "x", "y");
        p.series.push(Series::new("", vec![0.0, 1.0], vec![1.0 / 3.0, 1.0 / 3.0]));
        let svg = p.to_svg();
        assert_clean(&svg);
        assert!(!svg.contains("0000000"), "long float in output");
    }

    #[test]
    fn legend_only_when_useful() {
        let mut p = LinePlot::new("one", "x", "y");
        p.series.push(Series::new("", vec![0.0, 1.0], vec![0.0, 1.0]));
        assert!(!p.to_svg().contains("series 1"));
        p.series.push(Series::new("", vec![0.0, 1.0], vec![1.0, 0.0]).with_dashed(true));
        let svg = p.to_svg();
        assert!(svg.contains("series 1") && svg.contains("series 2"));
        assert!(svg.contains("stroke-dasharray"));
        let mut q = LinePlot::new("named", "x", "y");
        q.series.push(Series::new("cos2", vec![0.0, 1.0], vec![0.0, 1.0]));
        assert!(q.to_svg().contains(">cos2</text>"));
    }

    #[test]
    fn long_series_is_downsampled() {
        let n = 1_000_000;
        let x: Vec<f64> = (0..n).map(|i| i as f64 * 1e-3).collect();
        let y: Vec<f64> = x.iter().map(|t| (t * 7.0).sin() + 0.1 * (t * 900.0).sin()).collect();
        let mut p = LinePlot::new("long", "t", "y");
        p.series.push(Series::new("s", x, y));
        let svg = p.to_svg();
        assert_clean(&svg);
        assert!(svg.len() < 200_000, "svg is {} bytes", svg.len());
        // Extremes survive the reduction: the y range reaches about ±1.1.
        let pts = downsample_columns(&[(0.1, 1.0), (0.2, 5.0), (0.3, -2.0), (0.4, 0.0), (1.5, 3.0)]);
        assert_eq!(pts, vec![(0.1, 1.0), (0.2, 5.0), (0.3, -2.0), (0.4, 0.0), (1.5, 3.0)]);
        let pts = downsample_columns(&[(0.1, 1.0), (0.2, 5.0), (0.25, 4.0), (0.3, -2.0), (0.35, 1.0), (0.4, 0.0)]);
        assert_eq!(pts, vec![(0.1, 1.0), (0.2, 5.0), (0.3, -2.0), (0.4, 0.0)]);
    }

    #[test]
    fn heatmap_with_nan_cell() {
        let x = vec![1.0, 2.0, 3.0];
        let y = vec![10.0, 20.0];
        let z = vec![vec![0.1, f64::NAN, 0.3], vec![0.4, 0.5, f64::INFINITY]];
        let h = Heatmap::new("scan <1>", "a", "b", "score", x, y, z);
        let svg = h.to_svg();
        assert_clean(&svg);
        assert!(svg.contains(MISSING_COLOR));
        assert!(svg.contains("linearGradient"));
        assert!(svg.contains("scan &lt;1&gt;"));
    }

    #[test]
    fn heatmap_degenerate() {
        let cases = vec![
            Heatmap::new("empty", "a", "b", "z", vec![], vec![], vec![]),
            Heatmap::new("single", "a", "b", "z", vec![0.0], vec![5.0], vec![vec![2.0]]),
            Heatmap::new("ragged", "a", "b", "z", vec![0.0, 1.0], vec![0.0, 1.0], vec![vec![1.0]]),
            Heatmap::new("const", "a", "b", "z", vec![0.0, 1.0], vec![0.0, 1.0], vec![vec![3.0; 2]; 2]),
            Heatmap::new("bad axis", "a", "b", "z", vec![f64::NAN, 1.0], vec![0.0, 1.0], vec![vec![1.0, 2.0]; 2]),
        ];
        for h in cases {
            assert_clean(&h.to_svg());
        }
    }

    #[test]
    fn colormap_rises_in_lightness_in_even_steps() {
        // The map's colours converted back to CIELAB (sRGB → XYZ → L*a*b*, D65; IEC 61966-2-1, CIE 15:2004,
        // written out here independently of `lab_to_srgb`): L* rises at every step and the 8-bit rounding
        // keeps it within 0.5 of the linear ramp 18 → 93. A sRGB white must come back as L* = 100.
        let lightness = |(r, g, b): (u8, u8, u8)| {
            let lin = |c: u8| {
                let c = c as f64 / 255.0;
                if c <= 0.04045 { c / 12.92 } else { ((c + 0.055) / 1.055).powf(2.4) }
            };
            let y = 0.2126729 * lin(r) + 0.7151522 * lin(g) + 0.0721750 * lin(b);
            if y > (6.0f64 / 29.0).powi(3) { 116.0 * y.cbrt() - 16.0 } else { y * (29.0f64 / 3.0).powi(3) }
        };
        assert!((lightness((255, 255, 255)) - 100.0).abs() < 1e-3);
        let mut previous = -1.0;
        for k in 0..=100 {
            let t = k as f64 / 100.0;
            let l = lightness(colormap(t));
            assert!(l > previous, "t = {t}: L* {l} after {previous}");
            assert!((l - (18.0 + 75.0 * t)).abs() < 0.5, "t = {t}: L* {l}");
            previous = l;
        }
        assert_eq!(colormap_hex(f64::NAN), colormap_hex(0.0));
        assert_eq!(colormap_hex(2.0), colormap_hex(1.0));
    }

    #[test]
    fn histogram_counts_and_output() {
        let mut h = Histogram::new("scores", "score", vec![0.0, 0.1, 0.2, 0.9, 1.0, f64::NAN], 2);
        let (edges, counts) = h.counts();
        assert_eq!(counts, vec![3, 2]);
        assert_eq!(edges.len(), 3);
        h.markers.push(Marker::line(0.5, "median", PULSE));
        h.markers.push(Marker::span(0.4, 0.6, "band", ""));
        let svg = h.to_svg();
        assert_clean(&svg);
        assert!(svg.contains("1 non-finite skipped"));
        for vals in [vec![], vec![2.0], vec![2.0; 10], vec![f64::NAN]] {
            assert_clean(&Histogram::new("h", "x", vals, 0).to_svg());
        }
    }
}
