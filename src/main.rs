//! The `rillnet` command: parse arguments, call the library, write its outcome, map errors to
//! exit codes (see `rillnet::error::exit`: 0 done, 1 a limit check failed, 2 bad input or
//! usage or output that could not be written, 3 results withheld by the solver).

use clap::CommandFactory;
use cli::{Cli, Colour, Command, Show, SyntaxArg};
use rillnet::commands::{self, Outcome, SensitivityChoice};
use rillnet::error::exit;
use rillnet::input::{positive_length, ChipArg};
use rillnet::report::Format;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

mod cli;

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
            mixing,
        } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let choice = match (sensitivity, channels.is_empty()) {
                (false, _) => SensitivityChoice::None,
                (true, true) => SensitivityChoice::Targets,
                (true, false) => SensitivityChoice::Channels(channels.clone()),
            };
            let mixing = mixing.map(|m| match m {
                cli::MixingArg::Well => rillnet::chip::species::Mixing::Well,
                cli::MixingArg::Lateral => rillnet::chip::species::Mixing::Lateral,
            });
            let request = commands::SolveRequest {
                chip: arg.input(),
                plot: plot.as_deref(),
                sensitivity: choice,
            };
            let outcome = commands::solve_mixing(&request, mixing)?;
            (outcome, *format, output.clone(), vec![arg.path])
        }
        Command::Evolve {
            file,
            span,
            every,
            format,
            plot,
            channels,
        } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let mut req = commands::EvolveRequest::new(arg.input(), span, every);
            req.plot = plot.as_deref();
            req.channels = channels;
            (commands::evolve(&req)?, *format, None, vec![arg.path])
        }
        Command::Spread {
            file,
            samples,
            seed,
            shard,
            merge,
            format,
            output,
            plot,
            tornado,
        } => {
            picture_arg(plot.as_deref())?;
            picture_arg(tornado.as_deref())?;
            let arg = chip(file)?;
            let outcome = commands::spread(&commands::SpreadRequest {
                chip: arg.input(),
                samples: *samples,
                seed: *seed,
                shard: shard.as_deref(),
                merge,
                plot: plot.as_deref(),
                tornado: tornado.as_deref(),
            })?;
            (outcome, *format, output.clone(), vec![arg.path])
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
            species,
            skip_tubing,
            output,
        } => {
            picture_arg(Some(output))?;
            let arg = chip(file)?;
            let solutes = match (show, colour) {
                (Show::Outlets, _) => Some(commands::SolutePicture::Outlets),
                (Show::Splits, Colour::Species) => Some(commands::SolutePicture::Splits {
                    species: species.as_deref(),
                }),
                _ => None,
            };
            if let Some(picture) = solutes {
                let outcome = commands::plot_solutes(&arg.input(), picture, output)?;
                return Ok((outcome, Format::Table, None, vec![arg.path]));
            }
            let outcome = commands::plot(&commands::PlotRequest {
                chip: arg.input(),
                pressure_profile: matches!(show, Show::Pressure),
                skip_tubing: *skip_tubing,
                colour: match colour {
                    Colour::Pressure => rillnet::plots::ColourBy::Pressure,
                    Colour::Flow => rillnet::plots::ColourBy::Flow,
                    Colour::Margin => rillnet::plots::ColourBy::Margin,
                    Colour::Species => rillnet::plots::ColourBy::Pressure,
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
    let cli = Cli::parse_checked();
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
