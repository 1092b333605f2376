//! The `trackswing` binary: parses arguments, resolves a plan, calls the library, reports.
//!
//! Exit codes: 0 success; 2 bad command line; 3 bad input (case, fields, track, towns);
//! 4 outputs could not be written.

mod cli;
mod commands;
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

/// What `run` was given: a case file, or model files with optional track and towns.
enum Plan<'a> {
    CaseFile(&'a Path),
    ModelFiles {
        files: &'a [PathBuf],
        track: Option<&'a str>,
        towns: Option<&'a Path>,
    },
}

fn run_case(
    plan: Plan<'_>,
    common: &Common,
    default_out: Option<PathBuf>,
    with_report: bool,
) -> Result<(), Failure> {
    let over = Overrides {
        cross: common.cross.clone(),
        along: common.along.clone(),
        out: common.out.clone().or(default_out),
        units: common.units.clone(),
        snow_ratio: common.snow_ratio.clone(),
        force: common.force,
        precip_type: common.precip_type.clone(),
        no_dry_air: common.no_dry_air,
        timing: common.timing.clone(),
        intensity: common.intensity.clone(),
        warm_bias: common.warm_bias.clone(),
        raster_type: common.raster_type.clone(),
        cross_sigma: common.cross_sigma,
        along_sigma: common.along_sigma,
        report: with_report || common.report,
    };
    let case = match plan {
        Plan::CaseFile(p) => Case::load(p, &over),
        Plan::ModelFiles {
            files,
            track,
            towns,
        } => Case::from_model_files(files, track, towns, &over),
    }
    .map_err(|e| Failure::Input(e.into()))?;
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

fn run_plan(a: &cli::RunArgs) -> Result<(), Failure> {
    let is_case = a.inputs.len() == 1
        && a.inputs[0]
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("toml"));
    if is_case {
        if a.track.is_some() || a.towns.is_some() {
            return Err(Failure::Input(anyhow::anyhow!(
                "--track and --towns go with model files; a case file names its own track and towns"
            )));
        }
        return run_case(Plan::CaseFile(&a.inputs[0]), &a.common, None, false);
    }
    run_case(
        Plan::ModelFiles {
            files: &a.inputs,
            track: a.track.as_deref(),
            towns: a.towns.as_deref(),
        },
        &a.common,
        None,
        false,
    )
}

/// `trackswing sounding`: the library makes the sounding, this prints it.
fn sounding(a: &cli::SoundingArgs) -> Result<(), Failure> {
    let bad = |what: String| Failure::Input(anyhow::anyhow!(what));
    let (lat, lon) =
        a.at.split_once(',')
            .and_then(|(la, lo)| {
                Some((
                    la.trim().parse::<f64>().ok()?,
                    lo.trim().parse::<f64>().ok()?,
                ))
            })
            .filter(|(la, lo)| la.is_finite() && lo.is_finite())
            .ok_or_else(|| {
                bad(format!(
                    "--at '{}': expected LAT,LON in degrees, e.g. 47.76,-29.29",
                    a.at
                ))
            })?;
    let over = Overrides {
        cross: Some(a.cross.to_string()),
        along: Some(a.along.to_string()),
        timing: Some(a.timing.to_string()),
        intensity: Some(a.intensity.to_string()),
        warm_bias: Some(a.warm_bias.to_string()),
        precip_type: a.precip_type.clone(),
        snow_ratio: a.snow_ratio.clone(),
        no_dry_air: a.no_dry_air,
        ..Default::default()
    };
    let case = Case::load(&a.case, &over).map_err(|e| Failure::Input(e.into()))?;
    let req = trackswing::sounding::SoundingRequest {
        lat,
        lon,
        step: a.step,
        scenario: trackswing::scenario::Scenario {
            cross_km: a.cross,
            along_km: a.along,
            timing_h: a.timing,
            intensity: a.intensity,
            warm_bias_k: a.warm_bias,
        },
    };
    let s = trackswing::sounding::sounding(&case, &req).map_err(|e| Failure::Input(e.into()))?;
    if a.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&s).expect("a sounding serialises")
        );
    } else {
        println!("{s}");
    }
    Ok(())
}

/// The error and its causes, joined by ": ", leaving out a cause whose text the message already
/// holds (many of the library's errors name their cause in their own text).
fn error_text(e: &anyhow::Error) -> String {
    let mut text = String::new();
    for cause in e.chain() {
        let part = cause.to_string();
        if text.contains(&part) {
            continue;
        }
        if !text.is_empty() {
            text.push_str(": ");
        }
        text.push_str(&part);
    }
    text
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match &cli.command {
        Command::Run(a) => run_plan(a),
        Command::Inspect(a) => commands::inspect(&a.inputs).map_err(Failure::Input),
        Command::Track(a) => commands::track(a),
        Command::Demo(a) => run_case(
            Plan::CaseFile(&demo_case()),
            &a.common,
            Some(PathBuf::from("demo-out")),
            true,
        ),
        Command::Report(a) => trackswing::write::report::write_report_and_list(&a.out_dir)
            .map(|p| println!("wrote {}", p.display()))
            .with_context(|| format!("writing the report for {}", a.out_dir.display()))
            .map_err(|e| {
                let missing_input = e.chain().any(|c| {
                    c.downcast_ref::<trackswing::write::report::ReportError>()
                        .is_some_and(|r| {
                            !matches!(r, trackswing::write::report::ReportError::Write(_))
                        })
                });
                if missing_input {
                    Failure::Input(e)
                } else {
                    Failure::Output(e)
                }
            }),
        Command::MakeDemo(a) => {
            let spec = trackswing::demo::spec_from(a.nx, a.ny, a.steps, a.step_hours, a.levels);
            if a.grib2 {
                trackswing::demo::grib2_case::write_case_grib2(&a.out, &spec)
            } else {
                trackswing::demo::files::write_case(&a.out, &spec)
            }
            .with_context(|| format!("writing the demo case into {}", a.out.display()))
            .map_err(Failure::Output)
        }
        Command::Sounding(a) => sounding(a),
        Command::ThermoTable => trackswing::diagnose::thermo_table::thermo_table(
            std::io::stdin().lock(),
            std::io::stdout().lock(),
        )
        .map_err(|e| Failure::Input(e.into())),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            let (code, e) = match f {
                Failure::Input(e) => (3, e),
                Failure::Output(e) => (4, e),
            };
            eprintln!("trackswing: error: {}", error_text(&e));
            ExitCode::from(code)
        }
    }
}
