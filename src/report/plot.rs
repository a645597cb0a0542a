//! SVG plots drawn with plotters into strings, for the HTML report and as separate
//! files. No fonts or system libraries are needed: SVG text is rendered by the viewer.
//!
//! Two shapes cover every figure magproof draws: an x–y plot of point and line series
//! (projections with fitted ellipses, residual against time, field against table angle,
//! command and response over time, trends across builds) and a histogram.

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use crate::Error;

/// Our palette: slate blue, amber, teal, brick, graphite, plum.
pub const PALETTE: [RGBColor; 6] = [
    RGBColor(0x3b, 0x5b, 0x92),
    RGBColor(0xd0, 0x8c, 0x1f),
    RGBColor(0x2a, 0x9d, 0x8f),
    RGBColor(0xb3, 0x41, 0x2e),
    RGBColor(0x4b, 0x55, 0x63),
    RGBColor(0x8e, 0x4b, 0x8f),
];

/// Most points drawn per series; longer series are thinned by a fixed stride so that a
/// 10⁶-sample log still gives a small SVG.
pub const MAX_POINTS_PER_SERIES: usize = 4000;

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mark {
    /// Small filled circles.
    Points,
    /// A polyline through the points in order.
    Line,
    /// A dashed polyline (limits, references).
    Dashed,
}

/// One named series of an x–y plot.
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend label.
    pub name: String,
    /// (x, y) points.
    pub points: Vec<(f64, f64)>,
    /// How to draw it.
    pub mark: Mark,
    /// Index into [`PALETTE`].
    pub color: usize,
    /// 1σ of each point's y, drawn as vertical error bars (empty: none).
    pub sigma: Vec<f64>,
}

impl Series {
    /// A series of points.
    pub fn points(name: &str, points: Vec<(f64, f64)>, color: usize) -> Self {
        Series {
            name: name.to_string(),
            points,
            mark: Mark::Points,
            color,
            sigma: Vec::new(),
        }
    }

    /// A series drawn as a line.
    pub fn line(name: &str, points: Vec<(f64, f64)>, color: usize) -> Self {
        Series {
            name: name.to_string(),
            points,
            mark: Mark::Line,
            color,
            sigma: Vec::new(),
        }
    }

    /// The same series with a 1σ error bar on each point's y (same unit as y).
    pub fn with_sigma(mut self, sigma: Vec<f64>) -> Self {
        self.sigma = sigma;
        self
    }

    /// A dashed line.
    pub fn dashed(name: &str, points: Vec<(f64, f64)>, color: usize) -> Self {
        Series {
            name: name.to_string(),
            points,
            mark: Mark::Dashed,
            color,
            sigma: Vec::new(),
        }
    }
}

/// An x–y plot.
#[derive(Debug, Clone)]
pub struct XyPlot {
    /// Title above the plot.
    pub title: String,
    /// x-axis label with unit.
    pub x_label: String,
    /// y-axis label with unit.
    pub y_label: String,
    /// The series, drawn in order.
    pub series: Vec<Series>,
    /// Same scale on both axes (projections of field samples).
    pub equal_aspect: bool,
    /// Fixed x range instead of the data's.
    pub x_range: Option<(f64, f64)>,
    /// Fixed y range instead of the data's.
    pub y_range: Option<(f64, f64)>,
    /// Size in pixels.
    pub size: (u32, u32),
    /// Names shown instead of the numbers 1, 2, … on the x axis (builds); empty: numbers.
    pub x_names: Vec<String>,
}

impl XyPlot {
    /// A plot with default size and data ranges.
    pub fn new(title: &str, x_label: &str, y_label: &str) -> Self {
        XyPlot {
            title: title.to_string(),
            x_label: x_label.to_string(),
            y_label: y_label.to_string(),
            series: Vec::new(),
            equal_aspect: false,
            x_range: None,
            y_range: None,
            size: (560, 380),
            x_names: Vec::new(),
        }
    }

    /// Add a series.
    pub fn with(mut self, s: Series) -> Self {
        self.series.push(s);
        self
    }
}

