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
        /// Also print d(flow)/d(width, height, length) for the target channels (all channels
        /// when the chip has no flow targets).
        #[arg(long)]
        sensitivity: bool,
    },
    /// Tune the adjustable ports (pressure controllers, syringe pumps) to meet the chip's targets.
    Tune {
        /// Chip file with 'targets:' and ports marked 'adjust: {min: ..., max: ...}'.
        file: PathBuf,
        /// Output format (table or json).
        #[arg(long, value_enum, default_value_t = OutFormat::Table)]
        format: OutFormat,
        /// Write the tuned chip to this new file.
        #[arg(long, short)]
        output: Option<PathBuf>,
    },
    /// Size channel lengths/widths (marked 'size:') to meet the chip's targets, drives fixed.
    Size {
        /// Chip file with 'targets:' and channels marked 'size: {length: {min: ..., max: ...}}'.
        file: PathBuf,
        /// Output format (table or json).
        #[arg(long, value_enum, default_value_t = OutFormat::Table)]
        format: OutFormat,
        /// Write the sized chip to this new file.
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Straight run of a serpentine for long channels, e.g. '10 mm'.
        #[arg(long, default_value = "10 mm")]
        run: String,
        /// Centre-line pitch of the serpentine, e.g. '400 um'.
        #[arg(long, default_value = "400 um")]
        pitch: String,
    },
    /// Draw the chip: flow splits (default) or pressure along the flow paths, to SVG or PNG.
    Plot {
        /// Chip file.
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
        /// Chip file.
        file: PathBuf,
        /// Folder to create (or an empty one).
        #[arg(long, short)]
        output: PathBuf,
        /// Also write into a folder that has files already (never replacing any).
        #[arg(long)]
        into_existing: bool,
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
            sensitivity,
        } => rillnet::solve_command(&rillnet::SolveRequest {
            chip: file,
            format: (*format).into(),
            output: output.as_deref(),
            plot: plot.as_deref(),
            sensitivity: *sensitivity,
        })
        .map(|text| (text, true)),
        Command::Tune {
            file,
            format,
            output,
        } => rillnet::tune_command(&design_request(
            file,
            *format,
            output.as_deref(),
            "10 mm",
            "400 um",
        )?)
        .map(|t| (t, true)),
        Command::Size {
            file,
            format,
            output,
            run,
            pitch,
        } => rillnet::size_command(&design_request(
            file,
            *format,
            output.as_deref(),
            run,
            pitch,
        )?)
        .map(|t| (t, true)),
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
        Command::Plot {
            file,
            show,
            colour,
            output,
        } => rillnet::plot_command(&rillnet::PlotRequest {
            chip: file,
            pressure_profile: matches!(show, Show::Pressure),
            colour: match colour {
                Colour::Pressure => rillnet::plots::ColourBy::Pressure,
                Colour::Flow => rillnet::plots::ColourBy::Flow,
                Colour::Margin => rillnet::plots::ColourBy::Margin,
            },
            output,
        })
        .map(|t| (t, true)),
        Command::Report {
            file,
            output,
            into_existing,
        } => rillnet::report_command(&rillnet::ReportRequest {
            chip: file,
            folder: output,
            into_existing: *into_existing,
        })
        .map(|t| (t, true)),
        Command::Check { file, format, plot } => rillnet::check_command(&rillnet::CheckRequest {
            chip: file,
            format: (*format).into(),
            plot: plot.as_deref(),
        })
        .map(|o| (o.text, o.passed)),
    }
}

fn length_arg(flag: &str, text: &str) -> Result<f64, rillnet::Error> {
    text.parse::<rillnet::units::Length>()
        .map(|l| l.si())
        .map_err(|e| {
            rillnet::Error::Input(rillnet::format::InputError::whole_file(flag, e.to_string()))
        })
}

fn design_request<'a>(
    file: &'a std::path::Path,
    format: OutFormat,
    output: Option<&'a std::path::Path>,
    run: &str,
    pitch: &str,
) -> Result<rillnet::DesignRequest<'a>, rillnet::Error> {
    Ok(rillnet::DesignRequest {
        chip: file,
        json: matches!(format, OutFormat::Json),
        output,
        run: length_arg("--run", run)?,
        pitch: length_arg("--pitch", pitch)?,
    })
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
