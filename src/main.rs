//! The `ergopath` binary: parses flags, calls [`ergopath::commands`], prints the result.
//! Errors go to standard error with exit status 2 (bad input) or 1 (computation failed).

use clap::{Args, CommandFactory, Parser, Subcommand};
use ergopath::commands::{self, Format};
use ergopath::units::{GivenEnergy, GivenRate};
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
    /// Write a commented model template to NAME.toml to start from
    #[command(after_help = "Example:\n  ergopath new my_motor && ergopath check my_motor.toml")]
    New {
        /// Name of the new model file (.toml is added)
        name: String,
    },
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell)
    #[command(
        after_help = "Example:\n  ergopath completions bash > ~/.local/share/bash-completion/completions/ergopath"
    )]
    Completions {
        /// The shell
        shell: clap_complete::Shell,
    },
    /// Print the manual (roff): the overview page and one page per subcommand
    #[command(after_help = "Example:\n  ergopath man > ergopath.1 && man ./ergopath.1")]
    Man,
    /// Print the complete model-file and JSON reference (docs/model-format.md)
    #[command(after_help = "Example:\n  ergopath reference | less")]
    Reference,
    /// Validate a model file and summarise it (states, transitions, implied values, cycles)
    #[command(after_help = "Example:\n  ergopath check problems/walker.toml")]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: states (the default: energies), transitions (rates, drive, work, what LDB implied) or cycles; e.g. --csv=transitions")))]
    Check {
        /// Model file (TOML)
        model: PathBuf,
        #[command(flatten)]
        format: FormatFlags,
    },
    /// Steady state: probabilities, fluxes, harvesting power, drive power, entropy production
    #[command(after_help = "Example:\n  ergopath steady problems/walker.toml --json")]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: transitions (the default: flux, work and drive rate of each transition), states (probabilities) or cycles; e.g. --csv=states")))]
    Steady {
        /// Model file (TOML)
        model: PathBuf,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Network diagram (SVG, or DOT with --dot): states sized by probability, arrows along the net flux
    #[command(
        after_help = "Examples:\n  ergopath draw problems/walker.toml > walker.svg\n  ergopath draw problems/ring6.toml --of design --save\n  ergopath draw problems/walker.toml --design results/walker/design.json --rank 2 --dot | neato -n2 -Tpng > design2.png\n\nWith --save, writes network-baseline, network-bound, network-design or network-design-<rank>\n(.txt, .svg, .dot) to the results folder and prints the text summary."
    )]
    Draw {
        /// Model file (TOML)
        model: PathBuf,
        /// What to draw: baseline (steady state), bound (its optimal distribution p*) or design (the bound's attaining design)
        #[arg(long, value_enum)]
        of: Option<DrawOfArg>,
        /// Draw a saved design instead: design.json (ranked designs, see --rank) or bound.json (its attaining design)
        #[arg(long, value_name = "FILE")]
        design: Option<PathBuf>,
        /// Which ranked design of --design FILE (1 = the best)
        #[arg(long, value_name = "N", default_value_t = 1)]
        rank: usize,
        /// Print the graph in the DOT language (Graphviz) instead of SVG
        #[arg(long)]
        dot: bool,
        /// Also write the diagram (text summary, SVG, DOT) to the results folder
        #[arg(long)]
        save: bool,
        /// Results folder for --save
        #[arg(long, value_name = "DIR", default_value = "results")]
        results: PathBuf,
    },
    /// Which parameter limits the bound: derivatives of baseline power and bound, ranked by headroom
    #[command(after_help = "Example:\n  ergopath sensitivity problems/walker.toml --csv")]
    #[command(mut_arg("csv", |a| a.help("Print the table of every parameter's derivatives as CSV (--csv=parameters, the only table)")))]
    Sensitivity {
        /// Model file (TOML)
        model: PathBuf,
        /// Also differentiate a saved design's power (its added rates held fixed): design.json (see --rank) or bound.json
        #[arg(long, value_name = "FILE")]
        design: Option<PathBuf>,
        /// Which ranked design of --design FILE (1 = the best)
        #[arg(long, value_name = "N", default_value_t = 1)]
        rank: usize,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Quantiles of baseline power, bound and headroom over networks sampled from the model's uncertainty
    #[command(
        after_help = "Example:\n  ergopath uncertainty problems/walker.toml --samples 1000 --seed 7 --save\n\nThe model gives rate_uncertainty (a factor at 95%) and energy_uncertainty (a 95% half-width in\nthe energy unit) at the top level or per state and transition; backward rates follow from LDB."
    )]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: samples (the default: one row per solved sample) or quantiles (each quantile with its 95% interval)")))]
    Uncertainty {
        /// Model file (TOML)
        model: PathBuf,
        /// Number of sampled networks
        #[arg(long, value_name = "N", default_value_t = 1000)]
        samples: usize,
        /// Seed of the samples (same seed, same result on any number of threads)
        #[arg(long, value_name = "S", default_value_t = 1)]
        seed: u64,
        /// Where added pathways may act: all, or A/B,C/D (default: the model's [pathways] pairs)
        #[arg(long)]
        pairs: Option<String>,
        /// Worker threads (default: one per core)
        #[arg(long, default_value_t = 0)]
        threads: usize,
        /// No progress bar
        #[arg(long, short)]
        quiet: bool,
        /// Keep solved samples in FILE, so that an interrupted run can be resumed
        #[arg(long, value_name = "FILE")]
        checkpoint: Option<PathBuf>,
        /// Continue an interrupted run from its --checkpoint FILE (--samples may grow)
        #[arg(long, requires = "checkpoint")]
        resume: bool,
        /// Testing aid: stop as if interrupted after N newly solved samples
        #[arg(long, hide = true)]
        stop_after_samples: Option<usize>,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Universal bound on harvesting power under added pathways, with a design that attains it
    #[command(
        after_help = "Examples:\n  ergopath bound problems/ring6.toml\n  ergopath bound problems/walker.toml --pairs empty/stepped,fuel_bound/hydrolysed --rate-cap 1000 --json"
    )]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: summary (the default: one row of the bound's figures), states (baseline and optimal probabilities), pathways (the printed designs' rates) or speed (the speed table)")))]
    Bound {
        /// Model file (TOML)
        model: PathBuf,
        /// Where added pathways may act: `all` or pairs like A/B,C/D (default: the model's [pathways] pairs, else all)
        #[arg(long)]
        pairs: Option<String>,
        /// Also find the exact best design with every added rate at most K: a number per the model's time unit, or with a unit (1000/s, 5/ms)
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        rate_cap: Option<GivenRate>,
        /// Share of the headroom the printed design reaches
        #[arg(long, default_value_t = 0.99)]
        target: f64,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Rank concrete designs (pathway sets and rates) within a budget, verified by steady-state solves
    #[command(
        after_help = "Examples:\n  ergopath design problems/walker.toml --max-pathways 2 --rate-cap 1000\n  ergopath design problems/ring6.toml --max-pathways 3 --total-rate 50 --work-limit 2 --top 5 --save\n  ergopath design problems/walker.toml --shard 0/4 --save   (then: ergopath merge results/walker/design-part-*-of-4.json)"
    )]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: pathways (the default: one row per pathway of each ranked design), ranking (one row per design) or precision (each design's fluctuations)")))]
    Design {
        /// Model file (TOML)
        model: PathBuf,
        /// Where added pathways may act: `all` or pairs like A/B,C/D (default: the model's [pathways] pairs, else all)
        #[arg(long)]
        pairs: Option<String>,
        #[command(flatten)]
        budget: BudgetArgs,
        #[command(flatten)]
        search: SearchArgs,
        /// Score only shard I of N (0-based) and write its part file for `ergopath merge`
        #[arg(long, value_name = "I/N", value_parser = parse_shard)]
        shard: Option<(usize, usize)>,
        /// Keep finished branches in FILE as the search goes; Ctrl-C then stops cleanly
        #[arg(long, value_name = "FILE")]
        checkpoint: Option<PathBuf>,
        /// Continue an interrupted search from its --checkpoint FILE
        #[arg(long, requires = "checkpoint")]
        resume: bool,
        /// Testing aid: stop as if interrupted after N new branches
        #[arg(long, hide = true)]
        stop_after_branches: Option<usize>,
        /// Rank only designs whose Fano factor |2D/J| (energy unit) is at most X: a regular enough work current
        #[arg(long, value_name = "X")]
        max_fano: Option<f64>,
        /// Also rank the designs by a quantile of their power over N networks sampled from the
        /// model's uncertainty (the designs' rates fixed; the samples use --seed)
        #[arg(long, value_name = "N")]
        samples: Option<usize>,
        /// The quantile of --samples (0.05: the power that 95% of the samples exceed)
        #[arg(long, value_name = "Q", default_value_t = 0.05, requires = "samples")]
        quantile: f64,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Simulate the machine (Gillespie) and compare the simulated mean power and diffusion with the exact ones
    #[command(
        after_help = "Examples:\n  ergopath simulate problems/walker.toml --time 100 --runs 2000 --seed 1\n  ergopath simulate problems/walker.toml --design results/walker/design.json --time 100 --runs 2000 --seed 1 --save"
    )]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: estimates (one row: the simulated mean power and work diffusion with their intervals and exact values)")))]
    Simulate {
        /// Model file (TOML)
        model: PathBuf,
        /// Add the pathways of a saved design: design.json (its rank-1 design) or bound.json (its attaining design)
        #[arg(long, value_name = "FILE")]
        design: Option<PathBuf>,
        /// Length of each run, in the model's time unit
        #[arg(long, value_name = "T")]
        time: f64,
        /// Number of independent runs
        #[arg(long, value_name = "N", default_value_t = 1000)]
        runs: usize,
        /// Seed of the runs' random streams (same seed, same result on any number of threads)
        #[arg(long, value_name = "S", default_value_t = 1)]
        seed: u64,
        /// No progress bar
        #[arg(long, short)]
        quiet: bool,
        #[command(flatten)]
        format: FormatFlags,
        /// Also write the report and a chart of the accumulated work of the first runs to results/<model name>/
        #[arg(long)]
        save: bool,
    },
    /// Combine the part files of a sharded design search into the ranking one run would give
    #[command(
        after_help = "Example:\n  ergopath merge results/walker/design-part-*-of-4.json --save"
    )]
    #[command(mut_arg("csv", |a| a.help("Print a table as CSV: pathways (the default: one row per pathway of each ranked design), ranking (one row per design) or precision (each design's fluctuations)")))]
    Merge {
        /// Part files written by `ergopath design --shard I/N`
        #[arg(required = true)]
        parts: Vec<PathBuf>,
        /// The model file, if it is no longer where the parts say
        #[arg(long)]
        model: Option<PathBuf>,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Best design at each value of one budget quantity, beside the bounds (table, CSV, plot)
    #[command(
        after_help = "Examples:\n  ergopath sweep problems/walker.toml --over rate-cap=1..1e6 --points 13 --save\n  ergopath sweep problems/ring6.toml --over max-pathways=1..4 --rate-cap 100"
    )]
    #[command(mut_arg("csv", |a| a.help("Print the table of budget values as CSV (--csv=budgets: best power, share of headroom, upper bound, pathways at each value)")))]
    Sweep {
        /// Model file (TOML)
        model: PathBuf,
        /// The budget quantity and its range: rate-cap, total-rate, max-pathways or work-limit, as NAME=FROM..TO
        #[arg(long, value_name = "NAME=FROM..TO")]
        over: String,
        /// Number of budget values (log-spaced for rates; every integer for max-pathways)
        #[arg(long, default_value_t = 13)]
        points: usize,
        /// Keep finished budget points in FILE as the sweep goes; Ctrl-C then stops cleanly
        #[arg(long, value_name = "FILE")]
        checkpoint: Option<PathBuf>,
        /// Continue an interrupted sweep from its --checkpoint FILE
        #[arg(long, requires = "checkpoint")]
        resume: bool,
        /// Testing aid: stop as if interrupted after N new points
        #[arg(long, hide = true)]
        stop_after_points: Option<usize>,
        /// Where added pathways may act: `all` or pairs like A/B,C/D
        #[arg(long)]
        pairs: Option<String>,
        #[command(flatten)]
        budget: BudgetArgs,
        #[command(flatten)]
        search: SearchArgs,
        #[command(flatten)]
        format: FormatFlags,
        #[command(flatten)]
        save: SaveFlag,
    },
    /// Rank alternative architectures (model files) by bound, headroom and best power within a budget
    #[command(
        after_help = "Example:\n  ergopath compare problems/walker.toml problems/photoswitch.toml problems/ring6.toml --rate-cap 1000 --save"
    )]
    #[command(mut_arg("csv", |a| a.help("Print the ranking of the models as CSV (--csv=ranking, the only table; powers in W per molecule)")))]
    Compare {
        /// Two or more model files
        #[arg(required = true, num_args = 2..)]
        models: Vec<PathBuf>,
        #[command(flatten)]
        budget: BudgetArgs,
        #[command(flatten)]
        search: SearchArgs,
        #[command(flatten)]
        format: FormatFlags,
        /// Also write the comparison to results/compare/
        #[arg(long)]
        save: bool,
    },
    /// Exact headroom beside the near-equilibrium and strong-drive closed forms as energy labels are scaled
    #[command(
        after_help = "Examples:\n  ergopath regimes problems/ring6.toml --scale stored --from 0.01 --to 1000 --points 11 --save\n  ergopath regimes problems/walker.toml --scale drive --from 0.1 --to 3\n\n`stored` multiplies every work label and raises each drive by the same amount, so no rate changes;\nwork, drive and energies (or a comma list) keep forward rates and take backward rates from LDB."
    )]
    #[command(mut_arg("csv", |a| a.help("Print the table of scales as CSV (--csv=scales: indicator, regime, exact headroom and both closed forms at each scale)")))]
    Regimes {
        /// Model file (TOML)
        model: PathBuf,
        /// Which labels to scale: work, drive, energies (or a comma list), or stored
        #[arg(long)]
        scale: String,
        /// Smallest scale factor
        #[arg(long, default_value_t = 0.01)]
        from: f64,
        /// Largest scale factor
        #[arg(long, default_value_t = 1000.0)]
        to: f64,
        /// Number of (log-spaced) scale factors
        #[arg(long, default_value_t = 11)]
        points: usize,
        #[command(flatten)]
        format: FormatFlags,
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
        /// States of the random network for the design-search timing (0 skips it)
        #[arg(long, default_value_t = 12)]
        design_states: usize,
        /// Most pathways per design in the design-search timing
        #[arg(long, default_value_t = 3)]
        design_k: usize,
    },
}

