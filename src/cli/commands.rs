//! The commands behind the subcommands.

use super::Failure;
use anyhow::anyhow;
use ringtrue::circuit::{self, Circuit};
use ringtrue::equations::System;
use ringtrue::integrate;
use ringtrue::output;
use ringtrue::settings::{Overrides, Settings};
use std::collections::BTreeMap;
use std::path::Path;

fn load_with_text(file: &Path) -> Result<(Circuit, Vec<u8>), Failure> {
    let bytes = std::fs::read(file)
        .map_err(|e| Failure::BadInput(anyhow!("cannot read {}: {e}", file.display())))?;
    let text = String::from_utf8(bytes.clone())
        .map_err(|_| Failure::BadInput(anyhow!("{} is not UTF-8 text", file.display())))?;
    let c = circuit::parse(&text, &file.display().to_string())
        .map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
    Ok((c, bytes))
}

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
        ringtrue::units::shortest(c.run.stop)
    );
    println!("  start:       {}", c.run.start.as_str());
    let watch: Vec<String> = c.watch.iter().map(|p| p.label()).collect();
    println!("  watch:       {}", watch.join(", "));
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
    points: Option<usize>,
) -> Result<(), Failure> {
    let c = load(file)?;
    let settings = settings_for(&c, flags)?;
    if points.is_some_and(|n| n < 2) {
        return Err(Failure::BadInput(anyhow!(
            "--points must be at least 2 (the first time is 0, the last the stop time)"
        )));
    }
    let run = integrate::simulate(&c, &settings).map_err(|e| {
        Failure::NotMet(anyhow!(
            "{}: {} run failed: {e}",
            c.file,
            settings.method.as_str()
        ))
    })?;
    let traj = match points {
        Some(n) => {
            let times = ringtrue::reference::Reference::uniform_times(c.run.stop, n);
            run.trajectory.resample(&c.breakpoints(), &times)
        }
        None => run.trajectory.clone(),
    };
    write_atomic(csv, &output::trajectory_csv(&traj))?;
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

/// Reads the times in the first column of a CSV file with a header row.
fn read_times(path: &Path) -> Result<Vec<f64>, Failure> {
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_path(path)
        .map_err(|e| Failure::BadInput(anyhow!("cannot read {}: {e}", path.display())))?;
    let mut times = Vec::new();
    for (i, rec) in rdr.records().enumerate() {
        let rec =
            rec.map_err(|e| Failure::BadInput(anyhow!("{}: row {}: {e}", path.display(), i + 2)))?;
        let field = rec.get(0).unwrap_or("").trim();
        let t: f64 = field.parse().map_err(|_| {
            Failure::BadInput(anyhow!(
                "{}:{}: the first column holds '{field}', which is not a time in seconds; the first column must be time",
                path.display(),
                i + 2
            ))
        })?;
        if !t.is_finite() || t < 0.0 {
            return Err(Failure::BadInput(anyhow!(
                "{}:{}: time {field} must be finite and not negative",
                path.display(),
                i + 2
            )));
        }
        times.push(t);
    }
    Ok(times)
}

pub fn reference(
    file: &Path,
    points: Option<usize>,
    at: Option<&Path>,
    csv: &Path,
    start: Option<ringtrue::settings::Start>,
) -> Result<(), Failure> {
    use ringtrue::reference::Reference;
    let c = load(file)?;
    let mut settings = Settings::new(ringtrue::settings::MethodName::TrBdf2);
    settings.apply(&c.run.settings);
    if let Some(s) = start {
        settings.start = s;
    }
    let times = match (points, at) {
        (Some(n), _) if n < 2 => {
            return Err(Failure::BadInput(anyhow!(
                "--points must be at least 2 (the first time is 0, the last the stop time)"
            )))
        }
        (Some(n), _) => Reference::uniform_times(c.run.stop, n),
        (None, Some(p)) => read_times(p)?,
        (None, None) => {
            return Err(Failure::BadInput(anyhow!(
                "give --points N or --at OTHER.csv"
            )))
        }
    };
    let r = Reference::build(&c, &settings)
        .map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?;
    let values = r.evaluate(&times);
    let traj = integrate::Trajectory {
        labels: r.labels.clone(),
        times,
        values,
    };
    write_atomic(csv, &output::trajectory_csv(&traj))?;
    eprintln!(
        "{}: reference {} (error bound {:e} of each signal's peak)",
        c.file,
        r.kind.label(),
        r.error_bound
    );
    if let Some(w) = &r.warning {
        eprintln!("warning: {w}");
    }
    Ok(())
}

/// The present time as an RFC 3339 UTC timestamp, e.g. 2026-12-01T22:22:55Z.
pub fn now_utc() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs() as i64)
        .unwrap_or(0);
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    // civil date from days since 1970-01-01 (H. Hinnant's algorithm, public domain)
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// The command line as typed, quoted where needed, to reproduce a report.
pub fn command_line() -> String {
    std::env::args()
        .map(|a| {
            if a.is_empty() || a.contains(|c: char| c.is_whitespace() || "'\"$`\\".contains(c)) {
                format!("'{}'", a.replace('\'', "'\\''"))
            } else {
                a
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// The plan file's name and text, when one is given.
fn read_plan_file(plan_file: Option<&Path>) -> Result<Option<(String, String)>, Failure> {
    plan_file
        .map(|p| {
            std::fs::read_to_string(p)
                .map(|text| (p.display().to_string(), text))
                .map_err(|e| Failure::BadInput(anyhow!("cannot read {}: {e}", p.display())))
        })
        .transpose()
}

/// The audit's plan: the plan file's (name, text) when given, else the circuit's own, then `--target`.
fn plan_from_sources(
    c: &Circuit,
    plan_file: Option<(&str, &str)>,
    target: Option<f64>,
) -> Result<ringtrue::audit::Plan, Failure> {
    use ringtrue::audit::Plan;
    use ringtrue::circuit::raw::RawPlan;
    let mut plan = match plan_file {
        Some((name, text)) => {
            let raw: RawPlan = ringtrue::circuit::yaml::from_str(text).map_err(|e| {
                Failure::BadInput(anyhow!(
                    "{name}:{}: {}; the plan file holds the plan map (methods, rtol, atol_v, atol_i, lte_factor, max_step, fixed_step, restart, scale, step_budget, target)",
                    e.line.map_or(String::new(), |l| l.to_string()),
                    e.message
                ))
            })?;
            Plan::from_raw(&raw).map_err(|e| Failure::BadInput(anyhow!("{name}: {e}")))?
        }
        None => match &c.plan {
            Some(raw) => {
                Plan::from_raw(raw).map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?
            }
            None => Plan::default(),
        },
    };
    if let Some(t) = target {
        plan.target = t;
    }
    plan.validate()
        .map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
    Ok(plan)
}

fn jobs_or_cores(jobs: Option<u32>) -> usize {
    jobs.map(|j| j as usize)
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
}

/// How `audit` was asked to run.
pub struct AuditRequest<'a> {
    pub file: &'a Path,
    pub out: Option<&'a Path>,
    pub jobs: Option<u32>,
    pub target: Option<f64>,
    pub plan_file: Option<&'a Path>,
    pub cell_seconds: f64,
    pub shard: Option<ringtrue::audit::shard::ShardSpec>,
}

pub fn audit(r: &AuditRequest) -> Result<(), Failure> {
    use ringtrue::audit::{self, results};
    let (c, bytes) = load_with_text(r.file)?;
    let plan_src = read_plan_file(r.plan_file)?;
    let plan = plan_from_sources(
        &c,
        plan_src.as_ref().map(|(n, t)| (n.as_str(), t.as_str())),
        r.target,
    )?;
    if !(r.cell_seconds.is_finite() && r.cell_seconds > 0.0) {
        return Err(Failure::BadInput(anyhow!(
            "--cell-seconds must be a positive number of seconds"
        )));
    }
    let jobs = jobs_or_cores(r.jobs);
    let dir = r
        .out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| Path::new("reports").join(&c.name));
    let options = audit::Options {
        jobs,
        cell_seconds: r.cell_seconds,
    };
    let sha = results::sha256_hex(&bytes);
    if let Some(spec) = r.shard {
        let sources = audit::shard::Sources {
            circuit_file: c.file.clone(),
            circuit_text: String::from_utf8(bytes).expect("load_with_text checked UTF-8"),
            circuit_sha256: sha,
            plan_file: plan_src,
            target: r.target,
        };
        return audit_shard(&c, &plan, spec, &options, sources, &dir);
    }
    let bar = super::progress::Progress::new(plan.size() as u64);
    let a = audit::run(&c, &plan, &options, &|failed| bar.cell_done(failed))
        .map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?;
    bar.finish();
    write_audit(&a, &c, &sha, &dir)
}

/// Runs one shard of the plan and writes `DIR/shard-K-of-N.json`.
fn audit_shard(
    c: &Circuit,
    plan: &ringtrue::audit::Plan,
    spec: ringtrue::audit::shard::ShardSpec,
    options: &ringtrue::audit::Options,
    sources: ringtrue::audit::shard::Sources,
    dir: &Path,
) -> Result<(), Failure> {
    use ringtrue::audit::shard;
    let mine = spec.cells(plan.size()).len() as u64;
    let bar = super::progress::Progress::new(mine);
    let cells = shard::run_shard(c, plan, spec, options, &|failed| bar.cell_done(failed))
        .map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?;
    bar.finish();
    let failed = cells.iter().filter(|x| x.1.failure.is_some()).count();
    let s = shard::Shard {
        version: env!("CARGO_PKG_VERSION").to_string(),
        spec,
        sources,
        cell_seconds: options.cell_seconds,
        plan_size: plan.size(),
        created: now_utc(),
        command: command_line(),
        threads: options.jobs,
        cells,
    };
    let path = dir.join(spec.file_name());
    let text = serde_json::to_string(&shard::to_json(&s)).expect("JSON values serialize") + "\n";
    write_atomic(&path, &text)?;
    println!(
        "{}: shard {} of {} ran {} of the plan's {} cells ({failed} failed); wrote {}",
        c.file,
        spec.index,
        spec.count,
        s.cells.len(),
        s.plan_size,
        path.display()
    );
    println!(
        "when all {} shards are done: ringtrue merge {}",
        spec.count,
        dir.display()
    );
    Ok(())
}

/// Writes results.json and report.html, stamped with this command and the time, and prints the
/// summary; the target decides the outcome.
fn write_audit(
    a: &ringtrue::audit::Audit,
    c: &Circuit,
    sha256: &str,
    dir: &Path,
) -> Result<(), Failure> {
    let created = now_utc();
    let command = command_line();
    let prov = &ringtrue::audit::results::Provenance {
        file: &c.file,
        title: &c.title,
        sha256,
        created: &created,
        command: &command,
        stop: c.run.stop,
    };
    let json = ringtrue::audit::results::results_json(a, prov);
    let text = serde_json::to_string_pretty(&json).expect("JSON values serialize") + "\n";
    write_atomic(&dir.join("results.json"), &text)?;
    let html = ringtrue::report::render(a, c, prov);
    write_atomic(&dir.join("report.html"), &html)?;
    let passing = a.cells.iter().filter(|x| x.meets_target).count();
    let failed = a.cells.iter().filter(|x| !x.ok()).count();
    println!(
        "{}: {} cells, {passing} meet the target {:e}, {failed} failed; reference {} (error bound {:.1e})",
        c.file,
        a.cells.len(),
        a.target,
        a.reference.kind.label(),
        a.reference.error_bound
    );
    if let Some(w) = &a.reference.warning {
        println!("warning: {w}");
    }
    match a.recommendation {
        Some(_) => println!("recommended: {}", a.recommendation_reason),
        None => println!("no recommendation: {}", a.recommendation_reason),
    }
    println!(
        "wrote {} and {}",
        dir.join("results.json").display(),
        dir.join("report.html").display()
    );
    if a.target_met() {
        Ok(())
    } else {
        Err(Failure::NotMet(anyhow!(
            "no cell meets the target {:e}",
            a.target
        )))
    }
}

/// The shard files named by `inputs`: each a shard file, or a folder whose `shard-*-of-*.json` are taken.
fn shard_files(inputs: &[std::path::PathBuf]) -> Result<Vec<std::path::PathBuf>, Failure> {
    let mut files = Vec::new();
    for input in inputs {
        if input.is_dir() {
            let entries = std::fs::read_dir(input).map_err(|e| {
                Failure::BadInput(anyhow!("cannot list the folder {}: {e}", input.display()))
            })?;
            let mut found: Vec<_> = entries
                .filter_map(Result::ok)
                .map(|e| e.path())
                .filter(|p| {
                    p.file_name().and_then(|n| n.to_str()).is_some_and(|n| {
                        n.starts_with("shard-") && n.ends_with(".json") && n.contains("-of-")
                    })
                })
                .collect();
            if found.is_empty() {
                return Err(Failure::BadInput(anyhow!(
                    "{} holds no shard files (shard-K-of-N.json); run `ringtrue audit FILE --shard K/N --out {}` first",
                    input.display(),
                    input.display()
                )));
            }
            found.sort();
            files.extend(found);
        } else if input.is_file() {
            files.push(input.clone());
        } else {
            return Err(Failure::BadInput(anyhow!(
                "{} is neither a shard file nor a folder of shard files",
                input.display()
            )));
        }
    }
    files.dedup();
    Ok(files)
}

pub fn merge(
    inputs: &[std::path::PathBuf],
    out: Option<&Path>,
    jobs: Option<u32>,
) -> Result<(), Failure> {
    use ringtrue::audit::{results, shard};
    let files = shard_files(inputs)?;
    let mut shards = Vec::with_capacity(files.len());
    for f in &files {
        let name = f.display().to_string();
        let text = std::fs::read_to_string(f)
            .map_err(|e| Failure::BadInput(anyhow!("cannot read {name}: {e}")))?;
        let s = shard::from_json(&text, &name).map_err(|e| Failure::BadInput(anyhow!("{e}")))?;
        shards.push((name, s));
    }
    let bad = |e: shard::ShardError| Failure::BadInput(anyhow!("{e}"));
    let (first_file, first) = shards
        .first()
        .ok_or_else(|| bad(shard::ShardError::Empty))?;
    let src = &first.sources;
    if results::sha256_hex(src.circuit_text.as_bytes()) != src.circuit_sha256 {
        return Err(Failure::BadInput(anyhow!(
            "{first_file}: the circuit text does not match its recorded sha256; the shard file was changed, rerun the shard"
        )));
    }
    let c = circuit::parse(&src.circuit_text, &src.circuit_file)
        .map_err(|e| Failure::BadInput(anyhow!("{first_file}: the circuit it holds: {e}")))?;
    let plan = plan_from_sources(
        &c,
        src.plan_file
            .as_ref()
            .map(|(n, t)| (n.as_str(), t.as_str())),
        src.target,
    )?;
    // Before the shard set is checked, so a corrupt plan size cannot ask for a vast cell list.
    if plan.size() != first.plan_size {
        return Err(bad(shard::ShardError::PlanSize {
            plan: plan.size(),
            shards: first.plan_size,
        }));
    }
    let dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| match inputs[0].is_dir() {
            true => inputs[0].clone(),
            false => inputs[0]
                .parent()
                .map(Path::to_path_buf)
                .unwrap_or_else(|| Path::new(".").to_path_buf()),
        });
    let a = shard::merge(&c, &plan, &shards, jobs_or_cores(jobs))
        .map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?;
    write_audit(&a, &c, &src.circuit_sha256, &dir)
}

pub fn poles(file: &Path, json: Option<&Path>) -> Result<(), Failure> {
    use ringtrue::units::engineering;
    let c = load(file)?;
    let mut settings = Settings::new(ringtrue::settings::MethodName::TrBdf2);
    settings.apply(&c.run.settings);
    let ps = ringtrue::poles::poles(&c, &settings)
        .map_err(|e| Failure::BadInput(anyhow!("{}: {e}", c.file)))?;
    println!(
        "{}: {} poles at the {} state",
        c.file,
        ps.len(),
        settings.start.as_str()
    );
    println!(
        "{:>14} {:>14} {:>12} {:>8} {:>10} {:>12}",
        "re (1/s)", "im (rad/s)", "freq (Hz)", "zeta", "Q", "tau (s)"
    );
    for p in &ps {
        println!(
            "{:>14.6e} {:>14.6e} {:>12} {:>8.4} {:>10} {:>12}",
            p.re,
            p.im,
            engineering(p.frequency_hz()),
            p.damping_ratio(),
            p.q().map_or("inf".to_string(), |q| format!("{q:.4}")),
            p.time_constant().map_or("inf".to_string(), engineering)
        );
    }
    if let Some(j) = json {
        let text = serde_json::to_string_pretty(&ringtrue::poles::poles_json(&ps))
            .expect("JSON values serialize")
            + "\n";
        write_atomic(j, &text)?;
    }
    Ok(())
}

pub fn diagnose(
    file: &Path,
    signal: &str,
    flags: &Overrides,
    json: Option<&Path>,
) -> Result<(), Failure> {
    let c = load(file)?;
    let mut o = *flags;
    if o.method.is_none() {
        o.method = c.run.settings.method;
    }
    if o.method.is_none() {
        return Err(Failure::BadInput(anyhow!(
            "no method given: pass --method or set run.method in {}",
            c.file
        )));
    }
    settings_for(&c, &o)?;
    let d = ringtrue::diagnose::diagnose(&c, &o, signal).map_err(|e| match e {
        ringtrue::diagnose::DiagnoseError::UnknownSignal { .. } => {
            Failure::BadInput(anyhow!("{}: {e}", c.file))
        }
        other => Failure::NotMet(anyhow!("{}: {other}", c.file)),
    })?;
    print!("{}", ringtrue::diagnose::summary(&d));
    if let Some(j) = json {
        let text = serde_json::to_string_pretty(&ringtrue::diagnose::diagnosis_json(&d))
            .expect("JSON values serialize")
            + "\n";
        write_atomic(j, &text)?;
    }
    Ok(())
}

pub fn inspect(wave: &Path, signal: &str, target: f64, json: Option<&Path>) -> Result<(), Failure> {
    if !(target.is_finite() && target > 0.0 && target < 1.0) {
        return Err(Failure::BadInput(anyhow!(
            "--target must be between 0 and 1, e.g. 1e-3"
        )));
    }
    let bad = |m: String| Failure::BadInput(anyhow!("{}: {m}", wave.display()));
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_path(wave)
        .map_err(|e| bad(format!("cannot read: {e}")))?;
    let headers: Vec<String> = rdr
        .headers()
        .map_err(|e| bad(e.to_string()))?
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    let col = headers
        .iter()
        .skip(1)
        .position(|h| h == signal)
        .map(|k| k + 1)
        .ok_or_else(|| {
            bad(format!(
                "has no column '{signal}'; its columns are {}",
                headers.join(", ")
            ))
        })?;
    let (mut t, mut v) = (Vec::new(), Vec::new());
    for (i, rec) in rdr.records().enumerate() {
        let rec = rec.map_err(|e| bad(format!("row {}: {e}", i + 2)))?;
        let parse = |k: usize| -> Result<f64, Failure> {
            let f = rec.get(k).unwrap_or("").trim();
            f.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| {
                    bad(format!(
                        "line {}: '{f}' in column {} is not a finite number",
                        i + 2,
                        k + 1
                    ))
                })
        };
        let (ti, vi) = (parse(0)?, parse(col)?);
        if let Some(&last) = t.last() {
            if ti <= last {
                return Err(bad(format!("line {}: time {} does not increase; the first column must be strictly increasing time", i + 2, ringtrue::units::shortest(ti))));
            }
        }
        t.push(ti);
        v.push(vi);
    }
    let peak = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    let flags = if peak > 0.0 {
        ringtrue::detect::numerical_ringing(signal, &t, &v, None, peak, target, &[])
    } else {
        Vec::new()
    };
    println!(
        "{}: {} samples of {signal}; {} numerical-ringing flag(s)",
        wave.display(),
        t.len(),
        flags.len()
    );
    for f in &flags {
        println!(
            "  from {:.6e} s to {:.6e} s, severity {:.2}",
            f.t_start, f.t_end, f.severity
        );
    }
    if let Some(j) = json {
        let doc = serde_json::json!({ "flags": flags.iter().map(ringtrue::audit::results::flag_json).collect::<Vec<_>>() });
        write_atomic(
            j,
            &(serde_json::to_string_pretty(&doc).expect("JSON values serialize") + "\n"),
        )?;
    }
    Ok(())
}

