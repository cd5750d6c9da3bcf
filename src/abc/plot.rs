//! SVG figures (plotters, SVG backend; text is left to the viewer's fonts). Each function
//! returns the SVG text; the caller writes it atomically.

use super::design::PowerRow;
use super::prior::Prior;
use super::regression::ParameterPosterior;
use super::rejection::ModelShare;
use plotters::prelude::*;

const SIZE: (u32, u32) = (720, 480);

fn finite_range(lo: f64, hi: f64) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    if hi > lo { (lo, hi) } else { (lo - 0.5, lo + 0.5) }
}

/// A number with `digits` significant digits, without trailing zeros (tick and legend labels).
pub fn sig(x: f64, digits: i32) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let decimals = (digits - 1 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

/// Draws vertical intervals `(x, low, high)` with caps `half` pixels wide on each side.
fn intervals<X, DB, CT>(
    chart: &mut ChartContext<'_, DB, CT>,
    bars: &[(X, f64, f64)],
    style: ShapeStyle,
    half: i32,
) -> Option<()>
where
    X: Clone + 'static,
    DB: DrawingBackend,
    CT: CoordTranslate<From = (X, f64)>,
{
    chart
        .draw_series(bars.iter().map(|(x, lo, hi)| PathElement::new([(x.clone(), *lo), (x.clone(), *hi)], style)))
        .ok()?;
    chart
        .draw_series(bars.iter().flat_map(|(x, lo, hi)| {
            [*lo, *hi].map(|y| EmptyElement::at((x.clone(), y)) + PathElement::new([(-half, 0), (half, 0)], style))
        }))
        .ok()?;
    Some(())
}

fn centred(size: u32) -> TextStyle<'static> {
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    TextStyle::from(("sans-serif", size).into_font()).pos(Pos::new(HPos::Center, VPos::Bottom))
}

/// Bars of the rejection model probabilities with ± 2 Monte-Carlo errors, each bar named by
/// its hypothesis and labelled with its probability.
pub fn model_bars(names: &[String], shares: &[ModelShare]) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        let _ = root.fill(&WHITE);
        let n = names.len().max(1);
        let accepted: usize = shares.iter().map(|s| s.accepted).sum();
        let chart = ChartBuilder::on(&root)
            .caption(format!("Posterior model probabilities (rejection ABC, {accepted} accepted)"), ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            // A segmented range 0..k has k + 1 slots.
            .build_cartesian_2d((0..n.max(2) - 1).into_segmented(), 0f64..1.12f64);
        let Ok(mut chart) = chart else { return svg_fallback() };
        let labels: Vec<String> = names.to_vec();
        let _ = chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .disable_x_mesh()
            .x_labels(n)
            .x_label_formatter(&|x| match x {
                SegmentValue::CenterOf(i) => labels.get(*i).cloned().unwrap_or_default(),
                _ => String::new(),
            })
            .x_label_style(("sans-serif", 14))
            .x_desc("hypothesis")
            .y_desc("posterior probability")
            .draw();
        let _ = chart.draw_series(shares.iter().enumerate().map(|(i, s)| {
            let mut bar = Rectangle::new(
                [(SegmentValue::Exact(i), 0.0), (SegmentValue::Exact(i + 1), s.probability)],
                BLUE.mix(0.55).filled(),
            );
            bar.set_margin(0, 0, 25, 25);
            bar
        }));
        let bars: Vec<_> = shares
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let (p, e) = (s.probability, 2.0 * s.mc_error);
                (SegmentValue::CenterOf(i), (p - e).max(0.0), (p + e).min(1.0))
            })
            .collect();
        let _ = intervals(&mut chart, &bars, BLACK.stroke_width(2), 12);
        // A legend entry of its own: the intervals are drawn as two series.
        let _ = chart.draw_series(std::iter::empty::<Circle<(SegmentValue<usize>, f64), i32>>()).map(|a| {
            a.label("± 2 Monte-Carlo errors")
                .legend(|(x, y)| PathElement::new([(x + 10, y - 6), (x + 10, y + 6)], BLACK.stroke_width(2)))
        });
        let _ = chart.draw_series(shares.iter().enumerate().map(|(i, s)| {
            let top = (s.probability + 2.0 * s.mc_error).min(1.0) + 0.015;
            let name = names.get(i).map_or("", String::as_str);
            Text::new(format!("{name}: {}", sig(s.probability, 3)), (SegmentValue::CenterOf(i), top), centred(14))
        }));
        let _ = chart.configure_series_labels().position(SeriesLabelPosition::UpperRight).border_style(BLACK).draw();
        let _ = root.present();
    }
    svg
}

