//! SVG figure of a simulation: each unit's error norm over time on a log
//! scale, the stacked error, and the certified envelope.

use crate::problem::Problem;
use crate::simulate::Trajectory;
use plotters::prelude::*;

/// Renders the error-decay figure as an SVG document.
///
/// Units are thin grey lines (the slowest three in darker greys, named in
/// the legend), the stacked error a bold black line, the certified envelope
/// a dashed line; all legible in greyscale print.
///
/// # Errors
/// A message when plotting fails (it does not for finite data).
pub fn errors_svg(problem: &Problem, traj: &Trajectory) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (900, 560)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let floor = 1e-12;
        let positive = |v: f64| v.max(floor);
        let mut hi = traj.total.iter().copied().fold(floor, f64::max);
        if let Some(env) = &traj.envelope {
            // Keep the envelope's start in view, but not orders above the data.
            hi = hi.max(env[0].min(hi * 1e3));
        }
        let lo = traj
            .errors
            .iter()
            .flatten()
            .copied()
            .map(positive)
            .fold(hi, f64::min)
            .max(hi * 1e-12);
        let (t0, t1) = (traj.times[0], traj.times[traj.times.len() - 1]);
        let title = format!(
            "{}: estimation error per unit (reference: {})",
            problem.settings.name,
            match traj.reference_kind {
                crate::simulate::Reference::Truth => "given true parameter",
                crate::simulate::Reference::PooledFit => "pooled least-squares fit",
            }
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(16)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(t0..t1, (lo * 0.5..hi * 2.0).log_scale())
            .map_err(|e| e.to_string())?;
        chart
            .configure_mesh()
            .x_desc("time (s)")
            .y_desc("|θ_i − θ|")
            .light_line_style(WHITE)
            .y_label_formatter(&|v| format!("{v:.0e}"))
            .draw()
            .map_err(|e| e.to_string())?;
        let mut order: Vec<usize> = (0..traj.errors.len()).collect();
        order.sort_by(|&a, &b| {
            let (ea, eb) = (&traj.errors[a], &traj.errors[b]);
            eb[eb.len() - 1]
                .total_cmp(&ea[ea.len() - 1])
                .then(a.cmp(&b))
        });
        let series = |e: &Vec<f64>| -> Vec<(f64, f64)> {
            traj.times
                .iter()
                .zip(e)
                .map(|(&t, &v)| (t, positive(v)))
                .collect()
        };
        for &i in order.iter().skip(3).rev() {
            chart
                .draw_series(LineSeries::new(
                    series(&traj.errors[i]),
                    RGBColor(190, 190, 190),
                ))
                .map_err(|e| e.to_string())?;
        }
        let greys = [
            RGBColor(60, 60, 60),
            RGBColor(100, 100, 100),
            RGBColor(140, 140, 140),
        ];
        for (rank, &i) in order.iter().take(3).enumerate() {
            let colour = greys[rank];
            chart
                .draw_series(LineSeries::new(
                    series(&traj.errors[i]),
                    colour.stroke_width(2),
                ))
                .map_err(|e| e.to_string())?
                .label(format!("{} (slowest #{})", problem.nodes[i].id, rank + 1))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], colour.stroke_width(2))
                });
        }
        chart
            .draw_series(LineSeries::new(series(&traj.total), BLACK.stroke_width(3)))
            .map_err(|e| e.to_string())?
            .label("all units (stacked error)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(3)));
        if let (Some(env), Some(rate)) = (&traj.envelope, traj.certified_rate) {
            chart
                .draw_series(DashedLineSeries::new(
                    series(env),
                    8,
                    5,
                    BLACK.stroke_width(2),
                ))
                .map_err(|e| e.to_string())?
                .label(format!("certified bound c·exp(−{rate:.3e} t)"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 8, y)], BLACK.stroke_width(2)));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|e| e.to_string())?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}

/// Renders the cost–rate front as an SVG document: certified rate against
/// cost, one marker per plan (labelled with its number of links), the
/// budget and the target rate as dashed lines when given.
///
/// # Errors
/// A message when plotting fails (it does not for finite data).
pub fn front_svg(
    front: &crate::whatif::budget::Front,
    target_rate: Option<f64>,
) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (900, 560)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let points: Vec<(f64, f64)> = front
            .front
            .iter()
            .map(|p| (p.cost, p.rate.unwrap_or(0.0)))
            .collect();
        let (mut x0, mut x1) = points
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
                (a.min(p.0), b.max(p.0))
            });
        if let Some(b) = front.max_cost {
            x1 = x1.max(b);
        }
        if !x0.is_finite() {
            (x0, x1) = (0.0, 1.0);
        }
        let pad = ((x1 - x0) * 0.08).max(1.0);
        let mut y1 = points.iter().map(|p| p.1).fold(0.0f64, f64::max);
        if let Some(t) = target_rate {
            y1 = y1.max(t);
        }
        let y1 = if y1 > 0.0 { y1 * 1.15 } else { 1.0 };
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!("{}: certified rate against cost", front.network),
                ("sans-serif", 18),
            )
            .margin(16)
            .x_label_area_size(40)
            .y_label_area_size(80)
            .build_cartesian_2d((x0 - pad)..(x1 + pad), 0.0..y1)
            .map_err(|e| e.to_string())?;
        chart
            .configure_mesh()
            .x_desc("cost of the links")
            .y_desc("certified rate (1/s)")
            .light_line_style(WHITE)
            .y_label_formatter(&|v| format!("{v:.3e}"))
            .draw()
            .map_err(|e| e.to_string())?;
        // The front is a staircase: a plan stays available at higher cost.
        let mut stairs = Vec::new();
        for (k, &(c, r)) in points.iter().enumerate() {
            if k > 0 {
                stairs.push((c, points[k - 1].1));
            }
            stairs.push((c, r));
        }
        if let Some(&(_, r)) = points.last() {
            stairs.push((x1 + pad, r));
        }
        chart
            .draw_series(LineSeries::new(stairs, BLACK.stroke_width(2)))
            .map_err(|e| e.to_string())?
            .label("best certified rate for the cost")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(2)));
        chart
            .draw_series(front.front.iter().zip(&points).map(|(p, &(c, r))| {
                EmptyElement::at((c, r))
                    + Circle::new((0, 0), 5, BLACK.filled())
                    + Text::new(
                        format!("{} links", p.links.len()),
                        (6, -16),
                        ("sans-serif", 12),
                    )
            }))
            .map_err(|e| e.to_string())?;
        if let Some(t) = target_rate {
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x0 - pad, t), (x1 + pad, t)],
                    6,
                    4,
                    RGBColor(90, 90, 90).stroke_width(1),
                ))
                .map_err(|e| e.to_string())?
                .label(format!("target rate {t:.3e} 1/s"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 8, y)], RGBColor(90, 90, 90)));
        }
        if let Some(b) = front.max_cost {
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(b, 0.0), (b, y1)],
                    3,
                    3,
                    BLACK.stroke_width(1),
                ))
                .map_err(|e| e.to_string())?
                .label(format!("budget {b:.2}"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 4, y)], BLACK));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK)
            .position(SeriesLabelPosition::LowerRight)
            .draw()
            .map_err(|e| e.to_string())?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}
