//! The IC50 → Ki relations and the Morrison tight-binding equation, as plain
//! functions on molar `f64`. They do not validate: [`super::convert`] checks
//! that every input is positive and finite before calling them.
//!
//! Cheng & Prusoff, Biochem. Pharmacol. 22, 3099–3108 (1973), for an inhibitor
//! at substrate concentration S with Michaelis constant Km:
//!
//! | mechanism | constant = |
//! |---|---|
//! | competitive | Ki = IC50 / (1 + S/Km) |
//! | uncompetitive | Kiu = IC50 / (1 + Km/S) |
//! | noncompetitive (Kic = Kiu) | Ki = IC50 |
//! | mixed, α = Kiu/Kic | Ki = IC50 · (Km + S/α) / (Km + S) |
//! | competitive binding, labelled ligand L with Kd | Ki = IC50 / (1 + L/Kd) |
//!
//! Tight binding (Morrison, Biochim. Biophys. Acta 185, 269–286, 1969): with
//! total enzyme Et the half-inhibiting total inhibitor is IC50 = Kapp + Et/2
//! (Copeland, *Evaluation of Enzyme Inhibitors in Drug Discovery*, 2nd ed.,
//! 2013), so IC50 − Et/2 replaces IC50 before the relation.

/// The one vocabulary of mechanisms (the rate laws of `mode`); a conversion
/// takes `Option<Mechanism>`, `None` meaning "not known".
pub use crate::models::inhibition::Mechanism;

/// Parses a mechanism as a table cell or flag states it: `Some(None)` for
/// `unknown` or an empty cell, `None` when the text names no mechanism.
pub fn parse_stated(text: &str) -> Option<Option<Mechanism>> {
    match text.trim().to_ascii_lowercase().as_str() {
        "unknown" | "" => Some(None),
        _ => Mechanism::parse(text).map(Some),
    }
}

/// Competitive: Ki = IC50 / (1 + S/Km).
pub fn competitive(ic50: f64, s: f64, km: f64) -> f64 {
    ic50 / (1.0 + s / km)
}

/// Uncompetitive: Kiu = IC50 / (1 + Km/S).
pub fn uncompetitive(ic50: f64, s: f64, km: f64) -> f64 {
    ic50 / (1.0 + km / s)
}

/// Noncompetitive (Kic = Kiu): Ki = IC50, whatever S.
pub fn noncompetitive(ic50: f64) -> f64 {
    ic50
}

/// Mixed with α = Kiu/Kic: Ki = IC50 · (Km + S/α) / (Km + S).
pub fn mixed(ic50: f64, s: f64, km: f64, alpha: f64) -> f64 {
    ic50 * (km + s / alpha) / (km + s)
}

/// Competitive binding assay with labelled ligand L of dissociation constant Kd:
/// Ki = IC50 / (1 + L/Kd).
pub fn binding(ic50: f64, ligand: f64, kd: f64) -> f64 {
    ic50 / (1.0 + ligand / kd)
}

/// IC50 − Et/2, the apparent constant under the Morrison model; `None` when
/// the IC50 is not above Et/2, which no inhibitor can achieve.
pub fn tight_binding_corrected(ic50: f64, enzyme: f64) -> Option<f64> {
    let corrected = ic50 - enzyme / 2.0;
    (corrected > 0.0).then_some(corrected)
}

/// The apparent dissociation constant in the Morrison equation for a mechanism
/// (DESIGN §4): competitive Ki(1 + S/Km), uncompetitive Kiu(1 + Km/S),
/// noncompetitive Ki, mixed (Km + S)/(Km/Ki + S/(αKi)). For `Unknown` the
/// competitive form. `ki` is Kiu for the uncompetitive mechanism.
pub fn apparent_constant(mechanism: Option<Mechanism>, ki: f64, s: f64, km: f64, alpha: f64) -> f64 {
    match mechanism {
        Some(Mechanism::Competitive) | None => ki * (1.0 + s / km),
        Some(Mechanism::Uncompetitive) => ki * (1.0 + km / s),
        Some(Mechanism::Noncompetitive) => ki,
        Some(Mechanism::Mixed) => (km + s) / (km / ki + s / (alpha * ki)),
        // No inhibition: no concentration halves the rate.
        Some(Mechanism::None) => f64::INFINITY,
    }
}

/// Morrison's v/v0 at total inhibitor `i`, total enzyme `enzyme` and apparent
/// constant `kapp`:
/// v/v0 = 1 − (b − √(b² − 4·Et·I)) / (2·Et), b = Et + I + Kapp.
/// The bound fraction is evaluated as 2I / (b + √(b² − 4·Et·I)), the same
/// quantity without the cancellation that ruins the textbook form when Et ≪ Kapp.
pub fn morrison_fraction(i: f64, enzyme: f64, kapp: f64) -> f64 {
    let b = enzyme + i + kapp;
    let disc = (b * b - 4.0 * enzyme * i).max(0.0);
    1.0 - 2.0 * i / (b + disc.sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn half_inhibition_is_at_kapp_plus_half_et() {
        // Copeland (2013): IC50 = Kapp + Et/2 under the Morrison equation.
        let (et, kapp) = (4e-9, 1e-9);
        assert_relative_eq!(morrison_fraction(kapp + et / 2.0, et, kapp), 0.5, max_relative = 1e-12);
    }

    #[test]
    fn parses_mechanism_words() {
        assert_eq!(parse_stated("Non-competitive"), Some(Some(Mechanism::Noncompetitive)));
        assert_eq!(parse_stated(""), Some(None));
        assert_eq!(parse_stated("Unknown"), Some(None));
        assert_eq!(parse_stated("allosteric"), None);
    }
}
