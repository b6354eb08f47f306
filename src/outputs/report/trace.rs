//! Figure "trace": the averaged trace of one observable with the certified interval and the
//! worst-case interval as bands (and the ideal-model trace when the run gave one).

use plotters::prelude::SeriesLabelPosition;

use super::plot::{self, Curve, Dash, DrawError, Marker};
use super::{escape, ObservableColumns, ReportData};

/// Shade of the certified interval (darker) and of the worst-case interval (lighter).
const CERTIFIED_GREY: u8 = 150;
const WORST_CASE_GREY: u8 = 222;
/// With a data statement (format 1.1): the model and data intervals in two middle shades,
/// the certified intersection darkest.
const MODEL_GREY: u8 = 200;
const DATA_GREY: u8 = 178;
const INTERSECTION_GREY: u8 = 120;

/// The worst-case interval `mean ∓ (e_wc + e_shot)`, clipped to the spectrum of the observable
/// (an unbounded `e_wc` gives the whole spectrum).
pub(crate) fn worst_case_band(o: &ObservableColumns) -> (Vec<f64>, Vec<f64>) {
    let [lo, hi] = o.spectrum;
    let half = |k: usize| o.e_wc[k] + o.e_shot[k];
    let low = (0..o.mean.len())
        .map(|k| (o.mean[k] - half(k)).max(lo))
        .collect();
    let high = (0..o.mean.len())
        .map(|k| (o.mean[k] + half(k)).min(hi))
        .collect();
    (low, high)
}

/// The SVG and the caption (HTML) of the figure.
pub(crate) fn figure(
    d: &ReportData,
    o: &ObservableColumns,
    ideal: Option<&Vec<f64>>,
) -> Result<(String, String), DrawError> {
    let (wc_low, wc_high) = worst_case_band(o);
    let values = wc_low
        .iter()
        .chain(&wc_high)
        .chain(&o.lower)
        .chain(&o.upper)
        .chain(&o.mean)
        .chain(ideal.into_iter().flatten())
        .copied();
    let entries = 3 + usize::from(ideal.is_some()) + if o.data.is_some() { 2 } else { 0 };
    let y = plot::with_legend_room(
        plot::padded_range(values, (o.spectrum[0], o.spectrum[1])),
        entries,
    );
    let svg = plot::figure(
        plot::time_range(&d.times),
        y,
        &plot::time_label(&d.time_unit),
        &format!("⟨{}⟩", o.name),
        SeriesLabelPosition::UpperRight,
        |c| {
            plot::draw_band(
                c,
                &d.times,
                &wc_low,
                &wc_high,
                WORST_CASE_GREY,
                "worst case: mean ∓ (E_wc + E_shot)",
            )?;
            match &o.data {
                None => plot::draw_band(
                    c,
                    &d.times,
                    &o.lower,
                    &o.upper,
                    CERTIFIED_GREY,
                    &format!("certified interval, confidence {}", d.confidence),
                )?,
                Some(b) => {
                    plot::draw_band(
                        c,
                        &d.times,
                        &o.lower,
                        &o.upper,
                        MODEL_GREY,
                        "model statement",
                    )?;
                    plot::draw_band(
                        c,
                        &d.times,
                        &b.lower,
                        &b.upper,
                        DATA_GREY,
                        &format!("data statement ({})", b.method),
                    )?;
                    plot::draw_band(
                        c,
                        &d.times,
                        &b.certified_lower,
                        &b.certified_upper,
                        INTERSECTION_GREY,
                        &format!("certified (intersection), confidence {}", d.confidence),
                    )?;
                }
            }
            if let Some(ideal) = ideal {
                plot::draw_curve(
                    c,
                    &d.times,
                    ideal,
                    &Curve::new("ideal model (from the run)", Dash::Long, Marker::Ring),
                )?;
            }
            plot::draw_curve(
                c,
                &d.times,
                &o.mean,
                &Curve::new("mean over realizations", Dash::Solid, Marker::Circle),
            )
        },
    )?;
    let caption = format!(
        "Averaged trace of {name}: the mean over realizations (solid line, filled circles){ideal}; \
         the {which} [lower, upper] = mean ∓ (E_avg + E_shot) at confidence {conf} \
         ({statement}; {band}); and the worst-case interval mean ∓ (E_wc + E_shot), clipped \
         to the spectrum [{lo}, {hi}] of the observable (light band; E_wc holds with \
         probability 1, E_shot is the certificate's shot term).{unbounded}{data}",
        name = escape(&o.name),
        ideal = if ideal.is_some() {
            ", the run's ideal-model trace (long dashes, open circles)"
        } else {
            ""
        },
        which = if o.data.is_some() {
            "model statement's interval"
        } else {
            "certified interval"
        },
        band = if o.data.is_some() {
            "the lightest inner band"
        } else {
            "dark band"
        },
        conf = d.confidence,
        statement = escape(&d.statement),
        lo = o.spectrum[0],
        hi = o.spectrum[1],
        data = match &o.data {
            None => String::new(),
            Some(b) => format!(
                " The certified interval is the intersection (darkest band) of the model \
                 statement and the data \
                 statement (middle band): a {} interval for the mean of the realizations from \
                 the values themselves, widened by the model's systematic and bias terms. \
                 Where the two do not overlap nothing is certified (a gap in the darkest band).",
                escape(&b.method)
            ),
        },
        unbounded = match o.e_wc.iter().filter(|x| x.is_infinite()).count() {
            0 => String::new(),
            n => format!(
                " E_wc is unbounded at {n} of {} times (a noise law of unbounded support), so \
                 the light band there is the whole spectrum.",
                o.e_wc.len()
            ),
        },
    );
    Ok((svg, caption))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_worst_case_band_is_clipped_to_the_spectrum() {
        let o = ObservableColumns {
            name: "Z".into(),
            description: String::new(),
            spectrum: [-1.0, 1.0],
            mean: vec![0.5, 0.0],
            lower: vec![0.4, -0.2],
            upper: vec![0.6, 0.2],
            e_wc: vec![0.25, f64::INFINITY],
            e_sys: vec![0.0; 2],
            e_bias: vec![0.0; 2],
            fluctuation: vec![0.0; 2],
            fluctuation_static: None,
            e_avg: vec![0.05, 0.1],
            e_shot: vec![0.25, 0.1],
            claim: String::new(),
            data: None,
            device: Default::default(),
        };
        let (low, high) = worst_case_band(&o);
        assert_eq!(low, [0.0, -1.0]);
        assert_eq!(high, [1.0, 1.0]);
    }
}
