//! Figure "spread": the observed realization-to-realization standard deviation of one
//! observable against the one the noise record and the shots allow, from the certificate's
//! variance checks.

use plotters::prelude::SeriesLabelPosition;

use super::plot::{self, Curve, Dash, DrawError, Marker};
use super::{ReportData, SpreadColumns};

/// `sqrt(s²)` and `sqrt(V_noise + V_shot)` per time.
pub(crate) fn deviations(s: &SpreadColumns) -> (Vec<f64>, Vec<f64>) {
    let observed = s
        .sample_variance
        .iter()
        .map(|v| v.max(0.0).sqrt())
        .collect();
    let allowed = s
        .v_noise
        .iter()
        .zip(&s.v_shot)
        .map(|(n, h)| (n + h).max(0.0).sqrt())
        .collect();
    (observed, allowed)
}

/// The SVG and the caption (HTML) of the figure.
pub(crate) fn figure(d: &ReportData, s: &SpreadColumns) -> Result<(String, String), DrawError> {
    let (observed, allowed) = deviations(s);
    let failed: Vec<(f64, f64)> = d
        .times
        .iter()
        .zip(&observed)
        .zip(&s.rejected)
        .filter(|(_, &r)| r)
        .map(|((&t, &o), _)| (t, o))
        .collect();
    let entries = 2 + usize::from(!failed.is_empty());
    let top = plot::padded_range(
        observed.iter().chain(&allowed).copied().chain([0.0]),
        (0.0, 1.0),
    )
    .1;
    let y = plot::with_legend_room((0.0, top), entries);
    let n_failed = failed.len();
    let svg = plot::figure(
        plot::time_range(&d.times),
        y,
        &plot::time_label(&d.time_unit),
        "standard deviation",
        SeriesLabelPosition::UpperRight,
        |c| {
            plot::draw_curve(
                c,
                &d.times,
                &allowed,
                &Curve::new("allowed: √(V_noise + V_shot)", Dash::Long, Marker::Triangle),
            )?;
            plot::draw_curve(
                c,
                &d.times,
                &observed,
                &Curve::new(
                    "observed: √s² over realizations",
                    Dash::Solid,
                    Marker::Circle,
                ),
            )?;
            plot::draw_points(c, failed, Marker::Cross, "variance test rejected (Holm)")
        },
    )?;
    let caption = format!(
        "Realization-to-realization standard deviation, in the units of the observable: the \
         observed one, √s² with s² the unbiased sample variance (solid line, filled circles), \
         against the largest one the noise record and the shots allow, √(V_noise + V_shot) \
         (long dashes, triangles){approx}. A single time above the allowed curve is not by \
         itself a failure: the χ² variance test with Holm's correction decides, and {failed}.",
        approx = if s.shot_approximate {
            "; V_shot from the run's standard errors (approximate)"
        } else {
            ""
        },
        failed = match n_failed {
            0 => "it rejected at no time".to_string(),
            n => format!("it rejected at the {n} times marked with crosses"),
        },
    );
    Ok((svg, caption))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn deviations_are_square_roots_of_the_variances() {
        let s = SpreadColumns {
            sample_variance: vec![0.04, 0.0],
            v_noise: vec![0.01, 0.0],
            v_shot: vec![0.08, 0.25],
            rejected: vec![false, false],
            shot_approximate: false,
        };
        let (o, a) = deviations(&s);
        assert_eq!(o, [0.2, 0.0]);
        assert!((a[0] - 0.3).abs() < 1e-15);
        assert_eq!(a[1], 0.5);
    }
}
