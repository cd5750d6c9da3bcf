//! SVG figures, drawn with plotters' SVG backend (text is left to the viewer's fonts).

use crate::abc::plot::sig;
use plotters::prelude::*;

/// The q-quantile of sorted values (linear interpolation between order statistics).
fn quantile(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q;
    let (i, f) = (h.floor() as usize, h - h.floor());
    if i + 1 < sorted.len() { sorted[i] + f * (sorted[i + 1] - sorted[i]) } else { sorted[i] }
}

/// Round tick values for a log axis from `lo` to `hi` (both > 0): 1-2-5 in each decade, or
/// the decades alone when those are too many, or 1..9 when the range is narrow.
pub fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Vec::new();
    }
    let (e0, e1) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let within = |ms: &[f64]| -> Vec<f64> {
        (e0..=e1)
            .flat_map(|e| ms.iter().map(move |m| m * 10f64.powi(e)))
            // Rounded to what the label shows, so that 0.1 is printed once.
            .map(|v| sig(v, 3).parse::<f64>().unwrap_or(v))
            .filter(|v| *v >= lo * (1.0 - 1e-9) && *v <= hi * (1.0 + 1e-9))
            .collect()
    };
    let ticks = within(&[1.0, 2.0, 5.0]);
    if ticks.len() > 10 {
        within(&[1.0])
    } else if ticks.len() < 3 {
        let fine = within(&[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0]);
        if fine.len() >= 2 { fine } else { vec![sig(lo, 3).parse().unwrap_or(lo), sig(hi, 3).parse().unwrap_or(hi)] }
    } else {
        ticks
    }
}

/// What the x axis of a statistic's null histogram shows: how the genome-wide value is
/// formed from the loci (as `stats::combined_column_values` forms it) and its unit.
pub fn statistic_axis_label(name: &str) -> String {
    let per_locus = |stat: &str| match stat {
        "pi" => "π (pairwise differences)",
        "segregating_sites" => "S (segregating sites)",
        "tajima_d" => "Tajima's D",
        "theta_w" => "θ_W (Watterson)",
        "fay_wu_h" => "Fay & Wu's H (differences)",
        _ => "value",
    };
    if let Some(stat) = name.strip_suffix("_locus_mean") {
        return format!("{name}: mean over loci of the per-locus {}", per_locus(stat));
    }
    if let Some(stat) = name.strip_suffix("_locus_var") {
        return format!("{name}: variance across loci of the per-locus {}", per_locus(stat));
    }
    if let Some(i) = name.strip_prefix("xi_").or_else(|| name.strip_prefix("sfs_")) {
        return format!("{name}: sites with {i} derived alleles (summed over loci)");
    }
    if let Some(i) = name.strip_prefix("eta_") {
        return format!("{name}: sites with minor-allele count {i} (summed over loci)");
    }
    if let Some(deme) = name.strip_prefix("pi_") {
        return format!("{name}: π within deme {deme} (pairwise differences, summed over loci)");
    }
    if let Some(pair) = name.strip_prefix("fst_") {
        return format!("{name}: F_ST of {} (ratio of sums over loci; no unit)", pair.replace('_', " and "));
    }
    let what = match name {
        "segregating_sites" => "segregating sites S (sites, summed over loci)",
        "pi" => "π, mean pairwise differences (summed over loci)",
        "theta_w" => "θ_W = S / a_n (summed over loci)",
        "tajima_d" => "Tajima's D of the summed SFS (no unit)",
        "fay_wu_h" => "Fay & Wu's H = π − θ_H (differences, summed over loci)",
        "fay_wu_h_norm" => "normalised Fay & Wu's H of the summed SFS (no unit)",
        "haplotypes" => "distinct haplotypes per locus (mean over loci)",
        "sfs_chi2" => "chi-square distance of the SFS to the null mean (no unit)",
        _ => return name.to_string(),
    };
    format!("{name}: {what}")
}