/// Weighted histogram of the adjusted posterior sample, as a density, with the prior
/// density, the prior range, the posterior median and 95% interval, each in the legend.
/// A log-uniform prior is drawn on a log axis: the histogram and the prior are then
/// densities of log10 θ (the prior is flat there) and ticks show θ itself.
pub fn posterior_density(hypothesis: &str, post: &ParameterPosterior, prior: &Prior) -> String {
    let log = matches!(prior.kind, super::prior::PriorKind::LogUniform) && prior.low > 0.0;
    let to_axis = |x: f64| if log { x.log10() } else { x };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        let _ = root.fill(&WHITE);
        let vals: Vec<(f64, f64)> = post
            .adjusted
            .iter()
            .zip(&post.weights)
            .filter(|(v, w)| v.is_finite() && **w > 0.0 && (!log || **v > 0.0))
            .map(|(&v, &w)| (to_axis(v), w))
            .collect();
        let lo = vals.iter().map(|v| v.0).fold(to_axis(prior.low), f64::min);
        let hi = vals.iter().map(|v| v.0).fold(to_axis(prior.high), f64::max);
        let (lo, hi) = finite_range(lo, hi);
        let bins = 30usize;
        let width = (hi - lo) / bins as f64;
        let mut h = vec![0.0; bins];
        let total: f64 = vals.iter().map(|v| v.1).sum();
        for &(v, w) in &vals {
            let b = (((v - lo) / width) as usize).min(bins - 1);
            h[b] += w / (total.max(1e-300) * width);
        }
        // On the log axis the prior of log10 θ is flat: 1 / (log10 high - log10 low).
        let prior_at = |u: f64| {
            if log {
                if (to_axis(prior.low)..=to_axis(prior.high)).contains(&u) {
                    1.0 / (to_axis(prior.high) - to_axis(prior.low))
                } else {
                    0.0
                }
            } else {
                prior.density(u)
            }
        };
        let grid = |i: usize| lo + (hi - lo) * i as f64 / 200.0;
        let prior_max = (0..=200).map(|i| prior_at(grid(i))).fold(0.0, f64::max);
        let ymax = h.iter().copied().fold(prior_max, f64::max).max(1e-12) * 1.25;
        let scale = if log { " (log scale)" } else { "" };
        let chart = ChartBuilder::on(&root)
            .caption(format!("{hypothesis}: posterior of {}", post.parameter), ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(70)
            .build_cartesian_2d(lo..hi, 0f64..ymax);
        let Ok(mut chart) = chart else { return svg_fallback() };
        let tick = |x: &f64| if log { sig(10f64.powf(*x), 3) } else { sig(*x, 4) };
        let y_desc = if log { "density of log10 value" } else { "density" };
        let _ = chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            // On the log axis the ticks are drawn below, at round values of θ (1-2-5), not at
            // round logarithms.
            .x_labels(if log { 0 } else { 10 })
            .x_label_formatter(&tick)
            .y_label_formatter(&|y| sig(*y, 3))
            .x_desc(format!("{}{scale}", post.parameter))
            .y_desc(y_desc)
            .draw();
        if log {
            let style = centred(12).pos(plotters::style::text_anchor::Pos::new(
                plotters::style::text_anchor::HPos::Center,
                plotters::style::text_anchor::VPos::Top,
            ));
            for t in crate::report::figures::log_ticks(10f64.powf(lo), 10f64.powf(hi)) {
                let (px, py) = chart.backend_coord(&(t.log10(), 0.0));
                let _ = root.draw(&PathElement::new([(px, py), (px, py + 5)], BLACK.stroke_width(1)));
                let _ = root.draw(&Text::new(sig(t, 3), (px, py + 7), style.clone()));
            }
        }
        let _ = chart
            .draw_series(h.iter().enumerate().map(|(i, &d)| {
                let x0 = lo + i as f64 * width;
                Rectangle::new([(x0, 0.0), (x0 + width, d)], BLUE.mix(0.45).filled())
            }))
            .map(|a| {
                a.label("posterior (adjusted, weighted)")
                    .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], BLUE.mix(0.45).filled()))
            });
        let _ = chart
            .draw_series(LineSeries::new((0..=200).map(|i| (grid(i), prior_at(grid(i)))), RED.stroke_width(2)))
            .map(|a| {
                let kind = if log { "prior (log-uniform)" } else { "prior (uniform)" };
                a.label(kind).legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], RED.stroke_width(2)))
            });
        let _ = chart
            .draw_series(DashedLineSeries::new(
                vec![(to_axis(prior.low), 0.0), (to_axis(prior.low), ymax)],
                6,
                4,
                RED.into(),
            ))
            .map(|a| {
                a.label(format!("prior range [{}, {}]", sig(prior.low, 4), sig(prior.high, 4)))
                    .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], RED.stroke_width(1)))
            });
        let _ = chart.draw_series(DashedLineSeries::new(
            vec![(to_axis(prior.high), 0.0), (to_axis(prior.high), ymax)],
            6,
            4,
            RED.into(),
        ));
        if post.median.is_finite() && (!log || post.median > 0.0) {
            let m = to_axis(post.median);
            let _ =
                chart.draw_series(LineSeries::new(vec![(m, 0.0), (m, ymax * 0.8)], BLACK.stroke_width(2))).map(|a| {
                    a.label(format!("median {}", sig(post.median, 4)))
                        .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], BLACK.stroke_width(2)))
                });
        }
        let ends: Vec<f64> =
            [post.low_95, post.high_95].into_iter().filter(|x| x.is_finite() && (!log || *x > 0.0)).collect();
        for (k, &x) in ends.iter().enumerate() {
            let a = chart.draw_series(DashedLineSeries::new(
                vec![(to_axis(x), 0.0), (to_axis(x), ymax * 0.8)],
                4,
                3,
                BLACK.stroke_width(1),
            ));
            if k == 0 {
                let _ = a.map(|a| {
                    a.label(format!("95% interval [{}, {}]", sig(post.low_95, 4), sig(post.high_95, 4)))
                        .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], BLACK.stroke_width(1)))
                });
            }
        }
        let _ = chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw();
        let _ = root.present();
    }
    svg
}

