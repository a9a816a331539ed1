//! Command-line parsing and the commands: each turns validated arguments into library calls, adds
//! context to errors once, and maps outcomes to exit codes (0 success, 1 the run or target failed,
//! 2 bad input or usage).

mod commands;
mod progress;
mod signoff;

use clap::{Args, Parser, Subcommand};
use ringtrue::settings::{MethodName, Overrides, Restart, Scale, Start};
use ringtrue::units::{parse_value, Quantity};
use std::path::PathBuf;

#[derive(Parser, Debug)]
#[command(
    name = "ringtrue",
    version,
    about = "Measures the accuracy of transient integration settings on your circuit"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Check a circuit file and summarize it.
    Check {
        /// The circuit file (YAML).
        file: PathBuf,
    },
    /// Run one setting and write the watched signals at every accepted step.
    Simulate {
        /// The circuit file (YAML).
        file: PathBuf,
        #[command(flatten)]
        settings: SettingFlags,
        /// Where to write the waveform CSV (time, then the watched signals).
        #[arg(long, value_name = "OUT.csv")]
        csv: PathBuf,
        /// Where to write the run's statistics as JSON.
        #[arg(long, value_name = "STATS.json")]
        json: Option<PathBuf>,
        /// Write the signals at N uniform times over [0, stop] instead of at every accepted step,
        /// by a cubic through the nearest accepted points between breakpoints (error O(h^4)).
        #[arg(long, value_name = "N")]
        points: Option<usize>,
    },
    /// Rerun the circuit under every setting of the plan, measure each against the reference, and
    /// recommend the cheapest setting that meets the target.
    Audit {
        /// The circuit file (YAML).
        file: PathBuf,
        /// Where to write results.json and report.html (default: reports/<circuit name>).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Worker threads (default: every core).
        #[arg(long, value_parser = clap::value_parser!(u32).range(1..=1024))]
        jobs: Option<u32>,
        /// Accuracy target: max error over the peak of each watched signal (overrides the plan's).
        #[arg(long, value_parser = plain_value)]
        target: Option<f64>,
        /// A YAML file with the plan map (replaces the circuit file's plan).
        #[arg(long, value_name = "PLAN.yaml")]
        plan: Option<PathBuf>,
        /// Wall-clock budget per cell, in seconds.
        #[arg(long = "cell-seconds", default_value_t = 600.0)]
        cell_seconds: f64,
        /// Run only shard K of N (cells i with i mod N = K - 1) and write DIR/shard-K-of-N.json for
        /// `ringtrue merge`, e.g. one array-job task per shard.
        #[arg(long, value_name = "K/N", value_parser = shard_spec)]
        shard: Option<ringtrue::audit::shard::ShardSpec>,
    },
    /// Combine the shards of a sharded audit (folders of shard-K-of-N.json, or the files) into one
    /// results.json and report.html, the same as an unsharded audit's apart from timing.
    Merge {
        /// Shard files, or folders holding them.
        #[arg(required = true, value_name = "DIR")]
        inputs: Vec<PathBuf>,
        /// Where to write results.json and report.html (default: the first folder given).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Worker threads for measuring the cells (default: every core).
        #[arg(long, value_parser = clap::value_parser!(u32).range(1..=1024))]
        jobs: Option<u32>,
    },
    /// Decide whether a ringing signal is the circuit's or the integrator's: rerun the setting with its
    /// step limit halved and quartered and with an L-stable method, and compare.
    Diagnose {
        /// The circuit file (YAML).
        file: PathBuf,
        /// The watched signal to examine (a node, or NAME.current).
        #[arg(long)]
        signal: String,
        #[command(flatten)]
        settings: SettingFlags,
        /// Also write the verdict and evidence as JSON.
        #[arg(long, value_name = "OUT.json")]
        json: Option<PathBuf>,
    },
    /// Look for step-to-step oscillation in a waveform exported as CSV (time column, then signals; the
    /// rows being the producing program's own steps).
    Inspect {
        /// The waveform CSV (header row; the first column is time in seconds).
        wave: PathBuf,
        /// The column to examine.
        #[arg(long)]
        signal: String,
        /// Amplitudes below a quarter of this fraction of the signal's peak are not flagged.
        #[arg(long, value_parser = plain_value, default_value = "1e-3")]
        target: f64,
        /// Also write the flags as JSON.
        #[arg(long, value_name = "OUT.json")]
        json: Option<PathBuf>,
    },
    /// List the circuit's natural frequencies (poles) at its start state.
    Poles {
        /// The circuit file (YAML).
        file: PathBuf,
        /// Also write them as JSON.
        #[arg(long, value_name = "OUT.json")]
        json: Option<PathBuf>,
    },
    /// Evaluate the circuit's reference solution at uniform times or at another file's times.
    Reference {
        /// The circuit file (YAML).
        file: PathBuf,
        /// Number of uniform times over [0, stop] (first 0, last stop).
        #[arg(long, conflicts_with = "at", required_unless_present = "at")]
        points: Option<usize>,
        /// Use the times in the first column of this CSV file (with a header row).
        #[arg(long, value_name = "OTHER.csv")]
        at: Option<PathBuf>,
        /// Where to write the CSV (time, then the watched signals).
        #[arg(long, value_name = "OUT.csv")]
        csv: PathBuf,
        /// How the run starts: operating_point or initial_conditions (default: the file's run.start).
        #[arg(long, value_parser = named::<Start>)]
        start: Option<Start>,
    },
    /// Run one setting on every circuit of a project against its reference and write a sign-off
    /// record (signoff.json, signoff.html); or check a record against the files with --verify.
    Signoff {
        /// The project file (YAML: project, settings, target, circuits).
        #[arg(required_unless_present = "verify", conflicts_with = "verify")]
        project: Option<PathBuf>,
        /// Check that the files a signoff.json names are unchanged, instead of running.
        #[arg(long, value_name = "SIGNOFF.json", conflicts_with_all = ["out", "jobs"])]
        verify: Option<PathBuf>,
        /// Where to write signoff.json and signoff.html (default: reports/<project>).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Worker threads (default: every core).
        #[arg(long, value_parser = clap::value_parser!(u32).range(1..=1024))]
        jobs: Option<u32>,
    },
    /// Write a benchmark circuit file: an RC ladder, an RC mesh or an LC line, driven by a 1 V step,
    /// with the stop time worked out from the network.
    Generate {
        #[command(subcommand)]
        network: GenerateCommand,
    },
}

