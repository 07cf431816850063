//! The `rillnet` command: parse arguments, call the library, write its outcome, map errors to
//! exit codes (see `rillnet::error::exit`: 0 done, 1 a limit check failed, 2 bad input or
//! usage or output that could not be written, 3 results withheld by the solver).

use clap::{CommandFactory, Parser, Subcommand, ValueEnum};
use rillnet::commands::{self, Outcome, SensitivityChoice};
use rillnet::error::exit;
use rillnet::input::{positive_length, ChipArg};
use rillnet::report::Format;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "rillnet",
    version,
    about = "Laminar flow, pressure and wall shear in microfluidic channel networks"
)]
struct Cli {
    /// Print nothing on standard error but errors (no status lines).
    #[arg(long, short, global = true, conflicts_with = "verbose")]
    quiet: bool,
    /// Also print timings and solver figures on standard error.
    #[arg(long, short, global = true)]
    verbose: bool,
    /// Syntax of a chip read from standard input ('-'); default: guessed from its first
    /// character ('{' is JSON).
    #[arg(long, value_enum, global = true)]
    syntax: Option<SyntaxArg>,
    /// Memory a run may plan to use, e.g. '8 GiB' (default: RILLNET_MEMORY_BUDGET, else half
    /// the physical memory); larger chips are refused before they are built.
    #[arg(long, global = true, value_parser = rillnet::memory::parse_size)]
    memory_budget: Option<u64>,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
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
enum Show {
    Splits,
    Pressure,
}

#[derive(Clone, Copy, ValueEnum)]
enum Colour {
    Pressure,
    Flow,
    Margin,
}

#[derive(Clone, Copy, ValueEnum)]
enum SyntaxArg {
    Yaml,
    Json,
}

fn input_error(flag: &str, message: String) -> rillnet::Error {
    rillnet::Error::Input(rillnet::format::InputError::whole_file(flag, message))
}

/// Refuse a picture path whose extension rillnet cannot draw, before any work.
fn picture_arg(path: Option<&Path>) -> Result<(), rillnet::Error> {
    match path {
        Some(p) => rillnet::plots::PictureFormat::from_path(p).map(|_| ()),
        None => Ok(()),
    }
}

/// Run the command: its outcome and how to deliver it.
fn run(cli: &Cli) -> Result<(Outcome, Format, Option<PathBuf>, Vec<PathBuf>), rillnet::Error> {
    let syntax = cli.syntax.map(|s| match s {
        SyntaxArg::Json => rillnet::format::Syntax::Json,
        SyntaxArg::Yaml => rillnet::format::Syntax::Yaml,
    });
    if let Some(bytes) = cli.memory_budget {
        rillnet::memory::set_budget(bytes);
    }
    let chip = |file: &Path| ChipArg::new(file, syntax);
    Ok(match &cli.command {
        Command::Solve {
            file,
            format,
            output,
            plot,
            sensitivity,
            channels,
        } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let choice = match (sensitivity, channels.is_empty()) {
                (false, _) => SensitivityChoice::None,
                (true, true) => SensitivityChoice::Targets,
                (true, false) => SensitivityChoice::Channels(channels.clone()),
            };
            let outcome = commands::solve(&commands::SolveRequest {
                chip: arg.input(),
                plot: plot.as_deref(),
                sensitivity: choice,
            })?;
            (outcome, *format, output.clone(), vec![arg.path])
        }
        Command::Evolve {
            file,
            span,
            every,
            format,
        } => {
            let arg = chip(file)?;
            let req = commands::EvolveRequest::new(arg.input(), span, every);
            (commands::evolve(&req)?, *format, None, vec![arg.path])
        }
        Command::Check { file, format, plot } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let outcome = commands::check(&commands::CheckRequest {
                chip: arg.input(),
                plot: plot.as_deref(),
            })?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Tune {
            file,
            format,
            output,
            ignore_limits,
        } => {
            let arg = chip(file)?;
            let outcome = commands::tune(&commands::DesignRequest {
                chip: arg.input(),
                output: output.as_deref(),
                run: 0.0,
                pitch: 0.0,
                ignore_limits: *ignore_limits,
            })?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Size {
            file,
            format,
            output,
            run,
            pitch,
            ignore_limits,
        } => {
            let (run, pitch) = (
                positive_length("--run", run)?,
                positive_length("--pitch", pitch)?,
            );
            let arg = chip(file)?;
            let outcome = commands::size(&commands::DesignRequest {
                chip: arg.input(),
                output: output.as_deref(),
                run,
                pitch,
                ignore_limits: *ignore_limits,
            })?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Section {
            spec,
            file,
            name,
            viscosity,
            tolerance,
            format,
            plot,
        } => {
            picture_arg(plot.as_deref())?;
            let viscosity = match viscosity {
                Some(v) => Some(
                    v.parse::<rillnet::units::Viscosity>()
                        .map_err(|e| input_error("--viscosity", e.to_string()))?,
                ),
                None => None,
            };
            let arg = file.as_deref().map(chip).transpose()?;
            let outcome = commands::section(&commands::SectionRequest {
                spec: spec.as_deref(),
                chip: arg.as_ref().map(ChipArg::input),
                name: name.as_deref(),
                viscosity,
                tolerance: *tolerance,
                plot: plot.as_deref(),
            })?;
            let inputs = arg.map(|a| a.path).into_iter().collect();
            (outcome, *format, None, inputs)
        }
        Command::Plot {
            file,
            show,
            colour,
            output,
        } => {
            picture_arg(Some(output))?;
            let arg = chip(file)?;
            let outcome = commands::plot(&commands::PlotRequest {
                chip: arg.input(),
                pressure_profile: matches!(show, Show::Pressure),
                colour: match colour {
                    Colour::Pressure => rillnet::plots::ColourBy::Pressure,
                    Colour::Flow => rillnet::plots::ColourBy::Flow,
                    Colour::Margin => rillnet::plots::ColourBy::Margin,
                },
                output,
            })?;
            (outcome, Format::Table, None, vec![arg.path])
        }
        Command::Report {
            file,
            output,
            into_existing,
        } => {
            let arg = chip(file)?;
            let outcome = commands::report(&commands::ReportRequest {
                chip: arg.input(),
                folder: output,
                into_existing: *into_existing,
            })?;
            (outcome, Format::Table, None, vec![arg.path])
        }
        Command::Completions { .. } | Command::Manual => unreachable!("handled before run"),
    })
}

/// Write to standard error, ignoring failure (nowhere left to report it).
fn say(text: &str) {
    let _ = writeln!(std::io::stderr(), "{text}");
}

/// Print the completion script or manual page.
fn generated(command: &Command) -> Option<std::io::Result<()>> {
    let mut out = std::io::stdout().lock();
    match command {
        Command::Completions { shell } => {
            // Generated into memory first: the generator panics on a failed write.
            let mut script = Vec::new();
            clap_complete::generate(*shell, &mut Cli::command(), "rillnet", &mut script);
            Some(out.write_all(&script).and_then(|()| out.flush()))
        }
        Command::Manual => Some(clap_mangen::Man::new(Cli::command()).render(&mut out)),
        _ => None,
    }
}

/// The exit code for a failed write to standard output: quiet success for a closed pipe.
fn stdout_failure(e: &std::io::Error) -> ExitCode {
    if e.kind() == std::io::ErrorKind::BrokenPipe {
        return ExitCode::from(exit::OK);
    }
    say(&format!("error: cannot write to standard output: {e}"));
    ExitCode::from(exit::OUTPUT_FAILED)
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    if let Some(result) = generated(&cli.command) {
        return result.map_or_else(|e| stdout_failure(&e), |_| ExitCode::from(exit::OK));
    }
    let started = std::time::Instant::now();
    let (outcome, format, output, inputs) = match run(&cli) {
        Ok(done) => done,
        Err(e) => {
            say(&format!("error: {e}"));
            return ExitCode::from(e.exit_code());
        }
    };
    if cli.verbose {
        say(&format!(
            "rillnet: finished the work in {:.3} s",
            started.elapsed().as_secs_f64()
        ));
    }
    let code = if outcome.passed() {
        exit::OK
    } else {
        exit::CHECK_FAILED
    };
    if let Outcome::Wrote(files) = &outcome {
        if !cli.quiet {
            for f in files {
                say(&format!("wrote {}", f.display()));
            }
        }
        return ExitCode::from(code);
    }
    if let Some(path) = output {
        let protected: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
        if let Err(e) = commands::write_outcome(&outcome, format, &path, &protected) {
            say(&format!("error: {e}"));
            return ExitCode::from(e.exit_code());
        }
        if !cli.quiet {
            say(&format!("wrote {}", path.display()));
        }
        return ExitCode::from(code);
    }
    let stdout = std::io::stdout();
    if cli.verbose && stdout.is_terminal() {
        say("rillnet: writing the results");
    }
    match rillnet::emit(&outcome, format, &mut stdout.lock()) {
        Ok(()) => ExitCode::from(code),
        Err(e) => stdout_failure(&e),
    }
}
