//! Tables and plots of a scan or a decomposition: CSV text, and an SVG
//! figure of both sides against the scanned variable drawn with the
//! `plotters` crate. Pure functions from data to text; writing files is the
//! caller's business (`files::replace_together`).
//!
//! The figure has a title (shrunk, then wrapped onto a second line, then
//! cut with "…" so that it fits the width), a legend strip under it, and
//! two panels sharing the horizontal axis: the two sides (left solid, right
//! dashed; one colour per component), and below it their relative
//! difference on a logarithmic axis, each point marked with the agreement
//! rule's verdict. Both panels have ticks and labels along both axes.
//!
//! Only plotters' SVG backend is used, without its `ttf` feature: text is
//! written as `<text>` elements and laid out with an estimate of its width,
//! so no font file or font library is looked up, and a machine without
//! fonts draws the same file. (Its bitmap backend would have to rasterise
//! text with a real font, from the system or shipped with the program, so
//! there is no PNG.)

use std::fmt::Write as _;
use std::ops::Range;

use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::context::Context;
use crate::numeric::agreement::Agreement;
use crate::numeric::session::Scan;
use crate::term::Term;

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

/// The words on a figure: its title, the axis labels of the upper panel and
/// the names of the two sides in the legend.
#[derive(Clone, Debug, PartialEq)]
pub struct Labels {
    pub title: String,
    /// The horizontal axis: the scanned variable, with what it is where known.
    pub x: String,
    /// The vertical axis of the upper panel.
    pub y: String,
    pub left: String,
    pub right: String,
}

impl Labels {
    /// The labels of `scan PARAM …: L = R`: the parameter, named by its role
    /// where the file declares one (an operator's scaling dimension).
    pub fn scan(ctx: &Context, param: &str, title: &str) -> Labels {
        let x = match parameter_role(ctx, param) {
            Some(role) => format!("{param} ({role})"),
            None => param.to_string(),
        };
        Labels {
            title: title.to_string(),
            x,
            y: "value of each side".into(),
            left: "left side".into(),
            right: "right side".into(),
        }
    }

    /// The labels of `decompose …`: G(ξ) of the model against its expansion
    /// in the channel's blocks (docs/conventions.md §9).
    pub fn decompose(title: &str) -> Labels {
        Labels {
            title: title.to_string(),
            x: "cross-ratio ξ".into(),
            y: "G(ξ)".into(),
            left: "G(ξ) of the model".into(),
            right: "expansion in blocks".into(),
        }
    }

    /// The labels of `decompose ⟨…⟩ in structures`: the coefficient
    /// functions f_i against η (both sides are f_i; the lower panel is the
    /// residual at the check configurations of each η).
    pub fn structures(title: &str) -> Labels {
        Labels {
            title: format!("decompose {title}"),
            x: "cross-ratio η".into(),
            y: "f_i(η)".into(),
            left: "f_i(η) fitted".into(),
            right: "f_i(η) (residual below: check configurations)".into(),
        }
    }

    /// The labels of `decompose … in s-channel blocks …`: G of a four-point
    /// function against |z| along arg z = π/2 (Euclidean configurations)
    /// or z̄ = z/2 (real ones), docs/conventions.md §14.
    pub fn decompose_four_point(title: &str) -> Labels {
        Labels {
            title: title.to_string(),
            x: "|z| (at arg z = π/2, or z̄ = z/2 for real z)".into(),
            y: "G(u, v)".into(),
            left: "G of the file".into(),
            right: "expansion in s-channel blocks".into(),
        }
    }
}

/// "scaling dimension of O, P" when `param` is the declared `dim` of
/// operators.
fn parameter_role(ctx: &Context, param: &str) -> Option<String> {
    let ops: Vec<&str> = ctx
        .operators
        .values()
        .filter(|op| matches!(op.attrs.get("dim"), Some(Term::Sym(s)) if s == param))
        .map(|op| op.name.as_str())
        .collect();
    (!ops.is_empty()).then(|| format!("scaling dimension of {}", ops.join(", ")))
}

