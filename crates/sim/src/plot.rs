//! Line plots and histograms as SVG text: axes with round ticks, one coloured line per
//! series, a legend. The output is deterministic (fixed number formatting), so plots can be
//! committed and diffed.

use std::fmt::Write as _;

/// Series colours, in order (colour-blind-safe palette).
const COLOURS: [&str; 6] = [
    "#0072b2", "#d55e00", "#009e73", "#cc79a7", "#e69f00", "#56b4e9",
];

const W: f64 = 760.0;
const H: f64 = 340.0;
const LEFT: f64 = 70.0;
const RIGHT: f64 = 150.0;
const TOP: f64 = 36.0;
const BOTTOM: f64 = 46.0;

/// One line of a plot.
#[derive(Clone, Debug)]
pub struct Series {
    /// Legend label.
    pub label: String,
    /// (x, y) points.
    pub points: Vec<(f64, f64)>,
    /// Drawn dashed (commands, references).
    pub dashed: bool,
}

/// Round tick positions covering [lo, hi], about `n` of them.
pub fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi <= lo || !lo.is_finite() || !hi.is_finite() {
        return vec![lo];
    }
    let raw = (hi - lo) / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    // k·step for whole k (no accumulated rounding)
    let (k0, k1) = (
        (lo / step - 1e-9).ceil() as i64,
        (hi / step + 1e-9).floor() as i64,
    );
    (k0..=k1).map(|k| k as f64 * step).collect()
}

fn label(x: f64) -> String {
    let s = format!("{x:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

fn frame(
    title: &str,
    xlabel: &str,
    ylabel: &str,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> (String, impl Fn(f64, f64) -> (f64, f64)) {
    let (pw, ph) = (W - LEFT - RIGHT, H - TOP - BOTTOM);
    let map = move |x: f64, y: f64| {
        (
            LEFT + (x - x0) / (x1 - x0) * pw,
            TOP + ph - (y - y0) / (y1 - y0) * ph,
        )
    };
    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r##"<rect width="{W}" height="{H}" fill="#ffffff"/>"##);
    let _ = writeln!(
        s,
        r#"<text x="{}" y="22" font-size="14" font-weight="bold">{}</text>"#,
        LEFT,
        escape(title)
    );
    for t in ticks(x0, x1, 8) {
        let (x, _) = map(t, y0);
        let _ = writeln!(
            s,
            r##"<line x1="{x:.1}" y1="{TOP}" x2="{x:.1}" y2="{:.1}" stroke="#e6e6e6"/>"##,
            TOP + ph
        );
        let _ = writeln!(
            s,
            r#"<text x="{x:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            TOP + ph + 16.0,
            label(t)
        );
    }
    for t in ticks(y0, y1, 6) {
        let (_, y) = map(x0, t);
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e6e6e6"/>"##,
            LEFT + pw
        );
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
            LEFT - 6.0,
            y + 4.0,
            label(t)
        );
    }
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP}" width="{pw}" height="{ph}" fill="none" stroke="#333333"/>"##
    );
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
        LEFT + pw / 2.0,
        H - 8.0,
        escape(xlabel)
    );
    let _ = writeln!(
        s,
        r#"<text transform="translate(16 {:.1}) rotate(-90)" text-anchor="middle">{}</text>"#,
        TOP + ph / 2.0,
        escape(ylabel)
    );
    (s, map)
}

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if hi - lo < 1e-9 * lo.abs().max(1.0) {
        let d = lo.abs().max(1.0) * 0.05;
        return (lo - d, hi + d);
    }
    let pad = 0.05 * (hi - lo);
    (lo - pad, hi + pad)
}

/// A line plot of several series over a shared x axis.
pub fn lines(title: &str, xlabel: &str, ylabel: &str, series: &[Series]) -> String {
    // the x axis (time) spans the data exactly; the y axis gets a margin
    let xs = || {
        series
            .iter()
            .flat_map(|s| s.points.iter().map(|p| p.0))
            .filter(|x| x.is_finite())
    };
    let x0 = xs().fold(f64::INFINITY, f64::min);
    let x1 = xs().fold(f64::NEG_INFINITY, f64::max);
    let xr = if x0 < x1 { (x0, x1) } else { range(xs()) };
    let yr = range(series.iter().flat_map(|s| s.points.iter().map(|p| p.1)));
    let (mut s, map) = frame(title, xlabel, ylabel, xr, yr);
    let mut colour = 0;
    for (i, se) in series.iter().enumerate() {
        let c = if se.dashed {
            "#555555"
        } else {
            COLOURS[colour % COLOURS.len()]
        };
        if !se.dashed {
            colour += 1;
        }
        let pts: Vec<String> = se
            .points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite())
            .map(|p| {
                let (x, y) = map(p.0, p.1);
                format!("{x:.1},{y:.1}")
            })
            .collect();
        let dash = if se.dashed {
            r#" stroke-dasharray="6 4""#
        } else {
            ""
        };
        let _ = writeln!(
            s,
            r#"<polyline fill="none" stroke="{c}" stroke-width="1.6"{dash} points="{}"/>"#,
            pts.join(" ")
        );
        let ly = TOP + 12.0 + 18.0 * i as f64;
        let lx = W - RIGHT + 12.0;
        let _ = writeln!(
            s,
            r#"<line x1="{lx}" y1="{ly}" x2="{}" y2="{ly}" stroke="{c}" stroke-width="2"{dash}/>"#,
            lx + 22.0
        );
        let _ = writeln!(
            s,
            r#"<text x="{}" y="{}">{}</text>"#,
            lx + 28.0,
            ly + 4.0,
            escape(&se.label)
        );
    }
    s.push_str("</svg>\n");
    s
}

