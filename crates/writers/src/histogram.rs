//! Histogram pictures of mesh quality measures (non-orthogonality, skewness, volume ratio...).
//!
//! Method: equal-width binning over the finite values' range (or a given range), bars drawn
//! on a linear or a log(1 + count) axis, common practice for skewed mesh-quality distributions.
//! Invariants: the bin counts plus the non-finite count add up to the number of values; every
//! finite value falls in exactly one bin (values on the upper edge go to the last bin).

pub use crate::picture::PictureError;
use crate::picture::{
    fill_rect, format_tick, format_value, label, line, new_pixmap, nice_step, png, rect_outline,
    text, ticks, Align, Rgb, INK,
};
use tiny_skia::Pixmap;

/// Most bins a histogram will allocate.
pub const MAX_BINS: usize = 1000;

/// Equal-width bin counts of a set of values.
///
/// ```
/// let b = octocut_writers::histogram::Bins::of(&[0.0, 0.5, 1.0, f64::NAN], 2, None);
/// assert_eq!(b.counts, vec![1, 2]);
/// assert_eq!(b.not_finite, 1);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct Bins {
    pub lo: f64,
    pub hi: f64,
    pub counts: Vec<u64>,
    /// NaN and infinite values (not in any bin).
    pub not_finite: u64,
    /// Finite values outside a given range (not in any bin).
    pub outside: u64,
}

impl Bins {
    /// Bins `values` into `bins` (clamped to 1..=[`MAX_BINS`]) equal bins over `range`, or over
    /// the finite values' range when `None`.
    pub fn of(values: &[f64], bins: usize, range: Option<(f64, f64)>) -> Bins {
        let n = bins.clamp(1, MAX_BINS);
        let finite = values.iter().copied().filter(|x| x.is_finite());
        let (mut lo, mut hi) = range.unwrap_or_else(|| {
            finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                (a.min(x), b.max(x))
            })
        });
        if !(lo.is_finite() && hi.is_finite()) {
            (lo, hi) = (0.0, 1.0);
        }
        if hi <= lo {
            let pad = (lo.abs() * 0.01).max(0.5);
            (lo, hi) = (lo - pad, hi + pad);
        }
        let mut b = Bins {
            lo,
            hi,
            counts: vec![0; n],
            not_finite: 0,
            outside: 0,
        };
        for &x in values {
            if !x.is_finite() {
                b.not_finite += 1;
            } else if x < lo || x > hi {
                b.outside += 1;
            } else {
                let i = (((x - lo) / (hi - lo)) * n as f64) as usize;
                b.counts[i.min(n - 1)] += 1;
            }
        }
        b
    }
}

/// One panel of a histogram picture.
#[derive(Clone, Debug)]
pub struct Measure<'a> {
    pub name: &'a str,
    /// Unit printed after the name ("deg"); empty for none.
    pub unit: &'a str,
    pub values: &'a [f64],
    pub bins: usize,
    /// Bin range; `None`: the finite values' range.
    pub range: Option<(f64, f64)>,
    /// A limit drawn as a red line, with the count of values above it.
    pub limit: Option<f64>,
}

/// Picture options of [`render_histogram`].
#[derive(Clone, Debug)]
pub struct HistogramStyle {
    pub width: u32,
    /// Height of each panel in pixels.
    pub panel_height: u32,
    pub title: String,
    /// Bar heights on a log(1 + count) axis.
    pub log_counts: bool,
}

impl Default for HistogramStyle {
    fn default() -> Self {
        HistogramStyle {
            width: 1200,
            panel_height: 300,
            title: String::new(),
            log_counts: true,
        }
    }
}

const BAR: Rgb = [0x00, 0x72, 0xb2];
const LIMIT: Rgb = [0xd5, 0x5e, 0x00];

/// [`render_histogram_pixmap`] encoded as PNG.
pub fn render_histogram(
    measures: &[Measure],
    style: &HistogramStyle,
) -> Result<Vec<u8>, PictureError> {
    png(&render_histogram_pixmap(measures, style)?)
}