/// Figure size in pixels.
const WIDTH: u32 = 820;
const HEIGHT: u32 = 640;
/// Text sizes in plotters' units (an SVG `font-size` of size / 1.24).
const TITLE_SIZE: f64 = 20.0;
const TITLE_MIN_SIZE: f64 = 15.0;
const TEXT_SIZE: f64 = 16.0;
const TICK_SIZE: f64 = 14.0;
/// The width of one character of a sans-serif font relative to its
/// `font-size`, generous so that estimates err on the wide side (a common
/// rule of thumb for proportional fonts is about 0.5-0.6).
const CHAR_WIDTH: f64 = 0.6;
/// Components drawn at most (the CSV holds all of them).
const MAX_COMPONENTS: usize = 6;
/// Relative differences below this are drawn at it (double precision
/// cannot resolve less).
const FLOOR: f64 = 1e-17;
const LEFT_AREA: u32 = 92;
const BOTTOM_AREA: u32 = 56;

/// One colour per component; the left side solid, the right side dashed.
const PALETTE: [RGBColor; MAX_COMPONENTS] = [
    RGBColor(0x1f, 0x5f, 0xa8),
    RGBColor(0xc0, 0x39, 0x2b),
    RGBColor(0x22, 0x8b, 0x3b),
    RGBColor(0x8e, 0x44, 0xad),
    RGBColor(0xd3, 0x84, 0x00),
    RGBColor(0x16, 0x8a, 0x8a),
];
/// The right side of a scalar scan takes the second colour.
const DISAGREE: RGBColor = RGBColor(0xd0, 0x10, 0x10);
const UNKNOWN: RGBColor = RGBColor(0x88, 0x88, 0x88);

/// The figure of a scan (or of a decomposition put in a scan's shape). An
/// error is plotters' own and should not happen: every range is finite and
/// not empty, and no font is looked up.
pub fn svg(scan: &Scan, labels: &Labels) -> Result<String, String> {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (WIDTH, HEIGHT)).into_drawing_area();
        draw(&root, scan, labels).map_err(|e| format!("cannot draw the plot: {e}"))?;
        root.present()
            .map_err(|e| format!("cannot draw the plot: {e}"))?;
    }
    Ok(out)
}

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
type Failure = Box<dyn std::error::Error>;

/// One entry of the legend strip.
enum Key {
    Line {
        color: RGBColor,
        dashed: bool,
        text: String,
    },
    Marker {
        verdict: Mark,
        text: String,
    },
    /// Words alone.
    Note(String),
}

impl Key {
    fn text(&self) -> &str {
        match self {
            Key::Line { text, .. } | Key::Marker { text, .. } | Key::Note(text) => text,
        }
    }
}

#[derive(Clone, Copy, PartialEq)]
enum Mark {
    Agree(RGBColor),
    Disagree,
    Unknown,
    Zero(RGBColor),
}