/// A key of a legend drawn outside the plot.
pub(crate) enum Key {
    Bar(RGBAColor),
    Line(RGBColor, u32),
    Dashed,
    Dot(RGBColor),
}

/// A legend below the plot, two entries a row, so that it hides no data.
pub(crate) fn legend_strip<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    items: &[(Key, String)],
) -> Option<()> {
    let (w, _) = area.dim_in_pixel();
    let col = (w as i32 - 40) / 2;
    for (k, (key, label)) in items.iter().enumerate() {
        let (x, y) = (30 + (k as i32 % 2) * col, 14 + (k as i32 / 2) * 22);
        match key {
            Key::Bar(c) => area.draw(&Rectangle::new([(x, y - 6), (x + 20, y + 6)], c.filled())).ok()?,
            Key::Line(c, width) => area.draw(&PathElement::new([(x, y), (x + 20, y)], c.stroke_width(*width))).ok()?,
            Key::Dot(c) => area.draw(&Circle::new((x + 10, y), 5, c.filled())).ok()?,
            Key::Dashed => {
                for d in [0, 8, 16] {
                    area.draw(&PathElement::new([(x + d, y), (x + d + 5, y)], BLACK.stroke_width(1))).ok()?;
                }
            }
        }
        let style = TextStyle::from(("sans-serif", 14).into_font()).pos(plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Left,
            plotters::style::text_anchor::VPos::Center,
        ));
        area.draw(&Text::new(label.clone(), (x + 28, y), style)).ok()?;
    }
    Some(())
}

/// The observed site frequency spectrum over the null's central 95% band and mean, entry by
/// entry (`kind` is `unfolded` or `folded`), with the goodness-of-fit p-value.
pub fn sfs_band(kind: &str, observed: &[f64], null_rows: &[Vec<f64>], p_value: Option<f64>) -> anyhow::Result<String> {
    let k = observed.len();
    let mut svg = String::new();
    {
        let err = |e: &dyn std::fmt::Display| anyhow::anyhow!("drawing the SFS: {e}");
        let root = SVGBackend::with_string(&mut svg, (720, 460)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| err(&e))?;
        let mut band = Vec::with_capacity(k);
        for i in 0..k {
            let mut col: Vec<f64> = null_rows.iter().filter_map(|r| r.get(i).copied()).collect();
            col.sort_by(f64::total_cmp);
            let mean = col.iter().sum::<f64>() / col.len().max(1) as f64;
            band.push(if col.is_empty() {
                (0.0, 0.0, 0.0)
            } else {
                (quantile(&col, 0.025), mean, quantile(&col, 0.975))
            });
        }
        let top = band.iter().map(|b| b.2).chain(observed.iter().copied()).fold(1.0f64, f64::max) * 1.1;
        let p = p_value.map_or(String::new(), |p| format!(", fit p = {}", sig(p, 3)));
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("Observed {kind} SFS against the null{p}"), ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(0.5f64..k as f64 + 0.5, 0f64..top)
            .map_err(|e| err(&e))?;
        let entry = if kind == "folded" { "minor-allele count i (eta_i)" } else { "derived-allele count i (xi_i)" };
        chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .x_labels(k.min(20))
            .x_label_formatter(&|x| if x.fract() == 0.0 { format!("{x:.0}") } else { String::new() })
            .x_desc(entry)
            .y_desc("sites (summed over loci)")
            .draw()
            .map_err(|e| err(&e))?;
        let fill = RGBColor(120, 150, 190).mix(0.35);
        chart
            .draw_series(band.iter().enumerate().map(|(i, b)| {
                let x = (i + 1) as f64;
                Rectangle::new([(x - 0.4, b.0), (x + 0.4, b.2)], fill.filled())
            }))
            .map_err(|e| err(&e))?
            .label(format!("null central 95% ({} replicates)", null_rows.len()))
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], fill.filled()));
        chart
            .draw_series(LineSeries::new(
                band.iter().enumerate().map(|(i, b)| ((i + 1) as f64, b.1)),
                BLUE.stroke_width(2),
            ))
            .map_err(|e| err(&e))?
            .label("null mean")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], BLUE.stroke_width(2)));
        chart
            .draw_series(observed.iter().enumerate().map(|(i, &o)| Circle::new(((i + 1) as f64, o), 4, RED.filled())))
            .map_err(|e| err(&e))?
            .label("observed")
            .legend(|(x, y)| Circle::new((x + 9, y), 4, RED.filled()));
        framed_legend(&mut chart, SeriesLabelPosition::UpperRight).map_err(|e| err(&e))?;
        root.present().map_err(|e| err(&e))?;
    }
    Ok(svg)
}

