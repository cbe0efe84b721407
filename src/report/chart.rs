//! SVG figure of a simulation: each unit's error norm over time on a log
//! scale, the stacked error, and the certified envelope.

use crate::problem::Problem;
use crate::simulate::Trajectory;
use plotters::prelude::*;

/// How a legend entry is drawn.
#[derive(Clone, Copy)]
enum Mark {
    Line(RGBColor, u32),
    Dashed(RGBColor, u32),
    Dotted(RGBColor),
    Dot,
    Ring,
}

/// Draws a legend in its own panel beside the plot, so it never covers
/// data: one row per entry, a sample of the line or marker, then the text.
fn side_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    top: i32,
    entries: &[(Mark, String)],
) -> Result<(), String> {
    let font = ("sans-serif", 13).into_font();
    area.draw(&Text::new(
        "Legend",
        (10, top),
        ("sans-serif", 14).into_font(),
    ))
    .map_err(|e| e.to_string())?;
    for (k, (mark, text)) in entries.iter().enumerate() {
        let y = top + 30 + 24 * k as i32;
        let (a, b) = ((10, y), (40, y));
        match *mark {
            Mark::Line(c, w) => area.draw(&PathElement::new(vec![a, b], c.stroke_width(w))),
            Mark::Dashed(c, w) => {
                for x in [10, 22, 34] {
                    area.draw(&PathElement::new(
                        vec![(x, y), ((x + 7).min(40), y)],
                        c.stroke_width(w),
                    ))
                    .map_err(|e| e.to_string())?;
                }
                Ok(())
            }
            Mark::Dotted(c) => {
                for x in (10..=40).step_by(5) {
                    area.draw(&PathElement::new(
                        vec![(x, y), (x + 2, y)],
                        c.stroke_width(2),
                    ))
                    .map_err(|e| e.to_string())?;
                }
                Ok(())
            }
            Mark::Dot => area.draw(&Circle::new((25, y), 5, BLACK.filled())),
            Mark::Ring => area.draw(&Circle::new((25, y), 9, BLACK.stroke_width(2))),
        }
        .map_err(|e| e.to_string())?;
        area.draw(&Text::new(text.clone(), (50, y - 7), font.clone()))
            .map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// A tick label on a log axis: `1×10⁻³`, `0.01`, `100`.
fn log_tick(v: f64) -> String {
    super::number::sig(v, 2, super::number::Round::Nearest)
}

/// When each unit's error settles: the first output time after which it
/// stays within twice its final level (the median of the last tenth of the
/// run). A unit whose error sits at a noise floor
/// settles early; one still decaying settles late.
fn settling_times(traj: &Trajectory) -> Vec<f64> {
    traj.errors
        .iter()
        .map(|e| {
            let tail = (e.len() / 10).max(1);
            let mut last: Vec<f64> = e[e.len() - tail..].to_vec();
            last.sort_by(f64::total_cmp);
            let floor = last[last.len() / 2];
            let band = 2.0 * floor;
            let k = e.iter().rposition(|&v| v > band).map_or(0, |k| k + 1);
            traj.times[k.min(traj.times.len() - 1)]
        })
        .collect()
}

/// Width of the plot, and of the legend panel beside it (px).
const PLOT_W: u32 = 860;
const LEGEND_W: u32 = 330;

/// Renders the error-decay figure as an SVG document.
///
/// Units are thin grey lines (the three that settle last in darker greys,
/// named in the legend), the stacked error a bold black line, the certified
/// envelope a dashed line; the legend sits beside the plot, and a line
/// under the title says why the bound lies above the data. All legible in
/// greyscale print.
///
/// # Errors
/// A message when plotting fails (it does not for finite data).
pub fn errors_svg(problem: &Problem, traj: &Trajectory) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (PLOT_W + LEGEND_W, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let title = format!(
            "{}: estimation error per unit (reference: {})",
            problem.settings.name,
            match traj.reference_kind {
                crate::simulate::Reference::Truth => "given true parameter",
                crate::simulate::Reference::PooledFit => "pooled least-squares fit",
            }
        );
        root.draw(&Text::new(title, (16, 12), ("sans-serif", 18).into_font()))
            .map_err(|e| e.to_string())?;
        let note = match (&traj.envelope, traj.certified_rate) {
            (Some(env), Some(_)) if traj.total[0] > 0.0 => format!(
                "The bound starts {}× above the error: it holds for every start and covers the growth a window allows before it contracts.",
                super::number::sig(env[0] / traj.total[0], 3, super::number::Round::Up)
            ),
            _ => "No certified bound on this horizon: the lines show the simulated errors only."
                .to_string(),
        };
        root.draw(&Text::new(note, (16, 38), ("sans-serif", 12).into_font()))
            .map_err(|e| e.to_string())?;
        let body = root.margin(56, 0, 0, 0);
        let (left, right) = body.split_horizontally(PLOT_W);
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
        let mut chart = ChartBuilder::on(&left)
            .margin(16)
            .x_label_area_size(40)
            .y_label_area_size(80)
            .build_cartesian_2d(t0..t1, (lo * 0.5..hi * 2.0).log_scale())
            .map_err(|e| e.to_string())?;
        chart
            .configure_mesh()
            .x_desc("time (s)")
            .y_desc("|θ_i − θ|")
            .light_line_style(WHITE)
            .x_label_formatter(&|v| super::number::sig(*v, 4, super::number::Round::Nearest))
            .y_label_formatter(&|v| log_tick(*v))
            .draw()
            .map_err(|e| e.to_string())?;
        let settle = settling_times(traj);
        let mut order: Vec<usize> = (0..traj.errors.len()).collect();
        order.sort_by(|&a, &b| {
            let (ea, eb) = (&traj.errors[a], &traj.errors[b]);
            settle[b]
                .total_cmp(&settle[a])
                .then(eb[eb.len() - 1].total_cmp(&ea[ea.len() - 1]))
                .then(a.cmp(&b))
        });
        let series = |e: &Vec<f64>| -> Vec<(f64, f64)> {
            traj.times
                .iter()
                .zip(e)
                .map(|(&t, &v)| (t, positive(v)))
                .collect()
        };
        let mut entries: Vec<(Mark, String)> = Vec::new();
        for &i in order.iter().skip(3).rev() {
            chart
                .draw_series(LineSeries::new(
                    series(&traj.errors[i]),
                    RGBColor(190, 190, 190),
                ))
                .map_err(|e| e.to_string())?;
        }
        if order.len() > 3 {
            entries.push((
                Mark::Line(RGBColor(190, 190, 190), 1),
                format!("{} other units", order.len() - 3),
            ));
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
                .map_err(|e| e.to_string())?;
            entries.push((
                Mark::Line(colour, 2),
                format!(
                    "{} (settles at {} s)",
                    problem.nodes[i].id,
                    super::number::sig(settle[i], 4, super::number::Round::Nearest)
                ),
            ));
        }
        chart
            .draw_series(LineSeries::new(series(&traj.total), BLACK.stroke_width(3)))
            .map_err(|e| e.to_string())?;
        entries.push((Mark::Line(BLACK, 3), "all units (stacked error)".into()));
        if let (Some(env), Some(rate)) = (&traj.envelope, traj.certified_rate) {
            chart
                .draw_series(DashedLineSeries::new(
                    series(env),
                    8,
                    5,
                    BLACK.stroke_width(2),
                ))
                .map_err(|e| e.to_string())?;
            entries.push((
                Mark::Dashed(BLACK, 2),
                format!(
                    "certified bound, rate {} 1/s",
                    super::number::sig(rate, 4, super::number::Round::Down)
                ),
            ));
        }
        side_legend(&right, 40, &entries)?;
        right
            .draw(&Text::new(
                "Named: the three units that settle last",
                (10, 40 + 30 + 24 * entries.len() as i32),
                ("sans-serif", 11).into_font(),
            ))
            .map_err(|e| e.to_string())?;
        right
            .draw(&Text::new(
                "(within 2× their final level).",
                (10, 40 + 44 + 24 * entries.len() as i32),
                ("sans-serif", 11).into_font(),
            ))
            .map_err(|e| e.to_string())?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}

/// Renders the cost–rate front as an SVG document: certified rate against
/// cost as a staircase, one marker per plan (labelled with its number of
/// links), the plan chosen within the budget ringed, the target rate as a
/// long-dashed horizontal line and the budget as a dotted vertical line,
/// each named at its end; the legend sits beside the plot.
///
/// # Errors
/// A message when plotting fails (it does not for finite data).
pub fn front_svg(
    front: &crate::whatif::budget::Front,
    target_rate: Option<f64>,
) -> Result<String, String> {
    use super::number::{self as num, Round};
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (PLOT_W + LEGEND_W, 580)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        root.draw(&Text::new(
            format!("{}: certified rate against cost", front.network),
            (16, 12),
            ("sans-serif", 18).into_font(),
        ))
        .map_err(|e| e.to_string())?;
        let body = root.margin(40, 0, 0, 0);
        let (left, right) = body.split_horizontally(PLOT_W);
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
            x0 = x0.min(b);
        }
        if !x0.is_finite() {
            (x0, x1) = (0.0, 1.0);
        }
        let pad = ((x1 - x0) * 0.08).max(1.0);
        let mut y1 = points.iter().map(|p| p.1).fold(0.0f64, f64::max);
        if let Some(t) = target_rate {
            y1 = y1.max(t);
        }
        let y1 = if y1 > 0.0 { y1 * 1.2 } else { 1.0 };
        let mut chart = ChartBuilder::on(&left)
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
            .x_label_formatter(&|v| num::cost(*v, Round::Nearest))
            .y_label_formatter(&|v| num::sig(*v, 3, Round::Nearest))
            .draw()
            .map_err(|e| e.to_string())?;
        let mut entries: Vec<(Mark, String)> = Vec::new();
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
            .map_err(|e| e.to_string())?;
        entries.push((
            Mark::Line(BLACK, 2),
            "best certified rate for the cost".into(),
        ));
        chart
            .draw_series(front.front.iter().zip(&points).map(|(p, &(c, r))| {
                EmptyElement::at((c, r))
                    + Circle::new((0, 0), 5, BLACK.filled())
                    + Text::new(
                        num::count(p.links.len(), "link", "links"),
                        (6, -18),
                        ("sans-serif", 12),
                    )
            }))
            .map_err(|e| e.to_string())?;
        entries.push((Mark::Dot, "a plan on the front (its links)".into()));
        if let Some(t) = target_rate {
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x0 - pad, t), (x1 + pad, t)],
                    14,
                    6,
                    RGBColor(90, 90, 90).stroke_width(2),
                ))
                .map_err(|e| e.to_string())?;
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("target {} 1/s", num::sig(t, 4, Round::Nearest)),
                    (x0 - pad, t),
                    ("sans-serif", 12),
                )))
                .map_err(|e| e.to_string())?;
            entries.push((
                Mark::Dashed(RGBColor(90, 90, 90), 2),
                format!("target rate {} 1/s", num::sig(t, 4, Round::Nearest)),
            ));
        }
        if let Some(b) = front.max_cost {
            // Dots: short strokes a quarter of their spacing long.
            let step = y1 / 80.0;
            chart
                .draw_series((0..80).map(|k| {
                    let y = step * k as f64;
                    PathElement::new(vec![(b, y), (b, y + 0.25 * step)], BLACK.stroke_width(2))
                }))
                .map_err(|e| e.to_string())?;
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("budget {}", num::cost(b, Round::Nearest)),
                    (b, y1 * 0.97),
                    ("sans-serif", 12),
                )))
                .map_err(|e| e.to_string())?;
            entries.push((
                Mark::Dotted(BLACK),
                format!("budget {}", num::cost(b, Round::Nearest)),
            ));
            if let Some(p) = &front.best_within_budget {
                chart
                    .draw_series(std::iter::once(Circle::new(
                        (p.cost, p.rate.unwrap_or(0.0)),
                        10,
                        BLACK.stroke_width(2),
                    )))
                    .map_err(|e| e.to_string())?;
                entries.push((
                    Mark::Ring,
                    format!(
                        "chosen within the budget: {}",
                        num::cost(p.cost, Round::Nearest)
                    ),
                ));
            }
        }
        side_legend(&right, 40, &entries)?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::{Reference, Trajectory};

    /// A unit whose error sits on a noise floor of 1e-3 from t ≈ 7 s and a
    /// unit still decaying as e^{−0.08 t} (final 3.4e-4, below the floor):
    /// by final error the first looks slowest; by settling time the second
    /// is (closed forms: e^{−t} meets 2e-3 at t = ln 500 ≈ 6.2 s; the
    /// second's final level is its median over the last tenth, e^{−0.08·95},
    /// and it stays within twice that from t = 95 − ln 2 / 0.08 ≈ 86.3 s).
    #[test]
    fn the_slowest_unit_is_the_one_still_decaying() {
        let times: Vec<f64> = (0..=100).map(f64::from).collect();
        let floor: Vec<f64> = times.iter().map(|t| (-t).exp().max(1e-3)).collect();
        let decaying: Vec<f64> = times.iter().map(|t| (-0.08 * t).exp()).collect();
        let traj = Trajectory {
            reference: vec![0.0],
            reference_kind: Reference::Truth,
            times: times.clone(),
            errors: vec![floor, decaying],
            total: vec![1.0; times.len()],
            envelope: None,
            units: Vec::new(),
            observed_rate: None,
            certified_rate: None,
            within_envelope: None,
        };
        let settle = settling_times(&traj);
        assert_eq!(settle, vec![7.0, 87.0]);
    }
}
