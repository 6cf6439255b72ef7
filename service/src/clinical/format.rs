//! Number formatting for the texts the service writes.

/// `v` with exactly `decimals` decimals; "-" for a value that is not finite.
pub fn num(v: f64, decimals: usize) -> String {
    if v.is_finite() { format!("{v:.decimals$}") } else { "-".to_owned() }
}

/// "0.82 mmol/L (3.29 mg/dL)" for a calcium, given calcium's molar mass.
pub fn value_with_mg_dl(mmol: f64, molar_mass: Option<f64>) -> String {
    match molar_mass {
        Some(m) => format!("{} mmol/L ({} mg/dL)", num(mmol, 2), num(mmol * m / 10.0, 2)),
        None => format!("{} mmol/L", num(mmol, 2)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats() {
        assert_eq!(num(1.234, 2), "1.23");
        assert_eq!(num(f64::NAN, 2), "-");
        assert_eq!(value_with_mg_dl(1.0, Some(40.078)), "1.00 mmol/L (4.01 mg/dL)");
    }
}