fn plot_err(e: impl std::fmt::Display) -> Error {
    Error::Internal(format!("drawing a plot failed: {e}"))
}

fn finite_range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if lo > hi {
        return None;
    }
    if hi - lo < 1e-12 * (1.0 + lo.abs().max(hi.abs())) {
        let pad = 0.5 * (1.0 + lo.abs() * 0.01);
        return Some((lo - pad, hi + pad));
    }
    let pad = 0.05 * (hi - lo);
    Some((lo - pad, hi + pad))
}

fn thin(points: &[(f64, f64)]) -> impl Iterator<Item = (f64, f64)> + '_ {
    let stride = points.len().div_ceil(MAX_POINTS_PER_SERIES).max(1);
    points
        .iter()
        .step_by(stride)
        .copied()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
}

/// A tick label for an axis spanning `span`: as many decimals as a step of about a
/// sixth of the span needs, so that labels stay short (`-40000`, not `-40000.0`).
fn tick(v: f64, span: f64) -> String {
    let step = (span / 6.0).abs();
    let d = if step > 0.0 && step.is_finite() {
        (1 - step.log10().floor() as i32).clamp(0, 6) as usize
    } else {
        2
    };
    let d = if step >= 5.0 { 0 } else { d };
    let text = format!("{v:.d$}");
    if text
        .trim_start_matches('-')
        .trim_matches(|c| c == '0' || c == '.')
        .is_empty()
    {
        "0".to_string()
    } else {
        text
    }
}

/// An x tick: the name of the build at a whole number 1, 2, … when names are given
/// (nothing between them), else the number.
fn x_tick(v: f64, span: f64, names: &[String]) -> String {
    if names.is_empty() {
        return tick(v, span);
    }
    let k = v.round();
    if (v - k).abs() > 1e-6 || k < 1.0 {
        return String::new();
    }
    names.get(k as usize - 1).cloned().unwrap_or_default()
}

/// The chart an x–y plot is drawn on: SVG, linear axes in data units.
type XyChart<'a, 'b> =
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Draw an x–y plot as an SVG document.
pub fn draw_xy(plot: &XyPlot) -> Result<String, Error> {
    let ((x0, x1), (y0, y1)) = xy_ranges(plot);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, plot.size).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(&plot.title, ("sans-serif", 17))
            .margin(12)
            .x_label_area_size(38)
            .y_label_area_size(62)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .x_labels(if plot.x_names.is_empty() {
                7
            } else {
                plot.x_names.len() + 1
            })
            .y_labels(7)
            .x_label_formatter(&|v| x_tick(*v, x1 - x0, &plot.x_names))
            .y_label_formatter(&|v| tick(*v, y1 - y0))
            .x_desc(&plot.x_label)
            .y_desc(&plot.y_label)
            .light_line_style(RGBColor(0xee, 0xee, 0xee))
            .bold_line_style(RGBColor(0xd4, 0xd4, 0xd4))
            .label_style(("sans-serif", 12))
            .draw()
            .map_err(plot_err)?;
        for s in &plot.series {
            draw_one_series(&mut chart, s)?;
        }
        if plot.series.iter().any(|s| !s.name.is_empty()) {
            draw_legend(&mut chart)?;
        }
        root.present().map_err(plot_err)?;
    }
    // Labels may hold text of an old ledger: nothing XML forbids reaches the file.
    Ok(with_axis_labels(
        crate::text::xml_clean(svg),
        &plot.x_label,
        &plot.y_label,
    ))
}

/// The SVG with its axis labels also as attributes of the root element
/// (`data-x-label`, `data-y-label`), so that a check of a report can read them.
fn with_axis_labels(svg: String, x_label: &str, y_label: &str) -> String {
    let attr = |s: &str| {
        crate::text::xml_clean(
            s.replace('&', "&amp;")
                .replace('"', "&quot;")
                .replace('<', "&lt;"),
        )
    };
    match svg.find("<svg") {
        Some(i) => format!(
            "{}<svg data-x-label=\"{}\" data-y-label=\"{}\"{}",
            &svg[..i],
            attr(x_label),
            attr(y_label),
            &svg[i + 4..]
        ),
        None => svg,
    }
}

