//! Reuse across supports: [`ExposureCache`] computes the exposures of many supports of one
//! run once per region shape, and gives a support whose region equals an earlier one number
//! for number the same values (the same operations on the same numbers, so the same bits).

use std::collections::HashMap;
use std::sync::Arc;

use rayon::prelude::*;

use super::exposure::{max_time, Values};
use super::*;

/// Exposures of many supports of one run, computed once per *region shape*.
///
/// The exposure of support `X` is a function of its region (bonds, `J̃`, sources with
/// `n_Y`, the order `K`, in the order the computation visits them), of the growth `q` and of
/// the times; nothing else is read. The region is found by a bounded search costing time
/// proportional to it, and when it equals, number for number (`J̃` to the bit, no boundary
/// or different coupling inside it), the region of a support already computed (a translate on
/// a uniform lattice, or the same support again), the computed values are reused: they are
/// exactly what a fresh computation would give, since it would perform the same operations on
/// the same numbers. Otherwise they are computed afresh. Which supports came first changes
/// only what is reused, never a value.
///
/// Memory: the kept shapes and values are dropped when they pass a budget (a number of stored
/// numbers); a dropped shape is recomputed if it comes again, with the same bits.
#[derive(Debug)]
pub struct ExposureCache {
    budget: usize,
    /// `q` and the times (bits) the kept values belong to.
    key: Option<Key>,
    lookup: HashMap<u64, Vec<usize>>,
    shapes: Vec<(Region, Arc<Values>)>,
    held: usize,
    computed: usize,
    reused: usize,
    /// Whether terms whose region meets the boundary may take the comparison values.
    compare: bool,
    /// The last comparison built, with its plan and times (`None` inside: it could not be built).
    comparison: Option<(ComparisonPlan, Vec<u64>, Option<Arc<Comparison>>)>,
}

/// `q` and the times, as bits: what kept values belong to.
type Key = (u64, Vec<u64>);

/// Where the values of one support of a batch come from.
enum Source {
    Kept(Arc<Values>),
    New(usize),
}

impl ExposureCache {
    /// An empty cache keeping at most about `budget` numbers (8 bytes each).
    pub fn new(budget: usize) -> ExposureCache {
        ExposureCache {
            budget,
            key: None,
            lookup: HashMap::new(),
            shapes: Vec::new(),
            held: 0,
            computed: 0,
            reused: 0,
            compare: true,
            comparison: None,
        }
    }

    /// Allows (the default) or forbids the comparison with an interior region for the terms of
    /// later sums (docs/method.md §5, "Comparison with an interior region"); forbidden, every
    /// term gets its exact region.
    pub fn set_comparison(&mut self, on: bool) {
        self.compare = on;
    }

    /// Whether the comparison is allowed.
    pub fn comparison_allowed(&self) -> bool {
        self.compare
    }

    /// The comparison of `plan` at `times`: built the first time and kept while the plan and the
    /// times stay the same (the plan holds everything the table depends on besides the times:
    /// the lattice, `J̃`, `K` and where every instance sits).
    pub fn comparison(&mut self, plan: ComparisonPlan, times: &[f64]) -> Option<Arc<Comparison>> {
        let bits: Vec<u64> = times.iter().map(|t| t.to_bits()).collect();
        if let Some((p, t, c)) = &self.comparison {
            if *p == plan && *t == bits {
                return c.clone();
            }
        }
        let c = plan.clone().build(times).map(Arc::new);
        self.comparison = Some((plan, bits, c.clone()));
        c
    }

    /// `(computed, reused)`: how many supports were computed afresh and how many reused the
    /// values of an equal region shape, since the cache was made.
    pub fn counts(&self) -> (usize, usize) {
        (self.computed, self.reused)
    }

    fn clear(&mut self) {
        self.lookup.clear();
        self.shapes.clear();
        self.held = 0;
    }

    /// The exposure of one support (see [`ExposureCache::exposures`]).
    pub fn exposure(
        &mut self,
        graph: &WalkGraph,
        index: &InstanceIndex,
        times: &[f64],
        x: &[usize],
    ) -> Result<Exposure, Unavailable> {
        let mut out = self.exposures(graph, index, times, &[x]);
        out.pop().unwrap_or(Err(Unavailable::GlobalObservable))
    }