/// One labelled bar chart per measure, stacked top to bottom under the title.
pub fn render_histogram_pixmap(
    measures: &[Measure],
    style: &HistogramStyle,
) -> Result<Pixmap, PictureError> {
    if measures.is_empty() {
        return Err(PictureError::Empty("no measures"));
    }
    let head = 56u32;
    let height = (style.panel_height as u64 * measures.len() as u64 + head as u64)
        .min(u32::MAX as u64) as u32;
    let mut pm = new_pixmap(style.width, height)?;
    if style.panel_height < 120 {
        return Err(PictureError::Size(style.width, style.panel_height));
    }
    text(&mut pm, 20.0, 16.0, &style.title, 3, INK);
    let (left, right) = (110.0f32, 40.0f32);
    let pw = style.width as f32 - left - right;
    for (k, m) in measures.iter().enumerate() {
        let y0 = (head + k as u32 * style.panel_height) as f32;
        let (top, bottom) = (y0 + 48.0, y0 + style.panel_height as f32 - 52.0);
        let ph = bottom - top;
        let b = Bins::of(m.values, m.bins, m.range);
        let finite: Vec<f64> = m.values.iter().copied().filter(|x| x.is_finite()).collect();
        let name = if m.unit.is_empty() {
            m.name.to_string()
        } else {
            format!("{} ({})", m.name, m.unit)
        };
        text(&mut pm, left, y0 + 2.0, &name, 2, INK);
        let mut stats = format!("n = {}", m.values.len());
        if !finite.is_empty() {
            let mean = finite.iter().sum::<f64>() / finite.len() as f64;
            let (mn, mx) = finite
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, c), &x| {
                    (a.min(x), c.max(x))
                });
            stats += &format!(
                "   min {}   mean {}   max {}",
                format_value(mn),
                format_value(mean),
                format_value(mx)
            );
        }
        if let Some(lim) = m.limit {
            stats += &format!(
                "   above {}: {}",
                format_value(lim),
                finite.iter().filter(|&&x| x > lim).count()
            );
        }
        if b.not_finite > 0 {
            stats += &format!("   not finite: {}", b.not_finite);
        }
        if b.outside > 0 {
            stats += &format!("   outside range: {}", b.outside);
        }
        text(&mut pm, left, y0 + 24.0, &stats, 2, INK);
        let max = b.counts.iter().copied().max().unwrap_or(0).max(1);
        let hscale = |c: u64| -> f32 {
            if style.log_counts {
                ((1.0 + c as f64).log10() / (1.0 + max as f64).log10()) as f32
            } else {
                c as f32 / max as f32
            }
        };
        let bw = pw / b.counts.len() as f32;
        for (i, &c) in b.counts.iter().enumerate() {
            if c > 0 {
                let hgt = (hscale(c) * ph).max(1.0);
                let gap = if bw > 4.0 { 1.0 } else { 0.0 };
                fill_rect(
                    &mut pm,
                    left + i as f32 * bw,
                    bottom - hgt,
                    (bw - gap).max(1.0),
                    hgt,
                    BAR,
                );
            }
        }
        rect_outline(&mut pm, left, top, pw, ph, 1.5, INK);
        // x axis
        let to_x = |x: f64| left + ((x - b.lo) / (b.hi - b.lo)) as f32 * pw;
        let step = nice_step(b.hi - b.lo, 10.0);
        for x in ticks(b.lo, b.hi, step) {
            let sx = to_x(x);
            line(&mut pm, [sx, bottom], [sx, bottom + 7.0], 1.5, INK);
            label(
                &mut pm,
                sx,
                bottom + 20.0,
                &format_tick(x, step),
                2,
                Align::Centre,
                INK,
            );
        }
        // y axis: counts
        let marks: Vec<u64> = if style.log_counts {
            std::iter::successors(Some(1u64), |&c| c.checked_mul(10))
                .take_while(|&c| c <= max)
                .collect()
        } else {
            let s = nice_step(max as f64, 4.0).max(1.0);
            ticks(0.0, max as f64, s)
                .into_iter()
                .map(|c| c as u64)
                .collect()
        };
        for c in marks {
            let sy = bottom - hscale(c) * ph;
            line(&mut pm, [left - 7.0, sy], [left, sy], 1.5, INK);
            label(
                &mut pm,
                left - 12.0,
                sy,
                &c.to_string(),
                2,
                Align::Right,
                INK,
            );
        }
        let axis_name = if style.log_counts {
            "bars: cells per bin (log scale)"
        } else {
            "bars: cells per bin"
        };
        label(
            &mut pm,
            left + pw,
            y0 + 9.0,
            axis_name,
            2,
            Align::Right,
            INK,
        );
        if let Some(lim) = m.limit.filter(|l| *l >= b.lo && *l <= b.hi) {
            let sx = to_x(lim);
            let mut y = top;
            while y < bottom {
                line(&mut pm, [sx, y], [sx, (y + 8.0).min(bottom)], 2.5, LIMIT);
                y += 14.0;
            }
            label(
                &mut pm,
                sx - 6.0,
                top + 12.0,
                &format!("limit {}", format_value(lim)),
                2,
                Align::Right,
                LIMIT,
            );
        }
    }
    Ok(pm)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bins_count_every_value_once() {
        let values: Vec<f64> = (0..1000)
            .map(|i| (i as f64 * 0.618034).fract() * 90.0)
            .chain([f64::NAN, f64::INFINITY])
            .collect();
        let b = Bins::of(&values, 30, None);
        assert_eq!(
            b.counts.iter().sum::<u64>() + b.not_finite,
            values.len() as u64
        );
        assert_eq!(b.not_finite, 2);
        // exact: values on the upper edge go to the last bin, the minimum to the first
        let b = Bins::of(&[0.0, 10.0, 5.0], 10, Some((0.0, 10.0)));
        assert_eq!((b.counts[0], b.counts[5], b.counts[9]), (1, 1, 1));
        let b = Bins::of(&[1.0, 20.0], 4, Some((0.0, 10.0)));
        assert_eq!(b.outside, 1);
        assert_eq!(Bins::of(&[], usize::MAX, None).counts.len(), MAX_BINS);
    }

    #[test]
    fn histogram_png_has_the_stated_size() {
        let a: Vec<f64> = (0..5000)
            .map(|i| (((i * 7919) % 1000) as f64 / 1000.0).powi(4) * 80.0) // skewed, as quality measures are
            .collect();
        let b: Vec<f64> = a.iter().map(|x| x / 120.0).collect();
        let ms = [
            Measure {
                name: "non-orthogonality",
                unit: "deg",
                values: &a,
                bins: 45,
                range: Some((0.0, 90.0)),
                limit: Some(70.0),
            },
            Measure {
                name: "skewness",
                unit: "",
                values: &b,
                bins: 40,
                range: None,
                limit: None,
            },
        ];
        let style = HistogramStyle {
            title: "quality".into(),
            ..Default::default()
        };
        let bytes = render_histogram(&ms, &style).unwrap();
        let pm = Pixmap::decode_png(&bytes).unwrap();
        assert_eq!((pm.width(), pm.height()), (1200, 56 + 2 * 300));
        let bar_px = pm
            .pixels()
            .iter()
            .filter(|p| (p.red(), p.green(), p.blue()) == (BAR[0], BAR[1], BAR[2]))
            .count();
        assert!(bar_px > 10_000, "{bar_px} bar pixels");
        assert!(matches!(
            render_histogram(&[], &style),
            Err(PictureError::Empty(_))
        ));
        if let Ok(dir) = std::env::var("OCTOCUT_PICTURES") {
            std::fs::write(std::path::Path::new(&dir).join("histogram.png"), &bytes).unwrap();
        }
    }
}
