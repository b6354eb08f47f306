//! What every figure of the report shares: the page size of a figure, fonts, axis ranges, and
//! curves told apart by dash pattern and marker (so they stay distinct in grey scale and on a
//! black-and-white printer), drawn with plotters' SVG backend.
//!
//! plotters' SVG backend writes text as `<text>` elements and, without its `ttf` feature,
//! estimates text extents itself, so no system font is read. The `xmlns` attribute it writes is
//! dropped when the SVG is inlined: HTML5 does not need it, and the report then holds no URL.

use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

/// Width and height of every figure in SVG user units (pixels at 100 %).
pub const SIZE: (u32, u32) = (960, 480);
/// Font family written into the SVG; the viewer picks its own sans-serif face.
pub const FONT: &str = "sans-serif";
/// Tick labels, in plotters' font units (it writes `font-size` = size / 1.24): about 18 units
/// high, 9 pt when the 960-unit figure is printed 17 cm wide.
pub const TICK_FONT: u32 = 22;
/// Axis descriptions (about 19 units).
pub const AXIS_FONT: u32 = 24;
/// Legend entries (about 17 units).
pub const LEGEND_FONT: u32 = 21;

/// A chart drawn into an SVG string, with `f64` axes.
/// One lifetime for the chart and its backend, so that closures drawing into it need no
/// lifetime bounds of their own.
pub type Chart<'a> = ChartContext<'a, SVGBackend<'a>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// What went wrong inside plotters (only possible through a bug: the backend writes to a string).
pub type DrawError = Box<dyn std::error::Error>;

/// The line pattern of a curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dash {
    Solid,
    /// Long dashes.
    Long,
    /// Short dashes, nearly dots.
    Short,
}

/// The marker at every data point of a curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Triangle,
    Square,
    Cross,
    /// An open circle.
    Ring,
}

/// How one curve is drawn and named in the legend.
#[derive(Debug, Clone)]
pub struct Curve {
    pub label: String,
    pub dash: Dash,
    pub marker: Marker,
    /// Grey level of line and marker, 0 = black.
    pub grey: u8,
    pub width: u32,
}

impl Curve {
    /// A black curve of width 2.
    pub fn new(label: impl Into<String>, dash: Dash, marker: Marker) -> Curve {
        Curve {
            label: label.into(),
            dash,
            marker,
            grey: 0,
            width: 2,
        }
    }

    fn style(&self) -> ShapeStyle {
        RGBColor(self.grey, self.grey, self.grey).stroke_width(self.width)
    }
}

/// Draws `points` as markers of `kind` and names them `label` in the legend, whose entry is a
/// 30-unit line in `legend_line` (dash and gap; `None`: no line) with the marker on it.
fn put_markers<'a>(
    chart: &mut Chart<'a>,
    points: Vec<(f64, f64)>,
    kind: Marker,
    style: ShapeStyle,
    legend_line: Option<(u32, u32)>,
    label: &str,
) -> Result<(), DrawError> {
    let filled = ShapeStyle {
        filled: true,
        ..style
    };
    let open = ShapeStyle {
        filled: false,
        stroke_width: 2,
        ..style
    };
    let line_style = if legend_line.is_some() {
        style
    } else {
        TRANSPARENT.into()
    };
    let (size, gap) = legend_line.unwrap_or((30, 0));
    let line = move || DashedPathElement::new(vec![(0, 0), (30, 0)], size, gap, line_style);
    macro_rules! put {
        ($data:expr, $legend:expr) => {{
            chart
                .draw_series(points.into_iter().map($data))?
                .label(label)
                .legend(move |at| EmptyElement::at(at) + line() + $legend);
        }};
    }
    match kind {
        Marker::Circle => put!(
            move |p| Circle::new(p, 4, filled),
            Circle::new((15, 0), 4, filled)
        ),
        Marker::Ring => put!(
            move |p| Circle::new(p, 5, open),
            Circle::new((15, 0), 5, open)
        ),
        Marker::Triangle => put!(
            move |p| TriangleMarker::new(p, 6, filled),
            TriangleMarker::new((15, 0), 6, filled)
        ),
        Marker::Cross => put!(
            move |p| Cross::new(p, 5, open),
            Cross::new((15, 0), 5, open)
        ),
        Marker::Square => put!(
            move |p| EmptyElement::at(p) + Rectangle::new([(-4, -4), (4, 4)], filled),
            Rectangle::new([(11, -4), (19, 4)], filled)
        ),
    }
    Ok(())
}

