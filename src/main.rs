//! The `ergopath` binary: parses flags, calls [`ergopath::commands`], prints the result.
//! Errors go to standard error with exit status 2 (bad input) or 1 (computation failed).

use clap::{Args, Parser, Subcommand};
use ergopath::commands::{self, Format};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "ergopath",
    version,
    about = "Harvesting power of Markov jump networks, its universal bound, and designs that reach it",
    after_help = "Examples:\n  ergopath check problems/walker.toml\n  ergopath steady problems/walker.toml --json\n  ergopath bound problems/walker.toml --rate-cap 1000 --save"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Validate a model file and summarise it (states, transitions, implied values, cycles)
    #[command(after_help = "Example:\n  ergopath check problems/walker.toml")]
    Check {
        /// Model file (TOML)
        model: PathBuf,
    },
    /// Steady state: probabilities, fluxes, harvesting power, drive power, entropy production
    #[command(after_help = "Example:\n  ergopath steady problems/walker.toml --json")]
    Steady {
        /// Model file (TOML)
        model: PathBuf,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Universal bound on harvesting power under added pathways, with a design that attains it
    #[command(
        after_help = "Examples:\n  ergopath bound problems/ring6.toml\n  ergopath bound problems/walker.toml --pairs empty/stepped,fuel_bound/hydrolysed --rate-cap 1000 --json"
    )]
    Bound {
        /// Model file (TOML)
        model: PathBuf,
        /// Where added pathways may act: `all` or pairs like A/B,C/D (default: the model's [pathways] pairs, else all)
        #[arg(long)]
        pairs: Option<String>,
        /// Also find the exact best design with every added rate at most K (per time unit)
        #[arg(long, value_name = "K")]
        rate_cap: Option<f64>,
        /// Share of the headroom the printed design reaches
        #[arg(long, default_value_t = 0.99)]
        target: f64,
        /// Print one JSON object (keys as in the model-format documentation)
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Time the solvers on seeded synthetic networks (banded and random-chord families)
    #[command(
        after_help = "Example:\n  ergopath bench --sizes 100,1000,100000 --bound-sizes 100,1000,10000 --runs 3"
    )]
    Bench {
        /// Network sizes (states) for the steady-state timings, comma separated
        #[arg(long, value_delimiter = ',', default_value = "100,1000,10000,100000")]
        sizes: Vec<usize>,
        /// Network sizes for the bound timings, comma separated
        #[arg(long, value_delimiter = ',', default_value = "100,1000,10000")]
        bound_sizes: Vec<usize>,
        /// Largest network given to the conic (Clarabel) route
        #[arg(long, default_value_t = 3000)]
        conic_limit: usize,
        /// Runs per size; the median is reported
        #[arg(long, default_value_t = 3)]
        runs: usize,
        /// Folder for the timing table
        #[arg(long, default_value = "results/bench")]
        out: PathBuf,
    },
}

#[derive(Args)]
struct SaveFlag {
    /// Also write the report (text, JSON, CSV) to results/<model name>/
    #[arg(long)]
    save: bool,
}

impl SaveFlag {
    fn root(&self) -> Option<PathBuf> {
        self.save.then(|| PathBuf::from("results"))
    }
}

#[derive(Args)]
struct FormatFlags {
    /// Print one JSON object (keys as in the model-format documentation)
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print the per-transition table as CSV
    #[arg(long)]
    csv: bool,
}

impl FormatFlags {
    fn format(&self) -> Format {
        match (self.json, self.csv) {
            (true, _) => Format::Json,
            (_, true) => Format::Csv,
            _ => Format::Text,
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Command::Check { model } => commands::check(model),
        Command::Steady {
            model,
            format,
            save,
        } => commands::steady(model, format.format(), save.root().as_deref()),
        Command::Bound {
            model,
            pairs,
            rate_cap,
            target,
            json,
            save,
        } => commands::bound(
            model,
            &commands::BoundRequest {
                pairs: pairs.clone(),
                rate_cap: *rate_cap,
                target: *target,
                format: if *json { Format::Json } else { Format::Text },
                save_root: save.root(),
            },
        ),
        Command::Bench {
            sizes,
            bound_sizes,
            conic_limit,
            runs,
            out,
        } => commands::bench(&commands::BenchRequest {
            steady_sizes: sizes.clone(),
            bound_sizes: bound_sizes.clone(),
            conic_limit: *conic_limit,
            runs: *runs,
            out_dir: out.clone(),
        }),
    };
    match result {
        Ok(text) => print_ignoring_closed_pipe(&text),
        Err(error) => {
            eprintln!("error: {error}");
            ExitCode::from(error.exit_code() as u8)
        }
    }
}

/// Prints to standard output; a closed pipe (e.g. `| head`) is not an error.
fn print_ignoring_closed_pipe(text: &str) -> ExitCode {
    let mut stdout = std::io::stdout().lock();
    match stdout
        .write_all(text.as_bytes())
        .and_then(|_| stdout.flush())
    {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: cannot write to standard output: {e}");
            ExitCode::from(1)
        }
    }
}
