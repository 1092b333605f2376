//! The `trackswing` binary: parses arguments, resolves a plan, calls the library, reports.
//!
//! Exit codes: 0 success; 2 bad command line; 3 bad input (case, fields, track, towns);
//! 4 outputs could not be written.

mod cli;
mod report;

use anyhow::Context;
use clap::Parser;
use cli::{Cli, Command, Common};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use trackswing::case::{Case, Overrides};

/// Where the shipped demo case lives: next to the sources when run from a checkout.
fn demo_case() -> PathBuf {
    let here = PathBuf::from("demo-grid/case.toml");
    if here.is_file() {
        return here;
    }
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

enum Failure {
    Input(anyhow::Error),
    Output(anyhow::Error),
}

fn run_case(
    case_path: &Path,
    common: &Common,
    default_out: Option<PathBuf>,
) -> Result<(), Failure> {
    let over = Overrides {
        cross: common.cross.clone(),
        along: common.along.clone(),
        out: common.out.clone().or(default_out),
        units: common.units.clone(),
        snow_ratio: common.snow_ratio.clone(),
        force: common.force,
    };
    let case = Case::load(case_path, &over).map_err(|e| Failure::Input(e.into()))?;
    let threads = common.threads.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    if threads == 0 {
        return Err(Failure::Input(anyhow::anyhow!(
            "--threads must be at least 1"
        )));
    }
    let progress = report::Bar::new(common.quiet);
    let started = std::time::Instant::now();
    let result = trackswing::engine::run(&case, threads, &progress).map_err(|e| {
        Failure::Input(anyhow::Error::from(e).context("the run stopped; nothing was written"))
    })?;
    let clock = std::time::Instant::now();
    let files = trackswing::write::write_all(&case, &result)
        .with_context(|| format!("writing the layers into {}", case.out_dir.display()))
        .map_err(Failure::Output)?;
    if !common.quiet {
        let write_s = clock.elapsed().as_secs_f64();
        report::summary(
            &case,
            &result,
            &files,
            &progress,
            started.elapsed(),
            write_s,
        );
    }
    Ok(())
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match &cli.command {
        Command::Run(a) => run_case(&a.case, &a.common, None),
        Command::Demo(a) => run_case(&demo_case(), &a.common, Some(PathBuf::from("demo-out"))),
        Command::MakeDemo(a) => trackswing::demo::files::write_case(
            &a.out,
            &trackswing::demo::spec_from(a.nx, a.ny, a.steps, a.step_hours, a.levels),
        )
        .with_context(|| format!("writing the demo case into {}", a.out.display()))
        .map_err(Failure::Output),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            let (code, e) = match f {
                Failure::Input(e) => (3, e),
                Failure::Output(e) => (4, e),
            };
            eprintln!("trackswing: error: {e:#}");
            ExitCode::from(code)
        }
    }
}
