//! Time and frequency units, and the one conversion every frequency goes through.
//!
//! docs/run-format.md and docs/noise-record.md: a run declares its time unit; every frequency declares its unit, angular
//! (`rad/s` ... `rad/ns`) or cyclic (`Hz` ... `GHz`, multiplied by 2π). Nothing is ever assumed:
//! an unknown or missing unit is an error at the reader. The conversion multiplies by an exact
//! power of ten (taken from a table, not computed as a product of two rounded factors) and, for
//! cyclic units, by 2π, so `1 MHz` in a run measured in `us` is exactly `2π` rad/us.

use std::fmt;

/// The time unit of a run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    S,
    Ms,
    Us,
    Ns,
}

/// A frequency unit, angular or cyclic.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FrequencyUnit {
    RadPerS,
    RadPerMs,
    RadPerUs,
    RadPerNs,
    Hz,
    KHz,
    MHz,
    GHz,
}

impl TimeUnit {
    /// All time units, with their spelling in files.
    pub const ALL: [(TimeUnit, &'static str); 4] = [
        (TimeUnit::S, "s"),
        (TimeUnit::Ms, "ms"),
        (TimeUnit::Us, "us"),
        (TimeUnit::Ns, "ns"),
    ];

    /// Parses the spelling used in files (`s`, `ms`, `us`, `ns`); `None` if unknown.
    pub fn parse(text: &str) -> Option<TimeUnit> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(u, _)| *u)
    }

    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(u, _)| *u == self)
            .map(|(_, s)| *s)
            .unwrap_or("?")
    }

    /// The unit as a power of ten of seconds: `s` is 0, `us` is −6.
    pub fn exponent(self) -> i32 {
        match self {
            TimeUnit::S => 0,
            TimeUnit::Ms => -3,
            TimeUnit::Us => -6,
            TimeUnit::Ns => -9,
        }
    }

    /// The factor that turns a duration in this unit into one in `other` (an exact power of
    /// ten): `1 us` is `1e3 ns`. A rate per this unit times `other.factor_to(self)` is the rate
    /// per `other`.
    pub fn factor_to(self, other: TimeUnit) -> f64 {
        exact_power_of_ten(self.exponent() - other.exponent())
    }
}

impl FrequencyUnit {
    /// All frequency units, with their spelling in files.
    pub const ALL: [(FrequencyUnit, &'static str); 8] = [
        (FrequencyUnit::RadPerS, "rad/s"),
        (FrequencyUnit::RadPerMs, "rad/ms"),
        (FrequencyUnit::RadPerUs, "rad/us"),
        (FrequencyUnit::RadPerNs, "rad/ns"),
        (FrequencyUnit::Hz, "Hz"),
        (FrequencyUnit::KHz, "kHz"),
        (FrequencyUnit::MHz, "MHz"),
        (FrequencyUnit::GHz, "GHz"),
    ];

    /// Parses the spelling used in files; `None` if unknown (units are case-sensitive:
    /// `mHz` is not `MHz`).
    pub fn parse(text: &str) -> Option<FrequencyUnit> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(u, _)| *u)
    }

    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(u, _)| *u == self)
            .map(|(_, s)| *s)
            .unwrap_or("?")
    }

    /// The list of accepted spellings, for messages.
    pub fn accepted() -> String {
        Self::ALL
            .iter()
            .map(|(_, s)| *s)
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// `(cyclic, e)`: the unit is `10^e` per second, cyclic (times 2π) or angular.
    fn parts(self) -> (bool, i32) {
        match self {
            FrequencyUnit::RadPerS => (false, 0),
            FrequencyUnit::RadPerMs => (false, 3),
            FrequencyUnit::RadPerUs => (false, 6),
            FrequencyUnit::RadPerNs => (false, 9),
            FrequencyUnit::Hz => (true, 0),
            FrequencyUnit::KHz => (true, 3),
            FrequencyUnit::MHz => (true, 6),
            FrequencyUnit::GHz => (true, 9),
        }
    }

    /// The factor that turns a value in this unit into radians per `time_unit`.
    pub fn factor_to_angular(self, time_unit: TimeUnit) -> f64 {
        let (cyclic, e) = self.parts();
        let scale = exact_power_of_ten(e + time_unit.exponent());
        if cyclic {
            std::f64::consts::TAU * scale
        } else {
            scale
        }
    }

    /// Converts `value` in this unit to radians per `time_unit`.
    pub fn to_angular(self, value: f64, time_unit: TimeUnit) -> f64 {
        value * self.factor_to_angular(time_unit)
    }
}

/// `10^e` for `|e| ≤ 18`, each the correctly rounded double (decimal literals, not products).
fn exact_power_of_ten(e: i32) -> f64 {
    const POS: [f64; 19] = [
        1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
        1e17, 1e18,
    ];
    const NEG: [f64; 19] = [
        1e0, 1e-1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10, 1e-11, 1e-12, 1e-13,
        1e-14, 1e-15, 1e-16, 1e-17, 1e-18,
    ];
    // Unit exponents lie in [-9, 9], so the sum lies in [-18, 18].
    let k = e.unsigned_abs() as usize;
    if e >= 0 {
        POS[k.min(18)]
    } else {
        NEG[k.min(18)]
    }
}

impl fmt::Display for TimeUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl fmt::Display for FrequencyUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::TAU;

    #[test]
    fn one_megahertz_is_two_pi_radians_per_microsecond_exactly() {
        assert_eq!(FrequencyUnit::MHz.to_angular(1.0, TimeUnit::Us), TAU);
        assert_eq!(FrequencyUnit::KHz.to_angular(1.0, TimeUnit::Ms), TAU);
        assert_eq!(FrequencyUnit::GHz.to_angular(1.0, TimeUnit::Ns), TAU);
    }

    #[test]
    fn angular_units_scale_by_powers_of_ten() {
        assert_eq!(FrequencyUnit::RadPerUs.to_angular(2.5, TimeUnit::Us), 2.5);
        assert_eq!(FrequencyUnit::RadPerS.to_angular(3.0, TimeUnit::Ms), 3.0e-3);
        assert_eq!(FrequencyUnit::RadPerNs.to_angular(1.0, TimeUnit::S), 1.0e9);
        assert_eq!(FrequencyUnit::Hz.to_angular(1.0, TimeUnit::Ns), TAU * 1e-9);
    }

    #[test]
    fn spellings_round_trip_and_are_case_sensitive() {
        for (u, s) in FrequencyUnit::ALL {
            assert_eq!(FrequencyUnit::parse(s), Some(u));
            assert_eq!(u.as_str(), s);
        }
        for (u, s) in TimeUnit::ALL {
            assert_eq!(TimeUnit::parse(s), Some(u));
        }
        assert_eq!(FrequencyUnit::parse("mhz"), None);
        assert_eq!(FrequencyUnit::parse("rad/µs"), None);
        assert_eq!(TimeUnit::parse("µs"), None);
    }
}
