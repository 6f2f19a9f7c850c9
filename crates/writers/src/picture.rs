//! Drawing helpers shared by the PNG pictures: a 5x7 bitmap font of our own, colour maps,
//! "nice" axis ticks and number labels, on top of tiny-skia's rasteriser.
//!
//! Methods: nice tick steps 1, 2, 5 x 10^k (Heckbert 1990, "Nice numbers for graph labels",
//! Graphics Gems); the continuous ramp interpolates viridis (van der Walt and Smith 2015; the
//! control colours are its published hex values, quoted from memory); the categorical palette is
//! Okabe and Ito (2008), colour-blind safe, extended by three colours of
//! Paul Tol's (2021) muted scheme. Invariant: every glyph is 5 x 7 cells.

use tiny_skia::{Paint, PathBuilder, Pixmap, Rect, Stroke, Transform};

/// Why a picture could not be made.
#[derive(Debug, thiserror::Error)]
pub enum PictureError {
    /// Width or height outside 64..=8192 pixels.
    #[error("picture size {0} x {1} is outside 64..=8192 pixels")]
    Size(u32, u32),
    /// Nothing to draw (no polygons, no finite values).
    #[error("nothing to draw: {0}")]
    Empty(&'static str),
    /// A per-cell value array that does not cover the cells referenced.
    #[error("cell {cell} has no value ({values} values given)")]
    Values { cell: u32, values: usize },
    /// The PNG encoder failed.
    #[error("PNG encoding failed: {0}")]
    Png(String),
}

pub(crate) type Rgb = [u8; 3];

pub(crate) const WHITE: Rgb = [255, 255, 255];
pub(crate) const INK: Rgb = [20, 20, 20];

pub(crate) fn new_pixmap(width: u32, height: u32) -> Result<Pixmap, PictureError> {
    if !(64..=8192).contains(&width) || !(64..=8192).contains(&height) {
        return Err(PictureError::Size(width, height));
    }
    let mut p = Pixmap::new(width, height).ok_or(PictureError::Size(width, height))?;
    p.fill(tiny_skia::Color::WHITE);
    Ok(p)
}

pub(crate) fn png(p: &Pixmap) -> Result<Vec<u8>, PictureError> {
    p.encode_png().map_err(|e| PictureError::Png(e.to_string()))
}

pub(crate) fn paint(c: Rgb, alpha: u8) -> Paint<'static> {
    let mut p = Paint::default();
    p.set_color_rgba8(c[0], c[1], c[2], alpha);
    p.anti_alias = true;
    p
}

pub(crate) fn fill_rect(p: &mut Pixmap, x: f32, y: f32, w: f32, h: f32, c: Rgb) {
    if let Some(r) = Rect::from_xywh(x, y, w, h) {
        let mut pt = paint(c, 255);
        pt.anti_alias = false;
        p.fill_rect(r, &pt, Transform::identity(), None);
    }
}

pub(crate) fn line(p: &mut Pixmap, a: [f32; 2], b: [f32; 2], width: f32, c: Rgb) {
    let mut pb = PathBuilder::new();
    pb.move_to(a[0], a[1]);
    pb.line_to(b[0], b[1]);
    if let Some(path) = pb.finish() {
        let stroke = Stroke {
            width,
            ..Stroke::default()
        };
        p.stroke_path(&path, &paint(c, 255), &stroke, Transform::identity(), None);
    }
}

pub(crate) fn rect_outline(p: &mut Pixmap, x: f32, y: f32, w: f32, h: f32, width: f32, c: Rgb) {
    if let Some(r) = Rect::from_xywh(x, y, w, h) {
        let path = PathBuilder::from_rect(r);
        let stroke = Stroke {
            width,
            ..Stroke::default()
        };
        p.stroke_path(&path, &paint(c, 255), &stroke, Transform::identity(), None);
    }
}

/// Rows a glyph is drawn below the top of the line: 2 for the descending letters g, p, q, y
/// (whose 7 rows are 5 of x-height and 2 below the baseline), else 0.
fn glyph_drop(ch: char) -> usize {
    if matches!(ch, 'g' | 'p' | 'q' | 'y') {
        2
    } else {
        0
    }
}