/// What `draw --of` shows.
#[derive(Clone, Copy, clap::ValueEnum)]
enum DrawOfArg {
    Baseline,
    Bound,
    Design,
}

impl DrawOfArg {
    fn of(self) -> commands::DrawOf {
        match self {
            DrawOfArg::Baseline => commands::DrawOf::Baseline,
            DrawOfArg::Bound => commands::DrawOf::Bound,
            DrawOfArg::Design => commands::DrawOf::Design,
        }
    }
}

/// Budget of the added pathways; unset values come from the model's [pathways] table.
#[derive(Args)]
struct BudgetArgs {
    /// How many added pathways a design may use (default: [pathways] max_pathways, else 2)
    #[arg(long, value_name = "K")]
    max_pathways: Option<usize>,
    /// Per-direction rate limit of each added pathway: a number per the model's time unit, or with a unit (1000/s, 5/ms, 2 per us)
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    rate_cap: Option<GivenRate>,
    /// Limit on the sum of all added rates, both directions (a number per the model's time unit, or 50/s)
    #[arg(long, value_name = "T", allow_negative_numbers = true)]
    total_rate: Option<GivenRate>,
    /// Limit on |work per jump| of each added pathway: a number in the model's energy unit, or with a unit (10kJ/mol, 4kT, '12 pN nm')
    #[arg(long, value_name = "W", allow_negative_numbers = true)]
    work_limit: Option<GivenEnergy>,
}