fn dashes(dash: Dash) -> Option<(u32, u32)> {
    match dash {
        Dash::Solid => None,
        Dash::Long => Some((12, 6)),
        Dash::Short => Some((3, 4)),
    }
}

/// The runs of consecutive finite points of `x`, `y` (a non-finite value, e.g. an unbounded
/// term, breaks the line).
pub fn finite_runs(x: &[f64], y: &[f64]) -> Vec<Vec<(f64, f64)>> {
    let mut runs = vec![Vec::new()];
    for (&a, &b) in x.iter().zip(y) {
        if a.is_finite() && b.is_finite() {
            if let Some(r) = runs.last_mut() {
                r.push((a, b));
            }
        } else if runs.last().is_some_and(|r| !r.is_empty()) {
            runs.push(Vec::new());
        }
    }
    runs.retain(|r| !r.is_empty());
    runs
}

/// Draws `y` against `x` as `curve`: lines through the finite runs, a marker at every finite
/// point, and a legend entry showing both.
pub fn draw_curve<'a>(
    chart: &mut Chart<'a>,
    x: &[f64],
    y: &[f64],
    curve: &Curve,
) -> Result<(), DrawError> {
    let style = curve.style();
    let runs = finite_runs(x, y);
    for run in &runs {
        match dashes(curve.dash) {
            None => {
                chart.draw_series(LineSeries::new(run.iter().copied(), style))?;
            }
            Some((size, gap)) => {
                chart.draw_series(DashedLineSeries::new(run.iter().copied(), size, gap, style))?;
            }
        }
    }
    let points: Vec<(f64, f64)> = runs.into_iter().flatten().collect();
    let legend_line = Some(dashes(curve.dash).map_or((30, 0), |(d, g)| (d.min(8), g.min(4))));
    put_markers(
        chart,
        points,
        curve.marker,
        style,
        legend_line,
        &curve.label,
    )
}

/// Points only, no line (e.g. failed tests), with a legend entry.
pub fn draw_points<'a>(
    chart: &mut Chart<'a>,
    points: Vec<(f64, f64)>,
    kind: Marker,
    label: &str,
) -> Result<(), DrawError> {
    if points.is_empty() {
        return Ok(());
    }
    put_markers(chart, points, kind, BLACK.stroke_width(2), None, label)
}

/// Fills the band between `low` and `high` over `x` in grey level `grey` (finite points only;
/// a gap in either edge splits the band).
pub fn draw_band<'a>(
    chart: &mut Chart<'a>,
    x: &[f64],
    low: &[f64],
    high: &[f64],
    grey: u8,
    label: &str,
) -> Result<(), DrawError> {
    let fill = RGBColor(grey, grey, grey).filled();
    let mut first = true;
    let mut run: Vec<(f64, f64, f64)> = Vec::new();
    let n = x.len().min(low.len()).min(high.len());
    for k in 0..=n {
        let point = (k < n && x[k].is_finite() && low[k].is_finite() && high[k].is_finite())
            .then(|| (x[k], low[k], high[k]));
        match point {
            Some(p) => run.push(p),
            None if !run.is_empty() => {
                let mut outline: Vec<(f64, f64)> = run.iter().map(|&(t, l, _)| (t, l)).collect();
                outline.extend(run.iter().rev().map(|&(t, _, h)| (t, h)));
                let anno = chart.draw_series(std::iter::once(Polygon::new(outline, fill)))?;
                if first {
                    anno.label(label).legend(move |(lx, ly)| {
                        Rectangle::new([(lx, ly - 7), (lx + 30, ly + 7)], fill)
                    });
                    first = false;
                }
                run.clear();
            }
            None => {}
        }
    }
    Ok(())
}

/// A range covering the finite `values`, padded by 6 % on each side; `fallback` when none is
/// finite, widened around a single value.
pub fn padded_range(values: impl IntoIterator<Item = f64>, fallback: (f64, f64)) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.into_iter().filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if lo > hi {
        return fallback;
    }
    let span = hi - lo;
    if span <= 1e-12 * lo.abs().max(hi.abs()).max(1e-300) {
        let w = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        return (lo - w, hi + w);
    }
    (lo - 0.06 * span, hi + 0.06 * span)
}

