//! Gas mixtures: parsing `"H2=0.6,H2O=0.3,N2=0.1"` and checking fractions.

use crate::gas::{Gas, GasError, GasTable};

/// One species of a mixture.
#[derive(Debug, Clone, PartialEq)]
pub struct Component {
    /// The gas.
    pub gas: Gas,
    /// Mole fraction, 0 < x ≤ 1.
    pub fraction: f64,
}

/// A gas or a mixture of gases with mole fractions summing to 1.
#[derive(Debug, Clone, PartialEq)]
pub struct Mixture {
    components: Vec<Component>,
}

/// How far the fractions may sum from 1 before it is an error.
pub const FRACTION_TOLERANCE: f64 = 1e-3;

/// What is wrong with a mixture.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MixtureError {
    /// No species.
    #[error("a mixture needs at least one species, e.g. \"H2=0.6,H2O=0.3,N2=0.1\"")]
    Empty,
    /// An item is not `gas=fraction`.
    #[error("mixture item {index} \"{item}\" is not of the form gas=fraction (e.g. \"N2=0.78\")")]
    BadItem {
        /// One-based item number.
        index: usize,
        /// The item as written.
        item: String,
    },
    /// A fraction is not a number in (0, 1].
    #[error("fraction of {gas} \"{text}\" must be a number greater than 0 and at most 1")]
    BadFraction {
        /// The gas.
        gas: String,
        /// The fraction as written.
        text: String,
    },
    /// A species appears twice.
    #[error("{0} appears more than once in the mixture")]
    Repeated(String),
    /// Fractions do not sum to 1.
    #[error("mole fractions sum to {sum}; they must sum to 1 (within {FRACTION_TOLERANCE})")]
    BadSum {
        /// The sum.
        sum: f64,
    },
    /// Unknown gas.
    #[error(transparent)]
    Gas(#[from] GasError),
}

impl Mixture {
    /// A pure gas.
    pub fn pure(gas: Gas) -> Self {
        Mixture {
            components: vec![Component { gas, fraction: 1.0 }],
        }
    }

    /// A mixture from gases and mole fractions. Fractions must each be in
    /// (0, 1] and sum to 1 within [`FRACTION_TOLERANCE`]; they are then
    /// rescaled to sum to 1.
    pub fn new(parts: Vec<(Gas, f64)>) -> Result<Self, MixtureError> {
        if parts.is_empty() {
            return Err(MixtureError::Empty);
        }
        for (i, (g, x)) in parts.iter().enumerate() {
            if !(x.is_finite() && *x > 0.0 && *x <= 1.0) {
                return Err(MixtureError::BadFraction {
                    gas: g.id.clone(),
                    text: x.to_string(),
                });
            }
            if parts[..i].iter().any(|(h, _)| h.id == g.id) {
                return Err(MixtureError::Repeated(g.id.clone()));
            }
        }
        let sum: f64 = parts.iter().map(|(_, x)| x).sum();
        if (sum - 1.0).abs() > FRACTION_TOLERANCE {
            return Err(MixtureError::BadSum { sum });
        }
        // Rescale only a real shortfall, not the last-bit rounding of
        // 0.6 + 0.3 + 0.1, so that the user's numbers are kept as written.
        let scale = if (sum - 1.0).abs() > 1e-9 { sum } else { 1.0 };
        Ok(Mixture {
            components: parts
                .into_iter()
                .map(|(gas, x)| Component {
                    gas,
                    fraction: x / scale,
                })
                .collect(),
        })
    }

    /// Parses `"H2=0.6,H2O=0.3,N2=0.1"` (or a single gas id, `"Ar"`).
    pub fn parse(text: &str, table: &GasTable) -> Result<Self, MixtureError> {
        let text = text.trim();
        if text.is_empty() {
            return Err(MixtureError::Empty);
        }
        if !text.contains('=') && !text.contains(',') {
            return Ok(Mixture::pure(table.get(text)?.clone()));
        }
        let mut parts = Vec::new();
        for (i, item) in text.split(',').enumerate() {
            let Some((id, x)) = item.split_once('=') else {
                return Err(MixtureError::BadItem {
                    index: i + 1,
                    item: item.trim().to_string(),
                });
            };
            let gas = table.get(id)?.clone();
            let fraction: f64 = x.trim().parse().map_err(|_| MixtureError::BadFraction {
                gas: gas.id.clone(),
                text: x.trim().to_string(),
            })?;
            parts.push((gas, fraction));
        }
        Mixture::new(parts)
    }

    /// The species.
    pub fn components(&self) -> &[Component] {
        &self.components
    }

    /// Whether this is a single gas.
    pub fn is_pure(&self) -> bool {
        self.components.len() == 1
    }

    /// `"N2"` for a pure gas, `"H2=0.6,H2O=0.3,N2=0.1"` for a mixture.
    pub fn label(&self) -> String {
        if let [only] = self.components.as_slice() {
            return only.gas.id.clone();
        }
        self.components
            .iter()
            .map(|c| format!("{}={}", c.gas.id, c.fraction))
            .collect::<Vec<_>>()
            .join(",")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_mixtures_and_single_gases() {
        let t = GasTable::builtin();
        let m = Mixture::parse("H2=0.6, H2O=0.3 ,N2=0.1", &t).expect("valid");
        assert_eq!(m.components().len(), 3);
        assert_eq!(m.label(), "H2=0.6,H2O=0.3,N2=0.1");
        assert!(Mixture::parse("Ar", &t).expect("Ar").is_pure());
        assert!(Mixture::parse("Ar=1", &t).expect("Ar=1").is_pure());
    }

    #[test]
    fn refuses_bad_mixtures_with_reasons() {
        let t = GasTable::builtin();
        let e = |s: &str| Mixture::parse(s, &t).unwrap_err();
        assert!(matches!(e("H2=0.6,N2=0.3"), MixtureError::BadSum { .. }));
        assert!(matches!(
            e("H2=0.6,N2"),
            MixtureError::BadItem { index: 2, .. }
        ));
        assert!(matches!(e("H2=x,N2=0.4"), MixtureError::BadFraction { .. }));
        assert!(matches!(
            e("H2=-0.5,N2=1.5"),
            MixtureError::BadFraction { .. }
        ));
        assert!(matches!(e("H2=0.5,H2=0.5"), MixtureError::Repeated(_)));
        assert!(matches!(e("Q2=0.5,N2=0.5"), MixtureError::Gas(_)));
        assert!(matches!(e(""), MixtureError::Empty));
    }
}
