//! `mae_offsets.png`: the MAE of the scenarios over the offset plane, cross-track across and
//! along-track up, one coloured cell per offset pair — which track happened. Where other axes
//! (timing, intensity, warm bias, members, methods) were run, a cell shows the smallest MAE
//! over them at that offset.

use super::assess::Assessment;
use super::run::FinishedRun;
use crate::render::{ramp, text, Canvas, Rgb};

/// The file's name.
pub const FILE: &str = "mae_offsets.png";

/// What the map shows.
pub const CAPTION: &str = "MAE of each track offset's snowfall against the reports (cross-track across, positive left of the motion; along-track up, positive ahead); with other axes, members or methods the smallest MAE over them; outlined: the best scenario; grey: no scenario at that offset with a value at every report";

const WHITE: Rgb = [255, 255, 255];
const INK: Rgb = [30, 30, 30];

/// The heat map as PNG bytes; `None` without a scored report or with a single offset.
pub fn mae_heatmap(run: &FinishedRun, a: &Assessment) -> Option<Vec<u8>> {
    let best = a.best?;
    let full = a.scored.len();
    let sorted_unique = |f: &dyn Fn(usize) -> f64| {
        let mut v: Vec<f64> = (0..run.scenarios.len()).map(f).collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    };
    let crosses = sorted_unique(&|k| run.scenarios[k].cross_km);
    let alongs = sorted_unique(&|k| run.scenarios[k].along_km);
    if crosses.len() * alongs.len() < 2 {
        return None;
    }
    let mut cells = vec![f64::NAN; crosses.len() * alongs.len()];
    let place = |k: usize| {
        let s = &run.scenarios[k];
        let i = crosses.iter().position(|c| *c == s.cross_km)?;
        let j = alongs.iter().position(|c| *c == s.along_km)?;
        Some(j * crosses.len() + i)
    };
    for sc in a.scenarios.iter().filter(|s| s.n == full) {
        if let Some(c) = place(sc.index) {
            if cells[c].is_nan() || sc.mae < cells[c] {
                cells[c] = sc.mae;
            }
        }
    }
    let hi = cells
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    let lo = cells
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f64::INFINITY, f64::min);
    let (nx, ny) = (crosses.len(), alongs.len());
    let cell = (640 / nx).clamp(8, 60).min((400 / ny).max(8)) as i64;
    let (left, top, right, bottom) = (80i64, 44i64, 150i64, 56i64);
    let width = left + cell * nx as i64 + right;
    let height = top + cell * ny as i64 + bottom;
    let mut c = Canvas::new(width as usize, height as usize, WHITE);
    let r = ramp::spread();
    let colour = |v: f64| {
        if hi > lo {
            r.rgb((v - lo) / (hi - lo))
        } else {
            r.rgb(0.0)
        }
    };
    let u = run.units.snow_unit();
    text::draw(
        &mut c,
        10.0,
        10.0,
        16.0,
        INK,
        &format!("MAE against the reports, {u}, by track offset"),
    );
    for j in 0..ny {
        // Ahead (positive along) at the top.
        let y0 = top + cell * (ny - 1 - j) as i64;
        for i in 0..nx {
            let x0 = left + cell * i as i64;
            let v = cells[j * nx + i];
            let fill = if v.is_finite() {
                colour(v)
            } else {
                [200, 200, 200]
            };
            c.fill_rect(x0, y0, x0 + cell - 1, y0 + cell - 1, fill);
        }
        let label = format!("{}", alongs[j]);
        let w = text::width(&label, 12.0);
        text::draw(
            &mut c,
            (left - 6) as f64 - w,
            (y0 + cell / 2 - 7) as f64,
            12.0,
            INK,
            &label,
        );
    }
    if let Some(k) = place(best) {
        let (i, j) = ((k % nx) as i64, (k / nx) as i64);
        let (x0, y0) = (left + cell * i, top + cell * (ny as i64 - 1 - j));
        c.stroke_rect(x0, y0, x0 + cell, y0 + cell, 2, INK);
    }
    // Labels on at most about 10 columns, so they never overlap.
    let every = nx.div_ceil(10).max(1);
    for (i, cross) in crosses.iter().enumerate().step_by(every) {
        let label = format!("{cross}");
        let w = text::width(&label, 12.0);
        let x = (left + cell * i as i64 + cell / 2) as f64 - w / 2.0;
        text::draw(
            &mut c,
            x,
            (top + cell * ny as i64 + 4) as f64,
            12.0,
            INK,
            &label,
        );
    }
    let xt = "cross-track offset, km (positive: left of the motion)";
    text::draw(&mut c, left as f64, (height - 24) as f64, 13.0, INK, xt);
    text::draw(&mut c, 6.0, (top - 18) as f64, 12.0, INK, "along, km");
    // Legend: a vertical bar from the smallest MAE (top) to the largest.
    let lx = left + cell * nx as i64 + 24;
    let lh = (cell * ny as i64).max(60);
    for y in 0..lh {
        let t = y as f64 / (lh - 1).max(1) as f64;
        c.fill_rect(
            lx,
            top + y,
            lx + 18,
            top + y + 1,
            colour(lo + t * (hi - lo)),
        );
    }
    for (y, v) in [(top, lo), (top + lh - 14, hi)] {
        text::draw(
            &mut c,
            (lx + 24) as f64,
            y as f64,
            12.0,
            INK,
            &format!("{v:.2} {u}"),
        );
    }
    Some(c.to_png())
}