fn draw(root: &Area, scan: &Scan, labels: &Labels) -> Result<(), Failure> {
    root.fill(&WHITE)?;
    let total = scan.labels.len().max(1);
    let shown = total.min(MAX_COMPONENTS);
    let root = draw_title(root, &labels.title)?;

    // The legend: both sides of each component shown, then the verdicts
    // that occur.
    let name = |i: usize| -> String {
        match scan.labels.get(i) {
            Some(l) if !l.is_empty() => format!(", {l}"),
            _ => String::new(),
        }
    };
    let color = |i: usize, right: bool| -> RGBColor {
        if total == 1 {
            PALETTE[usize::from(right)]
        } else {
            PALETTE[i % PALETTE.len()]
        }
    };
    let mut keys = Vec::new();
    for i in 0..shown {
        keys.push(Key::Line {
            color: color(i, false),
            dashed: false,
            text: format!("{}{}", labels.left, name(i)),
        });
        keys.push(Key::Line {
            color: color(i, true),
            dashed: true,
            text: format!("{}{}", labels.right, name(i)),
        });
    }
    let marks: Vec<Vec<(f64, f64, Mark)>> = (0..shown)
        .map(|i| {
            scan.rows
                .iter()
                .zip(&scan.judged)
                .filter_map(|((x, _, _), judged)| {
                    let (r, verdict) = judged.get(i)?;
                    if !x.is_finite() || r.is_nan() {
                        return None;
                    }
                    let mark = match verdict {
                        Agreement::Disagree => Mark::Disagree,
                        Agreement::Unknown(_) => Mark::Unknown,
                        Agreement::Agree if *r <= FLOOR => Mark::Zero(color(i, false)),
                        Agreement::Agree => Mark::Agree(color(i, false)),
                    };
                    Some((*x, *r, mark))
                })
                .collect()
        })
        .collect();
    let occurs = |f: &dyn Fn(&Mark) -> bool| marks.iter().flatten().any(|(_, _, m)| f(m));
    let first = color(0, false);
    if occurs(&|m| matches!(m, Mark::Agree(_))) {
        keys.push(Key::Marker {
            verdict: Mark::Agree(first),
            text: "sides agree".into(),
        });
    }
    if occurs(&|m| matches!(m, Mark::Zero(_))) {
        keys.push(Key::Marker {
            verdict: Mark::Zero(first),
            text: format!("difference below {FLOOR:.0e}"),
        });
    }
    if occurs(&|m| *m == Mark::Disagree) {
        keys.push(Key::Marker {
            verdict: Mark::Disagree,
            text: "sides DISAGREE".into(),
        });
    }
    if occurs(&|m| *m == Mark::Unknown) {
        keys.push(Key::Marker {
            verdict: Mark::Unknown,
            text: "agreement unknown".into(),
        });
    }
    if total > shown {
        keys.push(Key::Note(format!(
            "components 1-{shown} of {total} shown (all in the CSV)"
        )));
    }
    let root = draw_legend(&root, &keys)?;

    let height = root.dim_in_pixel().1;
    let (upper, lower) = root.split_vertically(height * 62 / 100);

    let xs = || scan.rows.iter().map(|r| r.0);
    let x = Axis::along(&xs().collect::<Vec<_>>());
    let side = |i: usize, right: bool| -> Vec<(f64, f64)> {
        scan.rows
            .iter()
            .filter_map(|(x, l, r)| Some((*x, *if right { r } else { l }.get(i)?)))
            .collect()
    };
    let values = (0..shown).flat_map(|i| side(i, false).into_iter().chain(side(i, true)));
    let y = Axis::choose(values.map(|p| p.1), 3.0, 0.06);
    let y_label = if y.log {
        format!("{} (logarithmic)", labels.y)
    } else {
        labels.y.clone()
    };
    let mut chart = panel(&upper, &x, &y, None, &y_label)?;
    for i in 0..shown {
        for right in [false, true] {
            let style = ShapeStyle::from(color(i, right)).stroke_width(2);
            for run in runs(&side(i, right), &x, &y) {
                if right {
                    chart.draw_series(DashedLineSeries::new(run, 7, 5, style))?;
                } else {
                    chart.draw_series(LineSeries::new(run, style))?;
                }
            }
        }
    }

    // The relative differences, on at least four decades that include the
    // floor when a point sits on it.
    let r = || {
        marks
            .iter()
            .flatten()
            .map(|m| m.1)
            .filter(|r| r.is_finite() && *r > FLOOR)
    };
    let (lo, hi) = if r().next().is_some() {
        bounds(r())
    } else {
        (1e-16, 1e-16)
    };
    let mut lo = lo;
    if marks.iter().flatten().any(|m| m.1 <= FLOOR) {
        lo = lo.min(FLOOR);
    }
    let d = Axis::differences(lo, hi);
    let mut chart = panel(&lower, &x, &d, Some(&labels.x), "relative difference")?;
    let bottom = d.range.start;
    let top = d.range.end;
    for component in &marks {
        let points: Vec<(f64, f64, Mark)> = component
            .iter()
            .filter_map(|&(at, r, mark)| {
                let r = if r <= FLOOR { bottom } else { d.place(r)? };
                Some((x.place(at)?, r.clamp(bottom, top), mark))
            })
            .collect();
        let color = component
            .iter()
            .find_map(|m| match m.2 {
                Mark::Agree(c) | Mark::Zero(c) => Some(c),
                _ => None,
            })
            .unwrap_or(UNKNOWN);
        chart.draw_series(LineSeries::new(
            points.iter().map(|p| (p.0, p.1)),
            color.mix(0.35).stroke_width(1),
        ))?;
        for (at, r, mark) in points {
            chart.plotting_area().draw(&marker((at, r), mark))?;
        }
    }
    Ok(())
}

