//! Figure "budget": the error budget of one observable over time, each term its own curve
//! (bias, fluctuation, systematic, shot, and the device errors when the certificate has them),
//! with the half-width of the certified interval.

use plotters::prelude::SeriesLabelPosition;

use super::plot::{self, Curve, Dash, DrawError, Marker};
use super::{escape, ObservableColumns, ReportData};

/// The SVG and the caption (HTML) of the figure.
pub(crate) fn figure(d: &ReportData, o: &ObservableColumns) -> Result<(String, String), DrawError> {
    // E_avg = min(s_O, E_wc, E_sys + E_bias + fluctuation), so the half-width is not the sum
    // of the terms; it is drawn as its own curve.
    let half_width: Vec<f64> = o.e_avg.iter().zip(&o.e_shot).map(|(a, s)| a + s).collect();
    let mut bias = Curve::new(
        "E_bias (bias of the noise average)",
        Dash::Solid,
        Marker::Circle,
    );
    bias.width = 1;
    let mut curves = vec![
        (&o.e_bias, bias),
        (
            &o.fluctuation,
            Curve::new("fluctuation term", Dash::Long, Marker::Triangle),
        ),
        (
            &o.e_sys,
            Curve::new("E_sys (known offsets)", Dash::Short, Marker::Square),
        ),
        (
            &o.e_shot,
            Curve::new("E_shot (finite shots)", Dash::Long, Marker::Cross),
        ),
        (&half_width, {
            let mut c = Curve::new("half-width E_avg + E_shot", Dash::Solid, Marker::Ring);
            c.width = 3;
            c.grey = 90;
            c
        }),
    ];
    // Format 1.4: the fluctuation term of static noise, beside the windowed one.
    if let Some(v) = &o.fluctuation_static {
        let mut c = Curve::new(
            "fluctuation term, static noise",
            Dash::Short,
            Marker::Triangle,
        );
        c.grey = 60;
        curves.push((v, c));
    }
    // Format 1.3: the device-error terms, each drawn when the certificate has it.
    let device = [
        (
            &o.device.incoherent,
            "E_inc (incoherent errors)",
            Dash::Short,
            Marker::Triangle,
            "E_inc (short dashes, triangles)",
        ),
        (
            &o.device.preparation,
            "E_prep (preparation errors)",
            Dash::Long,
            Marker::Square,
            "E_prep (long dashes, squares)",
        ),
        (
            &o.device.readout,
            "E_meas (readout errors)",
            Dash::Short,
            Marker::Circle,
            "E_meas (short dashes, circles)",
        ),
    ];
    let mut device_text = Vec::new();
    for (column, label, dash, marker, text) in device {
        if let Some(v) = column {
            let mut c = Curve::new(label, dash, marker);
            c.grey = 60;
            curves.push((v, c));
            device_text.push(text);
        }
    }
    let all = curves.iter().flat_map(|(v, _)| v.iter().copied());
    let top = plot::padded_range(all.chain([0.0]), (0.0, 1.0)).1;
    let y = plot::with_legend_room((0.0, top), curves.len());
    let svg = plot::figure(
        plot::time_range(&d.times),
        y,
        &plot::time_label(&d.time_unit),
        &format!("error of ⟨{}⟩", o.name),
        SeriesLabelPosition::UpperRight,
        |c| {
            for (v, curve) in &curves {
                plot::draw_curve(c, &d.times, v, curve)?;
            }
            Ok(())
        },
    )?;
    let unbounded = |v: &[f64]| v.iter().filter(|x| x.is_infinite()).count();
    let mut notes = String::new();
    for (what, v) in [
        ("the fluctuation term", &o.fluctuation),
        ("E_bias", &o.e_bias),
    ] {
        let n = unbounded(v);
        if n > 0 {
            notes.push_str(&format!(
                " {what} is unbounded at {n} of {} times (no point drawn there).",
                v.len()
            ));
        }
    }
    let caption = format!(
        "Error budget of {name} over time, in the units of the observable: E_bias (thin solid \
         line, filled circles), the fluctuation term of the averaged trace (long dashes, \
         triangles), E_sys (short dashes, squares), E_shot (long dashes, crosses), and the \
         half-width E_avg + E_shot of the certified interval (thick grey line, open circles). \
         E_avg = min(s_O, E_wc, E_sys + E_bias + fluctuation), so the half-width can be less \
         than the sum of the terms.{windows}{device}{notes}",
        windows = if o.fluctuation_static.is_some() {
            " The record declares correlation times (format 1.4): the fluctuation term is that \
             of noise drawn again in every window; the grey short-dashed curve with triangles \
             is the same term for static noise, for comparison (not part of the claim)."
        } else {
            ""
        },
        name = escape(&o.name),
        device = if device_text.is_empty() {
            String::new()
        } else {
            format!(
                " The device errors, added with certainty to E_avg (grey): {}.",
                device_text.join(", ")
            )
        },
    );
    Ok((svg, caption))
}