/// 5x7 glyph rows, `#` set (see [`glyph_drop`] for the descending letters).
fn glyph(ch: char) -> [&'static str; 7] {
    match ch {
        '0' => [
            " ### ", "#   #", "#  ##", "# # #", "##  #", "#   #", " ### ",
        ],
        '1' => [
            "  #  ", " ##  ", "  #  ", "  #  ", "  #  ", "  #  ", " ### ",
        ],
        '2' => [
            " ### ", "#   #", "    #", "   # ", "  #  ", " #   ", "#####",
        ],
        '3' => [
            "#####", "   # ", "  #  ", "   # ", "    #", "#   #", " ### ",
        ],
        '4' => [
            "   # ", "  ## ", " # # ", "#  # ", "#####", "   # ", "   # ",
        ],
        '5' => [
            "#####", "#    ", "#### ", "    #", "    #", "#   #", " ### ",
        ],
        '6' => [
            "  ## ", " #   ", "#    ", "#### ", "#   #", "#   #", " ### ",
        ],
        '7' => [
            "#####", "    #", "   # ", "  #  ", " #   ", " #   ", " #   ",
        ],
        '8' => [
            " ### ", "#   #", "#   #", " ### ", "#   #", "#   #", " ### ",
        ],
        '9' => [
            " ### ", "#   #", "#   #", " ####", "    #", "   # ", " ##  ",
        ],
        'A' => [
            " ### ", "#   #", "#   #", "#####", "#   #", "#   #", "#   #",
        ],
        'B' => [
            "#### ", "#   #", "#   #", "#### ", "#   #", "#   #", "#### ",
        ],
        'C' => [
            " ### ", "#   #", "#    ", "#    ", "#    ", "#   #", " ### ",
        ],
        'D' => [
            "#### ", "#   #", "#   #", "#   #", "#   #", "#   #", "#### ",
        ],
        'E' => [
            "#####", "#    ", "#    ", "#### ", "#    ", "#    ", "#####",
        ],
        'F' => [
            "#####", "#    ", "#    ", "#### ", "#    ", "#    ", "#    ",
        ],
        'G' => [
            " ### ", "#   #", "#    ", "# ###", "#   #", "#   #", " ####",
        ],
        'H' => [
            "#   #", "#   #", "#   #", "#####", "#   #", "#   #", "#   #",
        ],
        'I' => [
            " ### ", "  #  ", "  #  ", "  #  ", "  #  ", "  #  ", " ### ",
        ],
        'J' => [
            "  ###", "   # ", "   # ", "   # ", "   # ", "#  # ", " ##  ",
        ],
        'K' => [
            "#   #", "#  # ", "# #  ", "##   ", "# #  ", "#  # ", "#   #",
        ],
        'L' => [
            "#    ", "#    ", "#    ", "#    ", "#    ", "#    ", "#####",
        ],
        'M' => [
            "#   #", "## ##", "# # #", "# # #", "#   #", "#   #", "#   #",
        ],
        'N' => [
            "#   #", "#   #", "##  #", "# # #", "#  ##", "#   #", "#   #",
        ],
        'O' => [
            " ### ", "#   #", "#   #", "#   #", "#   #", "#   #", " ### ",
        ],
        'P' => [
            "#### ", "#   #", "#   #", "#### ", "#    ", "#    ", "#    ",
        ],
        'Q' => [
            " ### ", "#   #", "#   #", "#   #", "# # #", "#  # ", " ## #",
        ],
        'R' => [
            "#### ", "#   #", "#   #", "#### ", "# #  ", "#  # ", "#   #",
        ],
        'S' => [
            " ####", "#    ", "#    ", " ### ", "    #", "    #", "#### ",
        ],
        'T' => [
            "#####", "  #  ", "  #  ", "  #  ", "  #  ", "  #  ", "  #  ",
        ],
        'U' => [
            "#   #", "#   #", "#   #", "#   #", "#   #", "#   #", " ### ",
        ],
        'V' => [
            "#   #", "#   #", "#   #", "#   #", "#   #", " # # ", "  #  ",
        ],
        'W' => [
            "#   #", "#   #", "#   #", "# # #", "# # #", "# # #", " # # ",
        ],
        'X' => [
            "#   #", "#   #", " # # ", "  #  ", " # # ", "#   #", "#   #",
        ],
        'Y' => [
            "#   #", "#   #", " # # ", "  #  ", "  #  ", "  #  ", "  #  ",
        ],
        'Z' => [
            "#####", "    #", "   # ", "  #  ", " #   ", "#    ", "#####",
        ],
        'a' => [
            "     ", "     ", " ### ", "    #", " ####", "#   #", " ####",
        ],
        'b' => [
            "#    ", "#    ", "# ## ", "##  #", "#   #", "#   #", "#### ",
        ],
        'c' => [
            "     ", "     ", " ### ", "#    ", "#    ", "#   #", " ### ",
        ],
        'd' => [
            "    #", "    #", " ## #", "#  ##", "#   #", "#   #", " ####",
        ],
        'e' => [
            "     ", "     ", " ### ", "#   #", "#####", "#    ", " ### ",
        ],
        'f' => [
            "  ## ", " #  #", " #   ", "###  ", " #   ", " #   ", " #   ",
        ],
        'g' => [
            " ####", "#   #", "#   #", "#   #", " ####", "    #", " ### ",
        ],
        'h' => [
            "#    ", "#    ", "# ## ", "##  #", "#   #", "#   #", "#   #",
        ],
        'i' => [
            "  #  ", "     ", " ##  ", "  #  ", "  #  ", "  #  ", " ### ",
        ],
        'j' => [
            "   # ", "     ", "  ## ", "   # ", "   # ", "#  # ", " ##  ",
        ],
        'k' => [
            "#    ", "#    ", "#  # ", "# #  ", "##   ", "# #  ", "#  # ",
        ],
        'l' => [
            " ##  ", "  #  ", "  #  ", "  #  ", "  #  ", "  #  ", " ### ",
        ],
        'm' => [
            "     ", "     ", "## # ", "# # #", "# # #", "#   #", "#   #",
        ],
        'n' => [
            "     ", "     ", "# ## ", "##  #", "#   #", "#   #", "#   #",
        ],
        'o' => [
            "     ", "     ", " ### ", "#   #", "#   #", "#   #", " ### ",
        ],
        'p' => [
            "#### ", "#   #", "#   #", "#   #", "#### ", "#    ", "#    ",
        ],
        'q' => [
            " ####", "#   #", "#   #", "#   #", " ####", "    #", "    #",
        ],
        'r' => [
            "     ", "     ", "# ## ", "##  #", "#    ", "#    ", "#    ",
        ],
        's' => [
            "     ", "     ", " ####", "#    ", " ### ", "    #", "#### ",
        ],
        't' => [
            " #   ", " #   ", "###  ", " #   ", " #   ", " #  #", "  ## ",
        ],
        'u' => [
            "     ", "     ", "#   #", "#   #", "#   #", "#  ##", " ## #",
        ],
        'v' => [
            "     ", "     ", "#   #", "#   #", "#   #", " # # ", "  #  ",
        ],
        'w' => [
            "     ", "     ", "#   #", "#   #", "# # #", "# # #", " # # ",
        ],
        'x' => [
            "     ", "     ", "#   #", " # # ", "  #  ", " # # ", "#   #",
        ],
        'y' => [
            "#   #", "#   #", "#   #", "#   #", " ####", "    #", " ### ",
        ],
        'z' => [
            "     ", "     ", "#####", "   # ", "  #  ", " #   ", "#####",
        ],
        '.' => [
            "     ", "     ", "     ", "     ", "     ", " ##  ", " ##  ",
        ],
        ',' => [
            "     ", "     ", "     ", "     ", " ##  ", "  #  ", " #   ",
        ],
        '-' => [
            "     ", "     ", "     ", " ### ", "     ", "     ", "     ",
        ],
        '+' => [
            "     ", "  #  ", "  #  ", "#####", "  #  ", "  #  ", "     ",
        ],
        '=' => [
            "     ", "     ", "#####", "     ", "#####", "     ", "     ",
        ],
        ':' => [
            "     ", " ##  ", " ##  ", "     ", " ##  ", " ##  ", "     ",
        ],
        '(' => [
            "   # ", "  #  ", " #   ", " #   ", " #   ", "  #  ", "   # ",
        ],
        ')' => [
            " #   ", "  #  ", "   # ", "   # ", "   # ", "  #  ", " #   ",
        ],
        '[' => [
            " ### ", " #   ", " #   ", " #   ", " #   ", " #   ", " ### ",
        ],
        ']' => [
            " ### ", "   # ", "   # ", "   # ", "   # ", "   # ", " ### ",
        ],
        '/' => [
            "     ", "    #", "   # ", "  #  ", " #   ", "#    ", "     ",
        ],
        '%' => [
            "##   ", "##  #", "   # ", "  #  ", " #   ", "#  ##", "   ##",
        ],
        '_' => [
            "     ", "     ", "     ", "     ", "     ", "     ", "#####",
        ],
        '<' => [
            "   # ", "  #  ", " #   ", "#    ", " #   ", "  #  ", "   # ",
        ],
        '>' => [
            " #   ", "  #  ", "   # ", "    #", "   # ", "  #  ", " #   ",
        ],
        '*' => [
            "     ", "  #  ", "# # #", " ### ", "# # #", "  #  ", "     ",
        ],
        '\'' => [
            "  #  ", "  #  ", "     ", "     ", "     ", "     ", "     ",
        ],
        '^' => [
            "  #  ", " # # ", "#   #", "     ", "     ", "     ", "     ",
        ],
        ' ' => ["     "; 7],
        _ => [
            "#####", "#   #", "#   #", "#   #", "#   #", "#   #", "#####",
        ],
    }
}

