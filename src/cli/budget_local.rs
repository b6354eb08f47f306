//! `budget --support`: the planning answers for a local observable, from the same evaluator
//! `certify` uses (the smaller of the light-cone and global statements at each point).
//!
//! Why through `RunEvaluator`: a planned answer that `certify` would not reproduce on the
//! same inputs is no answer. Each trial point is one evaluation of
//! [`crate::bounds::run_bounds::RunEvaluator`] on the planned lattice and Hamiltonian bond
//! norm, at one time, with the confidence split over `--points` points as `certify` splits it
//! over times × observables, and the record's amplitudes multiplied by the trial scale. The
//! searches are those of the global answers ([`crate::bounds::planning`]).
//!
//! For other system sizes (question c) the support keeps its shape and is placed at the
//! lattice's centre. The light cone's tail grows with the number of noise sources outside it
//! (docs/method.md §5), so the largest system is finite, though far larger than the global
//! statement's; the search stops at [`max_local_side`].

use crate::bounds::confidence::Simultaneity;
use crate::bounds::global::PointBounds;
use crate::bounds::local::Statement;
use crate::bounds::planning::{self, Answer, Which};
use crate::bounds::run_bounds::{LightCone, RunEvaluator, RunGeometry};
use crate::model::lattice::Lattice;
use crate::model::sums::{ObservableSums, ShotSums};
use crate::model::units::FrequencyUnit;
use crate::model::Hamiltonian;
use crate::Error;

use super::Problem;

/// What the local answers need besides the record.
pub(super) struct LocalPlan<'a> {
    pub prob: &'a Problem,
    /// The planned lattice's shape and the observable's sites on it.
    pub shape: &'a [usize],
    pub support: &'a [usize],
    pub bond_norm: f64,
    pub energy_unit: FrequencyUnit,
    pub spectrum: [f64; 2],
    pub realizations: usize,
    pub shots: Option<u64>,
    pub confidence: f64,
    pub points: usize,
}

/// One evaluated point: the terms, whether the light-cone statement was computed, and
/// whether it is the one used there (the smaller).
pub(super) struct LocalPoint {
    pub bounds: PointBounds,
    pub light_cone: LightCone,
    pub light_cone_used: bool,
}

/// The largest side the system-size search tries for a local observable.
pub(super) fn max_local_side(dimension: usize) -> usize {
    match dimension {
        1 => 100_000,
        2 => 300,
        _ => 40,
    }
}

