//! Charts of a verification, drawn with plotters: the nominal run's waveforms (one panel per
//! group of nodes, volts against time) and a chain's timing diagram (one lane per stage
//! output, the count after each edge along the top). The same code draws on a canvas for the
//! screen and into SVG for print. Rendering only: the numbers come from the core.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::{Deserialize, Serialize};

use crate::traces::{DecimatedRun, DecimatedTrace};

/// Which pen a trace is drawn with: the same colour marks the same transistor in every panel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Pen {
    Input,
    First,
    Second,
}

/// One panel of a waveform chart: a title and the traces it shows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Panel {
    pub title: String,
    /// Indices into the run's traces, with the pen for each.
    pub traces: Vec<(usize, Pen)>,
}

/// Waveforms of one run, stacked panels over a shared time axis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WaveformChart {
    pub run: DecimatedRun,
    pub panels: Vec<Panel>,
}

/// A ripple chain's timing diagram: every trace of the run is one lane, top to bottom.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimingDiagram {
    pub run: DecimatedRun,
    /// Start of every active input edge, and the end of the last period after them, s
    /// (packed for the page, see [`crate::packed`]).
    #[serde(with = "crate::packed")]
    pub edge_times_s: Vec<f64>,
    /// Count read after each edge; `None` where a stage sat between its states.
    pub counts: Vec<Option<u64>>,
    /// Ideal logic levels (a plan), labelled 0 and 1 instead of volts.
    #[serde(default)]
    pub logic: bool,
}

pub(crate) const INK: RGBColor = RGBColor(0x1b, 0x1b, 0x1b);
pub(crate) const MUTED: RGBColor = RGBColor(0x5a, 0x5a, 0x5a);
pub(crate) const GRID: RGBColor = RGBColor(0xe2, 0xe5, 0xe8);
const EDGE_MARK: RGBColor = RGBColor(0xc9, 0xcf, 0xd6);
pub(crate) const FAIL: RGBColor = RGBColor(0xa3, 0x15, 0x15);

pub(crate) fn pen_colour(pen: Pen) -> RGBColor {
    match pen {
        Pen::Input => RGBColor(0x4a, 0x4a, 0x4a),
        Pen::First => RGBColor(0x0b, 0x53, 0x94),
        Pen::Second => RGBColor(0xb4, 0x5f, 0x06),
    }
}

/// Sizes in CSS pixels times the device-pixel ratio, so a HiDPI canvas draws at its full
/// resolution with the same layout. `font_scale` also corrects plotters' SVG backend, which
/// writes every font 1.24 times smaller than asked.
#[derive(Clone, Copy)]
pub(crate) struct Metrics {
    scale: f64,
    font_scale: f64,
}

/// plotters' SVG backend divides font sizes by this.
pub(crate) const SVG_FONT_SHRINK: f64 = 1.24;

impl Metrics {
    pub(crate) fn new(scale: f64, font_factor: f64) -> Metrics {
        let scale = if scale.is_finite() { scale.clamp(0.5, 4.0) } else { 1.0 };
        Metrics { scale, font_scale: scale * font_factor }
    }
    pub(crate) fn px(self, css: f64) -> i32 {
        (css * self.scale).round() as i32
    }
    pub(crate) fn font(self, css: f64) -> FontDesc<'static> {
        FontDesc::new(FontFamily::SansSerif, css * self.font_scale, FontStyle::Normal)
    }
    pub(crate) fn bold(self, css: f64) -> FontDesc<'static> {
        FontDesc::new(FontFamily::SansSerif, css * self.font_scale, FontStyle::Bold)
    }
    pub(crate) fn stroke(self, css: f64) -> u32 {
        (css * self.scale).round().max(1.0) as u32
    }
}

/// A time axis in a readable unit: the factor to multiply seconds by, and its name.
fn time_unit(span_s: f64) -> (f64, &'static str) {
    if span_s < 2e-6 {
        (1e9, "ns")
    } else if span_s < 2e-3 {
        (1e6, "µs")
    } else if span_s < 2.0 {
        (1e3, "ms")
    } else {
        (1.0, "s")
    }
}

