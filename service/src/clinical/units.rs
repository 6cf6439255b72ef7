//! Unit normalisation: UCUM codes into each analyte's canonical unit.
//!
//! The table below holds the UCUM units the service accepts, each with its
//! dimension and its factor to the dimension's base unit, as UCUM defines them
//! (prefixes m = 1e-3, u = 1e-6, n = 1e-9, p = 1e-12, d = 1e-1; [lb_av] =
//! 0.45359237 kg). It is a closed list on purpose (DEVELOPERS.md: units): a
//! code outside it is refused, never guessed. UCUM codes are case-sensitive,
//! so `mEq/L` and `MG/DL` are refused; UCUM defines the litre both as `L` and
//! as `l`, so `mg/dl` is the same unit as `mg/dL` and is accepted. Converting between
//! mass, substance and equivalents needs the analyte's molar mass and valence,
//! which come from the rule data.

use crate::rules::model::AnalyteRule;

/// Physical dimension of a unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dimension {
    /// Mass per volume; base g/L.
    MassConcentration,
    /// Amount of substance per volume; base mol/L.
    SubstanceConcentration,
    /// Equivalents per volume; base eq/L.
    EquivalentConcentration,
    /// Catalytic activity per volume; base U/L.
    CatalyticConcentration,
    /// Mass; base kg.
    Mass,
    /// Length; base cm.
    Length,
    /// Short duration; base ms.
    Duration,
    /// Gestational duration; base wk.
    Weeks,
    /// pH; base [pH].
    Ph,
    /// Mass ratio; base g/g.
    MassRatio,
    /// Molar ratio; base mol/mol.
    SubstanceRatio,
}

/// One accepted UCUM unit.
#[derive(Debug, Clone, Copy)]
pub struct UnitDef {
    /// UCUM code (case-sensitive).
    pub code: &'static str,
    /// Dimension.
    pub dimension: Dimension,
    /// Multiply by this to get the dimension's base unit.
    pub factor: f64,
}

const fn unit(code: &'static str, dimension: Dimension, factor: f64) -> UnitDef {
    UnitDef { code, dimension, factor }
}

use Dimension as D;

/// Every accepted UCUM code, with its factor to the base unit of its dimension.
pub const UNITS: &[UnitDef] = &[
    unit("g/L", D::MassConcentration, 1.0),
    unit("g/dL", D::MassConcentration, 10.0),
    unit("mg/dL", D::MassConcentration, 1e-2),
    unit("mg/L", D::MassConcentration, 1e-3),
    unit("mg/mL", D::MassConcentration, 1.0),
    unit("ug/dL", D::MassConcentration, 1e-5),
    unit("ug/L", D::MassConcentration, 1e-6),
    unit("ng/mL", D::MassConcentration, 1e-6),
    unit("ng/dL", D::MassConcentration, 1e-8),
    unit("ng/L", D::MassConcentration, 1e-9),
    unit("pg/mL", D::MassConcentration, 1e-9),
    unit("mol/L", D::SubstanceConcentration, 1.0),
    unit("mmol/L", D::SubstanceConcentration, 1e-3),
    unit("umol/L", D::SubstanceConcentration, 1e-6),
    unit("nmol/L", D::SubstanceConcentration, 1e-9),
    unit("pmol/L", D::SubstanceConcentration, 1e-12),
    unit("eq/L", D::EquivalentConcentration, 1.0),
    unit("meq/L", D::EquivalentConcentration, 1e-3),
    unit("U/L", D::CatalyticConcentration, 1.0),
    unit("ukat/L", D::CatalyticConcentration, 60.0),
    unit("kg", D::Mass, 1.0),
    unit("g", D::Mass, 1e-3),
    unit("[lb_av]", D::Mass, 0.453_592_37),
    unit("cm", D::Length, 1.0),
    unit("m", D::Length, 100.0),
    unit("mm", D::Length, 0.1),
    unit("[in_i]", D::Length, 2.54),
    unit("ms", D::Duration, 1.0),
    unit("s", D::Duration, 1000.0),
    unit("wk", D::Weeks, 1.0),
    unit("d", D::Weeks, 1.0 / 7.0),
    unit("[pH]", D::Ph, 1.0),
    unit("g/g", D::MassRatio, 1.0),
    unit("mg/mg", D::MassRatio, 1.0),
    unit("mg/g", D::MassRatio, 1e-3),
    unit("mol/mol", D::SubstanceRatio, 1.0),
    unit("mmol/mmol", D::SubstanceRatio, 1.0),
    unit("mmol/mol", D::SubstanceRatio, 1e-3),
];