/// The x and y ranges in data units: fixed, else the data's, else 0–1; widened for an
/// equal aspect.
pub(crate) fn xy_ranges(plot: &XyPlot) -> ((f64, f64), (f64, f64)) {
    let xs = plot
        .series
        .iter()
        .flat_map(|s| s.points.iter().map(|p| p.0));
    // Error bars are part of the data's extent.
    let ys = plot.series.iter().flat_map(|s| {
        s.points.iter().enumerate().flat_map(move |(k, p)| {
            let e = s
                .sigma
                .get(k)
                .copied()
                .filter(|e| e.is_finite())
                .unwrap_or(0.0);
            [p.1 - e, p.1 + e]
        })
    });
    let x = plot
        .x_range
        .or_else(|| finite_range(xs))
        .unwrap_or((0.0, 1.0));
    let y = plot
        .y_range
        .or_else(|| finite_range(ys))
        .unwrap_or((0.0, 1.0));
    if plot.equal_aspect {
        equal_aspect_ranges(plot.size, x, y)
    } else {
        (x, y)
    }
}

/// Widen the narrower range so one unit has the same length in pixels on both axes of
/// a plot of `size` pixels (less the label areas).
fn equal_aspect_ranges(
    size: (u32, u32),
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> ((f64, f64), (f64, f64)) {
    let (w, h) = (f64::from(size.0 - 90), f64::from(size.1 - 80));
    let per_px = ((x1 - x0) / w).max((y1 - y0) / h);
    let (cx, cy) = (0.5 * (x0 + x1), 0.5 * (y0 + y1));
    (
        (cx - 0.5 * per_px * w, cx + 0.5 * per_px * w),
        (cy - 0.5 * per_px * h, cy + 0.5 * per_px * h),
    )
}

/// Draw one series as points, a line or a dashed line, with its legend entry if named.
fn draw_one_series<'a, 'b: 'a>(chart: &mut XyChart<'a, 'b>, s: &Series) -> Result<(), Error> {
    let color = PALETTE[s.color % PALETTE.len()];
    let legend_color = color;
    // ±1σ bars (few points: a trend across builds, so no thinning).
    chart
        .draw_series(
            s.points
                .iter()
                .zip(&s.sigma)
                .filter(|((x, y), e)| x.is_finite() && y.is_finite() && e.is_finite())
                .map(|(&(x, y), &e)| {
                    ErrorBar::new_vertical(x, y - e, y, y + e, color.stroke_width(1), 8)
                }),
        )
        .map_err(plot_err)?;
    let anno = match s.mark {
        Mark::Points => chart
            .draw_series(thin(&s.points).map(|p| Circle::new(p, 2, color.mix(0.55).filled())))
            .map_err(plot_err)?,
        Mark::Line => chart
            .draw_series(LineSeries::new(thin(&s.points), color.stroke_width(2)))
            .map_err(plot_err)?,
        Mark::Dashed => chart
            .draw_series(DashedLineSeries::new(
                thin(&s.points).collect::<Vec<_>>(),
                6,
                4,
                color.stroke_width(2),
            ))
            .map_err(plot_err)?,
    };
    if !s.name.is_empty() {
        anno.label(s.name.as_str()).legend(move |(x, y)| {
            Rectangle::new([(x, y - 4), (x + 14, y + 4)], legend_color.filled())
        });
    }
    Ok(())
}

/// Draw the legend box in the upper right corner.
fn draw_legend<'a, 'b: 'a>(chart: &mut XyChart<'a, 'b>) -> Result<(), Error> {
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(0xbb, 0xbb, 0xbb))
        .label_font(("sans-serif", 12))
        .position(SeriesLabelPosition::UpperRight)
        .draw()
        .map_err(plot_err)
}

