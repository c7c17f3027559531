//! The look shared by every plot: colours that stay apart for colour-blind readers and in grey
//! print (the Okabe–Ito palette, common practice), one font family that every viewer has, and
//! the finishing touches of the SVG text.

use plotters::style::RGBColor;

/// Font family of every label: the generic family, so no font file is needed anywhere.
pub(crate) const FONT: &str = "sans-serif";
/// The 1X as measured (raw): grey, thin, behind the compensated curve.
pub(crate) const MEASURED: RGBColor = RGBColor(0x80, 0x80, 0x80);
/// The slow-roll compensated 1X: blue, the main curve.
pub(crate) const COMPENSATED: RGBColor = RGBColor(0x00, 0x72, 0xB2);
/// A baseline run overlaid: orange.
pub(crate) const BASELINE: RGBColor = RGBColor(0xE6, 0x9F, 0x00);
/// Critical-speed marks: vermilion.
pub(crate) const CRITICAL: RGBColor = RGBColor(0xD5, 0x5E, 0x00);
/// Half-power points: reddish purple.
pub(crate) const HALF_POWER: RGBColor = RGBColor(0xCC, 0x79, 0xA7);
/// The operating range: bluish green, shaded lightly.
pub(crate) const RANGE: RGBColor = RGBColor(0x00, 0x9E, 0x73);
/// The required separation-margin bands: yellow, shaded lightly.
pub(crate) const MARGIN: RGBColor = RGBColor(0xF0, 0xE4, 0x42);
/// Text and axes.
pub(crate) const INK: RGBColor = RGBColor(0x20, 0x20, 0x20);

/// A perceptually ordered colour scale from dark blue through green to yellow (anchors of the
/// viridis map, common practice), for `t` in 0..=1: readable on screen and still ordered in grey
/// print.
pub(crate) fn scale(t: f64) -> RGBColor {
    const ANCHORS: [(f64, [f64; 3]); 5] = [
        (0.0, [68.0, 1.0, 84.0]),
        (0.25, [59.0, 82.0, 139.0]),
        (0.5, [33.0, 145.0, 140.0]),
        (0.75, [94.0, 201.0, 98.0]),
        (1.0, [253.0, 231.0, 37.0]),
    ];
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let i = ANCHORS
        .windows(2)
        .position(|w| t <= w[1].0)
        .unwrap_or(ANCHORS.len() - 2);
    let (t0, a) = ANCHORS[i];
    let (t1, b) = ANCHORS[i + 1];
    let u = (t - t0) / (t1 - t0);
    let mix = |k: usize| (a[k] + (b[k] - a[k]) * u).round().clamp(0.0, 255.0) as u8;
    RGBColor(mix(0), mix(1), mix(2))
}

/// Finishes an SVG from plotters: a `<title>` for screen readers and browsers' tooltips, and text
/// trimmed of the line breaks plotters puts around it.
pub(crate) fn finish(svg: &str, title: &str) -> String {
    let esc = escape(title);
    let mut out = String::with_capacity(svg.len() + title.len() + 32);
    match svg.find('>') {
        Some(i) => {
            out.push_str(&svg[..=i]);
            out.push_str(&format!("\n<title>{esc}</title>"));
            out.push_str(&svg[i + 1..]);
        }
        None => out.push_str(svg),
    }
    out.replace(">\n", ">")
        .replace("\n</text>", "</text>")
        .replace("><", ">\n<")
}

/// Escapes text for XML and HTML.
pub(crate) fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A tick step of 1, 2, 2.5 or 5 × 10^k giving about `n` ticks over `span`.
pub(crate) fn nice_step(span: f64, n: f64) -> f64 {
    if !(span > 0.0 && span.is_finite()) {
        return 1.0;
    }
    let raw = span / n;
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * p)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * p)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_runs_from_dark_to_light() {
        let lum = |c: RGBColor| {
            0.2126 * f64::from(c.0) + 0.7152 * f64::from(c.1) + 0.0722 * f64::from(c.2)
        };
        let mut last = -1.0;
        for i in 0..=20 {
            let l = lum(scale(i as f64 / 20.0));
            assert!(l > last, "luminance must rise along the scale");
            last = l;
        }
    }

    #[test]
    fn nice_steps() {
        assert_eq!(nice_step(3000.0, 10.0), 500.0);
        assert_eq!(nice_step(100.0, 5.0), 20.0);
    }
}