/// One axis: straight, or logarithmic (drawn as the decimal logarithm of
/// the values), with its ticks and their labels.
#[derive(Clone, Debug)]
struct Axis {
    log: bool,
    /// In drawn coordinates (the logarithm on a logarithmic axis).
    range: Range<f64>,
    /// Labelled ticks, in drawn coordinates.
    ticks: Vec<f64>,
    /// Grid lines between them (the 2…9 of each decade on a logarithmic
    /// axis that shows decades only).
    minor: Vec<f64>,
    /// The spacing of straight ticks (for the number of decimals).
    step: f64,
}

/// Ticks on a straight axis: about this many.
const TICKS: f64 = 7.0;

impl Axis {
    /// Logarithmic when every value is positive and they span more than
    /// `decades`, else straight and padded by `pad` of its length.
    fn choose(values: impl Iterator<Item = f64> + Clone, decades: f64, pad: f64) -> Axis {
        let (lo, hi) = bounds(values.clone());
        let positive = values.filter(|v| v.is_finite()).all(|v| v > 0.0);
        if positive && lo > 0.0 && (hi / lo).log10() > decades {
            Axis::logarithmic(lo.log10().floor()..hi.log10().ceil())
        } else {
            Axis::straight(padded((lo, hi), pad))
        }
    }

    /// The horizontal axis of samples `xs` (in order): logarithmic when
    /// they are positive, span more than a decade and are spaced evenly in
    /// their logarithm rather than in their value (the middle sample lies
    /// nearer the middle of the logarithmic range).
    fn along(xs: &[f64]) -> Axis {
        let (lo, hi) = bounds(xs.iter().copied());
        let log = match (xs.first(), xs.get(xs.len() / 2), xs.last()) {
            (Some(&a), Some(&m), Some(&b)) if lo > 0.0 && hi / lo > 10.0 && a != b => {
                let straight = (m - a) / (b - a);
                let logarithmic = (m / a).ln() / (b / a).ln();
                (logarithmic - 0.5).abs() < (straight - 0.5).abs()
            }
            _ => false,
        };
        if log {
            Axis::logarithmic(lo.log10()..hi.log10())
        } else {
            Axis::straight(padded((lo, hi), 0.0))
        }
    }

    /// Relative differences from `lo` to `hi` (both positive): whole
    /// decades, at least four, extended upwards up to 1 (where two sides
    /// have nothing in common) and then downwards.
    fn differences(lo: f64, hi: f64) -> Axis {
        let start = lo.log10().floor();
        let end = hi.log10().ceil();
        let end = end.max((start + 4.0).min(0.0));
        Axis::logarithmic(start.min(end - 4.0)..end)
    }