/// Look a UCUM code up in the accepted table. A lower-case litre in the
/// denominator (`/l`, `/dl`, `/ml`) is UCUM's other symbol for the litre and
/// finds the table entry written with `L`.
pub fn lookup(code: &str) -> Option<&'static UnitDef> {
    UNITS.iter().find(|u| u.code == code).or_else(|| {
        let (num, den) = code.split_once('/')?;
        let prefix = den.strip_suffix('l')?;
        if !["", "d", "m", "u"].contains(&prefix) {
            return None;
        }
        let spelled = format!("{num}/{prefix}L");
        UNITS.iter().find(|u| u.code == spelled)
    })
}

/// Why a value could not be converted.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum UnitError {
    /// The code is not in the accepted table.
    #[error("unit '{0}' is not an accepted UCUM code (UCUM codes are case-sensitive)")]
    Unknown(String),
    /// The canonical unit of the analyte is itself not in the table (a rule error).
    #[error("canonical unit '{0}' of the rule set is not an accepted UCUM code")]
    BadCanonical(String),
    /// The dimensions cannot be bridged with the analyte's chemistry.
    #[error("unit '{from}' cannot be converted to '{to}' for {analyte}: {why}")]
    Incompatible {
        /// Reported unit.
        from: String,
        /// Canonical unit.
        to: String,
        /// Analyte label.
        analyte: String,
        /// Reason.
        why: &'static str,
    },
}

/// Convert `value` in UCUM `from` into the analyte's canonical unit.
pub fn to_canonical(value: f64, from: &str, rule: &AnalyteRule) -> Result<f64, UnitError> {
    let src = lookup(from).ok_or_else(|| UnitError::Unknown(from.to_owned()))?;
    let dst = lookup(&rule.canonical_unit).ok_or_else(|| UnitError::BadCanonical(rule.canonical_unit.clone()))?;
    let base = value * src.factor;
    let incompatible = |why| UnitError::Incompatible {
        from: from.to_owned(),
        to: rule.canonical_unit.clone(),
        analyte: rule.label.clone(),
        why,
    };
    let in_dst_base = match (src.dimension, dst.dimension) {
        (a, b) if a == b => base,
        (D::MassConcentration, D::SubstanceConcentration) => {
            base / rule.molar_mass_g_per_mol.ok_or_else(|| incompatible("no molar mass"))?
        }
        (D::SubstanceConcentration, D::MassConcentration) => {
            base * rule.molar_mass_g_per_mol.ok_or_else(|| incompatible("no molar mass"))?
        }
        (D::EquivalentConcentration, D::SubstanceConcentration) => {
            base / rule.valence.ok_or_else(|| incompatible("no valence defined"))?
        }
        (D::EquivalentConcentration, D::MassConcentration) => {
            let valence = rule.valence.ok_or_else(|| incompatible("no valence defined"))?;
            let mass = rule.molar_mass_g_per_mol.ok_or_else(|| incompatible("no molar mass"))?;
            base / valence * mass
        }
        (D::SubstanceConcentration, D::EquivalentConcentration) => {
            base * rule.valence.ok_or_else(|| incompatible("no valence defined"))?
        }
        (D::MassConcentration, D::EquivalentConcentration) => {
            let valence = rule.valence.ok_or_else(|| incompatible("no valence defined"))?;
            let mass = rule.molar_mass_g_per_mol.ok_or_else(|| incompatible("no molar mass"))?;
            base / mass * valence
        }
        (D::MassRatio, D::SubstanceRatio) => {
            let m = rule.ratio_molar_masses_g_per_mol.ok_or_else(|| incompatible("no molar masses"))?;
            base / m.numerator * m.denominator
        }
        (D::SubstanceRatio, D::MassRatio) => {
            let m = rule.ratio_molar_masses_g_per_mol.ok_or_else(|| incompatible("no molar masses"))?;
            base * m.numerator / m.denominator
        }
        _ => return Err(incompatible("different dimensions")),
    };
    Ok(in_dst_base / dst.factor)
}