pub(crate) fn fail<E: std::fmt::Display>(error: E) -> String {
    format!("cannot draw the chart: {error}")
}

/// Lowest minimum and highest maximum of some traces, or `None` when they hold nothing.
fn extent<'a>(traces: impl Iterator<Item = &'a DecimatedTrace>) -> Option<(f64, f64)> {
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    for trace in traces {
        low = trace.min_v.iter().copied().filter(|v| v.is_finite()).fold(low, f64::min);
        high = trace.max_v.iter().copied().filter(|v| v.is_finite()).fold(high, f64::max);
    }
    (low <= high).then_some((low, high))
}

/// The trace as a line through its envelope in `columns` columns: buckets are merged to one
/// column per device pixel, and each column's line runs from its left edge at the end nearer
/// the previous column to its right edge at the other end. A flat stretch stays one line, a
/// fast edge fills its column, and an edge split between two columns stays one straight
/// stroke instead of a jog at the column boundary.
fn envelope(run: &DecimatedRun, trace: &DecimatedTrace, columns: usize, time_factor: f64) -> Vec<(f64, f64)> {
    let buckets = trace.min_v.len().min(trace.max_v.len());
    let columns = columns.clamp(1, buckets.max(1));
    let per_column = buckets.div_ceil(columns).max(1);
    let bucket_s = run.bucket_s();
    let mut points = Vec::with_capacity(2 * columns + 2);
    let mut previous: Option<f64> = None;
    for (column, (lows, highs)) in
        trace.min_v.chunks(per_column).zip(trace.max_v.chunks(per_column)).enumerate()
    {
        let low = lows.iter().copied().fold(f64::INFINITY, f64::min);
        let high = highs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if !(low.is_finite() && high.is_finite()) {
            continue;
        }
        let first_bucket = column * per_column;
        let left_s = run.start_s + first_bucket as f64 * bucket_s;
        let right_s = run.start_s + (first_bucket + lows.len()) as f64 * bucket_s;
        let rising = previous.is_none_or(|p| (p - low).abs() <= (p - high).abs());
        let (first, second) = if rising { (low, high) } else { (high, low) };
        points.push((left_s * time_factor, first));
        points.push((right_s * time_factor, second));
        previous = Some(second);
    }
    without_flat_interiors(points)
}

/// Drops the inner points of every run of three or more points at one level: the line drawn
/// is the same, and a logic trace (long flat stretches) costs far fewer canvas calls.
fn without_flat_interiors(points: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
    let mut kept: Vec<(f64, f64)> = Vec::with_capacity(points.len());
    for point in points {
        if let [.., before, last] = kept.as_slice() {
            if before.1 == last.1 && last.1 == point.1 {
                kept.pop();
            }
        }
        kept.push(point);
    }
    kept
}

/// Tick labels with as few digits as a tick spacing of `step` needs.
pub(crate) fn tick_label(value: f64, step: f64) -> String {
    let digits = if step >= 1.0 {
        0
    } else if step >= 0.1 {
        1
    } else if step >= 0.01 {
        2
    } else {
        3
    };
    let text = format!("{value:.digits$}");
    // "-0" and "-0.0" read as a sign error.
    if text.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') {
        text.trim_start_matches('-').to_string()
    } else {
        text.replace('-', "−")
    }
}

/// Draws a waveform chart on `root` (a canvas or an SVG document), at `scale` device pixels
/// per CSS pixel.
pub fn draw_waveforms<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &WaveformChart,
    scale: f64,
) -> Result<(), String> {
    waveforms_on(root, chart, Metrics::new(scale, 1.0))
}