/// A histogram of several samples over shared bins.
pub fn histogram(title: &str, xlabel: &str, samples: &[(String, Vec<f64>)], bins: usize) -> String {
    let xr = range(samples.iter().flat_map(|s| s.1.iter().copied()));
    let width = (xr.1 - xr.0) / bins as f64;
    let counts: Vec<Vec<usize>> = samples
        .iter()
        .map(|(_, v)| {
            let mut c = vec![0; bins];
            for x in v.iter().filter(|x| x.is_finite()) {
                let k = (((x - xr.0) / width) as usize).min(bins - 1);
                c[k] += 1;
            }
            c
        })
        .collect();
    let top = counts.iter().flatten().copied().max().unwrap_or(1).max(1) as f64;
    let (mut s, map) = frame(title, xlabel, "runs", xr, (0.0, top * 1.05));
    let n = samples.len().max(1) as f64;
    for (i, ((name, _), c)) in samples.iter().zip(&counts).enumerate() {
        let colour = COLOURS[i % COLOURS.len()];
        for (k, &cnt) in c.iter().enumerate() {
            if cnt == 0 {
                continue;
            }
            let a = xr.0 + width * (k as f64 + i as f64 / n);
            let (x0, y0) = map(a, cnt as f64);
            let (x1, y1) = map(a + width / n, 0.0);
            let _ = writeln!(
                s,
                r#"<rect x="{x0:.1}" y="{y0:.1}" width="{:.1}" height="{:.1}" fill="{colour}" fill-opacity="0.8"/>"#,
                (x1 - x0).max(0.5),
                y1 - y0
            );
        }
        let ly = TOP + 12.0 + 18.0 * i as f64;
        let lx = W - RIGHT + 12.0;
        let _ = writeln!(
            s,
            r#"<rect x="{lx}" y="{}" width="22" height="8" fill="{colour}"/>"#,
            ly - 4.0
        );
        let _ = writeln!(
            s,
            r#"<text x="{}" y="{}">{}</text>"#,
            lx + 28.0,
            ly + 4.0,
            escape(name)
        );
    }
    s.push_str("</svg>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        // steps of 1, 2, 2.5 or 5 times a power of ten, at least (hi − lo)/n (common practice)
        let close = |a: Vec<f64>, b: &[f64]| {
            a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() < 1e-12)
        };
        assert!(close(ticks(0.0, 90.0, 8), &[0.0, 20.0, 40.0, 60.0, 80.0]));
        assert!(close(ticks(118.5, 151.5, 6), &[120.0, 130.0, 140.0, 150.0]));
        assert!(close(ticks(-0.12, 0.31, 6), &[-0.1, 0.0, 0.1, 0.2, 0.3]));
    }

    #[test]
    fn plots_are_well_formed_and_deterministic() {
        let s = vec![
            Series {
                label: "a <1>".into(),
                points: vec![(0.0, 1.0), (1.0, 2.0)],
                dashed: false,
            },
            Series {
                label: "cmd".into(),
                points: vec![(0.0, 2.0), (1.0, 2.0)],
                dashed: true,
            },
        ];
        let a = lines("t", "x", "y", &s);
        assert_eq!(a, lines("t", "x", "y", &s));
        assert!(a.starts_with("<svg") && a.trim_end().ends_with("</svg>"));
        assert!(a.contains("a &lt;1&gt;") && a.contains("stroke-dasharray"));
        assert_eq!(a.matches("<polyline").count(), 2);
        let h = histogram(
            "h",
            "x",
            &[("e".into(), vec![1.0, 2.0, 2.5]), ("p".into(), vec![1.5])],
            5,
        );
        assert!(h.matches("<rect").count() >= 4);
    }
}