impl BudgetArgs {
    fn flags(&self) -> commands::BudgetFlags {
        commands::BudgetFlags {
            max_pathways: self.max_pathways,
            rate_cap: self.rate_cap,
            total_rate: self.total_rate,
            work_limit: self.work_limit,
        }
    }
}

/// How the design search runs.
#[derive(Args)]
struct SearchArgs {
    /// How many designs to rank
    #[arg(long, default_value_t = 10)]
    top: usize,
    /// Seeded random starts of the rate optimisation per pathway set (besides the convex start)
    #[arg(long, default_value_t = 2)]
    starts: usize,
    /// Seed of the random starts (the same seed gives the same ranking)
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Worker threads (default: one per core)
    #[arg(long, default_value_t = 0)]
    threads: usize,
    /// Largest number of pathway sets searched exhaustively; above it a beam search runs
    #[arg(long, default_value_t = ergopath::search::EXHAUSTIVE_LIMIT)]
    exhaustive_limit: u64,
    /// Sets kept per level by the beam search
    #[arg(long, default_value_t = 48)]
    beam_width: usize,
    /// No progress bar
    #[arg(long, short)]
    quiet: bool,
    /// With a fluctuating environment: pathways act the same in every environment state
    /// (default: environment-aware, rates may differ per environment state)
    #[arg(long)]
    blind: bool,
}