/// Power of each design (a point, in order of cost from the top) with its Wilson 95%
/// interval, the design named with its cost on the left, and the target power as a labelled
/// dashed line. Designs are not joined: they are separate choices, not points on a curve.
pub fn power_curve(statistic: &str, rows: &[&PowerRow], target: f64) -> String {
    let mut pts: Vec<&&PowerRow> = rows.iter().collect();
    pts.sort_by(|a, b| a.cost.total_cmp(&b.cost).then_with(|| a.design.cmp(&b.design)));
    let n = pts.len().max(1);
    let labels: Vec<String> = pts.iter().map(|r| format!("{} (cost {})", r.design, sig(r.cost, 4))).collect();
    let widest = labels.iter().map(|l| l.chars().count()).max().unwrap_or(10) as u32;
    // The legend sits below the plot (no empty design slot above the top one).
    let height = (160 + 45 * n as u32).max(280) + 60;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIZE.0.max(widest * 7 + 420), height)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let (plot, below) = root.split_vertically(height - 60);
        let chart = ChartBuilder::on(&plot)
            .caption(format!("Power of {statistic} per design (target {})", sig(target, 3)), ("sans-serif", 18))
            .margin(12)
            .margin_right(25)
            .x_label_area_size(45)
            .y_label_area_size(widest * 7 + 20)
            // 0..k has k + 1 slots: one per design.
            .build_cartesian_2d(0f64..1.0f64, (0..n.max(2) - 1).into_segmented());
        let Ok(mut chart) = chart else { return svg_fallback() };
        let _ = chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .disable_y_mesh()
            .y_labels(n)
            .y_label_formatter(&|y| match y {
                SegmentValue::CenterOf(i) => labels.get(*i).cloned().unwrap_or_default(),
                _ => String::new(),
            })
            .y_label_style(("sans-serif", 13))
            .x_desc("power (share of alternative datasets rejected)")
            .y_desc("design (cheapest at the bottom)")
            .draw();
        let _ = chart.draw_series(pts.iter().enumerate().map(|(i, r)| {
            PathElement::new(
                [(r.low_95, SegmentValue::CenterOf(i)), (r.high_95, SegmentValue::CenterOf(i))],
                BLACK.stroke_width(1),
            )
        }));
        let _ = chart.draw_series(pts.iter().enumerate().flat_map(|(i, r)| {
            [r.low_95, r.high_95].map(|x| {
                EmptyElement::at((x, SegmentValue::CenterOf(i)))
                    + PathElement::new([(0, -8), (0, 8)], BLACK.stroke_width(1))
            })
        }));
        let _ = chart.draw_series(
            pts.iter().enumerate().map(|(i, r)| Circle::new((r.power, SegmentValue::CenterOf(i)), 5, BLUE.filled())),
        );
        let _ = chart.draw_series(pts.iter().enumerate().map(|(i, r)| {
            EmptyElement::at((r.power, SegmentValue::CenterOf(i))) + Text::new(sig(r.power, 2), (0, -8), centred(12))
        }));
        let _ = chart.draw_series(DashedLineSeries::new(
            vec![(target, SegmentValue::Exact(0)), (target, SegmentValue::Last)],
            8,
            4,
            RED.stroke_width(2),
        ));
        use crate::report::figures::Key;
        let _ = crate::report::figures::legend_strip(
            &below,
            &[
                (Key::Dot(BLUE), "power".to_string()),
                (Key::Line(BLACK, 1), "Wilson 95% interval".to_string()),
                (Key::Line(RED, 2), format!("target power {}", sig(target, 3))),
            ],
        );
        let _ = root.present();
    }
    svg
}

fn svg_fallback() -> String {
    format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{}\" height=\"{}\"><text x=\"10\" y=\"20\">figure could not be drawn</text></svg>",
        SIZE.0, SIZE.1
    )
}
