//! The `rillnet` command line: every command, option and value the binary accepts (clap
//! derive). Parsing only; `main.rs` calls the library with what was parsed.

use clap::{CommandFactory, Parser, Subcommand, ValueEnum};
use rillnet::report::Format;
use std::path::PathBuf;

impl Cli {
    /// Parse the command line, and refuse (exit code 2, clap's usage message) an option
    /// given to a picture it does not apply to.
    pub fn parse_checked() -> Cli {
        let cli = Cli::parse();
        if let Command::Plot {
            show, skip_tubing, ..
        } = &cli.command
        {
            if *skip_tubing && !matches!(show, Show::Pressure) {
                Cli::command()
                    .error(
                        clap::error::ErrorKind::ArgumentConflict,
                        "'--skip-tubing' applies to '--show pressure' only",
                    )
                    .exit();
            }
        }
        cli
    }
}

#[derive(Parser)]
#[command(
    name = "rillnet",
    version,
    about = "Laminar flow, pressure and wall shear in microfluidic channel networks"
)]
pub struct Cli {
    /// Print nothing on standard error but errors (no status lines).
    #[arg(long, short, global = true, conflicts_with = "verbose")]
    pub quiet: bool,
    /// Also print timings and solver figures on standard error.
    #[arg(long, short, global = true)]
    pub verbose: bool,
    /// Syntax of a chip read from standard input ('-'); default: guessed from its first
    /// character ('{' is JSON).
    #[arg(long, value_enum, global = true)]
    pub syntax: Option<SyntaxArg>,
    /// Memory a run may plan to use, e.g. '8 GiB' (default: RILLNET_MEMORY_BUDGET, else half
    /// the physical memory); larger chips are refused before they are built.
    #[arg(long, global = true, value_parser = rillnet::memory::parse_size)]
    pub memory_budget: Option<u64>,
    /// JSON without whitespace between tokens (the default when writing to a file with -o).
    #[arg(long, global = true, conflicts_with = "pretty")]
    pub compact: bool,
    /// Indented JSON (the default on standard output), also when writing to a file.
    #[arg(long, global = true)]
    pub pretty: bool,
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand)]
pub enum Command {
    /// How far flows, splits and wall shear can land from the design under the chip's
    /// tolerances: first order beside Monte Carlo, target misses, limits and yield.
    Spread {
        /// Chip file with 'tolerance:' entries; '-' reads standard input.
        file: PathBuf,
        /// Monte Carlo samples of the whole run (all shards together).
        #[arg(long, default_value_t = 10_000)]
        samples: u64,
        /// Seed of the counter-based draws (same seed, same samples, same results).
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Run only shard i of n ('i/n'); merge the JSON outputs with --merge.
        #[arg(long, conflicts_with = "merge")]
        shard: Option<String>,
        /// Merge the JSON outputs of every shard of one run (same chip file, seed, samples).
        #[arg(long, num_args = 1..)]
        merge: Vec<PathBuf>,
        /// Draw the distributions of the key flows, split shares and wall shear (nominal,
        /// target and its tolerance band, percentiles, limit) to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
        /// Draw the tornado chart of the first-order variance contributions to this new .svg
        /// or .png file.
        #[arg(long)]
        tornado: Option<PathBuf>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write to this new file instead of standard output (never overwrites).
        #[arg(long, short)]
        output: Option<PathBuf>,
    },
    /// Solve a chip: every node pressure, channel flow, wall shear and port operating point.
    Solve {
        /// Chip file (.yaml/.yml, or .json); '-' reads standard input.
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write to this new file instead of standard output (never overwrites).
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Draw the wall-shear margin chart to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
        /// Also give d(flow)/d(width, height, length), absolute and relative, for the target
        /// channels (or those named by --channels).
        #[arg(long)]
        sensitivity: bool,
        /// Channels whose flows --sensitivity differentiates, comma-separated.
        #[arg(long, value_delimiter = ',', requires = "sensitivity")]
        channels: Vec<String>,
        /// Solute model: complete mixing at every junction, or side-by-side streams with a
        /// profile across each channel's width (default: the chip's 'mixing:', else well).
        #[arg(long, value_enum)]
        mixing: Option<MixingArg>,
    },
    /// Tune the adjustable ports (pressure controllers, syringe pumps) to meet the chip's targets.
    Tune {
        /// Chip file with 'targets:' and ports marked 'adjust: {min: ..., max: ...}'.
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write the tuned chip to this new file.
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Do not hold wall-shear limits and the pressure rating as constraints.
        #[arg(long)]
        ignore_limits: bool,
    },
    /// Size channel lengths/widths (marked 'size:') to meet the chip's targets, drives fixed.
    Size {
        /// Chip file with 'targets:' and channels marked 'size: {length: {min: ..., max: ...}}'.
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write the sized chip to this new file.
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Straight run of a serpentine for long channels, e.g. '10 mm'.
        #[arg(long, default_value = "10 mm")]
        run: String,
        /// Centre-line pitch of the serpentine, e.g. '400 um'.
        #[arg(long, default_value = "400 um")]
        pitch: String,
        /// Do not hold wall-shear limits and the pressure rating as constraints.
        #[arg(long)]
        ignore_limits: bool,
    },
    /// Draw the chip: flow splits (default) or pressure along the flow paths, to SVG or PNG.
    Plot {
        /// Chip file; '-' reads standard input.
        file: PathBuf,
        /// Which picture.
        #[arg(long, value_enum, default_value_t = Show::Splits)]
        show: Show,
        /// What the channel colours show (splits picture).
        #[arg(long, value_enum, default_value_t = Colour::Pressure)]
        colour: Colour,
        /// The species '--colour species' shows (default: the first the chip declares).
        #[arg(long)]
        species: Option<String>,
        /// With '--show pressure': start each path at its first on-chip node, leaving out the
        /// round-section channels (tubing, capillaries) between the inlet port and the chip.
        #[arg(long)]
        skip_tubing: bool,
        /// New .svg or .png file to write.
        #[arg(long, short)]
        output: PathBuf,
    },
    /// Write tables (CSV, JSON, text), every picture and a self-contained HTML page into a new folder.
    Report {
        /// Chip file; '-' reads standard input.
        file: PathBuf,
        /// Folder to create (or an empty one).
        #[arg(long, short)]
        output: PathBuf,
        /// Also write into a folder that has files already (never replacing any).
        #[arg(long)]
        into_existing: bool,
    },
    /// Follow a chip in time: wells, trapped gas, soft parts, ports switched on, rocking.
    Evolve {
        /// Chip file; '-' reads standard input.
        file: PathBuf,
        /// How long, e.g. '2 h'.
        #[arg(long = "for")]
        span: String,
        /// Output interval, e.g. '10 s'.
        #[arg(long, default_value = "10 s")]
        every: String,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Draw flows (and well levels) against time to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
        /// Channels to draw, e.g. 'feed,c3' (default: the targets' channels, else those at
        /// the ports; at most 8).
        #[arg(long, value_delimiter = ',', requires = "plot")]
        channels: Vec<String>,
    },
    /// Check a chip against its limits (cells' wall-shear limit, chip pressure rating,
    /// vacuum); exits 1 when any limit is exceeded.
    Check {
        /// Chip file (.yaml/.yml, or .json); '-' reads standard input.
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Draw the wall-shear margin chart to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
    },
    /// Figures of one cross-section: area, perimeter, hydraulic diameter, resistance per
    /// length, f·Re, mean and maximum wall shear per unit gradient, error estimate.
    Section {
        /// The section as a mapping in chip-file syntax, e.g.
        /// '{shape: trapezoid, top: 120 um, depth: 40 um, sidewall: 54.74 deg}'.
        spec: Option<String>,
        /// Take the section from this chip file (with --name); '-' reads standard input.
        #[arg(long, requires = "name")]
        file: Option<PathBuf>,
        /// Name of the section in the chip file (CHANNEL.section for an inline one).
        #[arg(long, requires = "file")]
        name: Option<String>,
        /// Viscosity for the resistance, e.g. '1.0 mPa*s' (default: the chip's fluid, or
        /// water at 20 °C).
        #[arg(long)]
        viscosity: Option<String>,
        /// Relative error target for numerical shapes.
        #[arg(long)]
        tolerance: Option<f64>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Draw the velocity field and the wall shear to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
    },
    /// Print a shell completion script for rillnet to standard output.
    Completions {
        /// The shell.
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print rillnet's manual page (roff) to standard output, e.g. `rillnet manual > rillnet.1`.
    Manual,
}

#[derive(Clone, Copy, ValueEnum)]
pub enum Show {
    Splits,
    Pressure,
    /// Outlet concentrations against outlet (the gradient a generator makes).
    Outlets,
}

#[derive(Clone, Copy, ValueEnum)]
pub enum Colour {
    Pressure,
    Flow,
    Margin,
    /// Mean concentration of a species (with --species).
    Species,
}

#[derive(Clone, Copy, ValueEnum)]
pub enum MixingArg {
    Well,
    Lateral,
}

#[derive(Clone, Copy, ValueEnum)]
pub enum SyntaxArg {
    Yaml,
    Json,
}