    /// The exposures of `supports` at `times` (in the order given), equal to the bit to
    /// [`Exposure::new`] of each, for the instances of `index`. The region searches run in
    /// parallel, the shapes are matched in the order given, and the new shapes are computed
    /// in parallel: the result does not depend on the thread count.
    pub fn exposures(
        &mut self,
        graph: &WalkGraph,
        index: &InstanceIndex,
        times: &[f64],
        supports: &[&[usize]],
    ) -> Vec<Result<Exposure, Unavailable>> {
        let key = (
            graph.growth.to_bits(),
            times.iter().map(|t| t.to_bits()).collect::<Vec<u64>>(),
        );
        if self.key.as_ref() != Some(&key) {
            self.clear();
            self.key = Some(key);
        }
        let t_max = max_time(times);
        // Progress on a terminal only (crate::progress): regions built, then walk sums.
        let task = crate::progress::Task::start("light-cone regions", supports.len() as u64);
        let regions: Vec<Result<(Region, u64), Unavailable>> = supports
            .par_iter()
            .with_min_len(8)
            .map(|x| {
                Region::build(graph, index, x, t_max).map(|r| {
                    let h = r.shape_hash();
                    (r, h)
                })
            })
            .inspect(|_| task.inc(1))
            .collect();
        drop(task);
        // Match in the order given: kept shapes first, then shapes new in this batch.
        let mut fresh: HashMap<u64, Vec<usize>> = HashMap::new();
        let mut new_shapes: Vec<usize> = Vec::new();
        let mut from: Vec<Option<Source>> = Vec::with_capacity(regions.len());
        for (a, r) in regions.iter().enumerate() {
            let Ok((region, h)) = r else {
                from.push(None);
                continue;
            };
            let kept = self.lookup.get(h).and_then(|c| {
                c.iter()
                    .copied()
                    .find(|&i| self.shapes[i].0.same_shape(region))
            });
            if let Some(i) = kept {
                from.push(Some(Source::Kept(self.shapes[i].1.clone())));
                self.reused += 1;
                continue;
            }
            let list = fresh.entry(*h).or_default();
            let same = list.iter().copied().find(|&p| {
                let b = new_shapes[p];
                matches!(&regions[b], Ok((other, _)) if other.same_shape(region))
            });
            match same {
                Some(p) => {
                    from.push(Some(Source::New(p)));
                    self.reused += 1;
                }
                None => {
                    list.push(new_shapes.len());
                    from.push(Some(Source::New(new_shapes.len())));
                    new_shapes.push(a);
                    self.computed += 1;
                }
            }
        }
        let q = graph.growth;
        let task = crate::progress::Task::start("light-cone walk sums", new_shapes.len() as u64);
        let computed: Vec<Arc<Values>> = new_shapes
            .par_iter()
            .map(|&a| match &regions[a] {
                Ok((region, _)) => Arc::new(Values::compute(&Walks::from_region(q, region), times)),
                Err(_) => Arc::new(Values {
                    values: Vec::new(),
                    tail: Vec::new(),
                    order: 0,
                }),
            })
            .inspect(|_| task.inc(1))
            .collect();
        drop(task);
        // Keep the new shapes for later batches, within the budget.
        for (p, &a) in new_shapes.iter().enumerate() {
            if let Ok((region, h)) = &regions[a] {
                let size = region.size() + computed[p].values.len() + computed[p].tail.len();
                if self.held + size > self.budget {
                    self.clear();
                }
                if size <= self.budget {
                    self.held += size;
                    self.lookup.entry(*h).or_default().push(self.shapes.len());
                    self.shapes.push((region.clone(), computed[p].clone()));
                }
            }
        }
        regions
            .into_iter()
            .zip(from)
            .map(|(r, f)| {
                let (region, _) = r?;
                let values = match f {
                    Some(Source::Kept(v)) => v,
                    Some(Source::New(p)) => computed[p].clone(),
                    // Not reached: every support with a region has a source.
                    None => return Err(Unavailable::GlobalObservable),
                };
                Ok(Exposure {
                    times: times.to_vec(),
                    region: region.sources,
                    values,
                })
            })
            .collect()
    }
}
