//! Small SVG figures: scatter plots with an optional fitted line, and
//! heat maps of matrices with a diverging colour scale.

use std::fmt::Write;

/// Width and height of every figure, in CSS pixels.
const W: f64 = 420.0;
const H: f64 = 300.0;
const MARGIN_L: f64 = 62.0;
const MARGIN_R: f64 = 16.0;
const MARGIN_T: f64 = 30.0;
const MARGIN_B: f64 = 46.0;

/// Escape text for XML.
pub fn escape(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

/// "Nice" tick positions covering [lo, hi] (Heckbert 1990, Graphics Gems).
pub fn ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0].iter().map(|m| m * mag).find(|s| *s >= raw).unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() * step;
    let mut out = Vec::new();
    let mut v = start;
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

fn fmt_tick(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{v:.1e}")
    } else {
        let s = format!("{v:.4}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

fn range(v: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for x in v.filter(|x| x.is_finite()) {
        lo = lo.min(x);
        hi = hi.max(x);
    }
    if lo > hi {
        return (0.0, 1.0);
    }
    if lo == hi {
        return (lo - 0.5, hi + 0.5);
    }
    let pad = 0.05 * (hi - lo);
    (lo - pad, hi + pad)
}

/// The opening of a figure: the `<svg>` element, its title and a heading.
fn open_svg(title: &str) -> String {
    let mut s = String::new();
    let _ = write!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W} {H}" width="{W}" height="{H}" role="img" font-family="sans-serif" font-size="11">"#
    );
    let _ = write!(s, r#"<title>{}</title>"#, escape(title));
    let _ = write!(
        s,
        r##"<text x="{}" y="18" text-anchor="middle" font-size="13" fill="#1f2933">{}</text>"##,
        W / 2.0,
        escape(title)
    );
    s
}

/// A scatter plot of (x, y) with axis labels and, optionally, the line
/// y = intercept + slope·x. Non-finite points are left out and counted in
/// the caption.
pub fn scatter(
    title: &str,
    x_label: &str,
    y_label: &str,
    x: &[f64],
    y: &[f64],
    line: Option<(f64, f64)>,
) -> String {
    let (x0, x1) = range(x.iter().copied());
    let (y0, y1) = range(y.iter().copied());
    let px = |v: f64| MARGIN_L + (v - x0) / (x1 - x0) * (W - MARGIN_L - MARGIN_R);
    let py = |v: f64| H - MARGIN_B - (v - y0) / (y1 - y0) * (H - MARGIN_T - MARGIN_B);
    let mut s = open_svg(title);
    axes(&mut s, x0, x1, y0, y1, &px, &py, x_label, y_label);
    let mut dropped = 0;
    for (&a, &b) in x.iter().zip(y) {
        if a.is_finite() && b.is_finite() {
            let _ = write!(
                s,
                r##"<circle cx="{:.2}" cy="{:.2}" r="3" fill="#2f6f8f" fill-opacity="0.75"/>"##,
                px(a),
                py(b)
            );
        } else {
            dropped += 1;
        }
    }
    if let Some((intercept, slope)) = line {
        if intercept.is_finite() && slope.is_finite() {
            let _ = write!(
                s,
                r##"<line x1="{:.2}" y1="{:.2}" x2="{:.2}" y2="{:.2}" stroke="#c2571a" stroke-width="2"/>"##,
                px(x0),
                py(intercept + slope * x0).clamp(MARGIN_T, H - MARGIN_B),
                px(x1),
                py(intercept + slope * x1).clamp(MARGIN_T, H - MARGIN_B)
            );
        }
    }
    if dropped > 0 {
        let _ = write!(
            s,
            r##"<text x="{}" y="{}" text-anchor="end" fill="#7b8794">{dropped} non-finite point(s) not shown</text>"##,
            W - MARGIN_R,
            MARGIN_T + 10.0
        );
    }
    s.push_str("</svg>");
    s
}

#[allow(clippy::too_many_arguments)]
fn axes(
    s: &mut String,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    px: &dyn Fn(f64) -> f64,
    py: &dyn Fn(f64) -> f64,
    x_label: &str,
    y_label: &str,
) {
    let (left, right, top, bottom) = (MARGIN_L, W - MARGIN_R, MARGIN_T, H - MARGIN_B);
    let _ = write!(
        s,
        r##"<rect x="{left}" y="{top}" width="{}" height="{}" fill="none" stroke="#9aa5b1"/>"##,
        right - left,
        bottom - top
    );
    for t in ticks(x0, x1, 5) {
        let x = px(t);
        let _ = write!(
            s,
            r##"<line x1="{x:.2}" y1="{bottom}" x2="{x:.2}" y2="{}" stroke="#9aa5b1"/>"##,
            bottom + 4.0
        );
        let _ = write!(
            s,
            r##"<text x="{x:.2}" y="{}" text-anchor="middle" fill="#3e4c59">{}</text>"##,
            bottom + 16.0,
            fmt_tick(t)
        );
    }
    for t in ticks(y0, y1, 5) {
        let y = py(t);
        let _ = write!(
            s,
            r##"<line x1="{}" y1="{y:.2}" x2="{left}" y2="{y:.2}" stroke="#9aa5b1"/>"##,
            left - 4.0
        );
        let _ = write!(
            s,
            r##"<text x="{}" y="{:.2}" text-anchor="end" fill="#3e4c59">{}</text>"##,
            left - 6.0,
            y + 4.0,
            fmt_tick(t)
        );
    }
    let _ = write!(
        s,
        r##"<text x="{}" y="{}" text-anchor="middle" fill="#1f2933">{}</text>"##,
        (left + right) / 2.0,
        H - 8.0,
        escape(x_label)
    );
    let _ = write!(
        s,
        r##"<text transform="translate(14 {}) rotate(-90)" text-anchor="middle" fill="#1f2933">{}</text>"##,
        (top + bottom) / 2.0,
        escape(y_label)
    );
}

/// Colour of `v` on a diverging scale centred on 0 with limit `lim`
/// (blue below, white at 0, orange-red above).
fn diverging(v: f64, lim: f64) -> String {
    if !v.is_finite() || lim <= 0.0 {
        return "#d9d9d9".into();
    }
    let t = (v / lim).clamp(-1.0, 1.0);
    let (r, g, b) = if t < 0.0 {
        let a = -t;
        (255.0 - a * (255.0 - 47.0), 255.0 - a * (255.0 - 111.0), 255.0 - a * (255.0 - 143.0))
    } else {
        (255.0 - t * (255.0 - 194.0), 255.0 - t * (255.0 - 87.0), 255.0 - t * (255.0 - 26.0))
    };
    format!("#{:02x}{:02x}{:02x}", r.round() as u8, g.round() as u8, b.round() as u8)
}

/// A heat map of a square matrix (row = initial state, column = target state)
/// on a diverging scale symmetric about 0.
pub fn heatmap(title: &str, row_label: &str, col_label: &str, m: &ndarray::Array2<f64>) -> String {
    let (r, c) = m.dim();
    let lim = m.iter().filter(|v| v.is_finite()).fold(0.0f64, |a, v| a.max(v.abs()));
    let side = (H - MARGIN_T - MARGIN_B).min(W - MARGIN_L - MARGIN_R - 70.0);
    let cw = side / c.max(1) as f64;
    let ch = side / r.max(1) as f64;
    let mut s = open_svg(title);
    for i in 0..r {
        for j in 0..c {
            let _ = write!(
                s,
                r#"<rect x="{:.2}" y="{:.2}" width="{:.2}" height="{:.2}" fill="{}"><title>{} -> {}: {}</title></rect>"#,
                MARGIN_L + j as f64 * cw,
                MARGIN_T + i as f64 * ch,
                cw,
                ch,
                diverging(m[[i, j]], lim),
                i,
                j,
                fmt_tick(m[[i, j]])
            );
        }
    }
    let _ = write!(
        s,
        r##"<text x="{}" y="{}" text-anchor="middle" fill="#1f2933">{}</text>"##,
        MARGIN_L + side / 2.0,
        MARGIN_T + side + 18.0,
        escape(col_label)
    );
    let _ = write!(
        s,
        r##"<text transform="translate({} {}) rotate(-90)" text-anchor="middle" fill="#1f2933">{}</text>"##,
        MARGIN_L - 12.0,
        MARGIN_T + side / 2.0,
        escape(row_label)
    );
    // Colour bar.
    let bx = MARGIN_L + side + 24.0;
    for k in 0..20 {
        let v = lim * (1.0 - 2.0 * k as f64 / 19.0);
        let _ = write!(
            s,
            r#"<rect x="{bx}" y="{:.2}" width="14" height="{:.2}" fill="{}"/>"#,
            MARGIN_T + k as f64 * side / 20.0,
            side / 20.0 + 0.5,
            diverging(v, lim)
        );
    }
    let _ = write!(
        s,
        r##"<text x="{}" y="{}" fill="#3e4c59">{}</text>"##,
        bx + 18.0,
        MARGIN_T + 8.0,
        fmt_tick(lim)
    );
    let _ = write!(
        s,
        r##"<text x="{}" y="{}" fill="#3e4c59">{}</text>"##,
        bx + 18.0,
        MARGIN_T + side,
        fmt_tick(-lim)
    );
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        assert_eq!(ticks(0.0, 1.0, 5), vec![0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0]);
        // Range 15.9 / 5 targets = 3.18, so the step rounds up to 5.
        assert_eq!(ticks(-3.7, 12.2, 5), vec![0.0, 5.0, 10.0]);
        // 9 / 4 = 2.25 rounds up to a step of 5.
        assert_eq!(ticks(-12.0, -3.0, 4), vec![-10.0, -5.0]);
    }

    #[test]
    fn scatter_escapes_text_and_counts_dropped_points() {
        let s = scatter("a<b", "x & y", "E", &[1.0, 2.0, f64::NAN], &[1.0, 3.0, 2.0], Some((0.0, 1.0)));
        assert!(s.starts_with("<svg") && s.ends_with("</svg>"));
        assert!(s.contains("a&lt;b") && s.contains("x &amp; y"));
        assert_eq!(s.matches("<circle").count(), 2);
        assert!(s.contains("1 non-finite point(s) not shown"));
    }

    #[test]
    fn heatmap_has_one_cell_per_entry() {
        let m = ndarray::array![[0.0, -1.0], [1.0, 0.0]];
        let s = heatmap("asymmetry", "initial", "target", &m);
        assert_eq!(s.matches("<rect x=").count(), 4 + 20);
        assert!(s.contains("#ffffff"));
    }
}