/// Histogram of a null distribution with the observed value marked by a vertical line,
/// labelled with the value and its two-sided empirical p-value, and the null's central 95%.
pub fn null_histogram(name: &str, null: &[f64], observed: Option<f64>, p_value: Option<f64>) -> anyhow::Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (640, 450)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        // The legend goes below the plot: over it, it hid the peak or the observed line.
        let (plot, below) = root.split_vertically(395);
        let mut keys: Vec<(Key, String)> = Vec::new();
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
        let mut chart = ChartBuilder::on(&plot)
            .caption(
                match p_value {
                    Some(p) => format!("{name}: observed against the null (two-sided p = {})", sig(p, 3)),
                    None => format!("{name}: null distribution"),
                },
                ("sans-serif", 18),
            )
            .margin(10)
            .x_label_area_size(35)
            .y_label_area_size(45)
            .build_cartesian_2d(lo..hi + width * 0.01, 0u32..top + top / 10 + 1)
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .x_desc(statistic_axis_label(name))
            .y_desc(format!("null replicates (of {})", null.len()))
            .draw()
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        chart
            .draw_series(counts.iter().enumerate().map(|(i, &c)| {
                let x0 = lo + i as f64 * width;
                Rectangle::new([(x0, 0), (x0 + width, c)], RGBColor(120, 150, 190).filled())
            }))
            .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
        keys.push((
            Key::Bar(RGBColor(120, 150, 190).to_rgba()),
            format!("null distribution ({} replicates)", null.len()),
        ));
        let ymax = top + top / 10 + 1;
        if null.len() >= 2 {
            let mut sorted = null.to_vec();
            sorted.sort_by(f64::total_cmp);
            let (q_lo, q_hi) = (quantile(&sorted, 0.025), quantile(&sorted, 0.975));
            for q in [q_lo, q_hi] {
                chart
                    .draw_series(DashedLineSeries::new([(q, 0), (q, ymax)], 6, 4, BLACK.stroke_width(1)))
                    .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
            }
            keys.push((Key::Dashed, format!("null central 95% [{}, {}]", sig(q_lo, 4), sig(q_hi, 4))));
        }
        if let Some(o) = observed {
            let p = p_value.map_or(String::new(), |p| format!(", p = {}", sig(p, 3)));
            chart
                .draw_series(LineSeries::new([(o, 0), (o, ymax)], RED.stroke_width(3)))
                .map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
            keys.push((Key::Line(RED, 3), format!("observed {}{p}", sig(o, 4))));
        }
        legend_strip(&below, &keys).ok_or_else(|| anyhow::anyhow!("drawing the legend of {name}"))?;
        root.present().map_err(|e| anyhow::anyhow!("drawing {name}: {e}"))?;
    }
    Ok(svg)
}

