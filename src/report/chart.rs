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