    /// A straight axis over `range`, ticks every 1, 2 or 5 times a power
    /// of ten.
    fn straight(range: Range<f64>) -> Axis {
        let raw = range.end / TICKS - range.start / TICKS;
        let unit = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 5.0, 10.0]
            .iter()
            .map(|m| m * unit)
            .find(|s| *s >= raw * 0.999)
            .unwrap_or(10.0 * unit);
        let first = (range.start / step).ceil() as i64;
        let last = (range.end / step).floor() as i64;
        let ticks = (first..=last).map(|k| k as f64 * step).collect();
        Axis {
            log: false,
            range,
            ticks,
            minor: Vec::new(),
            step,
        }
    }

    /// A logarithmic axis over `range` (decimal logarithms): ticks at 1, 2
    /// and 5 of each decade over up to three decades, else at decades (every
    /// second or more when there are many) with the rest as grid lines.
    fn logarithmic(range: Range<f64>) -> Axis {
        let (start, end) = (range.start.floor() as i32, range.end.ceil() as i32);
        let inside = |v: &f64| *v >= range.start - 1e-9 && *v <= range.end + 1e-9;
        let decades = range.end - range.start;
        let at = |multiples: &[f64]| -> Vec<f64> {
            (start..=end)
                .flat_map(|n| multiples.iter().map(move |m| n as f64 + m.log10()))
                .filter(inside)
                .collect()
        };
        let (ticks, minor) = if decades <= 3.0 {
            (at(&[1.0, 2.0, 5.0]), at(&[3.0, 4.0, 6.0, 7.0, 8.0, 9.0]))
        } else {
            let every = (decades / 8.0).ceil().max(1.0) as i32;
            let ticks = (start..=end)
                .filter(|n| n.rem_euclid(every) == 0)
                .map(f64::from)
                .filter(inside)
                .collect();
            let minor = if every == 1 {
                at(&[2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
            } else {
                (start..=end)
                    .filter(|n| n.rem_euclid(every) != 0)
                    .map(f64::from)
                    .filter(inside)
                    .collect()
            };
            (ticks, minor)
        };
        Axis {
            log: true,
            range,
            ticks,
            minor,
            step: 1.0,
        }
    }

    /// Where `v` is drawn, if it can be.
    fn place(&self, v: f64) -> Option<f64> {
        match self.log {
            _ if !v.is_finite() => None,
            true if v > 0.0 => Some(v.log10()),
            true => None,
            false => Some(v),
        }
    }

    /// The label of the tick at `v` (drawn coordinates): as many decimals
    /// as the spacing needs, exponent form for large and small numbers.
    fn label(&self, v: f64) -> String {
        if self.log {
            let value = 10f64.powf(v);
            let text = short_exponent(value, 2);
            return if (1e-3..1e5).contains(&value) {
                // 0.002, 50, 1000: the number itself, to three digits.
                let parsed: f64 = text.parse().unwrap_or(value);
                format!("{parsed}")
            } else {
                text
            };
        }
        let v = if v.abs() < self.step * 1e-6 { 0.0 } else { v };
        let magnitude = self.range.start.abs().max(self.range.end.abs());
        if (1e-3..1e5).contains(&magnitude) {
            let digits = (-(self.step.log10() + 1e-9).floor()).clamp(0.0, 12.0) as usize;
            format!("{v:.digits$}")
        } else {
            let digits = ((magnitude / self.step).log10().ceil()).clamp(1.0, 8.0) as usize;
            short_exponent(v, digits)
        }
    }
}

/// An [`Axis`] as plotters' coordinate: straight in drawn coordinates,
/// with the axis's own ticks as key points.
#[derive(Clone)]
struct Ticked(Axis);

impl Ranged for Ticked {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let Range { start, end } = self.0.range;
        // Halved so that a range from -f64::MAX to f64::MAX has a length.
        let t = (value / 2.0 - start / 2.0) / (end / 2.0 - start / 2.0);
        let t = if t.is_finite() {
            t.clamp(-1.0, 2.0)
        } else {
            0.0
        };
        let pixels = f64::from(limit.1 - limit.0);
        (f64::from(limit.0) + t * pixels).round() as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            self.0.minor.clone()
        } else {
            self.0.ticks.clone()
        }
    }

    fn range(&self) -> Range<f64> {
        self.0.range.clone()
    }
}

impl ValueFormatter<f64> for Ticked {
    fn format_ext(&self, value: &f64) -> String {
        self.0.label(*value)
    }
}

/// A panel with ticks and tick labels along both axes; the horizontal
/// axis named when `x_label` is given.
fn panel<'a, 'b>(
    area: &'a Area<'b>,
    x: &Axis,
    y: &Axis,
    x_label: Option<&str>,
    y_label: &str,
) -> Result<ChartContext<'a, SVGBackend<'b>, Cartesian2d<Ticked, Ticked>>, Failure> {
    let mut chart = ChartBuilder::on(area)
        .margin_right(24)
        .margin_top(8)
        .x_label_area_size(if x_label.is_some() { BOTTOM_AREA } else { 36 })
        .y_label_area_size(LEFT_AREA)
        .build_cartesian_2d(Ticked(x.clone()), Ticked(y.clone()))?;
    let mut mesh = chart.configure_mesh();
    mesh.x_labels(x.ticks.len())
        .y_labels(y.ticks.len())
        .y_desc(y_label)
        .label_style(("sans-serif", TICK_SIZE))
        .axis_desc_style(("sans-serif", TEXT_SIZE))
        .light_line_style(BLACK.mix(0.05))
        .bold_line_style(BLACK.mix(0.14));
    if let Some(label) = x_label {
        mesh.x_desc(label);
    }
    mesh.draw()?;
    Ok(chart)
}

