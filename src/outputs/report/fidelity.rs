//! Figure "fidelity": the fidelity lower bound of one noisy evolution over time, with the
//! times where the bound says nothing (vacuous) marked.

use plotters::prelude::SeriesLabelPosition;

use super::plot::{self, Curve, Dash, DrawError, Marker};
use super::ReportData;

/// The SVG and the caption (HTML) of the figure.
pub(crate) fn figure(d: &ReportData) -> Result<(String, String), DrawError> {
    let vacuous: Vec<(f64, f64)> = d
        .times
        .iter()
        .zip(&d.f_low)
        .zip(&d.vacuous)
        .filter(|(_, &v)| v)
        .map(|((&t, &f), _)| (t, if f.is_finite() { f.max(0.0) } else { 0.0 }))
        .collect();
    let n_vacuous = vacuous.len();
    let svg = plot::figure(
        plot::time_range(&d.times),
        (0.0, 1.02),
        &plot::time_label(&d.time_unit),
        "fidelity lower bound F_low",
        SeriesLabelPosition::LowerLeft,
        |c| {
            plot::draw_curve(
                c,
                &d.times,
                &d.f_low,
                &Curve::new("F_low", Dash::Solid, Marker::Square),
            )?;
            plot::draw_points(c, vacuous, Marker::Ring, "vacuous: the bound says nothing")
        },
    )?;
    let caption = format!(
        "Lower bound F_low on the fidelity |⟨ψ(t)|ψ_ideal(t)⟩|² of one noisy evolution from a \
         pure initial state (dimensionless; solid line, squares), each time with the \
         certificate's failure probability per time. {}",
        match n_vacuous {
            0 => "The bound is informative at every recorded time.".to_string(),
            n => format!(
                "At {n} of {} times it is vacuous (open circles).",
                d.times.len()
            ),
        }
    );
    Ok((svg, caption))
}