fn waveforms_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &WaveformChart,
    m: Metrics,
) -> Result<(), String> {
    root.fill(&WHITE).map_err(fail)?;
    let run = &chart.run;
    let (width, height) = root.dim_in_pixel();
    let legend_width = m.px(118.0);
    let (plots, legend) = root.split_horizontally((width as i32 - legend_width).max(1));
    let panels = chart.panels.len().max(1) as i32;
    let axis_extra = m.px(24.0);
    let panel_height = ((height as i32 - axis_extra) / panels).max(1);
    let breaks: Vec<i32> = (1..panels).map(|k| k * panel_height).collect();
    let areas = plots.split_by_breakpoints(Vec::<i32>::new(), breaks);
    let span_s = run.stop_s - run.start_s;
    let (factor, unit) = time_unit(span_s);
    let (x0, x1) = (run.start_s * factor, run.stop_s * factor);
    let x_span = x1 - x0;
    for (k, (panel, area)) in chart.panels.iter().zip(&areas).enumerate() {
        let bottom = k + 1 == chart.panels.len();
        let traces = panel.traces.iter().filter_map(|(i, _)| run.traces.get(*i));
        let (low, high) = extent(traces).unwrap_or((-1.0, 1.0));
        let pad = ((high - low) * 0.08).max(0.25);
        let (low, high) = (low - pad, high + pad);
        let mut plot = ChartBuilder::on(area)
            .margin_top(m.px(8.0))
            .margin_right(m.px(8.0))
            .x_label_area_size(if bottom { m.px(44.0) } else { m.px(20.0) })
            .y_label_area_size(m.px(56.0))
            .build_cartesian_2d(x0..x1.max(x0 + f64::EPSILON), low..high)
            .map_err(fail)?;
        let x_format = |v: &f64| tick_label(*v, x_span / 10.0);
        let y_format = |v: &f64| tick_label(*v, (high - low) / 5.0);
        let mut mesh = plot.configure_mesh();
        mesh.x_labels(10)
            .y_labels(5)
            .max_light_lines(0)
            .bold_line_style(GRID.stroke_width(m.stroke(1.0)))
            .axis_style(MUTED.stroke_width(m.stroke(1.0)))
            .set_all_tick_mark_size(m.px(4.0))
            .label_style(m.font(11.0).color(&INK))
            .axis_desc_style(m.font(12.0).color(&INK))
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .y_desc("volts (V)");
        if bottom {
            mesh.x_desc(format!("time ({unit})"));
        }
        mesh.draw().map_err(fail)?;
        let columns = plot.plotting_area().dim_in_pixel().0 as usize;
        for &(index, pen) in &panel.traces {
            let Some(trace) = run.traces.get(index) else { continue };
            let style = pen_colour(pen).stroke_width(m.stroke(1.5));
            plot.draw_series(LineSeries::new(envelope(run, trace, columns, factor), style)).map_err(fail)?;
        }
        // The legend beside the panel: its title, then a stroke and a name per trace.
        let top = k as i32 * panel_height + m.px(12.0);
        legend
            .draw(&Text::new(panel.title.clone(), (m.px(6.0), top), m.bold(12.0).color(&INK)))
            .map_err(fail)?;
        for (row, &(index, pen)) in panel.traces.iter().enumerate() {
            let Some(trace) = run.traces.get(index) else { continue };
            let y = top + m.px(22.0) + row as i32 * m.px(18.0);
            let colour = pen_colour(pen);
            legend
                .draw(&PathElement::new(
                    vec![(m.px(6.0), y), (m.px(26.0), y)],
                    colour.stroke_width(m.stroke(2.5)),
                ))
                .map_err(fail)?;
            let style = m.font(11.0).color(&INK).pos(Pos::new(HPos::Left, VPos::Center));
            legend.draw(&Text::new(trace.label.clone(), (m.px(32.0), y), style)).map_err(fail)?;
        }
    }
    root.present().map_err(fail)
}

/// Draws a timing diagram on `root`: lanes top to bottom, each trace scaled to its own swing
/// (named with its levels at the left), active input edges marked, the count after each edge
/// written above the lanes where there is room.
pub fn draw_timing_diagram<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    diagram: &TimingDiagram,
    scale: f64,
) -> Result<(), String> {
    timing_diagram_on(root, diagram, Metrics::new(scale, 1.0))
}

