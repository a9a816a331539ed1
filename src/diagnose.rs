//! The proof a user shows a colleague: is this ringing the circuit or the integrator? The given setting
//! is rerun with its step limit halved and quartered and with an L-stable method, and the waveforms are
//! compared (see `detect::verdict`).

use crate::audit::cell_settings;
use crate::circuit::Circuit;
use crate::detect::{self, Observation, Verdict};
use crate::integrate::{self, RunError};
use crate::poles::Pole;
use crate::settings::{MethodName, Overrides, Settings};

#[derive(Debug, Clone, PartialEq)]
pub struct Diagnosis {
    pub signal: String,
    pub verdict: Verdict,
    /// The pole the oscillation matches, for a physical verdict.
    pub pole: Option<Pole>,
    /// The original run, the two refinements, and the L-stable rerun.
    pub observations: Vec<Observation>,
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DiagnoseError {
    #[error("{signal} is not watched in this circuit; watch it (watch: [..., {signal}]) or pick one of: {}", available.join(", "))]
    UnknownSignal {
        signal: String,
        available: Vec<String>,
    },
    #[error("the {label} run failed: {error}")]
    Run { label: String, error: RunError },
}

/// Smallest alternating amplitude, relative to the signal's peak, that counts as ringing.
pub const AMPLITUDE_FLOOR: f64 = 2.5e-4;

pub fn diagnose(
    circuit: &Circuit,
    o: &Overrides,
    signal: &str,
) -> Result<Diagnosis, DiagnoseError> {
    let base = cell_settings(circuit, o);
    let labels: Vec<String> = circuit.watch.iter().map(|p| p.label()).collect();
    let k =
        labels
            .iter()
            .position(|l| l == signal)
            .ok_or_else(|| DiagnoseError::UnknownSignal {
                signal: signal.to_string(),
                available: labels.clone(),
            })?;
    let stop = circuit.run.stop;
    let refine = |f: f64| -> Settings {
        let mut s = base;
        match s.steps.fixed_step {
            Some(h) => s.steps.fixed_step = Some(h * f),
            None => s.steps.max_step = Some(s.steps.effective_max_step(stop) * f),
        }
        s
    };
    let mut l_stable = base;
    // Backward Euler is L-stable and, on a real stiff mode, never alternates (0 < R(z) < 1 for z < 0):
    // the cleanest witness. For a backward-Euler setting, BDF2.
    l_stable.method = if base.method == MethodName::BackwardEuler {
        MethodName::Bdf2
    } else {
        MethodName::BackwardEuler
    };
    let runs = [
        ("given setting", base),
        ("step limit halved", refine(0.5)),
        ("step limit quartered", refine(0.25)),
        ("L-stable method", l_stable),
    ];
    let mut observations = Vec::new();
    for (label, s) in runs {
        let r = integrate::simulate(circuit, &s).map_err(|error| DiagnoseError::Run {
            label: label.to_string(),
            error,
        })?;
        observations.push(detect::observe(
            label,
            s.method,
            &r.trajectory.times,
            &r.trajectory.values[k],
        ));
    }
    let poles = crate::poles::poles(circuit, &base).unwrap_or_default();
    let (verdict, pole) = detect::verdict(
        &observations[0],
        &observations[1..3],
        &observations[3],
        &poles,
        AMPLITUDE_FLOOR,
    );
    Ok(Diagnosis {
        signal: signal.to_string(),
        verdict,
        pole,
        observations,
    })
}

/// `{"verdict": ..., "evidence": [...]}`.
pub fn diagnosis_json(d: &Diagnosis) -> serde_json::Value {
    use crate::audit::results::num;
    let opt = |x: Option<f64>| x.map_or(serde_json::Value::Null, num);
    let evidence: Vec<serde_json::Value> = d
        .observations
        .iter()
        .map(|o| {
            serde_json::json!({
                "run": o.label,
                "method": o.method.as_str(),
                "median_step": num(o.step),
                "alternating_steps": o.alternating_steps,
                "alternating_amplitude_over_peak": num(o.alternating_amplitude),
                "implied_frequency_hz": opt(o.implied_frequency_hz),
                "oscillation_hz": opt(o.oscillation_hz),
            })
        })
        .collect();
    serde_json::json!({
        "signal": d.signal,
        "verdict": d.verdict.as_str(),
        "matching_pole": d.pole.map_or(serde_json::Value::Null, |p| serde_json::json!({
            "re": num(p.re), "im": num(p.im), "frequency_hz": num(p.frequency_hz()), "q": opt(p.q()),
        })),
        "evidence": evidence,
    })
}

/// A short human summary.
pub fn summary(d: &Diagnosis) -> String {
    let o = &d.observations;
    let mut s = format!("{}: {}\n", d.signal, d.verdict.as_str());
    for x in o {
        s.push_str(&format!(
            "  {:<22} {:<15} step {:.3e} s, {} alternating steps{}, oscillation {}\n",
            x.label,
            x.method.as_str(),
            x.step,
            x.alternating_steps,
            x.implied_frequency_hz.map_or(String::new(), |f| format!(
                " (1/2h = {f:.3e} Hz, amplitude {:.1e} of peak)",
                x.alternating_amplitude
            )),
            x.oscillation_hz
                .map_or("none".to_string(), |f| format!("{f:.4e} Hz"))
        ));
    }
    match (d.verdict, d.pole) {
        (Verdict::Numerical, _) => s.push_str("  the oscillation alternates step to step, follows the step and vanishes under an L-stable method: it is the integrator's\n"),
        (Verdict::Physical, Some(p)) => s.push_str(&format!("  the oscillation keeps its frequency under refinement and matches the pole at {:.4e} Hz (Q {}): it is the circuit's\n", p.frequency_hz(), p.q().map_or("inf".into(), |q| format!("{q:.2}")))),
        _ => s.push_str("  the reruns do not settle the question; inspect the evidence\n"),
    }
    s
}