/// The pieces of a curve between points that cannot be drawn (not finite,
/// or not positive on a logarithmic axis), in drawn coordinates.
fn runs(points: &[(f64, f64)], x: &Axis, y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    for &(a, b) in points {
        match (x.place(a).zip(y.place(b)), out.last_mut()) {
            (Some(p), Some(run)) => run.push(p),
            (None, Some(run)) if !run.is_empty() => out.push(Vec::new()),
            _ => {}
        }
    }
    out.retain(|r| !r.is_empty());
    out
}

/// A verdict's marker at `at` (in the coordinates of whatever draws it).
fn marker<DB, C>(at: C, mark: Mark) -> DynElement<'static, DB, C>
where
    DB: DrawingBackend,
    C: Clone + 'static,
{
    match mark {
        Mark::Agree(c) => Circle::new(at, 4, c.filled()).into_dyn(),
        Mark::Zero(c) => TriangleMarker::new(at, 5, c.filled()).into_dyn(),
        Mark::Disagree => Cross::new(at, 6, DISAGREE.stroke_width(3)).into_dyn(),
        Mark::Unknown => Circle::new(at, 5, UNKNOWN.stroke_width(2)).into_dyn(),
    }
}

/// Draws the title centred at the top, on one line or two, and returns the
/// area below it.
fn draw_title<'a>(root: &Area<'a>, title: &str) -> Result<Area<'a>, Failure> {
    let width = f64::from(root.dim_in_pixel().0) - 24.0;
    let (size, lines) = fit_title(title, width);
    let line_height = (size * 1.15).round() as u32;
    let height = 10 + line_height * lines.len() as u32;
    let (top, rest) = root.split_vertically(height);
    let style = TextStyle::from(("sans-serif", size).into_font())
        .color(&BLACK)
        .pos(Pos::new(HPos::Center, VPos::Top));
    let centre = (root.dim_in_pixel().0 / 2) as i32;
    for (i, line) in lines.iter().enumerate() {
        top.draw_text(line, &style, (centre, 8 + (i as u32 * line_height) as i32))?;
    }
    Ok(rest)
}

/// The title's size and lines: one line at the largest size from
/// [`TITLE_SIZE`] down to [`TITLE_MIN_SIZE`] that fits `width` pixels, else
/// two balanced lines at the largest size that fits, else two lines at the
/// smallest size, the second cut with "…".
pub fn fit_title(title: &str, width: f64) -> (f64, Vec<String>) {
    let title = title.split_whitespace().collect::<Vec<_>>().join(" ");
    let fits = |text: &str, size: f64| text_width(text, size) <= width;
    let sizes = || {
        (0..)
            .map(|k| TITLE_SIZE - f64::from(k))
            .take_while(|s| *s >= TITLE_MIN_SIZE)
    };
    if let Some(size) = sizes().find(|&s| fits(&title, s)) {
        return (size, vec![title]);
    }
    let chars: Vec<char> = title.chars().collect();
    let line = |from: usize, to: usize| chars[from..to].iter().collect::<String>();
    // The space that balances the two lines best; the middle without one.
    let split = (1..chars.len())
        .filter(|&i| chars[i] == ' ')
        .min_by_key(|&i| i.max(chars.len() - i))
        .unwrap_or(chars.len() / 2);
    let (first, second) = (line(0, split), line(split, chars.len()).trim().to_string());
    if let Some(size) = sizes().find(|&s| fits(&first, s) && fits(&second, s)) {
        return (size, vec![first, second]);
    }
    // Too long for two lines: the first as long as fits, at a space if
    // one is in its second half, and the rest cut.
    let size = TITLE_MIN_SIZE;
    let mut cut = chars.len();
    while cut > 0 && !fits(&line(0, cut), size) {
        cut -= 1;
    }
    let split = match (cut / 2..cut).rev().find(|&i| chars[i] == ' ') {
        Some(i) => i,
        None => cut,
    };
    let first = line(0, split);
    let mut kept: Vec<char> = line(split, chars.len()).trim().chars().collect();
    while !kept.is_empty() && !fits(&format!("{}…", kept.iter().collect::<String>()), size) {
        kept.pop();
    }
    let second = format!("{}…", kept.iter().collect::<String>().trim_end());
    (size, vec![first.trim_end().to_string(), second])
}

