//! `inspect`, `track` and `verify`: resolve the files named on the command line, call the
//! library, print or write the result.

use super::args::{TrackArgs, VerifyArgs};
use crate::Failure;
use anyhow::{anyhow, Context};
use std::path::PathBuf;
use trackswing::case::{expand_model_args, skipped_summary};
use trackswing::read::source::{magic, Magic};

/// The model files among `inputs`, with a note on stderr of what the folders held besides.
fn model_files(inputs: &[PathBuf]) -> Result<Vec<PathBuf>, anyhow::Error> {
    let found = expand_model_args(inputs)?;
    if let Some(note) = skipped_summary(&found.skipped) {
        eprintln!("note: {note}");
    }
    Ok(found.files)
}

fn files(inputs: &[PathBuf]) -> Result<Vec<PathBuf>, Failure> {
    model_files(inputs).map_err(Failure::Input)
}

/// Prints what the files hold.
pub fn inspect(inputs: &[PathBuf]) -> Result<(), anyhow::Error> {
    let files = model_files(inputs)?;
    let mut all_grib2 = true;
    for f in &files {
        all_grib2 &= magic(f)? == Magic::Grib2;
    }
    if all_grib2 {
        print!("{}", trackswing::read::grib::inspect::inspect(&files)?);
        return Ok(());
    }
    // Other formats go through GDAL (the `gdal` feature; without it, the error says how to
    // rebuild). Warnings about unused bands are part of what the files hold.
    let warnings = std::cell::RefCell::new(Vec::new());
    let src = trackswing::read::source::open_model(&files, None, &|w: &str| {
        warnings.borrow_mut().push(w.to_string())
    })?;
    print!("{}", trackswing::read::source::describe(src.as_ref()));
    for w in warnings.into_inner() {
        println!("note: {w}");
    }
    Ok(())
}

fn parse_start(s: &str) -> Result<(f64, f64), Failure> {
    let bad = || {
        Failure::Usage(anyhow!(
            "--start '{s}': expected LAT,LON in degrees, e.g. 47.5,-30"
        ))
    };
    let (a, b) = s.split_once(',').ok_or_else(bad)?;
    let lat: f64 = a.trim().parse().map_err(|_| bad())?;
    let lon: f64 = b.trim().parse().map_err(|_| bad())?;
    if !((-90.0..=90.0).contains(&lat) && lon.is_finite()) {
        return Err(bad());
    }
    Ok((lon, lat))
}

/// Finds the track and writes `track.csv` and `track.geojson`.
pub fn track(a: &TrackArgs) -> Result<(), Failure> {
    use trackswing::read::track_finder::{find_track, track_csv, track_geojson};
    let start = a.start.as_deref().map(parse_start).transpose()?;
    let files = files(&a.inputs)?;
    let (grid, steps) =
        trackswing::read::grib::mslp_series(&files).map_err(|e| Failure::Input(e.into()))?;
    let (found, lost) = find_track(&grid, &steps, start).map_err(|e| {
        Failure::Input(anyhow::Error::from(e).context(files[0].display().to_string()))
    })?;
    if found.len() < 2 {
        return Err(Failure::Input(anyhow!(
            "{}: the low was found at {} step(s) only; a track needs two positions",
            files[0].display(),
            found.len()
        )));
    }
    std::fs::create_dir_all(&a.out)
        .with_context(|| format!("creating {}", a.out.display()))
        .map_err(Failure::Output)?;
    for (name, text) in [
        ("track.csv", track_csv(&found)),
        ("track.geojson", track_geojson(&found)),
    ] {
        trackswing::write::write_text_atomic(&a.out, name, &text)
            .map_err(|e| Failure::Output(e.into()))?;
    }
    for c in &found {
        let (ns, ew) = (
            if c.lat < 0.0 { 'S' } else { 'N' },
            if c.lon < 0.0 { 'W' } else { 'E' },
        );
        println!(
            "{}  {:8.4}°{ns} {:9.4}°{ew}  {:7.1} hPa",
            c.time.format("%Y-%m-%dT%H:%MZ"),
            c.lat.abs(),
            c.lon.abs(),
            c.mslp_pa / 100.0
        );
    }
    if let Some(k) = lost {
        println!("the low was lost after step {k} of {}", steps.len());
    }
    println!(
        "wrote {} and {}",
        a.out.join("track.csv").display(),
        a.out.join("track.geojson").display()
    );
    Ok(())
}

/// Verifies a finished run against the reports and prints the summary.
pub fn verify(a: &VerifyArgs) -> Result<(), Failure> {
    use trackswing::verify::VerifyError;
    let v = trackswing::verify::verify(&a.out_dir, &a.reports).map_err(|e| match e {
        VerifyError::Write(_) => Failure::Output(
            anyhow::Error::from(e).context(format!("verifying {}", a.out_dir.display())),
        ),
        e => Failure::Input(e.into()),
    })?;
    let s = &v.assessment;
    let u = v.run.units.snow_unit();
    println!(
        "{} reports scored, {} skipped (see skipped.csv)",
        s.scored.len(),
        s.skipped.len()
    );
    println!(
        "mean CRPS {:.3} {u}; MAE of the run as issued {:.3} {u}; CRPS skill {:.3}",
        s.mean_crps, s.issued_mae, s.crps_skill
    );
    println!(
        "inside P10–P90: {:.0} % of the reports (80 % expected of a calibrated spread)",
        s.inside_p10_p90 * 100.0
    );
    if let (Some(b), Some(best)) = (s.best, s.scenarios.first()) {
        println!(
            "best scenario: {} (MAE {:.3} {u}, bias {:+.3} {u}); {} scenario(s) within one standard error of it",
            v.run.scenarios[b].label,
            best.mae,
            best.bias,
            s.within_one_se.len()
        );
    }
    println!("wrote {}", v.folder.display());
    println!("{}", trackswing::CAUTION);
    Ok(())
}
