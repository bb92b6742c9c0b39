//! Charts of the tolerance views, drawn with plotters: each DC margin against temperature
//! (nominal and worst curves with the required level) and the Monte Carlo histograms of the
//! tightest stage's margin per trial (with the required level marked), one small panel per
//! margin. The same code draws on a canvas for the screen and into SVG for print. Rendering
//! only: every number comes from `flipwright::tolerance`.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::{Deserialize, Serialize};

use flipwright::tolerance::{TemperatureSweep, YieldReport};

use crate::plots::{fail, pen_colour, tick_label, Metrics, Pen, FAIL, GRID, INK, MUTED, SVG_FONT_SHRINK};

/// One margin's curves over the temperature sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CurvePanel {
    pub title: String,
    /// SI unit of the margin ("V", "A", "W"), empty for a ratio.
    pub unit: String,
    pub required: f64,
    pub nominal: Vec<f64>,
    pub worst: Vec<f64>,
}

/// Every DC margin against temperature, one panel each.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TemperatureChart {
    pub temperatures_c: Vec<f64>,
    pub panels: Vec<CurvePanel>,
}

/// One margin's histogram: `counts[i]` trials fell in `[edges[i], edges[i+1])`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HistogramPanel {
    pub title: String,
    pub unit: String,
    pub required: f64,
    pub edges: Vec<f64>,
    pub counts: Vec<u32>,
    pub failing_trials: u32,
}

/// The Monte Carlo histograms of a run, one panel per DC margin.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HistogramChart {
    pub trials: u32,
    pub panels: Vec<HistogramPanel>,
}

impl TemperatureChart {
    pub fn from_sweep(sweep: &TemperatureSweep) -> TemperatureChart {
        TemperatureChart {
            temperatures_c: sweep.temperatures_c.clone(),
            panels: sweep
                .margins
                .iter()
                .map(|m| CurvePanel {
                    title: m.title.clone(),
                    unit: m.unit.clone(),
                    required: m.required,
                    nominal: m.nominal.clone(),
                    worst: m.worst.clone(),
                })
                .collect(),
        }
    }
}

impl HistogramChart {
    pub fn from_report(report: &YieldReport) -> HistogramChart {
        HistogramChart {
            trials: report.options.trials,
            panels: report
                .margins
                .iter()
                .map(|m| HistogramPanel {
                    title: m.title.clone(),
                    unit: m.unit.clone(),
                    required: m.required,
                    edges: m.histogram.edges.clone(),
                    counts: m.histogram.counts.clone(),
                    failing_trials: m.failing_trials,
                })
                .collect(),
        }
    }
}

/// Panels per row of the grid.
const COLUMNS: usize = 2;
/// Height of the legend strip along the top, CSS pixels.
const LEGEND_CSS: f64 = 26.0;

const NOMINAL_PEN: Pen = Pen::First;
const WORST_PEN: Pen = Pen::Second;
const BAR: RGBColor = RGBColor(0x6f, 0x8f, 0xb0);
const BAR_FAILING: RGBColor = RGBColor(0xd9, 0x7a, 0x7a);

/// The axis unit for values of `unit` whose largest magnitude is `magnitude`: the factor to
/// multiply by and its name ("mV"); a ratio stays as it is.
fn axis_unit(unit: &str, magnitude: f64) -> (f64, String) {
    if unit.is_empty() {
        return (1.0, "ratio".to_string());
    }
    // Zero (a rating headroom required to be ≥ 0) has no magnitude to scale to.
    let (factor, prefix) = if !magnitude.is_finite() || magnitude == 0.0 || magnitude >= 1.0 {
        (1.0, "")
    } else if magnitude >= 1e-3 {
        (1e3, "m")
    } else if magnitude >= 1e-6 {
        (1e6, "µ")
    } else {
        (1e9, "n")
    };
    (factor, format!("{prefix}{unit}"))
}

/// Three significant digits, without trailing zeros.
fn significant(value: f64) -> String {
    let digits = if value == 0.0 { 0 } else { (2 - value.abs().log10().floor() as i32).clamp(0, 6) as usize };
    let text = format!("{value:.digits$}");
    let text =
        if text.contains('.') { text.trim_end_matches('0').trim_end_matches('.').to_string() } else { text };
    text.replace('-', "−")
}

fn capitalised(title: &str) -> String {
    let mut chars = title.chars();
    match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => String::new(),
    }
}

/// Lowest and highest finite value, or `None`.
fn finite_range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (low, high) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(v), h.max(v)));
    (low <= high).then_some((low, high))
}

/// A range with some room around it, never empty.
fn padded(low: f64, high: f64) -> (f64, f64) {
    let span = high - low;
    let pad = if span > 0.0 { 0.08 * span } else { 0.1 * low.abs().max(1e-12) };
    (low - pad, high + pad)
}