impl SearchArgs {
    fn knobs(&self) -> commands::SearchKnobs {
        commands::SearchKnobs {
            top: self.top,
            starts: self.starts,
            seed: self.seed,
            exhaustive_limit: self.exhaustive_limit,
            beam_width: self.beam_width,
            threads: capped_threads(self.threads),
            quiet: self.quiet,
            blind: self.blind,
            control: Default::default(),
        }
    }
}

/// `--threads N` capped at what the machine runs at once (more threads only cost memory and
/// time), with a note when it is lowered; 0 stays 0 (one per core).
fn capped_threads(requested: usize) -> usize {
    let available = std::thread::available_parallelism().map_or(1, std::num::NonZeroUsize::get);
    if requested <= available {
        return requested;
    }
    note(&format!(
        "note: --threads {requested} is more than the {available} threads this machine runs at once; using {available}"
    ));
    available
}

/// Writes a line to standard error; a closed or full standard error is ignored (the exit
/// status still tells), never a panic as with `eprintln!`.
fn note(line: &str) {
    let mut stderr = std::io::stderr().lock();
    let _ = writeln!(stderr, "{}", ergopath::report::output::printable(line));
    let _ = stderr.flush();
}

/// `I/N` with `I < N`.
fn parse_shard(text: &str) -> Result<(usize, usize), String> {
    let usage = || format!("'{text}' is not a shard: give I/N with 0 <= I < N, e.g. 0/4");
    let (i, n) = text.split_once('/').ok_or_else(usage)?;
    let (i, n) = (
        i.trim().parse::<usize>().map_err(|_| usage())?,
        n.trim().parse::<usize>().map_err(|_| usage())?,
    );
    if i < n {
        Ok((i, n))
    } else {
        Err(usage())
    }
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
    /// Print one JSON object (every key: `ergopath reference`, or docs/model-format.md)
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print a table as CSV (the command's help names its tables)
    #[arg(
        long,
        value_name = "TABLE",
        num_args = 0..=1,
        require_equals = true,
        hide_possible_values = true,
        value_parser = clap::builder::PossibleValuesParser::new(commands::CSV_TABLES)
    )]
    csv: Option<Option<String>>,
}

