//! SVG figures, drawn with plotters' SVG backend (text is left to the viewer's fonts).

use plotters::prelude::*;

/// Histogram of a null distribution with the observed value marked by a vertical line.
pub fn null_histogram(name: &str, null: &[f64], observed: Option<f64>) -> anyhow::Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (640, 400)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        // Only finite values can be binned (an infinite range would never end the axis).
        let finite: Vec<f64> = null.iter().copied().filter(|x| x.is_finite()).collect();
        let null = finite.as_slice();
        let observed = observed.filter(|o| o.is_finite());
        let (mut lo, mut hi) = null.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
        if null.is_empty() {
            (lo, hi) = (observed.unwrap_or(0.0), observed.unwrap_or(0.0));
        }
        if let Some(o) = observed {
            lo = lo.min(o);
            hi = hi.max(o);
        }
        if hi <= lo {
            hi = lo + lo.abs().max(1.0);
        }
        if !(hi - lo).is_finite() {
            anyhow::bail!("drawing {name}: the values span more than the largest number ({lo} to {hi})");
        }
        let bins = 40usize;
        let width = (hi - lo) / bins as f64;
        let mut counts = vec![0u32; bins];
        for &x in null {
            counts[(((x - lo) / width) as usize).min(bins - 1)] += 1;
        }
        let top = counts.iter().copied().max().unwrap_or(1).max(1);
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("{name}: null distribution ({} replicates)", null.len()), ("sans-serif", 18))
            .margin(10)
            .x_label_area_size(35)
            .y_label_area_size(45)
            .build_cartesian_2d(lo..hi + width * 0.01, 0u32..top + top / 10 + 1)
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        chart
            .configure_mesh()
            .x_desc(name)
            .y_desc("replicates")
            .draw()
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        chart
            .draw_series(counts.iter().enumerate().map(|(i, &c)| {
                let x0 = lo + i as f64 * width;
                Rectangle::new([(x0, 0), (x0 + width, c)], RGBColor(120, 150, 190).filled())
            }))
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        if let Some(o) = observed {
            chart
                .draw_series(LineSeries::new([(o, 0), (o, top + top / 10 + 1)], RED.stroke_width(3)))
                .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?
                .label("observed")
                .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], RED));
            chart
                .configure_series_labels()
                .border_style(BLACK)
                .draw()
                .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        }
        root.present().map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
    }
    Ok(svg)
}
