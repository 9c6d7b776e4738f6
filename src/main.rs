//! The `escapade` binary: parse arguments, call the library, render, and map errors to one line
//! on stderr with exit code 2 (user mistakes) or 1 (anything else).

mod cli;

use clap::Parser;
use cli::{Cli, Command, Common};
use escapade::report::{RateReport, SurveyReport, json, table};
use escapade::scenario::{Model, Override};
use escapade::{landscape::Landscape, theory};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// A user-facing failure: the message is one line.
struct Failure {
    message: String,
    code: u8,
}

impl Failure {
    fn user(message: impl Into<String>) -> Self {
        Self {
            message: message.into(),
            code: 2,
        }
    }
}

fn load(file: Option<&Path>, common: &Common) -> Result<Model, Failure> {
    let overrides = common
        .set
        .iter()
        .map(|s| Override::parse(s))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::user(e.to_string()))?;
    match file {
        Some(f) => Model::load(f, &overrides),
        None => Model::from_text(
            escapade::DEMO_SCENARIO,
            "(demo)",
            &PathBuf::from("."),
            &overrides,
        ),
    }
    .map_err(|e| Failure::user(e.to_string()))
}

fn theory_error(m: &Model, e: &theory::TheoryError) -> Failure {
    Failure::user(format!("{}: {}: {e}", m.source, e.key()))
}

fn run(cli: Cli) -> Result<String, Failure> {
    match cli.command {
        Command::Survey { file, common } => {
            let m = load(Some(&file), &common)?;
            let l = Landscape::analyse(&m.potential, m.start, m.target, m.mass)
                .map_err(|e| theory_error(&m, &e.into()))?;
            let r = SurveyReport::new(&m, &l);
            Ok(if common.json {
                json::render(&r)
            } else {
                table::survey(&r)
            })
        }
        Command::Rate { file, common } => rate(Some(&file), &common),
        Command::Demo { common } => rate(None, &common),
    }
}

fn rate(file: Option<&Path>, common: &Common) -> Result<String, Failure> {
    let m = load(file, common)?;
    let t = theory::analyse(&m).map_err(|e| theory_error(&m, &e))?;
    let r = RateReport::new(&m, &t);
    Ok(if common.json {
        json::render(&r)
    } else {
        table::rate(&r)
    })
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion)
                || e.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
            {
                let _ = e.print();
                return ExitCode::SUCCESS;
            }
            // clap's message, folded to one line (without its usage block)
            let text = e.to_string();
            let line: Vec<&str> = text
                .lines()
                .map(str::trim)
                .take_while(|l| !l.starts_with("Usage:"))
                .filter(|l| !l.is_empty())
                .collect();
            eprintln!("{} (see escapade --help)", line.join(" "));
            return ExitCode::from(2);
        }
    };
    match run(cli) {
        Ok(text) => {
            use std::io::Write;
            // a closed pipe (e.g. `| head`) is not an error worth a message
            let mut out = std::io::stdout().lock();
            match writeln!(out, "{}", text.trim_end()).and_then(|()| out.flush()) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("error: cannot write the output: {e}");
                    ExitCode::from(1)
                }
            }
        }
        Err(f) => {
            // echoed user text may hold control characters: keep the message on one line
            let line: String = f
                .message
                .chars()
                .map(|c| {
                    if c.is_control() {
                        c.escape_default().to_string()
                    } else {
                        c.to_string()
                    }
                })
                .collect();
            eprintln!("error: {line}");
            ExitCode::from(f.code)
        }
    }
}