/// The simulated mean SFS (with the 95% interval of each mean) against the predicted one,
/// labelled with the prediction's kind and source.
pub fn sfs_simulated(
    simulated: &[(f64, f64, f64)],
    replicates: u64,
    predicted: Option<(&[f64], &str)>,
) -> anyhow::Result<String> {
    let k = simulated.len();
    let mut svg = String::new();
    {
        let err = |e: &dyn std::fmt::Display| anyhow::anyhow!("drawing the SFS: {e}");
        let root = SVGBackend::with_string(&mut svg, (720, 460)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| err(&e))?;
        let top = simulated
            .iter()
            .map(|s| s.2)
            .chain(predicted.iter().flat_map(|p| p.0.iter().copied()))
            .filter(|x| x.is_finite())
            .fold(1e-9f64, f64::max)
            * 1.15;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                match predicted {
                    Some(_) => format!("Unfolded SFS: simulated ({replicates} replicates) against predicted"),
                    None => format!("Unfolded SFS: simulated ({replicates} replicates); no prediction drawn"),
                },
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(0.5f64..k as f64 + 0.5, 0f64..top)
            .map_err(|e| err(&e))?;
        chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .x_labels(k.min(20))
            .x_label_formatter(&|x| if x.fract() == 0.0 { format!("{x:.0}") } else { String::new() })
            .x_desc("derived-allele count i (xi_i)")
            .y_desc("expected sites per replicate (summed over loci)")
            .draw()
            .map_err(|e| err(&e))?;
        chart
            .draw_series(simulated.iter().enumerate().map(|(i, s)| {
                let x = (i + 1) as f64;
                PathElement::new([(x, s.1), (x, s.2)], BLACK.stroke_width(1))
            }))
            .map_err(|e| err(&e))?
            .label("95% interval of the simulated mean")
            .legend(|(x, y)| PathElement::new([(x + 9, y - 6), (x + 9, y + 6)], BLACK.stroke_width(1)));
        chart
            .draw_series(
                simulated.iter().enumerate().map(|(i, s)| Circle::new(((i + 1) as f64, s.0), 4, BLUE.filled())),
            )
            .map_err(|e| err(&e))?
            .label("simulated mean")
            .legend(|(x, y)| Circle::new((x + 9, y), 4, BLUE.filled()));
        if let Some((p, label)) = predicted {
            chart
                .draw_series(LineSeries::new(
                    p.iter().enumerate().map(|(i, &v)| ((i + 1) as f64, v)),
                    RED.stroke_width(2),
                ))
                .map_err(|e| err(&e))?
                .label(format!("predicted ({label})"))
                .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], RED.stroke_width(2)));
        } else {
            // Said in the legend too: an absent line must not read as a line hidden by the points.
            chart
                .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
                .map_err(|e| err(&e))?
                .label("no predicted SFS for this sample (see the run's notes)")
                .legend(|(x, y)| Text::new("-", (x + 6, y - 8), ("sans-serif", 14)));
        }
        framed_legend(&mut chart, SeriesLabelPosition::UpperRight).map_err(|e| err(&e))?;
        root.present().map_err(|e| err(&e))?;
    }
    Ok(svg)
}

/// The series legend every figure draws: a framed, nearly opaque white box at `pos`.
fn framed_legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    pos: SeriesLabelPosition,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    chart.configure_series_labels().position(pos).background_style(WHITE.mix(0.85)).border_style(BLACK).draw()
}

/// Log-log chart frame shared by the families figures.
fn loglog_bounds(
    xs: impl Iterator<Item = f64> + Clone,
    ys: impl Iterator<Item = f64> + Clone,
) -> ((f64, f64), (f64, f64)) {
    let pos = |it: &mut dyn Iterator<Item = f64>| {
        it.filter(|v| v.is_finite() && *v > 0.0)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)))
    };
    let fix = |(lo, hi): (f64, f64)| {
        if lo.is_finite() && hi > lo {
            (lo / 1.3, hi * 1.3)
        } else if lo.is_finite() {
            (lo / 2.0, lo * 2.0)
        } else {
            (0.1, 10.0)
        }
    };
    (fix(pos(&mut xs.clone())), fix(pos(&mut ys.clone())))
}