fn timing_diagram_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    diagram: &TimingDiagram,
    m: Metrics,
) -> Result<(), String> {
    root.fill(&WHITE).map_err(fail)?;
    let run = &diagram.run;
    let lanes = run.traces.len().max(1);
    let top_band = 0.7;
    let y_max = lanes as f64 + top_band;
    let span_s = run.stop_s - run.start_s;
    let (factor, unit) = time_unit(span_s);
    let (x0, x1) = (run.start_s * factor, run.stop_s * factor);
    let x_span = x1 - x0;
    let mut plot = ChartBuilder::on(root)
        .margin_top(m.px(6.0))
        .margin_right(m.px(12.0))
        .x_label_area_size(m.px(44.0))
        .y_label_area_size(m.px(128.0))
        .build_cartesian_2d(x0..x1.max(x0 + f64::EPSILON), 0.0..y_max)
        .map_err(fail)?;
    let x_format = |v: &f64| tick_label(*v, x_span / 10.0);
    plot.configure_mesh()
        .x_labels(10)
        .y_labels(0)
        // The edge marks are the diagram's vertical grid.
        .disable_x_mesh()
        .disable_y_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID.stroke_width(m.stroke(1.0)))
        .axis_style(MUTED.stroke_width(m.stroke(1.0)))
        .set_all_tick_mark_size(m.px(4.0))
        .label_style(m.font(11.0).color(&INK))
        .axis_desc_style(m.font(12.0).color(&INK))
        .x_label_formatter(&x_format)
        .x_desc(format!("time ({unit})"))
        .draw()
        .map_err(fail)?;
    let (columns, _) = plot.plotting_area().dim_in_pixel();
    let pixels_per_period = match diagram.edge_times_s.as_slice() {
        [first, second, ..] => (second - first) * factor / x_span.max(f64::MIN_POSITIVE) * f64::from(columns),
        _ => 0.0,
    };
    // Active edges as thin vertical marks through every lane, while they stay apart.
    if pixels_per_period >= f64::from(m.px(6.0)) {
        let edges = diagram.edge_times_s.iter().take(diagram.counts.len());
        plot.draw_series(edges.map(|&t| {
            PathElement::new(
                vec![(t * factor, 0.0), (t * factor, lanes as f64)],
                EDGE_MARK.stroke_width(m.stroke(1.0)),
            )
        }))
        .map_err(fail)?;
    }
    for (lane, trace) in run.traces.iter().enumerate() {
        let base = (lanes - 1 - lane) as f64 + 0.15;
        let (low, high) = extent(std::iter::once(trace)).unwrap_or((0.0, 1.0));
        let swing = (high - low).max(1e-9);
        let points = envelope(run, trace, columns as usize, factor)
            .into_iter()
            .map(|(x, v)| (x, base + 0.7 * (v - low) / swing));
        let pen = if lane == 0 { Pen::Input } else { Pen::First };
        plot.draw_series(LineSeries::new(points, pen_colour(pen).stroke_width(m.stroke(1.5))))
            .map_err(fail)?;
        let (px, py) = plot.backend_coord(&(x0, base + 0.35));
        let name = m.font(11.5).color(&INK).pos(Pos::new(HPos::Right, VPos::Bottom));
        root.draw(&Text::new(trace.label.clone(), (px - m.px(8.0), py), name)).map_err(fail)?;
        let levels = if diagram.logic {
            "logic 0 / 1".to_string()
        } else {
            format!("{} … {} V", tick_label(low, swing / 10.0), tick_label(high, swing / 10.0))
        };
        let small = m.font(10.0).color(&MUTED).pos(Pos::new(HPos::Right, VPos::Top));
        root.draw(&Text::new(levels, (px - m.px(8.0), py + m.px(2.0)), small)).map_err(fail)?;
    }
    // Counts above the lanes, centred in the period each was read in. When they do not all
    // fit, every s-th pulse's count (s from 1, 2, 5, 10, 20, 50, …, the least that fits);
    // a count that could not be read ("?") is always shown.
    let widest = diagram.counts.iter().flatten().max().map_or(1, |c| c.to_string().len()) as f64;
    let stride = count_label_stride(f64::from(m.px(7.0 * widest + 4.0)), pixels_per_period);
    for (k, count) in diagram.counts.iter().enumerate() {
        if count.is_some() && (k + 1) % stride != 0 {
            continue;
        }
        let (Some(start), Some(end)) = (diagram.edge_times_s.get(k), diagram.edge_times_s.get(k + 1)) else {
            continue;
        };
        let (text, colour) = match count {
            Some(c) => (c.to_string(), INK),
            None => ("?".to_string(), FAIL),
        };
        let style = m.font(11.0).color(&colour).pos(Pos::new(HPos::Center, VPos::Center));
        let at = (0.5 * (start + end) * factor, lanes as f64 + 0.5 * top_band);
        plot.draw_series(std::iter::once(Text::new(text, at, style))).map_err(fail)?;
    }
    let (px, py) = plot.backend_coord(&(x0, lanes as f64 + 0.5 * top_band));
    let label = m.bold(11.5).color(&INK).pos(Pos::new(HPos::Right, VPos::Center));
    root.draw(&Text::new("count".to_string(), (px - m.px(8.0), py), label)).map_err(fail)?;
    root.present().map_err(fail)
}

