//! The problem collector of the JSON readers (scenarios, array descriptions) and its typed
//! getters: each records a problem at a JSON pointer (RFC 6901) and returns `None`, so one pass
//! reports every problem.

use serde_json::{Map, Value};

use crate::error::Problem;

/// Collects problems while reading.
pub(crate) struct Reader {
    pub(crate) problems: Vec<Problem>,
}

impl Reader {
    pub(crate) fn push(&mut self, path: impl Into<String>, message: impl Into<String>) {
        self.problems.push(Problem::new(path, message));
    }

    pub(crate) fn object<'v>(
        &mut self,
        v: &'v Value,
        path: &str,
        keys: &[&str],
    ) -> Option<&'v Map<String, Value>> {
        let Some(obj) = v.as_object() else {
            self.push(path, "must be a JSON object");
            return None;
        };
        for k in obj.keys() {
            if !keys.contains(&k.as_str()) {
                self.push(
                    format!("{path}/{}", escape(k)),
                    format!(
                        "is not a known key here; known keys are {}",
                        keys.join(", ")
                    ),
                );
            }
        }
        Some(obj)
    }

    pub(crate) fn required<'v>(
        &mut self,
        obj: &'v Map<String, Value>,
        path: &str,
        key: &str,
    ) -> Option<&'v Value> {
        let v = obj.get(key);
        if v.is_none() {
            self.push(format!("{path}/{key}"), "is missing; it is required");
        }
        v
    }

    pub(crate) fn string<'v>(&mut self, v: &'v Value, path: &str) -> Option<&'v str> {
        let s = v.as_str();
        if s.is_none() {
            self.push(path, "must be a string");
        }
        s
    }

    pub(crate) fn number(&mut self, v: &Value, path: &str) -> Option<f64> {
        match v.as_f64() {
            Some(x) if x.is_finite() => Some(x),
            _ => {
                self.push(path, "must be a finite number");
                None
            }
        }
    }

    pub(crate) fn integer(&mut self, v: &Value, path: &str, min: u64, max: u64) -> Option<u64> {
        match v.as_u64() {
            Some(x) if x >= min && x <= max => Some(x),
            _ => {
                self.push(path, format!("must be an integer from {min} to {max}"));
                None
            }
        }
    }

    /// A number for all `count` items or an array of `count` numbers.
    pub(crate) fn per_item(
        &mut self,
        v: &Value,
        path: &str,
        count: usize,
        what: &str,
    ) -> Option<Vec<f64>> {
        if let Some(arr) = v.as_array() {
            if arr.len() != count {
                self.push(
                    path,
                    format!(
                        "has {} values but the lattice has {count} {what}; give one per {} or a single number",
                        arr.len(),
                        what.trim_end_matches('s')
                    ),
                );
                return None;
            }
            let mut out = Vec::with_capacity(count);
            let mut ok = true;
            for (i, x) in arr.iter().enumerate() {
                match self.number(x, &format!("{path}/{i}")) {
                    Some(x) => out.push(x),
                    None => ok = false,
                }
            }
            ok.then_some(out)
        } else {
            self.number(v, path).map(|x| vec![x; count])
        }
    }
}

/// The problem of a file that is not JSON: at `/`, with serde_json's line and column.
pub(crate) fn syntax_problem(e: &serde_json::Error) -> Problem {
    Problem::new(
        "/",
        format!(
            "is not valid JSON (line {}, column {}: {e}); fix the syntax",
            e.line(),
            e.column()
        ),
    )
}

/// JSON-pointer escaping of one reference token (RFC 6901).
pub(crate) fn escape(key: &str) -> String {
    key.replace('~', "~0").replace('/', "~1")
}

/// The root pointer is `""` in RFC 6901; messages use `/` for the whole file.
pub(crate) fn fix_root(problems: Vec<Problem>) -> Vec<Problem> {
    problems
        .into_iter()
        .map(|mut p| {
            if p.path.is_empty() {
                p.path = "/".into();
            }
            p
        })
        .collect()
}

pub(crate) fn prefix(problems: Vec<Problem>, base: &str) -> Vec<Problem> {
    problems
        .into_iter()
        .map(|p| {
            let path = if p.path == "/" || p.path.is_empty() {
                base.to_string()
            } else {
                format!("{base}{}", p.path)
            };
            Problem::new(path, p.message)
        })
        .collect()
}
