//! Tables and plots of a scan: CSV text and a self-contained SVG line plot
//! of both sides against the scanned parameter. Pure functions from data to
//! text; writing files is the caller's business.

use std::fmt::Write as _;

use crate::numeric::session::Scan;

/// `param,left,right` (one left/right pair per component).
pub fn csv(scan: &Scan) -> String {
    let mut out = String::new();
    let mut header = vec![scan.param.clone()];
    for label in &scan.labels {
        let suffix = if label.is_empty() {
            String::new()
        } else {
            format!("[{label}]")
        };
        header.push(format!("left{suffix}"));
        header.push(format!("right{suffix}"));
    }
    let _ = writeln!(out, "{}", header.join(","));
    for (x, left, right) in &scan.rows {
        let mut row = vec![format!("{x:.12e}")];
        for (l, r) in left.iter().zip(right) {
            row.push(format!("{l:.12e}"));
            row.push(format!("{r:.12e}"));
        }
        let _ = writeln!(out, "{}", row.join(","));
    }
    out
}

/// A line plot of the first component: left side solid, right side dashed.
pub fn svg(scan: &Scan, title: &str) -> String {
    const W: f64 = 640.0;
    const H: f64 = 400.0;
    const M: f64 = 60.0;
    let xs: Vec<f64> = scan.rows.iter().map(|r| r.0).collect();
    let left: Vec<f64> = scan
        .rows
        .iter()
        .map(|r| r.1.first().copied().unwrap_or(f64::NAN))
        .collect();
    let right: Vec<f64> = scan
        .rows
        .iter()
        .map(|r| r.2.first().copied().unwrap_or(f64::NAN))
        .collect();
    let finite = |v: &[f64]| {
        v.iter()
            .copied()
            .filter(|x| x.is_finite())
            .collect::<Vec<f64>>()
    };
    let all: Vec<f64> = finite(&left).into_iter().chain(finite(&right)).collect();
    let (x0, x1) = bounds(&xs);
    let (y0, y1) = bounds(&all);
    let px = |x: f64| M + (x - x0) / (x1 - x0) * (W - 2.0 * M);
    let py = |y: f64| H - M - (y - y0) / (y1 - y0) * (H - 2.0 * M);
    let line = |ys: &[f64]| -> String {
        xs.iter()
            .zip(ys)
            .filter(|(_, y)| y.is_finite())
            .map(|(x, y)| format!("{:.2},{:.2}", px(*x), py(*y)))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let mut out = String::new();
    let _ = writeln!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(out, r#"<rect width="{W}" height="{H}" fill="white"/>"#);
    let _ = writeln!(
        out,
        r#"<text x="{M}" y="24" font-size="14">{}</text>"#,
        escape(title)
    );
    let _ = writeln!(
        out,
        r#"<line x1="{M}" y1="{}" x2="{}" y2="{}" stroke="black"/>"#,
        H - M,
        W - M,
        H - M
    );
    let _ = writeln!(
        out,
        r#"<line x1="{M}" y1="{M}" x2="{M}" y2="{}" stroke="black"/>"#,
        H - M
    );
    let _ = writeln!(out, r#"<text x="{M}" y="{}">{x0:.4}</text>"#, H - M + 18.0);
    let _ = writeln!(
        out,
        r#"<text x="{}" y="{}" text-anchor="end">{x1:.4}</text>"#,
        W - M,
        H - M + 18.0
    );
    let _ = writeln!(
        out,
        r#"<text x="{}" y="{}" text-anchor="middle">{}</text>"#,
        W / 2.0,
        H - 16.0,
        escape(&scan.param)
    );
    let _ = writeln!(
        out,
        r#"<text x="{}" y="{}" text-anchor="end">{y1:.4e}</text>"#,
        M - 6.0,
        M + 4.0
    );
    let _ = writeln!(
        out,
        r#"<text x="{}" y="{}" text-anchor="end">{y0:.4e}</text>"#,
        M - 6.0,
        H - M
    );
    let _ = writeln!(
        out,
        r##"<polyline points="{}" fill="none" stroke="#1f5fa8" stroke-width="2"/>"##,
        line(&left)
    );
    let _ = writeln!(
        out,
        r##"<polyline points="{}" fill="none" stroke="#c0392b" stroke-width="2" stroke-dasharray="6 4"/>"##,
        line(&right)
    );
    let _ = writeln!(
        out,
        r##"<text x="{}" y="{}" fill="#1f5fa8">left side</text>"##,
        W - M - 140.0,
        M
    );
    let _ = writeln!(
        out,
        r##"<text x="{}" y="{}" fill="#c0392b">right side (dashed)</text>"##,
        W - M - 140.0,
        M + 16.0
    );
    out.push_str("</svg>\n");
    out
}

/// Lower and upper bounds, widened when they coincide.
fn bounds(v: &[f64]) -> (f64, f64) {
    let lo = v
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .fold(f64::INFINITY, f64::min);
    let hi = v
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    if !lo.is_finite() || !hi.is_finite() {
        return (0.0, 1.0);
    }
    if hi - lo < 1e-300 {
        let pad = lo.abs().max(1.0) * 1e-3;
        return (lo - pad, hi + pad);
    }
    (lo, hi)
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}