/// A dashed horizontal or vertical stroke from `from` to `to` in chart coordinates.
fn dashes(from: (f64, f64), to: (f64, f64), count: usize) -> Vec<[(f64, f64); 2]> {
    let count = count.max(1);
    (0..count)
        .map(|k| {
            let at = |f: f64| (from.0 + (to.0 - from.0) * f, from.1 + (to.1 - from.1) * f);
            let start = k as f64 / count as f64;
            [at(start), at(start + 0.6 / count as f64)]
        })
        .collect()
}

/// The legend strip: a stroke (solid, dashed or a filled box) and a name per entry.
enum Swatch {
    Line(RGBColor),
    Dashed(RGBColor),
    Box(RGBColor),
}

fn legend<DB: DrawingBackend>(
    strip: &DrawingArea<DB, Shift>,
    entries: &[(Swatch, &str)],
    m: Metrics,
) -> Result<(), String> {
    let y = m.px(LEGEND_CSS / 2.0);
    let mut x = m.px(60.0);
    for (swatch, name) in entries {
        match swatch {
            Swatch::Line(colour) => strip
                .draw(&PathElement::new(
                    vec![(x, y), (x + m.px(22.0), y)],
                    colour.stroke_width(m.stroke(2.5)),
                ))
                .map_err(fail)?,
            Swatch::Dashed(colour) => {
                for part in [(0.0, 6.0), (9.0, 15.0), (18.0, 22.0)] {
                    strip
                        .draw(&PathElement::new(
                            vec![(x + m.px(part.0), y), (x + m.px(part.1), y)],
                            colour.stroke_width(m.stroke(2.0)),
                        ))
                        .map_err(fail)?;
                }
            }
            Swatch::Box(colour) => strip
                .draw(&Rectangle::new([(x, y - m.px(5.0)), (x + m.px(22.0), y + m.px(5.0))], colour.filled()))
                .map_err(fail)?,
        }
        let style = m.font(11.5).color(&INK).pos(Pos::new(HPos::Left, VPos::Center));
        strip.draw(&Text::new(name.to_string(), (x + m.px(28.0), y), style)).map_err(fail)?;
        x += m.px(40.0 + 6.5 * name.chars().count() as f64);
    }
    Ok(())
}

/// Splits `root` into the legend strip and one area per panel, `COLUMNS` to a row.
fn grid<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    panels: usize,
    m: Metrics,
) -> (DrawingArea<DB, Shift>, Vec<DrawingArea<DB, Shift>>) {
    let (strip, body) = root.split_vertically(m.px(LEGEND_CSS));
    let rows = panels.div_ceil(COLUMNS).max(1);
    let areas = body.split_evenly((rows, COLUMNS));
    (strip, areas)
}

/// Draws the margins-against-temperature chart on `root` at `scale` device pixels per CSS pixel.
pub fn draw_temperature_chart<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &TemperatureChart,
    scale: f64,
) -> Result<(), String> {
    temperature_chart_on(root, chart, Metrics::new(scale, 1.0))
}

fn temperature_chart_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &TemperatureChart,
    m: Metrics,
) -> Result<(), String> {
    root.fill(&WHITE).map_err(fail)?;
    let (strip, areas) = grid(root, chart.panels.len(), m);
    legend(
        &strip,
        &[
            (Swatch::Line(pen_colour(NOMINAL_PEN)), "nominal (other parameters at nominal)"),
            (Swatch::Line(pen_colour(WORST_PEN)), "worst case at that temperature"),
            (Swatch::Dashed(FAIL), "required"),
        ],
        m,
    )?;
    let temperatures = &chart.temperatures_c;
    let (t0, t1) = finite_range(temperatures.iter().copied()).unwrap_or((0.0, 1.0));
    let t1 = if t1 > t0 { t1 } else { t0 + 1.0 };
    for (panel, area) in chart.panels.iter().zip(&areas) {
        let values = panel.nominal.iter().chain(&panel.worst).copied().chain(std::iter::once(panel.required));
        let (low, high) = finite_range(values).unwrap_or((0.0, 1.0));
        let (factor, unit) = axis_unit(&panel.unit, low.abs().max(high.abs()));
        let (low, high) = padded(low * factor, high * factor);
        let mut plot = ChartBuilder::on(area)
            .caption(capitalised(&panel.title), m.bold(11.5).color(&INK))
            .margin(m.px(6.0))
            .margin_right(m.px(12.0))
            .x_label_area_size(m.px(34.0))
            .y_label_area_size(m.px(58.0))
            .build_cartesian_2d(t0..t1, low..high)
            .map_err(fail)?;
        let x_format = |v: &f64| tick_label(*v, (t1 - t0) / 6.0);
        let y_format = |v: &f64| tick_label(*v, (high - low) / 4.0);
        plot.configure_mesh()
            .x_labels(6)
            .y_labels(4)
            .max_light_lines(0)
            .bold_line_style(GRID.stroke_width(m.stroke(1.0)))
            .axis_style(MUTED.stroke_width(m.stroke(1.0)))
            .set_all_tick_mark_size(m.px(3.0))
            .label_style(m.font(10.5).color(&INK))
            .axis_desc_style(m.font(11.0).color(&INK))
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .x_desc("temperature (°C)")
            .y_desc(format!("margin ({unit})"))
            .draw()
            .map_err(fail)?;
        let required = panel.required * factor;
        if required.is_finite() {
            plot.draw_series(
                dashes((t0, required), (t1, required), 24)
                    .into_iter()
                    .map(|segment| PathElement::new(segment.to_vec(), FAIL.stroke_width(m.stroke(1.5)))),
            )
            .map_err(fail)?;
        }
        for (curve, pen) in [(&panel.nominal, NOMINAL_PEN), (&panel.worst, WORST_PEN)] {
            let points = temperatures
                .iter()
                .zip(curve.iter())
                .filter(|(t, v)| t.is_finite() && v.is_finite())
                .map(|(&t, &v)| (t, v * factor));
            plot.draw_series(LineSeries::new(points, pen_colour(pen).stroke_width(m.stroke(2.0))))
                .map_err(fail)?;
        }
    }
    root.present().map_err(fail)
}