impl FormatFlags {
    fn format(&self) -> Format {
        let table = |name: &str| {
            commands::CSV_TABLES
                .iter()
                .find(|t| **t == name)
                .map_or(Format::Csv, |&t| Format::CsvTable(t))
        };
        match (self.json, &self.csv) {
            (true, _) => Format::Json,
            (_, Some(None)) => Format::Csv,
            (_, Some(Some(name))) => table(name),
            _ => Format::Text,
        }
    }
}

/// The overview page followed by one page per subcommand (`ergopath-design(1)`, ...), in roff.
fn manual() -> Result<String, ergopath::Error> {
    let fail = |e: std::io::Error| ergopath::Error::Usage(format!("cannot render the manual: {e}"));
    let mut out = Vec::new();
    let command = Cli::command();
    clap_mangen::Man::new(command.clone())
        .render(&mut out)
        .map_err(fail)?;
    for sub in command.get_subcommands() {
        let name = format!("ergopath-{}", sub.get_name());
        let page = sub.clone().display_name(name);
        clap_mangen::Man::new(page).render(&mut out).map_err(fail)?;
    }
    Ok(String::from_utf8_lossy(&out).into_owned())
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Command::New { name } => commands::new_model(name),
        Command::Completions { shell } => {
            let mut out = Vec::new();
            clap_complete::generate(*shell, &mut Cli::command(), "ergopath", &mut out);
            Ok(String::from_utf8_lossy(&out).into_owned())
        }
        Command::Man => manual(),
        Command::Reference => Ok(ergopath::commands::MODEL_FORMAT.to_string()),
        Command::Check { model, format } => commands::check(model, format.format()),
        Command::Steady {
            model,
            format,
            save,
        } => commands::steady(model, format.format(), save.root().as_deref()),
        Command::Uncertainty {
            model,
            samples,
            seed,
            pairs,
            threads,
            quiet,
            checkpoint,
            resume,
            stop_after_samples,
            format,
            save,
        } => commands::uncertainty(
            model,
            &commands::UncertaintyRequest {
                pairs: pairs.clone(),
                samples: *samples,
                seed: *seed,
                knobs: commands::SearchKnobs {
                    threads: capped_threads(*threads),
                    quiet: *quiet,
                    ..Default::default()
                },
                format: format.format(),
                save_root: save.root(),
                checkpoint: checkpoint.clone(),
                resume: *resume,
                stop_after: *stop_after_samples,
            },
        ),
        Command::Draw {
            model,
            of,
            design,
            rank,
            dot,
            save,
            results,
        } => commands::draw(
            model,
            &commands::DrawRequest {
                of: of.map(DrawOfArg::of),
                design: design.clone(),
                rank: *rank,
                dot: *dot,
                save_root: save.then(|| results.clone()),
            },
        ),
        Command::Sensitivity {
            model,
            design,
            rank,
            format,
            save,
        } => commands::sensitivity(
            model,
            design.as_deref().map(|d| (d, *rank)),
            format.format(),
            save.root().as_deref(),
        ),
        Command::Bound {
            model,
            pairs,
            rate_cap,
            target,
            format,
            save,
        } => commands::bound(
            model,
            &commands::BoundRequest {
                pairs: pairs.clone(),
                rate_cap: *rate_cap,
                target: *target,
                format: format.format(),
                save_root: save.root(),
            },
        ),
        Command::Bench {
            sizes,
            bound_sizes,
            conic_limit,
            runs,
            out,
            design_states,
            design_k,
        } => commands::bench(&commands::BenchRequest {
            steady_sizes: sizes.clone(),
            bound_sizes: bound_sizes.clone(),
            conic_limit: *conic_limit,
            runs: *runs,
            out_dir: out.clone(),
            design: (*design_states > 0).then_some((*design_states, *design_k)),
        }),
        Command::Regimes {
            model,
            scale,
            from,
            to,
            points,
            format,
            save,
        } => commands::regimes(
            model,
            &commands::RegimesRequest {
                scale: scale.clone(),
                from: *from,
                to: *to,
                points: *points,
                format: format.format(),
                save_root: save.root(),
            },
        ),
        Command::Design {
            model,
            pairs,
            budget,
            search,
            shard,
            checkpoint,
            resume,
            stop_after_branches,
            max_fano,
            samples,
            quantile,
            format,
            save,
        } => commands::design(
            model,
            &commands::DesignRequest {
                pairs: pairs.clone(),
                budget: budget.flags(),
                knobs: search.knobs(),
                shard: *shard,
                checkpoint: checkpoint.clone(),
                resume: *resume,
                stop_after: *stop_after_branches,
                max_fano: *max_fano,
                samples: samples.map(|n| (n, *quantile)),
                format: format.format(),
                save_root: save.root(),
            },
        ),
        Command::Simulate {
            model,
            design,
            time,
            runs,
            seed,
            quiet,
            format,
            save,
        } => commands::simulate(
            model,
            &commands::SimulateRequest {
                design: design.clone(),
                time: *time,
                runs: *runs,
                seed: *seed,
                quiet: *quiet,
                format: format.format(),
                save_root: save.then(|| PathBuf::from("results")),
                control: Default::default(),
            },
        ),
        Command::Merge {
            parts,
            model,
            format,
            save,
        } => commands::merge(
            parts,
            model.as_deref(),
            format.format(),
            save.root().as_deref(),
        ),
        Command::Sweep {
            model,
            over,
            points,
            checkpoint,
            resume,
            stop_after_points,
            pairs,
            budget,
            search,
            format,
            save,
        } => commands::sweep(
            model,
            &commands::SweepRequest {
                pairs: pairs.clone(),
                budget: budget.flags(),
                knobs: search.knobs(),
                over: over.clone(),
                points: *points,
                format: format.format(),
                save_root: save.root(),
                checkpoint: checkpoint.clone(),
                resume: *resume,
                stop_after: *stop_after_points,
            },
        ),
        Command::Compare {
            models,
            budget,
            search,
            format,
            save,
        } => commands::compare(
            models,
            &commands::CompareRequest {
                budget: budget.flags(),
                knobs: search.knobs(),
                format: format.format(),
                save_root: save.then(|| PathBuf::from("results")),
            },
        ),
    };
    match result {
        Ok(text) => print_ignoring_closed_pipe(&text),
        Err(error) => {
            note(&format!("error: {error}"));
            ExitCode::from(error.exit_code() as u8)
        }
    }
}

/// Prints to standard output; a closed pipe (e.g. `| head`) is not an error.
fn print_ignoring_closed_pipe(text: &str) -> ExitCode {
    let text = ergopath::report::output::printable(text);
    let mut stdout = std::io::stdout().lock();
    match stdout
        .write_all(text.as_bytes())
        .and_then(|_| stdout.flush())
    {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
        Err(e) => {
            note(&format!("error: cannot write to standard output: {e}"));
            ExitCode::from(1)
        }
    }
}
