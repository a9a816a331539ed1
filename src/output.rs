//! Machine-readable output as text: the CSV of a trajectory and the JSON of a run's statistics. Writing
//! the text to disk is the binary's job.

use crate::integrate::{Stats, Trajectory};
use crate::units::shortest;
use std::fmt::Write;

/// `time,<signals...>` then one row per accepted time point, numbers in shortest round-trip form.
pub fn trajectory_csv(traj: &Trajectory) -> String {
    let mut s = String::with_capacity(traj.times.len() * (traj.labels.len() + 1) * 12);
    s.push_str("time");
    for l in &traj.labels {
        s.push(',');
        s.push_str(&csv_field(l));
    }
    s.push('\n');
    for (j, t) in traj.times.iter().enumerate() {
        s.push_str(&shortest(*t));
        for v in &traj.values {
            let _ = write!(s, ",{}", shortest(v[j]));
        }
        s.push('\n');
    }
    s
}

fn csv_field(l: &str) -> String {
    if l.contains([',', '"', '\n']) {
        format!("\"{}\"", l.replace('"', "\"\""))
    } else {
        l.to_string()
    }
}

/// The statistics of one run as a JSON object.
pub fn stats_json(stats: &Stats) -> serde_json::Value {
    serde_json::json!({
        "steps": stats.steps,
        "rejected_steps": stats.rejected_steps,
        "newton_iterations": stats.newton_iterations,
        "factorizations": stats.factorizations,
        "cpu_seconds": stats.cpu_seconds,
    })
}
