//! Helpers shared by the test modules: circuits from text, runs with chosen settings, CLI calls.

use ringtrue::circuit::{self, Circuit};
use ringtrue::integrate::{self, Run};
use ringtrue::settings::{MethodName, Settings};
use std::path::PathBuf;
use std::process::Command;

pub fn circuit(text: &str) -> Circuit {
    circuit::parse(text, "test.yaml")
        .unwrap_or_else(|e| panic!("test circuit does not parse:\n{e}"))
}

/// Settings with the circuit's run map applied, then `tweak`.
pub fn settings(c: &Circuit, method: MethodName, tweak: impl FnOnce(&mut Settings)) -> Settings {
    let mut s = Settings::new(method);
    s.apply(&c.run.settings);
    tweak(&mut s);
    s
}

pub fn run(c: &Circuit, method: MethodName, tweak: impl FnOnce(&mut Settings)) -> Run {
    let s = settings(c, method, tweak);
    integrate::simulate(c, &s).unwrap_or_else(|e| panic!("{} run failed: {e}", method.as_str()))
}

/// max |signal - exact(t)| over the accepted points.
pub fn max_error(run: &Run, signal: &str, exact: impl Fn(f64) -> f64) -> f64 {
    let v = run.trajectory.signal(signal).expect("watched signal");
    run.trajectory
        .times
        .iter()
        .zip(v)
        .map(|(t, v)| (v - exact(*t)).abs())
        .fold(0.0, f64::max)
}

/// A fresh scratch folder for one test.
pub fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("ringtrue-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("scratch folder");
    d
}

pub struct Outcome {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

pub fn ringtrue(args: &[&str]) -> Outcome {
    let out = Command::new(env!("CARGO_BIN_EXE_ringtrue"))
        .args(args)
        .output()
        .expect("the binary runs");
    Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}