/// Draws the Monte Carlo histograms on `root` at `scale` device pixels per CSS pixel.
pub fn draw_histograms<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &HistogramChart,
    scale: f64,
) -> Result<(), String> {
    histograms_on(root, chart, Metrics::new(scale, 1.0))
}

fn histograms_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &HistogramChart,
    m: Metrics,
) -> Result<(), String> {
    root.fill(&WHITE).map_err(fail)?;
    let (strip, areas) = grid(root, chart.panels.len(), m);
    legend(
        &strip,
        &[
            (Swatch::Box(BAR), "trials per bin (tightest stage of each trial)"),
            (Swatch::Box(BAR_FAILING), "bin wholly below required"),
            (Swatch::Dashed(FAIL), "required"),
        ],
        m,
    )?;
    for (panel, area) in chart.panels.iter().zip(&areas) {
        let title =
            format!("{} · {} of {} fail", capitalised(&panel.title), panel.failing_trials, chart.trials);
        let (Some(&first), Some(&last)) = (panel.edges.first(), panel.edges.last()) else {
            let style = m.font(11.0).color(&MUTED).pos(Pos::new(HPos::Left, VPos::Top));
            area.draw(&Text::new(format!("{title}: no finite values"), (m.px(8.0), m.px(8.0)), style))
                .map_err(fail)?;
            continue;
        };
        let span = (last - first).abs().max(f64::MIN_POSITIVE);
        // The required level is drawn when it lies near the values; far away it would squeeze
        // every bar into one column, so it is named in words instead.
        let required_near = panel.required.is_finite()
            && panel.required >= first - 3.0 * span
            && panel.required <= last + 3.0 * span;
        let (low, high) =
            if required_near { (first.min(panel.required), last.max(panel.required)) } else { (first, last) };
        let (factor, unit) = axis_unit(&panel.unit, low.abs().max(high.abs()));
        let (x0, x1) = padded(low * factor, high * factor);
        let tallest = panel.counts.iter().copied().max().unwrap_or(0).max(1);
        let y1 = f64::from(tallest) * 1.12;
        let mut plot = ChartBuilder::on(area)
            .caption(title, m.bold(11.0).color(&INK))
            .margin(m.px(6.0))
            .margin_right(m.px(12.0))
            .x_label_area_size(m.px(34.0))
            .y_label_area_size(m.px(58.0))
            .build_cartesian_2d(x0..x1, 0.0..y1)
            .map_err(fail)?;
        let x_format = |v: &f64| tick_label(*v, (x1 - x0) / 5.0);
        let y_format = |v: &f64| tick_label(*v, y1 / 4.0);
        plot.configure_mesh()
            .x_labels(5)
            .y_labels(4)
            .max_light_lines(0)
            .disable_x_mesh()
            .bold_line_style(GRID.stroke_width(m.stroke(1.0)))
            .axis_style(MUTED.stroke_width(m.stroke(1.0)))
            .set_all_tick_mark_size(m.px(3.0))
            .label_style(m.font(10.5).color(&INK))
            .axis_desc_style(m.font(11.0).color(&INK))
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .x_desc(format!("margin ({unit})"))
            .y_desc("trials")
            .draw()
            .map_err(fail)?;
        let bars = panel.edges.windows(2).zip(&panel.counts).filter(|(_, &c)| c > 0).map(|(edge, &count)| {
            let (left, right) = (edge.first().copied().unwrap_or(0.0), edge.last().copied().unwrap_or(0.0));
            let colour = if right <= panel.required { BAR_FAILING } else { BAR };
            Rectangle::new([(left * factor, 0.0), (right * factor, f64::from(count))], colour.filled())
        });
        plot.draw_series(bars).map_err(fail)?;
        if required_near {
            let x = panel.required * factor;
            plot.draw_series(
                dashes((x, 0.0), (x, y1), 12)
                    .into_iter()
                    .map(|segment| PathElement::new(segment.to_vec(), FAIL.stroke_width(m.stroke(2.0)))),
            )
            .map_err(fail)?;
        } else if panel.required.is_finite() {
            let (rf, ru) = axis_unit(&panel.unit, panel.required.abs());
            let note = format!("required {} {ru}: off this scale", significant(panel.required * rf));
            let style = m.font(10.0).color(&FAIL).pos(Pos::new(HPos::Left, VPos::Top));
            plot.draw_series(std::iter::once(Text::new(note, (x0 + 0.02 * (x1 - x0), y1), style)))
                .map_err(fail)?;
        }
    }
    root.present().map_err(fail)
}