pub fn generate(network: &ringtrue::generate::Network, out: Option<&Path>) -> Result<(), Failure> {
    use ringtrue::generate::{self, GenerateError, Network};
    use ringtrue::units::engineering;
    let g = generate::generate(network).map_err(|e| {
        let flag = match (&e, network) {
            (GenerateError::Count { .. }, Network::Ladder { .. }) => "--stages",
            (GenerateError::Count { .. }, Network::Mesh { .. }) => "--size",
            (GenerateError::Count { .. }, Network::Line { .. }) => "--sections",
            (GenerateError::Value { what, .. }, _) => match *what {
                "resistance" => "--resistance",
                "capacitance" => "--capacitance",
                "inductance" => "--inductance",
                _ => "--inductance and --capacitance",
            },
            (GenerateError::Time { .. }, _) => "the values",
        };
        Failure::BadInput(anyhow!("generate: {flag}: {e}"))
    })?;
    match out {
        Some(path) => write_atomic(path, &g.text)?,
        None => {
            use std::io::Write;
            let mut stdout = std::io::stdout().lock();
            stdout
                .write_all(g.text.as_bytes())
                .and_then(|()| stdout.flush())
                .map_err(|e| Failure::NotMet(anyhow!("cannot write to standard output: {e}")))?;
        }
    }
    let timing = match (g.slowest_time_constant, g.delay) {
        (Some(tau), _) => format!("slowest time constant {}s", engineering(tau)),
        (None, Some(d)) => format!("one-way delay {}s", engineering(d)),
        (None, None) => String::new(),
    };
    eprintln!(
        "{}{}: {} nodes, {} elements, {timing}, stop {}s, watching {}",
        out.map_or(String::new(), |p| format!("wrote {}: ", p.display())),
        g.name,
        g.nodes,
        g.elements,
        engineering(g.stop),
        g.watched
    );
    Ok(())
}