/// A fitted power law on a log-log figure: slope, a point it passes through, the range of
/// x it was fitted on, its legend.
type PowerLawFit = (f64, (f64, f64), [f64; 2], String);

/// One families figure: simulated points (with ±2 standard errors) and a predicted line, on
/// log-log axes. Points and predictions that are not positive cannot be drawn there and are
/// left out. `fit` adds a fitted power law (slope, through a point) with its own legend.
#[allow(clippy::too_many_arguments)]
fn loglog_figure(
    title: &str,
    x_desc: &str,
    y_desc: &str,
    simulated: &[(f64, f64, Option<f64>)],
    predicted: &[(f64, f64)],
    predicted_label: &str,
    fit: Option<PowerLawFit>,
    y_range: Option<(f64, f64)>,
    legend_at: SeriesLabelPosition,
) -> anyhow::Result<String> {
    let mut svg = String::new();
    {
        let err = |e: &dyn std::fmt::Display| anyhow::anyhow!("drawing {title}: {e}");
        let root = SVGBackend::with_string(&mut svg, (720, 480)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| err(&e))?;
        let xs = simulated.iter().map(|p| p.0).chain(predicted.iter().map(|p| p.0));
        let ys = simulated.iter().map(|p| p.1).chain(predicted.iter().map(|p| p.1));
        let ((x0, x1), (y0, y1)) = loglog_bounds(xs, ys);
        let (y0, y1) = y_range.unwrap_or((y0, y1));
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(70)
            // Ticks at round 1-2-5 values, no minor grid (it made grey bands).
            .build_cartesian_2d(
                (x0..x1).log_scale().with_key_points(log_ticks(x0, x1)),
                (y0..y1).log_scale().with_key_points(log_ticks(y0, y1)),
            )
            .map_err(|e| err(&e))?;
        chart
            .configure_mesh()
            // No minor grid: it made grey bands.
            .light_line_style(TRANSPARENT)
            .x_label_formatter(&|x| sig(*x, 3))
            .y_label_formatter(&|y| sig(*y, 3))
            .x_desc(x_desc)
            .y_desc(y_desc)
            .draw()
            .map_err(|e| err(&e))?;
        let inside = |v: f64| v.is_finite() && v > 0.0;
        let shown: Vec<&(f64, f64, Option<f64>)> = simulated.iter().filter(|p| inside(p.0) && inside(p.1)).collect();
        // Bars clipped to the plot; a lower end at or below 0 has no place on a log axis, so
        // such a bar is drawn upward only.
        let one_sided = shown.iter().any(|p| p.2.is_some_and(|se| p.1 - 2.0 * se <= 0.0));
        chart
            .draw_series(shown.iter().filter_map(|p| {
                let se = p.2?;
                let lo = if p.1 - 2.0 * se > 0.0 { (p.1 - 2.0 * se).clamp(y0, y1) } else { p.1.clamp(y0, y1) };
                Some(PathElement::new([(p.0, lo), (p.0, (p.1 + 2.0 * se).clamp(y0, y1))], BLACK.stroke_width(1)))
            }))
            .map_err(|e| err(&e))?
            .label(if one_sided {
                "± 2 standard errors (upper half only where the lower end is <= 0)"
            } else {
                "± 2 standard errors"
            })
            .legend(|(x, y)| PathElement::new([(x + 9, y - 6), (x + 9, y + 6)], BLACK.stroke_width(1)));
        chart
            .draw_series(shown.iter().map(|p| Circle::new((p.0, p.1), 3, BLUE.filled())))
            .map_err(|e| err(&e))?
            .label("simulated")
            .legend(|(x, y)| Circle::new((x + 9, y), 3, BLUE.filled()));
        let line: Vec<(f64, f64)> = predicted.iter().copied().filter(|p| inside(p.0) && inside(p.1)).collect();
        if !line.is_empty() {
            chart
                .draw_series(LineSeries::new(line, RED.stroke_width(2)))
                .map_err(|e| err(&e))?
                .label(predicted_label)
                .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], RED.stroke_width(2)));
        }
        if let Some((slope, (mx, my), [m0, m1], label)) = fit {
            let at = |m: f64| my * (m / mx).powf(slope);
            chart
                .draw_series(DashedLineSeries::new([(m0, at(m0)), (m1, at(m1))], 8, 4, BLACK.stroke_width(2)))
                .map_err(|e| err(&e))?
                .label(label)
                .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], BLACK.stroke_width(2)));
        }
        framed_legend(&mut chart, legend_at).map_err(|e| err(&e))?;
        root.present().map_err(|e| err(&e))?;
    }
    Ok(svg)
}