/// Raises the top of `range` so that a legend of `entries` lines in the upper right corner sits
/// above the data (the legend is drawn inside the plotting area, about 380 units high).
pub fn with_legend_room(range: (f64, f64), entries: usize) -> (f64, f64) {
    let share = ((24 * entries + 34) as f64 / 380.0).min(0.6);
    let span = range.1 - range.0;
    (range.0, range.0 + span / (1.0 - share))
}

/// The time axis: from the first to the last recorded time (a single time gets a unit span).
pub fn time_range(times: &[f64]) -> (f64, f64) {
    let lo = times.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = times.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !(lo.is_finite() && hi.is_finite()) {
        (0.0, 1.0)
    } else if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5, hi + 0.5)
    }
}

/// The label of the time axis, e.g. `time t (µs)`.
pub fn time_label(unit: &str) -> String {
    let shown = if unit == "us" { "µs" } else { unit };
    format!("time t ({shown})")
}

/// Draws a figure into an SVG string: a white page of [`SIZE`], a chart with the given axis
/// ranges and labels, `body` to draw the data, then the legend in `legend_at`.
pub fn figure(
    x: (f64, f64),
    y: (f64, f64),
    x_desc: &str,
    y_desc: &str,
    legend_at: SeriesLabelPosition,
    body: impl FnOnce(&mut Chart) -> Result<(), DrawError>,
) -> Result<String, DrawError> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        root.fill(&WHITE)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(18)
            .x_label_area_size(64)
            .y_label_area_size(96)
            .build_cartesian_2d(x.0..x.1, y.0..y.1)?;
        chart
            .configure_mesh()
            .x_desc(x_desc)
            .y_desc(y_desc)
            .x_labels(8)
            .y_labels(7)
            .label_style((FONT, TICK_FONT))
            .axis_desc_style((FONT, AXIS_FONT))
            .bold_line_style(RGBColor(215, 215, 215))
            .light_line_style(TRANSPARENT)
            .axis_style(BLACK.stroke_width(2))
            .draw()?;
        body(&mut chart)?;
        chart
            .configure_series_labels()
            .position(legend_at)
            .label_font((FONT, LEGEND_FONT))
            .background_style(WHITE.mix(0.88))
            .border_style(BLACK)
            .margin(12)
            .legend_area_size(44)
            .draw()?;
        root.present()?;
    }
    Ok(svg.replace(" xmlns=\"http://www.w3.org/2000/svg\"", ""))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_finite_values_split_a_curve() {
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = [1.0, f64::INFINITY, 2.0, 3.0, f64::NAN];
        assert_eq!(
            finite_runs(&x, &y),
            vec![vec![(0.0, 1.0)], vec![(2.0, 2.0), (3.0, 3.0)]]
        );
        assert!(finite_runs(&x, &[f64::NAN; 5]).is_empty());
    }

    #[test]
    fn ranges_are_padded_and_never_empty() {
        assert_eq!(padded_range([0.0, 1.0], (0.0, 1.0)), (-0.06, 1.06));
        assert_eq!(padded_range([f64::INFINITY], (0.0, 2.0)), (0.0, 2.0));
        assert_eq!(padded_range([0.0, 0.0], (5.0, 6.0)), (-1.0, 1.0));
        assert_eq!(time_range(&[3.0]), (2.5, 3.5));
        let (lo, hi) = with_legend_room((0.0, 1.0), 4);
        assert_eq!(lo, 0.0);
        assert!(hi > 1.3 && hi < 2.0);
        assert_eq!(time_label("us"), "time t (µs)");
    }

    /// The SVG backend writes text as `<text>` elements (no font file needed) and the inlined
    /// SVG holds no URL.
    #[test]
    fn a_figure_is_svg_with_text_and_no_url() {
        let svg = figure(
            (0.0, 1.0),
            (0.0, 1.0),
            "time t (s)",
            "value",
            SeriesLabelPosition::UpperRight,
            |c| {
                draw_curve(
                    c,
                    &[0.0, 0.5, 1.0],
                    &[0.1, 0.7, 0.4],
                    &Curve::new("a curve", Dash::Long, Marker::Triangle),
                )
            },
        )
        .unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains(">\ntime t (s)\n</text>"));
        assert!(svg.contains(">\na curve\n</text>"));
        assert!(svg.contains("stroke-dasharray") || svg.matches("<polyline").count() > 2);
        assert!(!svg.contains("http"));
    }
}
