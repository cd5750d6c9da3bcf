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

/// Bars of the rejection model probabilities with ± 2 Monte-Carlo errors.
pub fn model_bars(names: &[String], shares: &[ModelShare]) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        let _ = root.fill(&WHITE);
        let n = names.len().max(1);
        let chart = ChartBuilder::on(&root)
            .caption("posterior model probabilities (rejection ABC)", ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(0f64..n as f64, 0f64..1f64);
        let Ok(mut chart) = chart else { return svg_fallback() };
        let labels: Vec<String> = names.to_vec();
        let _ = chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(n)
            .x_label_formatter(&|x| {
                let i = x.floor() as usize;
                if (x - i as f64 - 0.5).abs() < 0.26 {
                    labels.get(i).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            })
            .y_desc("probability")
            .draw();
        let _ = chart.draw_series(shares.iter().enumerate().map(|(i, s)| {
            Rectangle::new([(i as f64 + 0.2, 0.0), (i as f64 + 0.8, s.probability)], BLUE.mix(0.6).filled())
        }));
        let _ = chart.draw_series(shares.iter().enumerate().map(|(i, s)| {
            let x = i as f64 + 0.5;
            PathElement::new(
                vec![
                    (x, (s.probability - 2.0 * s.mc_error).max(0.0)),
                    (x, (s.probability + 2.0 * s.mc_error).min(1.0)),
                ],
                BLACK.stroke_width(2),
            )
        }));
        let _ = root.present();
    }
    svg
}

/// Weighted histogram of the adjusted posterior sample, as a density, with the prior
/// density drawn as a red line and its range marked by dashed lines.
pub fn posterior_density(hypothesis: &str, post: &ParameterPosterior, prior: &Prior) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        let _ = root.fill(&WHITE);
        let vals: Vec<(f64, f64)> = post
            .adjusted
            .iter()
            .zip(&post.weights)
            .filter(|(v, w)| v.is_finite() && **w > 0.0)
            .map(|(&v, &w)| (v, w))
            .collect();
        let lo = vals.iter().map(|v| v.0).fold(prior.low, f64::min);
        let hi = vals.iter().map(|v| v.0).fold(prior.high, f64::max);
        let (lo, hi) = finite_range(lo, hi);
        let bins = 30usize;
        let width = (hi - lo) / bins as f64;
        let mut h = vec![0.0; bins];
        let total: f64 = vals.iter().map(|v| v.1).sum();
        for &(v, w) in &vals {
            let b = (((v - lo) / width) as usize).min(bins - 1);
            h[b] += w / (total.max(1e-300) * width);
        }
        let prior_max = (0..=200).map(|i| prior.density(lo + (hi - lo) * i as f64 / 200.0)).fold(0.0, f64::max);
        let ymax = h.iter().copied().fold(prior_max, f64::max).max(1e-12) * 1.1;
        let chart = ChartBuilder::on(&root)
            .caption(format!("{hypothesis}: {} (posterior, prior in red)", post.parameter), ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(60)
            .build_cartesian_2d(lo..hi, 0f64..ymax);
        let Ok(mut chart) = chart else { return svg_fallback() };
        let _ = chart.configure_mesh().x_desc(post.parameter.as_str()).y_desc("density").draw();
        let _ = chart.draw_series(h.iter().enumerate().map(|(i, &d)| {
            let x0 = lo + i as f64 * width;
            Rectangle::new([(x0, 0.0), (x0 + width, d)], BLUE.mix(0.5).filled())
        }));
        let _ = chart.draw_series(LineSeries::new(
            (0..=200).map(|i| {
                let x = lo + (hi - lo) * i as f64 / 200.0;
                (x, prior.density(x))
            }),
            RED.stroke_width(2),
        ));
        for x in [prior.low, prior.high] {
            let _ = chart.draw_series(DashedLineSeries::new(vec![(x, 0.0), (x, ymax)], 6, 4, RED.into()));
        }
        for x in [post.low_95, post.median, post.high_95] {
            if x.is_finite() {
                let _ = chart.draw_series(LineSeries::new(vec![(x, 0.0), (x, ymax * 0.9)], BLACK.stroke_width(1)));
            }
        }
        let _ = root.present();
    }
    svg
}

/// Power against design cost, with Wilson 95% bars, design names and the target line.
pub fn power_curve(statistic: &str, rows: &[&PowerRow], target: f64) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        let _ = root.fill(&WHITE);
        let lo = rows.iter().map(|r| r.cost).fold(f64::INFINITY, f64::min);
        let hi = rows.iter().map(|r| r.cost).fold(f64::NEG_INFINITY, f64::max);
        let (lo, hi) = finite_range(lo, hi);
        let pad = (hi - lo) * 0.08;
        let chart = ChartBuilder::on(&root)
            .caption(format!("power of {statistic} (target dashed)"), ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d((lo - pad)..(hi + pad), 0f64..1.05f64);
        let Ok(mut chart) = chart else { return svg_fallback() };
        let _ = chart.configure_mesh().x_desc("design cost").y_desc("power").draw();
        let mut pts: Vec<&&PowerRow> = rows.iter().collect();
        pts.sort_by(|a, b| a.cost.total_cmp(&b.cost));
        let _ = chart.draw_series(LineSeries::new(pts.iter().map(|r| (r.cost, r.power)), BLUE.stroke_width(2)));
        let _ = chart.draw_series(pts.iter().map(|r| Circle::new((r.cost, r.power), 4, BLUE.filled())));
        let _ = chart.draw_series(
            pts.iter().map(|r| PathElement::new(vec![(r.cost, r.low_95), (r.cost, r.high_95)], BLACK.stroke_width(1))),
        );
        let _ = chart.draw_series(
            pts.iter().map(|r| Text::new(r.design.clone(), (r.cost, (r.high_95 + 0.02).min(1.02)), ("sans-serif", 12))),
        );
        let _ =
            chart.draw_series(DashedLineSeries::new(vec![(lo - pad, target), (hi + pad, target)], 8, 4, RED.into()));
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