impl LocalPlan<'_> {
    /// The bounds at time `t` with every amplitude × `scale`, on a lattice of `shape` with the
    /// observable on `support`.
    pub fn point(
        &self,
        shape: &[usize],
        support: &[usize],
        scale: f64,
        t: f64,
    ) -> crate::Result<LocalPoint> {
        let p = self.prob;
        let lattice = Lattice::regular(p.geometry, shape, p.boundary)
            .map_err(|e| Error::Options(format!("--lattice: {e}")))?;
        let mut model =
            p.record
                .expand(&lattice, p.time_unit)
                .map_err(|problems| Error::Input {
                    kind: crate::InputKind::NoiseRecord,
                    file: p.noise_path.clone(),
                    problems,
                })?;
        for i in &mut model.instances {
            i.delta *= scale;
        }
        let hamiltonian = Hamiltonian {
            energy_unit: self.energy_unit,
            bond_norm_max: self.bond_norm,
            bond_norms: None,
            interaction_range: 1,
        };
        let times = [t];
        let geometry = RunGeometry {
            lattice: &lattice,
            hamiltonian: &hamiltonian,
            time_unit: p.time_unit,
        };
        // `points` observables at one time: the split certify makes over times × observables.
        let mut ev = RunEvaluator::new(
            &times,
            &model,
            geometry,
            self.points,
            self.confidence,
            Simultaneity::Simultaneous,
        )
        .map_err(|e| Error::Options(format!("--confidence: {e}")))?;
        let r = self.realizations;
        let sums = ObservableSums {
            realizations: r,
            // The values do not enter the model statement's half-width.
            value_sums: vec![self.spectrum[0] * r as f64],
            // Without --shots: 2^64 − 1 shots, a shot term below 1e-9 (never smaller than
            // the certificate of a real run's).
            shots: ShotSums::Uniform(self.shots.unwrap_or(u64::MAX)),
        };
        let s_o = self.spectrum[1] - self.spectrum[0];
        let o = ev.observable("planned", s_o, support, None, &sums);
        let light_cone_used = o
            .statements
            .first()
            .is_some_and(|s| *s != Statement::Global);
        let bounds = o
            .points
            .into_iter()
            .next()
            .ok_or_else(|| Error::Options("internal: no point evaluated".into()))?;
        Ok(LocalPoint {
            bounds,
            light_cone: o.light_cone,
            light_cone_used,
        })
    }

    /// The error asked for (`E_avg + E_shot` and the device terms, or `E_1`), ∞ where the
    /// point cannot be evaluated.
    fn error(&self, shape: &[usize], support: &[usize], scale: f64, t: f64, w: Which) -> f64 {
        match self.point(shape, support, scale, t) {
            Ok(p) => match w {
                Which::Averaged => p.bounds.half_width,
                Which::Single => p.bounds.e_one,
            },
            Err(_) => f64::INFINITY,
        }
    }

    /// (a) the largest scale factor at time `t`.
    pub fn largest_scale(&self, t: f64, target: f64, w: Which) -> Answer {
        planning::largest_real(
            |x| self.error(self.shape, self.support, x, t, w),
            target,
            1.0,
        )
    }

    /// (b) the longest time at the recorded amplitudes.
    pub fn longest_time(&self, t: f64, target: f64, w: Which) -> Answer {
        planning::largest_real(
            |x| self.error(self.shape, self.support, 1.0, x, w),
            target,
            t,
        )
    }

    /// (c) the largest side `L` at time `t`, the support placed at the centre.
    pub fn largest_side(&self, t: f64, target: f64, w: Which, lo: usize) -> Answer {
        let d = self.shape.len();
        let (extent, offsets) = self.support_shape();
        let lo = lo.max(extent);
        let hi = max_local_side(d).max(lo);
        planning::largest_integer(
            |l| {
                let shape = vec![l; d];
                match place(&shape, &vec![extent; d], &offsets) {
                    Some(sites) => self.error(&shape, &sites, 1.0, t, w),
                    None => f64::INFINITY,
                }
            },
            target,
            lo,
            hi,
        )
    }

    /// The support's bounding-box extent (largest over axes) and each site's offset from the
    /// box's corner, in the planned lattice's coordinates.
    fn support_shape(&self) -> (usize, Vec<Vec<usize>>) {
        let coords: Vec<Vec<usize>> = self
            .support
            .iter()
            .map(|&s| coordinates(self.shape, s))
            .collect();
        let d = self.shape.len();
        let lo: Vec<usize> = (0..d)
            .map(|a| coords.iter().map(|c| c[a]).min().unwrap_or(0))
            .collect();
        let offsets: Vec<Vec<usize>> = coords
            .iter()
            .map(|c| (0..d).map(|a| c[a] - lo[a]).collect())
            .collect();
        let extent = offsets
            .iter()
            .flat_map(|o| o.iter().copied())
            .max()
            .map_or(1, |m| m + 1);
        (extent, offsets)
    }
}

/// Row-major coordinates of `site` on `shape`.
fn coordinates(shape: &[usize], site: usize) -> Vec<usize> {
    let mut c = vec![0; shape.len()];
    let mut rest = site;
    for a in (0..shape.len()).rev() {
        c[a] = rest % shape[a];
        rest /= shape[a];
    }
    c
}

/// The sites of `offsets` with their box of `extent` placed at the centre of `shape`, or
/// `None` if it does not fit. Sorted, as supports are.
fn place(shape: &[usize], extent: &[usize], offsets: &[Vec<usize>]) -> Option<Vec<usize>> {
    if shape.iter().zip(extent).any(|(l, e)| e > l) {
        return None;
    }
    let corner: Vec<usize> = shape.iter().zip(extent).map(|(l, e)| (l - e) / 2).collect();
    let mut sites: Vec<usize> = offsets
        .iter()
        .map(|o| {
            o.iter()
                .zip(&corner)
                .zip(shape)
                .fold(0usize, |acc, ((x, c), l)| acc * l + x + c)
        })
        .collect();
    sites.sort_unstable();
    Some(sites)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_support_keeps_its_shape_when_placed_at_the_centre() {
        // Sites 5 and 6 of a 3 × 4 array: (1, 1) and (1, 2), a horizontal pair.
        assert_eq!(coordinates(&[3, 4], 6), vec![1, 2]);
        let offsets = vec![vec![0, 0], vec![0, 1]];
        // On 5 × 5 the 2 × 2 box sits at corner (1, 1): sites (1, 1) = 6 and (1, 2) = 7.
        assert_eq!(place(&[5, 5], &[2, 2], &offsets), Some(vec![6, 7]));
        assert_eq!(place(&[1, 1], &[2, 2], &offsets), None);
    }
}
