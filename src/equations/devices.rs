//! Nonlinear device laws with their exact derivatives, and the junction-voltage limit that keeps Newton
//! from overflowing the exponential.

use crate::circuit::DiodeModel;

/// A diode's junction law evaluated at one voltage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct JunctionPoint {
    /// Current through the junction (A).
    pub current: f64,
    /// d current / d voltage (S).
    pub conductance: f64,
    /// Charge stored in the junction (C): junction capacitance plus transit-time charge.
    pub charge: f64,
    /// d charge / d voltage (F).
    pub capacitance: f64,
}

/// Above this many thermal voltages the exponential is continued by its tangent, so no finite voltage
/// overflows; the value sits far above any current a real junction carries (Is * e^80).
const EXP_LIMIT: f64 = 80.0;

/// The Shockley law i = Is (exp(v / (n Vt)) - 1), its derivative, and the stored charge
/// q = Cj v + tt i with its derivative.
pub fn junction(model: &DiodeModel, v: f64) -> JunctionPoint {
    let nvt = model.thermal_voltage();
    let is = model.saturation_current;
    let u = v / nvt;
    let (current, conductance) = if u <= EXP_LIMIT {
        let e = u.exp();
        (is * (e - 1.0), is * e / nvt)
    } else {
        let e = EXP_LIMIT.exp();
        let g = is * e / nvt;
        (is * (e - 1.0) + g * (v - EXP_LIMIT * nvt), g)
    };
    JunctionPoint {
        current,
        conductance,
        charge: model.junction_capacitance * v + model.transit_time * current,
        capacitance: model.junction_capacitance + model.transit_time * conductance,
    }
}

/// The voltage above which the exponential's curvature makes full Newton steps unreliable:
/// n Vt ln(n Vt / (sqrt(2) Is)), where the junction's conductance matches a tangent of slope 1/(sqrt 2 Is).
/// Common practice in circuit Newton iterations.
pub fn critical_voltage(model: &DiodeModel) -> f64 {
    let nvt = model.thermal_voltage();
    nvt * (nvt / (std::f64::consts::SQRT_2 * model.saturation_current)).ln()
}

/// Limits a proposed junction voltage `new` given the previous iterate `old`: above the critical voltage
/// a rise of more than two thermal voltages is replaced by a logarithmic one (common practice).
pub fn limit_junction_voltage(model: &DiodeModel, old: f64, new: f64) -> f64 {
    let nvt = model.thermal_voltage();
    let vcrit = critical_voltage(model);
    if new > vcrit && (new - old).abs() > 2.0 * nvt {
        if old > 0.0 {
            let arg = 1.0 + (new - old) / nvt;
            if arg > 0.0 {
                old + nvt * arg.ln()
            } else {
                vcrit
            }
        } else {
            nvt * (new / nvt).ln()
        }
    } else {
        new
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn model() -> DiodeModel {
        DiodeModel {
            saturation_current: 1e-14,
            emission_coefficient: 1.0,
            temperature: 300.0,
            series_resistance: None,
            junction_capacitance: 1e-12,
            transit_time: 1e-9,
        }
    }

    #[test]
    fn thermal_voltage_from_codata() {
        // k T / q at 300 K with the exact SI constants (CODATA 2018): 0.0258519997864... V, computed with
        // 30-digit decimal arithmetic (Python decimal).
        let vt = model().thermal_voltage();
        assert!((vt - 0.025_851_999_786_435_5).abs() < 1e-15, "{vt}");
    }

    #[test]
    fn derivatives_match_finite_differences() {
        let m = model();
        for v in [-1.0, 0.0, 0.3, 0.7, 2.5, 5.0] {
            let p = junction(&m, v);
            let d = 1e-7;
            let (hi, lo) = (junction(&m, v + d), junction(&m, v - d));
            let g = (hi.current - lo.current) / (2.0 * d);
            let c = (hi.charge - lo.charge) / (2.0 * d);
            assert!(
                (g - p.conductance).abs() <= 1e-5 * p.conductance.abs() + 1e-18,
                "{v}: {g} vs {}",
                p.conductance
            );
            assert!(
                (c - p.capacitance).abs() <= 1e-5 * p.capacitance.abs() + 1e-20,
                "{v}"
            );
        }
    }

    #[test]
    fn limiting_only_acts_above_the_critical_voltage() {
        let m = model();
        assert_eq!(limit_junction_voltage(&m, 0.0, 0.3), 0.3);
        let lim = limit_junction_voltage(&m, 0.6, 5.0);
        assert!(lim > 0.6 && lim < 0.8, "{lim}");
        assert!(limit_junction_voltage(&m, -1.0, 3.0) < 1.0);
    }
}