/// Draw a histogram of `values` with `bins` equal bins as an SVG document.
pub fn draw_histogram(
    title: &str,
    x_label: &str,
    values: &[f64],
    bins: usize,
) -> Result<String, Error> {
    let bins = bins.clamp(1, 200);
    let (lo, hi) = finite_range(values.iter().copied()).unwrap_or((-1.0, 1.0));
    let width = (hi - lo) / bins as f64;
    let mut counts = vec![0u64; bins];
    for v in values.iter().filter(|v| v.is_finite()) {
        let k = (((v - lo) / width) as usize).min(bins - 1);
        counts[k] += 1;
    }
    let top = counts.iter().copied().max().unwrap_or(1).max(1) as f64 * 1.08;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (560, 340)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 17))
            .margin(12)
            .x_label_area_size(38)
            .y_label_area_size(62)
            .build_cartesian_2d(lo..hi, 0f64..top)
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .x_labels(7)
            .x_label_formatter(&|v| tick(*v, hi - lo))
            .y_label_formatter(&|v| tick(*v, top))
            .x_desc(x_label)
            .y_desc(HISTOGRAM_Y)
            .light_line_style(RGBColor(0xee, 0xee, 0xee))
            .label_style(("sans-serif", 12))
            .draw()
            .map_err(plot_err)?;
        let fill = PALETTE[0].mix(0.75).filled();
        chart
            .draw_series(counts.iter().enumerate().map(|(k, &c)| {
                let x = lo + k as f64 * width;
                Rectangle::new([(x, 0.0), (x + width, c as f64)], fill)
            }))
            .map_err(plot_err)?;
        root.present().map_err(plot_err)?;
    }
    // Labels may hold text of an old ledger: nothing XML forbids reaches the file.
    Ok(with_axis_labels(
        crate::text::xml_clean(svg),
        x_label,
        HISTOGRAM_Y,
    ))
}

/// The y axis of a histogram.
const HISTOGRAM_Y: &str = "samples [count per bin]";

/// Points of an ellipse `centre + a·cos θ + b·sin θ` (for fitted-shape overlays).
pub fn ellipse_points(
    centre: (f64, f64),
    a: (f64, f64),
    b: (f64, f64),
    n: usize,
) -> Vec<(f64, f64)> {
    (0..=n)
        .map(|k| {
            let t = std::f64::consts::TAU * k as f64 / n as f64;
            let (c, s) = (t.cos(), t.sin());
            (centre.0 + a.0 * c + b.0 * s, centre.1 + a.1 * c + b.1 * s)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn xy_plot_is_svg_with_escaped_text() {
        let p = XyPlot::new("a <b> & c", "t [s]", "B [nT]")
            .with(Series::points("raw", vec![(0.0, 1.0), (1.0, 2.0)], 0))
            .with(Series::line(
                "fit",
                ellipse_points((0.0, 0.0), (1.0, 0.0), (0.0, 1.0), 16),
                1,
            ));
        let svg = draw_xy(&p).unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("a &lt;b&gt; &amp; c"));
        assert!(!svg.contains("<b>"));
    }

    #[test]
    fn degenerate_inputs_still_draw() {
        assert!(draw_xy(&XyPlot::new("empty", "x", "y")).is_ok());
        let one = XyPlot::new("one", "x", "y").with(Series::points("", vec![(5.0, 5.0)], 0));
        assert!(draw_xy(&one).is_ok());
        assert!(draw_histogram("h", "r [nT]", &[], 10).is_ok());
        assert!(draw_histogram("h", "r [nT]", &[1.0, 1.0, f64::NAN], 10).is_ok());
    }

    #[test]
    fn tick_labels_stay_short() {
        assert_eq!(tick(-40000.0, 120_000.0), "-40000");
        assert_eq!(tick(0.25, 1.2), "0.25");
        assert_eq!(tick(-0.0, 10.0), "0");
        assert_eq!(tick(12.4, 60.0), "12");
    }

    #[test]
    fn long_series_are_thinned() {
        let pts: Vec<(f64, f64)> = (0..100_000).map(|i| (i as f64, (i % 7) as f64)).collect();
        let svg = draw_xy(&XyPlot::new("n", "x", "y").with(Series::points("", pts, 0))).unwrap();
        assert!(svg.matches("<circle").count() <= MAX_POINTS_PER_SERIES + 10);
    }
}