/// Width in pixels of `text` drawn at `scale` (6 columns a character, the last one blank).
pub(crate) fn text_width(text: &str, scale: u32) -> f32 {
    (text.chars().count() as u32 * 6 * scale).saturating_sub(scale) as f32
}

/// Height in pixels of a text line at `scale`.
pub(crate) fn text_height(scale: u32) -> f32 {
    (7 * scale) as f32
}

/// Draws `text` with its top-left corner at (x, y).
pub(crate) fn text(p: &mut Pixmap, x: f32, y: f32, text: &str, scale: u32, c: Rgb) {
    let s = scale as f32;
    let (x0, y0) = (x.round(), y.round());
    for (k, ch) in text.chars().enumerate() {
        let drop = glyph_drop(ch);
        for (row, bits) in glyph(ch).iter().enumerate() {
            for (col, b) in bits.bytes().enumerate() {
                if b == b'#' {
                    let gx = x0 + (6 * k + col) as f32 * s;
                    fill_rect(p, gx, y0 + (row + drop) as f32 * s, s, s, c);
                }
            }
        }
    }
}

/// Horizontal anchor of a text.
#[derive(Clone, Copy)]
pub(crate) enum Align {
    Left,
    Centre,
    Right,
}

/// Draws `s` anchored at (x, y) (y is the vertical centre of the line).
pub(crate) fn label(p: &mut Pixmap, x: f32, y: f32, s: &str, scale: u32, align: Align, c: Rgb) {
    let w = text_width(s, scale);
    let x = match align {
        Align::Left => x,
        Align::Centre => x - 0.5 * w,
        Align::Right => x - w,
    };
    text(p, x, y - 0.5 * text_height(scale), s, scale, c);
}