#[derive(Subcommand, Debug)]
enum GenerateCommand {
    /// N stages of a series resistance and a capacitance to ground, driven at node `in`; the far end
    /// is watched and the run stops at five times the slowest time constant.
    Ladder {
        /// Number of stages (1 to 1000000).
        #[arg(long, value_name = "N")]
        stages: usize,
        /// Series resistance of each stage, e.g. 1k or 50ohm.
        #[arg(long, value_parser = resistance_value, default_value = "1k", allow_hyphen_values = true)]
        resistance: f64,
        /// Capacitance of each stage to ground, e.g. 1p.
        #[arg(long, value_parser = capacitance_value, default_value = "1p", allow_hyphen_values = true)]
        capacitance: f64,
        /// Where to write the circuit file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// A K x K grid with a resistance between neighbours and a capacitance from every node to ground,
    /// driven at one corner through one resistance; the opposite corner is watched and the run stops
    /// at five times the slowest time constant.
    Mesh {
        /// Nodes along each side (2 to 1000).
        #[arg(long, value_name = "K")]
        size: usize,
        /// Resistance between neighbours (and of the drive), e.g. 1k.
        #[arg(long, value_parser = resistance_value, default_value = "1k", allow_hyphen_values = true)]
        resistance: f64,
        /// Capacitance of each node to ground, e.g. 1p.
        #[arg(long, value_parser = capacitance_value, default_value = "1p", allow_hyphen_values = true)]
        capacitance: f64,
        /// Where to write the circuit file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// N sections of a series inductance and a shunt capacitance, driven through and terminated in
    /// sqrt(L / C); the far end is watched, the edge rises over ten section delays sqrt(L C) and the
    /// run stops after the rise plus three one-way delays.
    Line {
        /// Number of sections (1 to 1000000).
        #[arg(long, value_name = "N")]
        sections: usize,
        /// Series inductance of each section, e.g. 2.5n.
        #[arg(long, value_parser = inductance_value, default_value = "2.5n", allow_hyphen_values = true)]
        inductance: f64,
        /// Shunt capacitance of each section, e.g. 1p.
        #[arg(long, value_parser = capacitance_value, default_value = "1p", allow_hyphen_values = true)]
        capacitance: f64,
        /// Where to write the circuit file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
}

impl GenerateCommand {
    fn split(self) -> (ringtrue::generate::Network, Option<PathBuf>) {
        use ringtrue::generate::Network;
        match self {
            GenerateCommand::Ladder {
                stages,
                resistance,
                capacitance,
                out,
            } => (
                Network::Ladder {
                    stages,
                    resistance,
                    capacitance,
                },
                out,
            ),
            GenerateCommand::Mesh {
                size,
                resistance,
                capacitance,
                out,
            } => (
                Network::Mesh {
                    size,
                    resistance,
                    capacitance,
                },
                out,
            ),
            GenerateCommand::Line {
                sections,
                inductance,
                capacitance,
                out,
            } => (
                Network::Line {
                    sections,
                    inductance,
                    capacitance,
                },
                out,
            ),
        }
    }
}

fn time_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Time).map_err(|e| e.to_string())
}
fn plain_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Plain).map_err(|e| e.to_string())
}
fn volt_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Voltage).map_err(|e| e.to_string())
}
fn amp_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Current).map_err(|e| e.to_string())
}
fn resistance_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Resistance).map_err(|e| e.to_string())
}
fn capacitance_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Capacitance).map_err(|e| e.to_string())
}
fn inductance_value(s: &str) -> Result<f64, String> {
    parse_value(s, Quantity::Inductance).map_err(|e| e.to_string())
}
fn named<T: std::str::FromStr<Err = ringtrue::settings::UnknownName>>(
    s: &str,
) -> Result<T, String> {
    s.parse()
        .map_err(|e: ringtrue::settings::UnknownName| e.to_string())
}