/// An estimate of the width of `text` at a plotters size (see
/// [`CHAR_WIDTH`]).
fn text_width(text: &str, size: f64) -> f64 {
    text.chars().count() as f64 * CHAR_WIDTH * size / 1.24
}

/// Draws the legend entries in rows, left to right, and returns the area
/// below them.
fn draw_legend<'a>(root: &Area<'a>, keys: &[Key]) -> Result<Area<'a>, Failure> {
    const ROW: i32 = 22;
    const SAMPLE: i32 = 30;
    const GAP: i32 = 26;
    let left = LEFT_AREA as i32;
    let right = root.dim_in_pixel().0 as i32 - 24;
    let mut placed = Vec::new();
    let (mut x, mut row) = (left, 0);
    for key in keys {
        let sample = if matches!(key, Key::Note(_)) {
            0
        } else {
            SAMPLE + 6
        };
        let width = sample + text_width(key.text(), TEXT_SIZE).ceil() as i32;
        if x > left && x + width > right {
            x = left;
            row += 1;
        }
        placed.push((x, row));
        x += width + GAP;
    }
    let rows = placed.last().map_or(0, |p| p.1 + 1);
    let (strip, rest) = root.split_vertically((rows * ROW + 8) as u32);
    let style = TextStyle::from(("sans-serif", TEXT_SIZE).into_font())
        .color(&BLACK)
        .pos(Pos::new(HPos::Left, VPos::Center));
    for (key, &(x, row)) in keys.iter().zip(&placed) {
        let y = row * ROW + ROW / 2;
        let sample = vec![(x, y), (x + SAMPLE, y)];
        match key {
            Key::Line {
                color,
                dashed: false,
                ..
            } => strip.draw(&PathElement::new(sample, color.stroke_width(2)))?,
            Key::Line { color, .. } => {
                strip.draw(&DashedPathElement::new(sample, 7, 5, color.stroke_width(2)))?
            }
            Key::Marker { verdict, .. } => strip.draw(&marker((x + SAMPLE / 2, y), *verdict))?,
            Key::Note(text) => {
                strip.draw_text(text, &style, (x, y))?;
                continue;
            }
        }
        strip.draw_text(key.text(), &style, (x + SAMPLE + 6, y))?;
    }
    Ok(rest)
}

/// `v` in exponent form with at most `digits` decimals, trailing zeros
/// dropped: `1.5e-3`, `1e10`.
fn short_exponent(v: f64, digits: usize) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let text = format!("{v:.digits$e}");
    match text.split_once('e') {
        Some((mantissa, exp)) if mantissa.contains('.') => {
            let mantissa = mantissa.trim_end_matches('0').trim_end_matches('.');
            format!("{mantissa}e{exp}")
        }
        _ => text,
    }
}

/// Lower and upper finite bounds, (0, 1) when there are none.
fn bounds(v: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = v
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), x| {
            (lo.min(x), hi.max(x))
        });
    if lo.is_finite() {
        (lo, hi)
    } else {
        (0.0, 1.0)
    }
}

/// `lo..hi` widened by `pad` of its length on each side, and around the
/// value when the two coincide (by a thousandth of it, or by 1 around 0).
fn padded((lo, hi): (f64, f64), pad: f64) -> Range<f64> {
    let span = hi - lo;
    let size = lo.abs().max(hi.abs());
    if span <= size * 1e-12 || span < 1e-300 {
        let d = if size < 1e-300 { 1.0 } else { size * 1e-3 };
        return (lo - d)..(hi + d);
    }
    let d = span * pad;
    if (lo - d).is_finite() && (hi + d).is_finite() {
        (lo - d)..(hi + d)
    } else {
        lo..hi
    }
}
