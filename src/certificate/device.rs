//! The certificate members of the device errors (format 1.3, docs/certificate.md): the
//! record's device sections as read, the terms per observable, the assumptions they add and
//! what stays outside the model. Added only when the record has device sections, so that
//! certificates from version 1 records keep their bytes.

use serde_json::{json, Value};

use crate::bounds::device::{DeviceTerms, ReadoutTerm};
use crate::model::device::{AppliesTo, ChannelSpec, DeviceModel, DeviceRecord, SiteSet};
use crate::numbers::num;

/// The certificate format minor version that introduced the device errors.
pub const FORMAT_MINOR: u64 = 3;

fn column(values: impl Iterator<Item = f64>) -> Value {
    Value::Array(values.map(num).collect())
}

fn sites(s: &SiteSet) -> Value {
    match s {
        SiteSet::EachSite => json!("each_site"),
        SiteSet::Sites(v) => json!({ "sites": v }),
    }
}

/// The record's device sections as read (units as written), under `noise.device`.
pub fn record_json(record: &DeviceRecord, model: &DeviceModel, angular_unit: &str) -> Value {
    let mut v = json!({});
    if let Some(channels) = &record.incoherent {
        let list: Vec<Value> = channels
            .iter()
            .map(|c| {
                let mut x = json!({ "name": c.name, "acts_on": sites(&c.acts_on) });
                match &c.spec {
                    ChannelSpec::Rate {
                        jump,
                        rate,
                        uncertainty,
                        unit,
                    } => {
                        x["jump"] = json!(jump.as_str());
                        x["rate"] = num(*rate);
                        x["rate_uncertainty"] = num(*uncertainty);
                        x["rate_unit"] = json!(unit.as_str());
                        x["constant"] = num(jump.constant());
                    }
                    ChannelSpec::Times {
                        t1,
                        t1_uncertainty,
                        t2,
                        t2_uncertainty,
                        unit,
                    } => {
                        x["t1"] = num(*t1);
                        x["t1_uncertainty"] = num(*t1_uncertainty);
                        x["t2"] = num(*t2);
                        x["t2_uncertainty"] = num(*t2_uncertainty);
                        x["time_unit"] = json!(unit.as_str());
                    }
                }
                x
            })
            .collect();
        v["incoherent"] = json!({
            "channels": list,
            "site_rate_unit": angular_unit.replace("rad/", "1/"),
            "site_rates": column(model.incoherent.iter().flatten().copied()),
        });
    }
    if let Some(entries) = &record.preparation {
        let list: Vec<Value> = entries
            .iter()
            .map(|p| {
                json!({
                    "acts_on": sites(&p.acts_on),
                    "trace_distance": num(p.trace_distance),
                    "trace_distance_uncertainty": num(p.uncertainty),
                })
            })
            .collect();
        v["preparation"] = json!({
            "entries": list,
            "site_trace_distances": column(model.preparation.iter().flatten().copied()),
        });
    }
    if let Some(r) = &record.readout {
        let list: Vec<Value> = r
            .entries
            .iter()
            .map(|e| {
                json!({
                    "acts_on": sites(&e.acts_on),
                    "flip_0_to_1": num(e.flip_0_to_1),
                    "flip_1_to_0": num(e.flip_1_to_0),
                    "flip_uncertainty": num(e.uncertainty),
                })
            })
            .collect();
        let applies = match &r.applies_to {
            AppliesTo::All => json!("all"),
            AppliesTo::Names(n) => json!(n),
        };
        v["readout"] = json!({
            "applies_to": applies,
            "errors": list,
            "site_flip_probabilities": column(
                model.readout.iter().flat_map(|(p, _)| p.iter().copied())
            ),
        });
    }
    v
}

/// The per-observable members: `e_incoherent`, `e_preparation` (per time), `e_readout` (per
/// time, or the reason it is not covered) and whether a light cone was computed.
pub fn observable_json(v: &mut Value, d: &DeviceTerms) {
    if let Some(e) = &d.incoherent {
        v["e_incoherent"] = column(e.iter().copied());
    }
    if let Some(e) = &d.preparation {
        v["e_preparation"] = column(e.iter().copied());
    }
    match d.readout {
        ReadoutTerm::Absent => {}
        ReadoutTerm::NotDeclared => {
            v["e_readout"] = json!(
                "not covered: the observable is not listed in the noise record's \
                 readout.applies_to (not declared read in the computational basis)"
            );
        }
        ReadoutTerm::Bound(e) => {
            v["e_readout"] = column(d.total.iter().map(|_| e));
        }
    }
    v["e_device"] = column(d.total.iter().copied());
    v["device_light_cone"] = json!(d.light_cone);
}

/// The assumptions the device terms add.
pub fn assumptions(model: &DeviceModel) -> Vec<&'static str> {
    let mut a = vec![
        "For the device errors: every site is a qubit (two levels, 0 and 1 the computational basis), and the device-error terms e_device are added to e_one and e_avg (and to the data statement's added term) with certainty, for every noise draw (docs/method.md §7).",
    ];
    if model.incoherent.is_some() {
        a.push("Incoherent errors: the open evolution is Markovian, generated by -i[H(g), .] plus the listed single-site Lindblad terms, each at a rate at most its stated value plus uncertainty (T1 and T2 converted to rates as docs/method.md §7.1 says, T1 being the relaxation time and T2 the coherence time of a free-induction or echo measurement under the same conditions as the run).");
    }
    if model.preparation.is_some() {
        a.push("Preparation errors: the prepared state is a product of single-site states, each within the stated trace distance (plus uncertainty) of the intended single-site state, and the intended initial state is a product state.");
    }
    if model.readout.is_some() {
        a.push("Readout errors: each observable in readout.applies_to is a function of the computational-basis outcomes on its support, and each site's recorded outcome differs from the true one with probability at most max(flip_0_to_1, flip_1_to_0) plus the uncertainty, independently of the other sites given the true outcomes.");
    }
    a
}

/// What is not covered, with the device sections present: the general gaps, and for each
/// kind of device error either what stays outside its model or, when the record has no such
/// section, the kind itself.
pub fn not_covered(model: &DeviceModel) -> Vec<&'static str> {
    let mut v = Vec::new();
    v.push(if model.incoherent.is_some() {
        "Incoherent errors other than the listed single-site Markovian channels: multi-site or correlated jumps, non-Markovian baths, and any site or channel the record omits."
    } else {
        "Decoherence and other incoherent (Markovian) errors."
    });
    v.push(if model.preparation.is_some() {
        "Preparation errors that are correlated between sites or leave the qubit subspace."
    } else {
        "State-preparation errors."
    });
    v.push(if model.readout.is_some() {
        "Readout errors that are correlated between sites, and readout errors of observables not listed in readout.applies_to."
    } else {
        "Measurement (readout) errors."
    });
    v.extend([
        "Leakage out of the modelled Hilbert space.",
        super::claim::TIME_DEPENDENCE_GAP,
        "Errors in the target Hamiltonian itself: the interval is for the ideal model's value, not for nature's.",
        "The fidelity bound is for the closed evolution from the intended state: it does not include the device errors.",
    ]);
    v
}