/// The settings of one cell; any given here override the circuit file's `run:` map.
#[derive(Args, Debug, Clone, Default)]
struct SettingFlags {
    /// Integration method: backward-euler, trapezoidal, bdf2 or tr-bdf2.
    #[arg(long, value_parser = named::<MethodName>)]
    method: Option<MethodName>,
    /// Relative tolerance of the local truncation error test.
    #[arg(long, value_parser = plain_value)]
    rtol: Option<f64>,
    /// Absolute tolerance for voltages (V).
    #[arg(long = "atol-v", value_parser = volt_value)]
    atol_v: Option<f64>,
    /// Absolute tolerance for currents (A).
    #[arg(long = "atol-i", value_parser = amp_value)]
    atol_i: Option<f64>,
    /// Factor on the tolerance in the LTE test (above 1 loosens).
    #[arg(long = "lte-factor", value_parser = plain_value)]
    lte_factor: Option<f64>,
    /// Largest step (s), e.g. 10n.
    #[arg(long = "max-step", value_parser = time_value)]
    max_step: Option<f64>,
    /// Run with this fixed step (s), without LTE control.
    #[arg(long = "fixed-step", value_parser = time_value)]
    fixed_step: Option<f64>,
    /// What rtol is relative to: value, signal_peak or circuit_peak.
    #[arg(long, value_parser = named::<Scale>)]
    scale: Option<Scale>,
    /// First step after a breakpoint: backward-euler or same.
    #[arg(long, value_parser = named::<Restart>)]
    restart: Option<Restart>,
    /// How the run starts: operating_point or initial_conditions.
    #[arg(long, value_parser = named::<Start>)]
    start: Option<Start>,
    /// Most steps (accepted and rejected) the run may take.
    #[arg(long = "step-budget")]
    step_budget: Option<u64>,
    /// LU for the Jacobian: auto (dense up to 12 unknowns, sparse above), dense or sparse.
    #[arg(long = "linear-solver", value_parser = named::<ringtrue::settings::Backend>)]
    linear_solver: Option<ringtrue::settings::Backend>,
}

impl SettingFlags {
    fn overrides(&self) -> Overrides {
        Overrides {
            method: self.method,
            rtol: self.rtol,
            atol_v: self.atol_v,
            atol_i: self.atol_i,
            lte_factor: self.lte_factor,
            max_step: self.max_step,
            fixed_step: self.fixed_step,
            scale: self.scale,
            restart: self.restart,
            start: self.start,
            step_budget: self.step_budget,
            linear_solver: self.linear_solver,
        }
    }
}

fn shard_spec(s: &str) -> Result<ringtrue::audit::shard::ShardSpec, String> {
    ringtrue::audit::shard::ShardSpec::parse(s).map_err(|e| e.to_string())
}

/// How a command ended.
pub enum Failure {
    /// The input or the usage is wrong (exit 2).
    BadInput(anyhow::Error),
    /// The work ran but did not succeed (exit 1).
    NotMet(anyhow::Error),
}

pub fn run() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return code;
        }
    };
    let result = match cli.command {
        Command::Check { file } => commands::check(&file),
        Command::Simulate {
            file,
            settings,
            csv,
            json,
            points,
        } => commands::simulate(&file, &settings.overrides(), &csv, json.as_deref(), points),
        Command::Audit {
            file,
            out,
            jobs,
            target,
            plan,
            cell_seconds,
            shard,
        } => commands::audit(&commands::AuditRequest {
            file: &file,
            out: out.as_deref(),
            jobs,
            target,
            plan_file: plan.as_deref(),
            cell_seconds,
            shard,
        }),
        Command::Merge { inputs, out, jobs } => commands::merge(&inputs, out.as_deref(), jobs),
        Command::Diagnose {
            file,
            signal,
            settings,
            json,
        } => commands::diagnose(&file, &signal, &settings.overrides(), json.as_deref()),
        Command::Inspect {
            wave,
            signal,
            target,
            json,
        } => commands::inspect(&wave, &signal, target, json.as_deref()),
        Command::Poles { file, json } => commands::poles(&file, json.as_deref()),
        Command::Reference {
            file,
            points,
            at,
            csv,
            start,
        } => commands::reference(&file, points, at.as_deref(), &csv, start),
        Command::Signoff {
            project,
            verify,
            out,
            jobs,
        } => signoff::signoff(project.as_deref(), verify.as_deref(), out.as_deref(), jobs),
        Command::Generate { network } => {
            let (network, out) = network.split();
            commands::generate(&network, out.as_deref())
        }
    };
    match result {
        Ok(()) => 0,
        Err(Failure::BadInput(e)) => {
            eprintln!("error: {e:#}");
            2
        }
        Err(Failure::NotMet(e)) => {
            eprintln!("error: {e:#}");
            1
        }
    }
}