/// A "nice" step (1, 2 or 5 times a power of ten) giving about `target` intervals over `span`.
pub(crate) fn nice_step(span: f64, target: f64) -> f64 {
    if span.is_nan() || span <= 0.0 || !span.is_finite() {
        return 1.0;
    }
    let raw = span / target.max(1.0);
    let mag = 10f64.powf(raw.log10().floor());
    let f = raw / mag;
    let nice = if f < 1.5 {
        1.0
    } else if f < 3.5 {
        2.0
    } else if f < 7.5 {
        5.0
    } else {
        10.0
    };
    nice * mag
}

/// Tick positions: the multiples of `step` within [lo, hi].
pub(crate) fn ticks(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    if last < first || last - first > 1000 {
        return Vec::new();
    }
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A number printed with the decimals its tick `step` needs ("0.25", "1500", "2e-05").
pub(crate) fn format_tick(v: f64, step: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let mag = step.abs().log10().floor();
    if mag < -4.0 || v.abs() >= 1e6 {
        let digits = ((v.abs().log10().floor() - mag).max(0.0) as usize).min(6);
        return format!("{v:.digits$e}");
    }
    let decimals = (-mag).max(0.0) as usize;
    format!("{v:.decimals$}")
}

/// A value printed with about four significant digits.
pub(crate) fn format_value(v: f64) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    if v == 0.0 {
        return "0".into();
    }
    let mag = v.abs().log10().floor();
    if !(-3.0..6.0).contains(&mag) {
        return format!("{v:.3e}");
    }
    let decimals = (3.0 - mag).max(0.0) as usize;
    let s = format!("{v:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// Viridis control colours at 0, 0.1, ..., 1 (published hex values, from memory).
const VIRIDIS: [Rgb; 11] = [
    [0x44, 0x01, 0x54],
    [0x48, 0x24, 0x75],
    [0x41, 0x44, 0x87],
    [0x35, 0x5f, 0x8d],
    [0x2a, 0x78, 0x8e],
    [0x21, 0x91, 0x8c],
    [0x22, 0xa8, 0x84],
    [0x44, 0xbf, 0x70],
    [0x7a, 0xd1, 0x51],
    [0xbd, 0xdf, 0x26],
    [0xfd, 0xe7, 0x25],
];

/// The continuous ramp at `t` in [0, 1] (clamped; NaN gives the low end).
pub(crate) fn ramp(t: f64) -> Rgb {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) } * 10.0;
    let i = (t.floor() as usize).min(9);
    let f = t - i as f64;
    let (a, b) = (VIRIDIS[i], VIRIDIS[i + 1]);
    [0, 1, 2].map(|k| (a[k] as f64 + f * (b[k] as f64 - a[k] as f64)).round() as u8)
}