/// Convert a canonical value back into another accepted unit (for display).
pub fn from_canonical(value: f64, to: &str, rule: &AnalyteRule) -> Result<f64, UnitError> {
    // Converting one canonical unit into `to` is the inverse of converting one
    // `to` unit into the canonical unit; all conversions here are linear.
    let one = to_canonical(1.0, to, rule)?;
    Ok(value / one)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rules::model::{AnalyteRule, Range, RatioMasses};

    fn rule(canonical: &str, mass: Option<f64>, valence: Option<f64>) -> AnalyteRule {
        AnalyteRule {
            label: "test analyte".into(),
            canonical_unit: canonical.into(),
            molar_mass_g_per_mol: mass,
            valence,
            ratio_molar_masses_g_per_mol: None,
            molar_mass_source: None,
            plausible: Range { min: 0.0, max: 1e9 },
            plausible_source: String::new(),
        }
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    // Check values below: IUPAC standard atomic weights Ca 40.078, Mg 24.305,
    // P 30.974 (CIAAW); the factors 4.008 mg/dL per mmol/L (Ca), 2.431 (Mg),
    // 3.097 (P), 88.4 umol/L per mg/dL (creatinine), 2.496 nmol/L per ng/mL
    // (25-OH vitamin D) and 0.106 pmol/L per pg/mL (PTH) are the published
    // SI conversion factors (common practice).

    #[test]
    fn calcium_mass_to_substance() {
        let ca = rule("mmol/L", Some(40.078), Some(2.0));
        let v = to_canonical(10.0, "mg/dL", &ca).unwrap();
        assert!(close(v, 2.4951, 1e-4), "{v}");
        assert!(close(to_canonical(4.008, "mg/dL", &ca).unwrap(), 1.0, 1e-4));
        // 5.0 meq/L of a divalent ion is 2.5 mmol/L.
        assert!(close(to_canonical(5.0, "meq/L", &ca).unwrap(), 2.5, 1e-12));
        // Fact of the trade: 9-11 mg/dL is 4.5-5.5 mEq/L.
        let meq = rule("meq/L", Some(40.078), Some(2.0));
        assert!(close(to_canonical(9.0, "mg/dL", &meq).unwrap(), 4.491, 1e-3));
        assert!(close(to_canonical(11.0, "mg/dL", &meq).unwrap(), 5.489, 1e-3));
        assert!(close(to_canonical(1.25, "mmol/L", &ca).unwrap(), 1.25, 1e-12));
    }

    #[test]
    fn magnesium_phosphate_creatinine_vitamin_d_pth() {
        let mg = rule("mmol/L", Some(24.305), Some(2.0));
        assert!(close(to_canonical(2.431, "mg/dL", &mg).unwrap(), 1.0, 1e-3));
        assert!(close(to_canonical(2.0, "meq/L", &mg).unwrap(), 1.0, 1e-12));
        let p = rule("mmol/L", Some(30.974), None);
        assert!(close(to_canonical(3.097, "mg/dL", &p).unwrap(), 1.0, 1e-3));
        assert!(matches!(to_canonical(1.0, "meq/L", &p), Err(UnitError::Incompatible { .. })));
        let cr = rule("umol/L", Some(113.12), None);
        assert!(close(to_canonical(1.0, "mg/dL", &cr).unwrap(), 88.4, 0.05));
        let d25 = rule("nmol/L", Some(400.64), None);
        assert!(close(to_canonical(1.0, "ng/mL", &d25).unwrap(), 2.496, 1e-3));
        let pth = rule("pmol/L", Some(9425.0), None);
        assert!(close(to_canonical(1.0, "pg/mL", &pth).unwrap(), 0.106, 1e-3));
    }

    #[test]
    fn albumin_weight_height_time() {
        let alb = rule("g/L", None, None);
        assert!(close(to_canonical(3.5, "g/dL", &alb).unwrap(), 35.0, 1e-9));
        assert!(matches!(to_canonical(500.0, "umol/L", &alb), Err(UnitError::Incompatible { .. })));
        let wt = rule("kg", None, None);
        assert!(close(to_canonical(150.0, "[lb_av]", &wt).unwrap(), 68.038_855_5, 1e-6));
        assert!(close(to_canonical(3250.0, "g", &wt).unwrap(), 3.25, 1e-12));
        let ht = rule("cm", None, None);
        assert!(close(to_canonical(1.05, "m", &ht).unwrap(), 105.0, 1e-9));
        let qt = rule("ms", None, None);
        assert!(close(to_canonical(0.45, "s", &qt).unwrap(), 450.0, 1e-9));
        let ga = rule("wk", None, None);
        assert!(close(to_canonical(252.0, "d", &ga).unwrap(), 36.0, 1e-9));
    }

    #[test]
    fn ratio_mass_and_molar() {
        let mut ratio = rule("mol/mol", None, None);
        ratio.ratio_molar_masses_g_per_mol = Some(RatioMasses { numerator: 40.078, denominator: 113.12 });
        // Matos 1997: 2.2 mol/mol ~ 0.78 mg/mg.
        assert!(close(to_canonical(0.78, "mg/mg", &ratio).unwrap(), 2.2, 0.01));
        assert!(close(from_canonical(2.2, "mg/mg", &ratio).unwrap(), 0.779, 1e-3));
    }

    #[test]
    fn refuses_what_is_not_ucum_or_not_convertible() {
        let ca = rule("mmol/L", Some(40.078), Some(2.0));
        for bad in ["mEq/L", "MG/DL", "mg%", "", "µmol/L", "mmol", "mg/Dl", "mg/kl", "kg/l"] {
            assert!(to_canonical(1.0, bad, &ca).is_err(), "{bad} accepted");
        }
        assert!(matches!(to_canonical(1.0, "kg", &ca), Err(UnitError::Incompatible { .. })));
    }

    #[test]
    fn lower_case_litre_is_the_same_unit() {
        let ca = rule("mmol/L", Some(40.078), Some(2.0));
        assert_eq!(to_canonical(10.0, "mg/dl", &ca), to_canonical(10.0, "mg/dL", &ca));
        assert_eq!(lookup("mmol/l").map(|u| u.code), Some("mmol/L"));
        assert_eq!(lookup("U/l").map(|u| u.code), Some("U/L"));
    }

    #[test]
    fn round_trip_through_display_units() {
        let ca = rule("mmol/L", Some(40.078), Some(2.0));
        for unit in ["mg/dL", "mg/L", "meq/L", "umol/L", "mmol/L"] {
            let canonical = to_canonical(7.3, unit, &ca).unwrap();
            let back = from_canonical(canonical, unit, &ca).unwrap();
            assert!(close(back, 7.3, 1e-9), "{unit}: {back}");
        }
    }

    mod properties {
        use proptest::prelude::*;

        use super::super::*;

        proptest! {
            /// Every accepted unit of every analyte of the embedded rules: to the canonical
            /// unit and back is the value again, and the conversion is linear.
            #[test]
            fn conversions_round_trip_and_are_linear(value in 1e-6f64..1e6, unit in 0..UNITS.len(), k in 0.5f64..4.0) {
                let rules = crate::clinical::testing::shared_rules();
                let code = UNITS[unit].code;
                for rule in rules.analytes.values() {
                    let Ok(canonical) = to_canonical(value, code, rule) else { continue };
                    let back = from_canonical(canonical, code, rule).expect("the way back exists");
                    prop_assert!((back - value).abs() <= 1e-9 * value, "{value} {code} -> {canonical} -> {back} ({})", rule.label);
                    let scaled = to_canonical(k * value, code, rule).expect("the same unit converts");
                    prop_assert!((scaled - k * canonical).abs() <= 1e-9 * scaled.abs(), "{code} is not linear for {}", rule.label);
                }
            }
        }
    }
}
