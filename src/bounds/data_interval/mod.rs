//! TEMPORARY STUB (replaced by the real module from branch data-interval): Hoeffding only.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeanMethod {
    Betting,
    EmpiricalBernstein,
    ClopperPearson,
}
impl MeanMethod {
    pub fn as_str(self) -> &'static str {
        match self {
            MeanMethod::Betting => "betting",
            MeanMethod::EmpiricalBernstein => "empirical_bernstein",
            MeanMethod::ClopperPearson => "clopper_pearson",
        }
    }
}
fn hoeffding(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    if values.is_empty() || lo >= hi {
        return [lo, hi];
    }
    let n = values.len() as f64;
    let m = values.iter().sum::<f64>() / n;
    let r = (hi - lo) * ((2.0 / alpha).ln() / (2.0 * n)).sqrt();
    [(m - r).max(lo), (m + r).min(hi)]
}
pub fn betting_interval(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    hoeffding(values, lo, hi, alpha)
}
pub fn empirical_bernstein_interval(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    hoeffding(values, lo, hi, alpha)
}
pub fn clopper_pearson(_k: u64, _n: u64, _alpha: f64) -> [f64; 2] {
    [0.0, 1.0]
}