/// Label every `stride`-th count: the least of 1, 2, 5, 10, 20, 50, … whose labels, `needed_px`
/// wide, fit periods `period_px` wide.
fn count_label_stride(needed_px: f64, period_px: f64) -> usize {
    let mut decade = 1usize;
    loop {
        for step in [1, 2, 5] {
            let stride = step * decade;
            // (A hundred million pulses is more than any diagram holds.)
            if stride as f64 * period_px >= needed_px || decade >= 100_000_000 {
                return stride;
            }
        }
        decade *= 10;
    }
}

/// The waveform chart as an SVG document `width` × `height` user units (for print).
pub fn waveforms_svg(chart: &WaveformChart, width: u32, height: u32) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        waveforms_on(&root, chart, Metrics::new(1.0, SVG_FONT_SHRINK))?;
    }
    Ok(svg)
}

/// The timing diagram as an SVG document (for print).
pub fn timing_diagram_svg(diagram: &TimingDiagram, width: u32, height: u32) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        timing_diagram_on(&root, diagram, Metrics::new(1.0, SVG_FONT_SHRINK))?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn square_run() -> DecimatedRun {
        let trace = |node: &str, label: &str, phase: bool| DecimatedTrace {
            node: node.to_string(),
            label: label.to_string(),
            min_v: (0..100).map(|i| if (i / 25 % 2 == 0) == phase { 0.1 } else { 8.9 }).collect(),
            max_v: (0..100).map(|i| if (i / 25 % 2 == 0) == phase { 0.2 } else { 9.0 }).collect(),
        };
        DecimatedRun {
            start_s: 0.0,
            stop_s: 40e-6,
            buckets: 100,
            recorded_points: 1000,
            traces: vec![trace("in", "input", true), trace("c1", "Q1 collector", false)],
        }
    }

    #[test]
    fn envelope_keeps_each_column_between_its_minimum_and_maximum() {
        let run = square_run();
        let points = envelope(&run, &run.traces[1], 10, 1e6);
        assert!(points.iter().all(|&(_, v)| (0.1..=9.0).contains(&v)), "{points:?}");
        assert!(points.iter().any(|&(_, v)| v == 9.0) && points.iter().any(|&(_, v)| v == 0.1));
        assert!(points.windows(2).all(|w| w[0].0 <= w[1].0), "time runs forward");
        assert!(points.len() <= 20, "at most two points per column: {}", points.len());
    }

    /// Every dropped point must lie on the kept line: between its kept neighbours in time, at
    /// their common level.
    #[test]
    fn flat_runs_keep_only_their_ends_and_the_line_is_unchanged() {
        let full: Vec<(f64, f64)> =
            [(0.0, 0.0), (1.0, 0.0), (2.0, 0.0), (3.0, 1.0), (4.0, 1.0), (5.0, 1.0), (6.0, 1.0), (7.0, 0.5)]
                .to_vec();
        let kept = without_flat_interiors(full.clone());
        assert_eq!(kept, vec![(0.0, 0.0), (2.0, 0.0), (3.0, 1.0), (6.0, 1.0), (7.0, 0.5)]);
        for point in full.iter().filter(|p| !kept.contains(p)) {
            let on_line = kept
                .windows(2)
                .any(|w| w[0].0 <= point.0 && point.0 <= w[1].0 && w[0].1 == point.1 && w[1].1 == point.1);
            assert!(on_line, "{point:?} dropped off the line");
        }
        // Ideal logic levels (minimum = maximum in every bucket), four flat stretches.
        let mut run = square_run();
        let levels: Vec<f64> = (0..100).map(|i| f64::from(i / 25 % 2 == 0)).collect();
        run.traces[0].min_v = levels.clone();
        run.traces[0].max_v = levels;
        let logic = envelope(&run, &run.traces[0], 100, 1e6);
        assert_eq!(logic.len(), 8, "a square wave keeps the two ends of each level: {logic:?}");
    }

    #[test]
    fn waveform_svg_labels_both_axes_and_names_the_traces() {
        let run = square_run();
        let chart = WaveformChart {
            run,
            panels: vec![
                Panel { title: "Input".to_string(), traces: vec![(0, Pen::Input)] },
                Panel { title: "Collectors".to_string(), traces: vec![(1, Pen::First)] },
            ],
        };
        let svg = waveforms_svg(&chart, 720, 400).unwrap_or_else(|e| unreachable!("{e}"));
        for expected in ["<svg", "time (µs)", "volts (V)", "Q1 collector", "Collectors", "<polyline"] {
            assert!(svg.contains(expected), "SVG lacks {expected}");
        }
    }

    #[test]
    fn timing_diagram_svg_has_a_lane_per_trace_and_the_counts() {
        let diagram = TimingDiagram {
            run: square_run(),
            edge_times_s: vec![10e-6, 20e-6, 30e-6, 40e-6],
            counts: vec![Some(1), Some(0), None],
            logic: false,
        };
        let svg = timing_diagram_svg(&diagram, 720, 300).unwrap_or_else(|e| unreachable!("{e}"));
        // plotters writes each text on a line of its own inside its element.
        for expected in
            ["input", "Q1 collector", "count", "\n1\n</text>", "\n0\n</text>", "\n?\n</text>", "time (µs)"]
        {
            assert!(svg.contains(expected), "SVG lacks {expected}");
        }
    }

    #[test]
    fn counts_too_dense_to_label_each_are_labelled_every_few_pulses() {
        assert_eq!(count_label_stride(18.0, 20.0), 1);
        assert_eq!(count_label_stride(18.0, 7.5), 5);
        assert_eq!(count_label_stride(18.0, 0.5), 50);
        // Sixty periods in a 600-unit SVG: about 7 units a period, too few for "59".
        let mut run = square_run();
        run.stop_s = 61e-6;
        let diagram = TimingDiagram {
            run,
            edge_times_s: (0..=60).map(|k| (0.5 + f64::from(k)) * 1e-6).collect(),
            counts: (1..=60u64).map(|k| if k == 7 { None } else { Some(k % 60) }).collect(),
            logic: true,
        };
        let svg = timing_diagram_svg(&diagram, 600, 300).unwrap_or_else(|e| unreachable!("{e}"));
        let label = |text: &str| svg.contains(&format!("\n{text}\n</text>"));
        // (15, 35 and 55 are not time ticks, which fall on the tens.)
        assert!(label("15") && label("35") && label("55"), "every fifth count is labelled");
        assert!(!label("11") && !label("54"), "the counts between are left out");
        assert!(label("?"), "an unread count is always shown");
    }

    #[test]
    fn tick_labels_never_show_a_negative_zero() {
        assert_eq!(tick_label(-0.0001, 0.5), "0.0");
        assert_eq!(tick_label(-2.5, 0.5), "−2.5");
        assert_eq!(tick_label(40.0, 9.0), "40");
    }
}