/// P(two members of the block l generations apart are related) against l, log-log, with the
/// renewal prediction. `simulated`: (lag, fraction, standard error); `predicted`: (lag, P).
pub fn relatedness_by_lag(simulated: &[(f64, f64, Option<f64>)], predicted: &[(f64, f64)]) -> anyhow::Result<String> {
    loglog_figure(
        "Relatedness by lag in the block",
        "lag l (generations)",
        "P(related within the horizon)",
        simulated,
        predicted,
        "predicted (renewal theory)",
        None,
        None,
        // Relatedness falls with the lag: the upper right is where the data are not.
        SeriesLabelPosition::UpperRight,
    )
}

/// P(D <= x l | related) for the MRCA depth D of related pairs, per x, pooled as rows of
/// (x, simulated CDF at the largest lag, se), against the limit law (x, CDF).
pub fn mrca_depth(lag: usize, simulated: &[(f64, f64, Option<f64>)], limit: &[(f64, f64)]) -> anyhow::Result<String> {
    loglog_figure(
        &format!("MRCA depth of related pairs at lag {lag} against its limit"),
        "x = depth / lag",
        "P(depth <= x lag | related)",
        simulated,
        limit,
        "limit law (BetaPrime(alpha, 1 - 2 alpha))",
        None,
        // A CDF: two decades below 1 keep the ticks readable.
        Some((0.01, 1.1)),
        SeriesLabelPosition::LowerRight,
    )
}

/// Var(S_m) of the coloured-family sums against m, log-log, with the exact variance and the
/// fitted slope 2H (and H predicted).
pub fn variance_growth(
    simulated: &[(f64, f64, Option<f64>)],
    exact: &[(f64, f64)],
    fit: Option<(f64, [f64; 2])>,
    predicted_h: Option<f64>,
) -> anyhow::Result<String> {
    let fit = fit.and_then(|(two_h, [m0, m1])| {
        // The fitted line passes through the geometric mean of the fitted points.
        let pts: Vec<&(f64, f64, Option<f64>)> =
            simulated.iter().filter(|p| p.0 >= m0 && p.0 <= m1 && p.1 > 0.0).collect();
        if pts.is_empty() {
            return None;
        }
        let k = pts.len() as f64;
        let gx = (pts.iter().map(|p| p.0.ln()).sum::<f64>() / k).exp();
        let gy = (pts.iter().map(|p| p.1.ln()).sum::<f64>() / k).exp();
        let pred = predicted_h.map_or(String::new(), |h| format!(", predicted 2H = {}", sig(2.0 * h, 3)));
        Some((two_h, (gx, gy), [m0, m1], format!("fitted slope 2H = {}{pred}", sig(two_h, 3))))
    });
    loglog_figure(
        "Variance of the coloured-family sum S_m against m",
        "m (individuals summed)",
        "Var(S_m)",
        simulated,
        exact,
        "exact Var(S_m)",
        fit,
        None,
        // Var(S_m) grows with m: the upper left is where the data are not.
        SeriesLabelPosition::UpperLeft,
    )
}
