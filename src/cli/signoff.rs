//! `ringtrue signoff PROJECT.yaml` and `ringtrue signoff --verify signoff.json`.

use super::commands::{now_utc, write_atomic};
use super::Failure;
use anyhow::anyhow;
use ringtrue::signoff::{self, FileState, RecordInfo};
use std::path::Path;

pub fn signoff(
    project: Option<&Path>,
    verify: Option<&Path>,
    out: Option<&Path>,
    jobs: Option<u32>,
) -> Result<(), Failure> {
    match (project, verify) {
        (_, Some(record)) => verify_record(record),
        (Some(p), None) => run(p, out, jobs),
        (None, None) => Err(Failure::BadInput(anyhow!(
            "give a project file (ringtrue signoff PROJECT.yaml) or a record to check (ringtrue signoff --verify signoff.json)"
        ))),
    }
}

fn run(project_file: &Path, out: Option<&Path>, jobs: Option<u32>) -> Result<(), Failure> {
    let p = signoff::load(project_file).map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
    let jobs = jobs
        .map(|j| j as usize)
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
    let dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| Path::new("reports").join(&p.name));
    let outcome = signoff::run(&p, jobs).map_err(|e| Failure::BadInput(anyhow!("{e}")))?;

    std::fs::create_dir_all(&dir).map_err(|e| {
        Failure::BadInput(anyhow!(
            "cannot create the folder {}: {e}; pass a writable --out",
            dir.display()
        ))
    })?;
    let canon = |path: &Path| {
        path.canonicalize().map_err(|e| {
            Failure::BadInput(anyhow!("cannot resolve the path {}: {e}", path.display()))
        })
    };
    let from_record = signoff::relative_path(&canon(&dir)?, &canon(project_file)?);
    let from_record = from_record.to_string_lossy().replace('\\', "/");
    let created = now_utc();
    let record = signoff::record_json(
        &p,
        &outcome,
        &RecordInfo {
            created: &created,
            project_file_from_record: &from_record,
        },
    );
    let text = serde_json::to_string_pretty(&record).expect("JSON values serialize") + "\n";
    let json_path = dir.join("signoff.json");
    let html_path = dir.join("signoff.html");
    write_atomic(&json_path, &text)?;
    write_atomic(&html_path, &signoff::render_html(&record))?;

    for (e, c) in p.entries.iter().zip(&outcome.circuits) {
        println!(
            "{} {}: {}",
            if c.passed { "PASS" } else { "FAIL" },
            e.file,
            c.reason
        );
        if let Some(w) = &c.reference_warning {
            println!("     warning: {w}");
        }
        match &c.would_pass {
            Some(signoff::WouldPass::Found { reason, .. }) => {
                println!("     would pass: {reason}")
            }
            Some(signoff::WouldPass::NotFound { reason }) => {
                println!("     no setting found that would pass: {reason}")
            }
            None => {}
        }
    }
    println!("wrote {} and {}", json_path.display(), html_path.display());
    let failing: Vec<&str> = p
        .entries
        .iter()
        .zip(&outcome.circuits)
        .filter(|(_, c)| !c.passed)
        .map(|(e, _)| e.file.as_str())
        .collect();
    if failing.is_empty() {
        println!(
            "sign-off of {} passed: {} circuits meet their targets",
            p.name,
            p.entries.len()
        );
        Ok(())
    } else {
        Err(Failure::NotMet(anyhow!(
            "sign-off of {} failed: {} of {} circuits miss their target: {}",
            p.name,
            failing.len(),
            p.entries.len(),
            failing.join(", ")
        )))
    }
}

fn verify_record(record: &Path) -> Result<(), Failure> {
    let text = std::fs::read_to_string(record).map_err(|e| {
        Failure::BadInput(anyhow!(
            "cannot read the record {}: {e}; give the signoff.json written by ringtrue signoff",
            record.display()
        ))
    })?;
    let v = signoff::verify(&text, record).map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
    for f in &v.files {
        match &f.state {
            FileState::Unchanged => println!("unchanged: {}", f.file),
            FileState::Changed { recorded, now } => println!(
                "changed:   {} ({}): sha256 was {recorded}, now {now}",
                f.file,
                f.path.display()
            ),
            FileState::Missing { message } => {
                println!("missing:   {} ({}): {message}", f.file, f.path.display())
            }
        }
    }
    let here = env!("CARGO_PKG_VERSION");
    if v.version_differs {
        println!(
            "tool version differs: the record was made by ringtrue {}, this is {here}",
            v.recorded_version
        );
    } else {
        println!("tool version: {here}, as recorded");
    }
    if !v.record_passed {
        println!("the record says the sign-off of {} failed", v.project);
    }
    if v.current() {
        println!("record {} is current", record.display());
        return Ok(());
    }
    let mut why = Vec::new();
    let changed = v.changed();
    if !changed.is_empty() {
        let names: Vec<&str> = changed.iter().map(|f| f.file.as_str()).collect();
        why.push(format!(
            "{} changed or missing since the record: {}",
            if names.len() == 1 { "1 file" } else { "files" },
            names.join(", ")
        ));
    }
    if v.version_differs {
        why.push(format!(
            "the tool version differs ({} recorded, {here} now)",
            v.recorded_version
        ));
    }
    if !v.record_passed {
        why.push("the recorded sign-off failed".to_string());
    }
    Err(Failure::NotMet(anyhow!(
        "{} does not certify the files as they are: {}; rerun ringtrue signoff on the project",
        record.display(),
        why.join("; ")
    )))
}