/// Okabe-Ito colours without black, then three of Tol's, for categories (cycled).
const CATEGORIES: [Rgb; 10] = [
    [0x56, 0xb4, 0xe9], // sky blue
    [0xe6, 0x9f, 0x00], // orange
    [0x00, 0x9e, 0x73], // bluish green
    [0xf0, 0xe4, 0x42], // yellow
    [0x00, 0x72, 0xb2], // blue
    [0xd5, 0x5e, 0x00], // vermillion
    [0xcc, 0x79, 0xa7], // reddish purple
    [0x33, 0x22, 0x88], // indigo (Tol 2021, muted scheme)
    [0x44, 0xaa, 0x99], // teal (Tol)
    [0x88, 0x22, 0x55], // wine (Tol)
];

/// Colour of category `k`.
pub(crate) fn category(k: usize) -> Rgb {
    CATEGORIES[k % CATEGORIES.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_steps_are_1_2_5_decades() {
        // Heckbert 1990: steps are 1, 2 or 5 times a power of ten
        assert_eq!(nice_step(10.0, 5.0), 2.0);
        assert_eq!(nice_step(1.0, 10.0), 0.1);
        assert!((nice_step(0.37, 6.0) - 0.05).abs() < 1e-15);
        assert_eq!(ticks(-0.1, 1.05, 0.5), vec![0.0, 0.5, 1.0]);
        assert_eq!(format_tick(0.25, 0.05), "0.25");
        assert_eq!(format_tick(1500.0, 500.0), "1500");
        assert_eq!(format_value(1.23456), "1.235");
        assert_eq!(format_value(45.0), "45");
    }

    #[test]
    fn ramp_ends_are_viridis_ends() {
        assert_eq!(ramp(0.0), VIRIDIS[0]);
        assert_eq!(ramp(1.0), VIRIDIS[10]);
        assert_eq!(ramp(2.0), VIRIDIS[10]);
        // viridis is monotone in lightness; here at least the green channel rises throughout
        let g: Vec<u8> = (0..=20).map(|i| ramp(i as f64 / 20.0)[1]).collect();
        assert!(g.windows(2).all(|w| w[0] <= w[1]));
    }

    #[test]
    fn every_glyph_is_five_by_seven() {
        for ch in (' '..='~').chain(['\u{1}']) {
            assert!(glyph(ch).iter().all(|r| r.len() == 5), "{ch:?}");
        }
    }
}
