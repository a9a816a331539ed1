//! The commands behind the subcommands.

use super::Failure;
use anyhow::anyhow;
use ringtrue::circuit::{self, Circuit, ElementKind};
use ringtrue::equations::System;
use ringtrue::integrate;
use ringtrue::output;
use ringtrue::settings::{Overrides, Settings};
use std::collections::BTreeMap;
use std::path::Path;

fn load(file: &Path) -> Result<Circuit, Failure> {
    circuit::load(file)
        .map(|(c, _)| c)
        .map_err(|e| Failure::BadInput(anyhow!("{e}")))
}

/// Writes `text` to `path` through a temporary file and a rename, so readers never see half a file.
pub fn write_atomic(path: &Path, text: &str) -> Result<(), Failure> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir).map_err(|e| {
        Failure::BadInput(anyhow!("cannot create the folder {}: {e}", dir.display()))
    })?;
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    std::fs::write(&tmp, text)
        .map_err(|e| Failure::BadInput(anyhow!("cannot write {}: {e}", tmp.display())))?;
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Failure::BadInput(anyhow!("cannot write {}: {e}", path.display()))
    })
}

pub fn check(file: &Path) -> Result<(), Failure> {
    let c = load(file)?;
    let sys = System::new(&c);
    let mut kinds: BTreeMap<&str, usize> = BTreeMap::new();
    for e in &c.elements {
        *kinds.entry(e.kind.kind_name()).or_default() += 1;
    }
    let nodes = c.nodes();
    println!("{}: {}", c.file, c.title);
    println!(
        "  nodes:       {} ({} besides ground {})",
        nodes.len(),
        nodes.join(", "),
        c.ground
    );
    println!("  unknowns:    {}", sys.size());
    let list: Vec<String> = kinds.iter().map(|(k, n)| format!("{n} {k}")).collect();
    println!("  elements:    {} ({})", c.elements.len(), list.join(", "));
    println!(
        "  linear:      {}",
        if c.is_linear() { "yes" } else { "no" }
    );
    println!(
        "  breakpoints: {} in (0, {} s], counting the stop time",
        c.breakpoints().len(),
        c.run.stop
    );
    println!("  start:       {}", c.run.start.as_str());
    let watch: Vec<String> = c.watch.iter().map(|p| p.label()).collect();
    println!("  watch:       {}", watch.join(", "));
    let _ = ElementKind::kind_name;
    Ok(())
}

/// The settings of a run: defaults, then the circuit's `run:` map, then the flags.
pub fn settings_for(c: &Circuit, flags: &Overrides) -> Result<Settings, Failure> {
    let method = flags.method.or(c.run.settings.method).ok_or_else(|| {
        Failure::BadInput(anyhow!(
            "no method given: pass --method (backward-euler, trapezoidal, bdf2 or tr-bdf2) or set run.method in {}",
            c.file
        ))
    })?;
    let mut s = Settings::new(method);
    s.apply(&c.run.settings);
    s.apply(flags);
    s.validate()
        .map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
    Ok(s)
}

pub fn simulate(
    file: &Path,
    flags: &Overrides,
    csv: &Path,
    json: Option<&Path>,
) -> Result<(), Failure> {
    let c = load(file)?;
    let settings = settings_for(&c, flags)?;
    let run = integrate::simulate(&c, &settings).map_err(|e| {
        Failure::NotMet(anyhow!(
            "{}: {} run failed: {e}",
            c.file,
            settings.method.as_str()
        ))
    })?;
    write_atomic(csv, &output::trajectory_csv(&run.trajectory))?;
    if let Some(j) = json {
        let text = serde_json::to_string_pretty(&output::stats_json(&run.stats))
            .expect("plain numbers serialize");
        write_atomic(j, &(text + "\n"))?;
    }
    let s = run.stats;
    eprintln!(
        "{}: {} steps, {} rejected, {} Newton iterations, {} factorizations, {:.3} s",
        settings.method.as_str(),
        s.steps,
        s.rejected_steps,
        s.newton_iterations,
        s.factorizations,
        s.cpu_seconds
    );
    Ok(())
}
