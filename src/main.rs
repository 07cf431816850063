//! The `rillnet` command: parse arguments, call the library, print, map errors to exit codes
//! (0 ok, 1 a check failed, 2 bad input or usage).

use clap::{Parser, Subcommand, ValueEnum};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "rillnet",
    version,
    about = "Laminar flow, pressure and wall shear in microfluidic channel networks"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Solve a chip: every node pressure, channel flow, wall shear and port operating point.
    Solve {
        /// Chip file (.yaml/.yml, or .json).
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = OutFormat::Table)]
        format: OutFormat,
        /// Write to this new file instead of standard output (never overwrites).
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Draw the wall-shear margin chart to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
    },
    /// Check a chip against its limits (cells' wall-shear limit, chip pressure rating);
    /// exits 1 when any limit is exceeded.
    Check {
        /// Chip file (.yaml/.yml, or .json).
        file: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = OutFormat::Table)]
        format: OutFormat,
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
        /// Take the section from this chip file (with --name).
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
        /// Output format (table or json).
        #[arg(long, value_enum, default_value_t = OutFormat::Table)]
        format: OutFormat,
        /// Draw the velocity field and the wall shear to this new .svg or .png file.
        #[arg(long)]
        plot: Option<PathBuf>,
    },
}

#[derive(Clone, Copy, ValueEnum)]
enum OutFormat {
    Table,
    Json,
    Csv,
}

impl From<OutFormat> for rillnet::report::Format {
    fn from(f: OutFormat) -> Self {
        match f {
            OutFormat::Table => rillnet::report::Format::Table,
            OutFormat::Json => rillnet::report::Format::Json,
            OutFormat::Csv => rillnet::report::Format::Csv,
        }
    }
}

/// Run the command: the text to print and whether every check passed.
fn run(command: &Command) -> Result<(String, bool), rillnet::Error> {
    match command {
        Command::Solve {
            file,
            format,
            output,
            plot,
        } => rillnet::solve_command(&rillnet::SolveRequest {
            chip: file,
            format: (*format).into(),
            output: output.as_deref(),
            plot: plot.as_deref(),
        })
        .map(|text| (text, true)),
        Command::Section {
            spec,
            file,
            name,
            viscosity,
            tolerance,
            format,
            plot,
        } => {
            let viscosity = match viscosity {
                Some(v) => Some(v.parse::<rillnet::units::Viscosity>().map_err(|e| {
                    rillnet::Error::Input(rillnet::format::InputError::whole_file(
                        "--viscosity",
                        e.to_string(),
                    ))
                })?),
                None => None,
            };
            rillnet::section_command(&rillnet::SectionRequest {
                spec: spec.as_deref(),
                chip: file.as_deref(),
                name: name.as_deref(),
                viscosity,
                tolerance: *tolerance,
                json: matches!(format, OutFormat::Json),
                plot: plot.as_deref(),
            })
            .map(|text| (text, true))
        }
        Command::Check { file, format, plot } => rillnet::check_command(&rillnet::CheckRequest {
            chip: file,
            format: (*format).into(),
            plot: plot.as_deref(),
        })
        .map(|o| (o.text, o.passed)),
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(&cli.command) {
        Ok((text, passed)) => {
            print!("{text}");
            if passed {
                ExitCode::SUCCESS
            } else {
                ExitCode::from(1)
            }
        }
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