/// The temperature chart as an SVG document `width` × `height` user units (for print).
pub fn temperature_chart_svg(chart: &TemperatureChart, width: u32, height: u32) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        temperature_chart_on(&root, chart, Metrics::new(1.0, SVG_FONT_SHRINK))?;
    }
    Ok(svg)
}

/// The histograms as an SVG document (for print).
pub fn histograms_svg(chart: &HistogramChart, width: u32, height: u32) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        histograms_on(&root, chart, Metrics::new(1.0, SVG_FONT_SHRINK))?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn temperature_svg_names_every_margin_and_both_axes() {
        let chart = TemperatureChart {
            temperatures_c: vec![-25.0, 25.0, 75.0],
            panels: vec![
                CurvePanel {
                    title: "output swing".to_string(),
                    unit: "V".to_string(),
                    required: 3.0,
                    nominal: vec![7.0, 7.5, 8.0],
                    worst: vec![5.0, 5.5, f64::NAN],
                },
                CurvePanel {
                    title: "collector current against IC(max)".to_string(),
                    unit: "A".to_string(),
                    required: 0.0,
                    nominal: vec![0.09, 0.09, 0.09],
                    worst: vec![0.08, 0.08, 0.08],
                },
            ],
        };
        let svg = temperature_chart_svg(&chart, 700, 300).unwrap_or_else(|e| unreachable!("{e}"));
        for expected in [
            "<svg",
            "Output swing",
            "Collector current",
            "temperature (°C)",
            "margin (V)",
            "margin (mA)",
            "required",
        ] {
            assert!(svg.contains(expected), "SVG lacks {expected}");
        }
    }

    #[test]
    fn histogram_svg_counts_failing_trials_and_says_when_required_is_off_scale() {
        let chart = HistogramChart {
            trials: 10,
            panels: vec![
                HistogramPanel {
                    title: "overdrive factor".to_string(),
                    unit: String::new(),
                    required: 1.5,
                    edges: vec![1.0, 2.0, 3.0],
                    counts: vec![4, 6],
                    failing_trials: 4,
                },
                HistogramPanel {
                    title: "collector–emitter voltage against VCEO".to_string(),
                    unit: "V".to_string(),
                    required: 0.0,
                    edges: vec![30.0, 30.1],
                    counts: vec![10],
                    failing_trials: 0,
                },
            ],
        };
        let svg = histograms_svg(&chart, 700, 300).unwrap_or_else(|e| unreachable!("{e}"));
        assert!(svg.contains("4 of 10 fail") && svg.contains("0 of 10 fail"), "failing counts in the titles");
        assert!(svg.contains("off this scale"), "a far-away required level is named");
        assert!(svg.contains("margin (ratio)") && svg.contains("trials"));
    }

    #[test]
    fn axis_units_take_a_readable_prefix() {
        assert_eq!(axis_unit("A", 0.012), (1e3, "mA".to_string()));
        assert_eq!(axis_unit("V", 8.0), (1.0, "V".to_string()));
        assert_eq!(axis_unit("", 3.0).1, "ratio");
        assert_eq!(axis_unit("V", 0.0), (1.0, "V".to_string()), "required 0 V reads 0 V, not 0 nV");
        assert_eq!(significant(300.0), "300");
        assert_eq!(significant(1.2345), "1.23");
        assert_eq!(significant(-0.05), "−0.05");
    }
}
