//! Quicklook maps (PNG): snowfall as modelled, its P90, its range over the offsets and the flip
//! distance, each with every scenario's rain–snow line (the modelled one bold), the track of
//! the low, the towns, a legend with units and a scale bar.
//!
//! Layout: the image is [`IMAGE_WIDTH`] px wide. The map panel shows the grid in an
//! equirectangular projection true to scale at the grid's middle latitude (x = lon·cos φ₀,
//! y = lat), as large as fits in [`PANEL_MAX_W`] × [`PANEL_MAX_H`] px; the legend stands to its
//! right; a header of [`HEADER_H`] px and a footer of [`FOOTER_H`] px frame both. The height is
//! `HEADER_H + max(panel height, LEGEND_MIN_H) + FOOTER_H`. North is up.

use super::{write_atomic, Kind, WriteError, Written};
use crate::engine::RunResult;
use crate::grid::{km_per_degree, Grid};
use crate::render::legend::{self, Classes};
use crate::render::{text, Canvas, Rgb};
use crate::scenario::Scenario;
use crate::summarise::bust::TownDecision;
use crate::summarise::scope::Needs;
use crate::summarise::summary::Decisions;
use crate::units::Units;
use std::path::Path;

/// Width of every map image, px.
pub const IMAGE_WIDTH: usize = 1200;
/// Largest map panel width, px.
pub const PANEL_MAX_W: f64 = 820.0;
/// Largest map panel height, px.
pub const PANEL_MAX_H: f64 = 760.0;
/// Header height, px.
pub const HEADER_H: usize = 84;
/// Footer height, px.
pub const FOOTER_H: usize = 64;
/// Least room for the legend, px.
pub const LEGEND_MIN_H: usize = 680;
const MARGIN: f64 = 24.0;
/// Towns labelled on a map, highest bust score first (all get a marker).
const MAX_LABELS: usize = 24;

const INK: Rgb = [28, 30, 36];
const MUTED: Rgb = [92, 96, 106];
const WHITE: Rgb = [255, 255, 255];
const TRACK: Rgb = [178, 34, 24];
const NO_FLIP: Rgb = [236, 238, 232];
const HATCH: Rgb = [150, 150, 150];

/// Where the grid lands on the image. The panel shows the grid in its own cell-index space:
/// on a lat/lon grid columns are narrowed by cos φ₀ (equirectangular, true to scale at the
/// middle latitude φ₀); a projected grid is shown in its own projection (grid north up).
#[derive(Clone, Copy, Debug)]
pub struct Frame {
    /// Pixels per column and per row.
    px_per_col: f64,
    px_per_row: f64,
    /// km per pixel across the map at its centre.
    km_per_px: f64,
    /// Latitude of the map's centre, degrees.
    mid_lat: f64,
    lonlat: bool,
    /// Panel left edge, px.
    pub x0: f64,
    /// Panel top, px.
    pub y0: f64,
    /// Panel width, px.
    pub w: f64,
    /// Panel height, px.
    pub h: f64,
    gt: [f64; 6],
}

impl Frame {
    /// The frame of a grid.
    pub fn of(grid: &Grid) -> Self {
        let gt = grid.georef.geotransform;
        let lonlat = !grid.is_projected();
        let (_, mid_lat) =
            grid.lonlat_of((grid.nx as f64 - 1.0) / 2.0, (grid.ny as f64 - 1.0) / 2.0);
        // Display units per cell: degrees of latitude (lat/lon) or metres (projected).
        let (dx, dy) = if lonlat {
            (
                gt[1].abs() * mid_lat.to_radians().cos().max(0.05),
                gt[5].abs(),
            )
        } else {
            (gt[1].abs(), gt[5].abs())
        };
        let scale = (PANEL_MAX_W / (grid.nx as f64 * dx)).min(PANEL_MAX_H / (grid.ny as f64 * dy));
        let km_per_unit = if lonlat {
            km_per_degree(mid_lat).0 / mid_lat.to_radians().cos().max(0.05)
        } else {
            0.001
        };
        Self {
            px_per_col: dx * scale,
            px_per_row: dy * scale,
            km_per_px: km_per_unit / scale,
            mid_lat,
            lonlat,
            x0: MARGIN,
            y0: HEADER_H as f64,
            w: (grid.nx as f64 * dx * scale).round(),
            h: (grid.ny as f64 * dy * scale).round(),
            gt,
        }
    }

    /// Pixel position of a fractional (column, row) in cell-centre index space.
    fn at_index(&self, col: f64, row: f64) -> (f64, f64) {
        (
            self.x0 + (col + 0.5) * self.px_per_col,
            self.y0 + (row + 0.5) * self.px_per_row,
        )
    }

    /// Pixel position of a lon/lat point (`None` off a projected grid's cell-centre hull).
    pub fn project(&self, grid: &Grid, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let (c, r) = if self.lonlat {
            let gt = self.gt;
            ((lon - gt[0]) / gt[1] - 0.5, (lat - gt[3]) / gt[5] - 0.5)
        } else {
            grid.index_of(lon, lat)?
        };
        Some(self.at_index(c, r))
    }

    /// Fractional (column, row) under a pixel position.
    fn index_at(&self, x: f64, y: f64) -> (f64, f64) {
        (
            (x - self.x0) / self.px_per_col - 0.5,
            (y - self.y0) / self.px_per_row - 0.5,
        )
    }

    fn clip(&self) -> [f64; 4] {
        [self.x0, self.y0, self.x0 + self.w, self.y0 + self.h]
    }

    fn scale_note(&self) -> String {
        if self.lonlat {
            format!("North is up; scale true at {:.1}° latitude", self.mid_lat)
        } else {
            "Grid north is up; scale of the projected grid".to_string()
        }
    }
}

/// Projects a lon/lat polyline, splitting it where points fall off the map.
fn project_line(
    f: &Frame,
    grid: &Grid,
    pts: impl Iterator<Item = (f64, f64)>,
) -> Vec<Vec<(f64, f64)>> {
    let mut out = vec![Vec::new()];
    for (lon, lat) in pts {
        match f.project(grid, lon, lat) {
            Some(p) => out.last_mut().expect("never empty").push(p),
            None => out.push(Vec::new()),
        }
    }
    out.retain(|l| l.len() >= 2);
    out
}

/// Size (width, height) of the map images of a grid, px.
pub fn image_size(grid: &Grid) -> (usize, usize) {
    let f = Frame::of(grid);
    (
        IMAGE_WIDTH,
        HEADER_H + (f.h as usize).max(LEGEND_MIN_H) + FOOTER_H,
    )
}

/// The value of a field at a fractional (column, row): bilinear where the four cells are
/// present, otherwise the nearest cell (NaN outside the grid).
fn sample(grid: &Grid, field: &[f32], c: f64, r: f64, nearest_only: bool) -> f32 {
    if c < -0.5 || r < -0.5 || c > grid.nx as f64 - 0.5 || r > grid.ny as f64 - 0.5 {
        return f32::NAN;
    }
    let near = |c: f64, r: f64| {
        let ci = (c.round().max(0.0) as usize).min(grid.nx - 1);
        let ri = (r.round().max(0.0) as usize).min(grid.ny - 1);
        field[ri * grid.nx + ci]
    };
    if nearest_only || grid.nx < 2 || grid.ny < 2 {
        return near(c, r);
    }
    let (cc, rr) = (
        c.clamp(0.0, (grid.nx - 1) as f64),
        r.clamp(0.0, (grid.ny - 1) as f64),
    );
    let c0 = (cc.floor() as usize).min(grid.nx - 2);
    let r0 = (rr.floor() as usize).min(grid.ny - 2);
    let (fx, fy) = ((cc - c0 as f64) as f32, (rr - r0 as f64) as f32);
    let v = |dc: usize, dr: usize| field[(r0 + dr) * grid.nx + c0 + dc];
    let s = v(0, 0) * (1.0 - fx) * (1.0 - fy)
        + v(1, 0) * fx * (1.0 - fy)
        + v(0, 1) * (1.0 - fx) * fy
        + v(1, 1) * fx * fy;
    if s.is_nan() {
        near(c, r)
    } else {
        s
    }
}

fn hatch(c: &mut Canvas, x: i64, y: i64) {
    if (x + y).rem_euclid(7) == 0 {
        c.set(x, y, HATCH);
    } else {
        c.set(x, y, [246, 246, 246]);
    }
}

/// What one map shows.
struct MapSpec<'a> {
    file: &'a str,
    title: String,
    legend_title: String,
    field: &'a [f32],
    classes: Classes,
    nearest_only: bool,
    /// The unit of `field` in words, ending the subtitle ("snowfall in cm", "distance in km").
    unit_words: String,
    /// The unit of `field` for the manifest (`cm`, `km`, `1`).
    units: String,
    /// Cells (value 0 in this layer) shown as "nothing flips within the offsets run".
    never: Option<&'a [f32]>,
}

/// Everything the maps draw besides the field.
struct Overlay<'a> {
    frame: Frame,
    /// Rain–snow lines of the drawn scenarios (baseline last), lon/lat.
    lines: Vec<(bool, Vec<Vec<[f64; 2]>>)>,
    /// The legend's words for the other scenarios' lines; `None` when there are none.
    other_lines: Option<String>,
    track: Vec<(f64, f64)>,
    centres: Vec<(f64, f64)>,
    towns: &'a [TownDecision],
    subtitle: String,
    notes: Vec<String>,
}

fn draw_field(c: &mut Canvas, grid: &Grid, f: &Frame, spec: &MapSpec) {
    let (x0, y0) = (f.x0 as i64, f.y0 as i64);
    for py in 0..f.h as i64 {
        for px in 0..f.w as i64 {
            let (col, row) = f.index_at((x0 + px) as f64 + 0.5, (y0 + py) as f64 + 0.5);
            let v = sample(grid, spec.field, col, row, spec.nearest_only);
            let (x, y) = (x0 + px, y0 + py);
            if v.is_finite() {
                c.set(x, y, spec.classes.colours[spec.classes.of(v as f64)]);
            } else if spec
                .never
                .is_some_and(|k| sample(grid, k, col, row, true) == 0.0)
            {
                c.set(x, y, NO_FLIP);
            } else {
                hatch(c, x, y);
            }
        }
    }
}

fn draw_overlays(c: &mut Canvas, grid: &Grid, o: &Overlay) {
    let f = &o.frame;
    let clip = f.clip();
    for (baseline, lines) in &o.lines {
        for pts in lines
            .iter()
            .flat_map(|l| project_line(f, grid, l.iter().map(|p| (p[0], p[1]))))
        {
            if *baseline {
                c.polyline(&pts, 5.5, WHITE, 0.9, clip);
                c.polyline(&pts, 2.8, INK, 1.0, clip);
            } else {
                c.polyline(&pts, 1.1, [40, 52, 70], 0.32, clip);
            }
        }
    }
    let inside =
        |p: &(f64, f64)| p.0 >= clip[0] && p.0 <= clip[2] && p.1 >= clip[1] && p.1 <= clip[3];
    for pts in project_line(f, grid, o.track.iter().copied()) {
        c.polyline(&pts, 5.5, WHITE, 0.85, clip);
        c.polyline(&pts, 2.6, TRACK, 1.0, clip);
        // Arrowhead on the last segment that ends inside the panel.
        if let Some(k) = (1..pts.len()).rev().find(|&k| inside(&pts[k])) {
            let (a, b) = (pts[k - 1], pts[k]);
            let len = (b.0 - a.0).hypot(b.1 - a.1);
            if len > 0.0 {
                let (ux, uy) = ((b.0 - a.0) / len, (b.1 - a.1) / len);
                let tip = b;
                let back = (tip.0 - 14.0 * ux, tip.1 - 14.0 * uy);
                c.triangle(
                    [
                        tip,
                        (back.0 - 6.0 * uy, back.1 + 6.0 * ux),
                        (back.0 + 6.0 * uy, back.1 - 6.0 * ux),
                    ],
                    TRACK,
                );
            }
        }
    }
    for q in o.centres.iter().filter_map(|p| f.project(grid, p.0, p.1)) {
        if inside(&q) {
            c.disc(q.0, q.1, 3.6, WHITE);
            c.disc(q.0, q.1, 2.4, TRACK);
        }
    }
    let mut placed: Vec<[f64; 4]> = Vec::new();
    let size = 13.0;
    let lh = text::line_height(size);
    for (rank, t) in o.towns.iter().enumerate() {
        let Some((x, y)) = f.project(grid, t.lon, t.lat) else {
            continue;
        };
        c.disc(x, y, 5.0, INK);
        c.disc(x, y, 3.2, WHITE);
        if rank >= MAX_LABELS {
            continue;
        }
        let w = text::width(&t.name, size);
        let candidates = [
            (x + 8.0, y - lh / 2.0),
            (x - 8.0 - w, y - lh / 2.0),
            (x - w / 2.0, y - 8.0 - lh),
            (x - w / 2.0, y + 8.0),
        ];
        let fits = |r: &[f64; 4]| {
            r[0] >= clip[0] + 2.0
                && r[2] <= clip[2] - 2.0
                && r[1] >= clip[1] + 2.0
                && r[3] <= clip[3] - 2.0
                && placed
                    .iter()
                    .all(|p| r[2] < p[0] || r[0] > p[2] || r[3] < p[1] || r[1] > p[3])
        };
        if let Some(r) = candidates
            .iter()
            .map(|&(lx, ly)| [lx, ly, lx + w, ly + lh])
            .find(fits)
        {
            text::draw_with_halo(c, r[0], r[1], size, INK, WHITE, &t.name);
            placed.push(r);
        }
    }
}

fn nice_length(target: f64) -> f64 {
    let p = 10f64.powf(target.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * p)
        .filter(|v| *v <= target)
        .fold(p, f64::max)
}

/// Draws the scale bar (km and miles, true at the middle latitude) with its top-left corner at
/// (bx, by), at most `max_w` px wide; returns the height used.
fn draw_scale_bar(c: &mut Canvas, f: &Frame, bx: f64, by: f64, max_w: f64) -> f64 {
    let km_px = f.km_per_px;
    let target_px = (max_w - 80.0).min(f.w * 0.3);
    let km = nice_length(target_px * km_px);
    let mi = nice_length(target_px * km_px / 1.609_344);
    let (km_w, mi_w) = (km / km_px, mi * 1.609_344 / km_px);
    let bx = bx - 8.0;
    for (row, len_px, label) in [
        (0.0, km_w, format!("{km} km")),
        (22.0, mi_w, format!("{mi} mi")),
    ] {
        let y = by + 12.0 + row;
        for k in 0..4 {
            let (sx, ex) = (
                bx + 8.0 + len_px * k as f64 / 4.0,
                bx + 8.0 + len_px * (k + 1) as f64 / 4.0,
            );
            let col = if k % 2 == 0 { INK } else { WHITE };
            c.fill_rect(sx as i64, y as i64, ex as i64, (y + 6.0) as i64, col);
        }
        c.stroke_rect(
            (bx + 8.0) as i64,
            y as i64,
            (bx + 8.0 + len_px) as i64 + 1,
            (y + 6.0) as i64 + 1,
            1,
            INK,
        );
        text::draw(c, bx + 14.0 + len_px, y - 5.0, 12.0, INK, &label);
    }
    text::draw(c, bx + 8.0, by + 50.0, 11.0, MUTED, &f.scale_note());
    68.0
}

fn legend(c: &mut Canvas, o: &Overlay, spec: &MapSpec) {
    let f = &o.frame;
    let lx = f.x0 + f.w + 28.0;
    let lw = IMAGE_WIDTH as f64 - lx - MARGIN;
    let mut y = f.y0;
    for l in text::wrap(&spec.legend_title, 16.0, lw) {
        text::draw(c, lx, y, 16.0, INK, &l);
        y += 21.0;
    }
    y += 6.0;
    let sw = 28.0;
    let n = spec.classes.colours.len();
    // Largest amounts at the top, as on a thermometer.
    for k in (0..n).rev() {
        c.fill_rect(
            lx as i64,
            y as i64,
            (lx + sw) as i64,
            (y + 18.0) as i64,
            spec.classes.colours[k],
        );
        c.stroke_rect(
            lx as i64,
            y as i64,
            (lx + sw) as i64,
            (y + 18.0) as i64,
            1,
            [170, 170, 170],
        );
        text::draw(
            c,
            lx + sw + 10.0,
            y + 1.0,
            13.0,
            INK,
            &spec.classes.labels[k],
        );
        y += 21.0;
    }
    if spec.never.is_some() {
        c.fill_rect(
            lx as i64,
            y as i64,
            (lx + sw) as i64,
            (y + 18.0) as i64,
            NO_FLIP,
        );
        c.stroke_rect(
            lx as i64,
            y as i64,
            (lx + sw) as i64,
            (y + 18.0) as i64,
            1,
            [170, 170, 170],
        );
        text::draw(
            c,
            lx + sw + 10.0,
            y + 1.0,
            13.0,
            INK,
            "no flip within the offsets run",
        );
        y += 21.0;
    }
    for yy in y as i64..(y + 18.0) as i64 {
        for xx in lx as i64..(lx + sw) as i64 {
            hatch(c, xx, yy);
        }
    }
    c.stroke_rect(
        lx as i64,
        y as i64,
        (lx + sw) as i64,
        (y + 18.0) as i64,
        1,
        [170, 170, 170],
    );
    text::draw(c, lx + sw + 10.0, y + 1.0, 13.0, INK, "no data");
    y += 34.0;

    let key = |c: &mut Canvas, y: &mut f64, draw: &dyn Fn(&mut Canvas, f64), words: &str| {
        draw(c, *y + 9.0);
        let lines = text::wrap(words, 12.5, lw - sw - 10.0);
        for (i, l) in lines.iter().enumerate() {
            text::draw(c, lx + sw + 10.0, *y + i as f64 * 16.0, 12.5, INK, l);
        }
        *y += 16.0 * lines.len().max(1) as f64 + 8.0;
    };
    let wide = [0.0, 0.0, IMAGE_WIDTH as f64, c.height as f64];
    key(
        c,
        &mut y,
        &|c, yy| {
            c.polyline(&[(lx, yy), (lx + sw, yy)], 5.5, WHITE, 0.9, wide);
            c.polyline(&[(lx, yy), (lx + sw, yy)], 2.8, INK, 1.0, wide);
        },
        "rain–snow line as modelled (half the precipitation falls as snow)",
    );
    if let Some(words) = &o.other_lines {
        key(
            c,
            &mut y,
            &|c, yy| c.polyline(&[(lx, yy), (lx + sw, yy)], 1.1, [40, 52, 70], 0.6, wide),
            words,
        );
    }
    key(
        c,
        &mut y,
        &|c, yy| {
            c.polyline(&[(lx, yy), (lx + sw, yy)], 2.6, TRACK, 1.0, wide);
            c.disc(lx + sw / 2.0, yy, 2.4, TRACK);
        },
        "track of the low as modelled; dots at the model's time steps",
    );
    key(
        c,
        &mut y,
        &|c, yy| {
            c.disc(lx + sw / 2.0, yy, 5.0, INK);
            c.disc(lx + sw / 2.0, yy, 3.2, WHITE);
        },
        "town (labels for the most bust-prone first)",
    );
    y += 8.0;
    for note in &o.notes {
        for l in text::wrap(note, 12.0, lw) {
            text::draw(c, lx, y, 12.0, MUTED, &l);
            y += 15.5;
        }
        y += 6.0;
    }
    y += 10.0;
    draw_scale_bar(c, f, lx, y, lw);
}

fn render(grid: &Grid, spec: &MapSpec, o: &Overlay) -> Canvas {
    let (w, h) = image_size(grid);
    let mut c = Canvas::new(w, h, WHITE);
    let f = &o.frame;
    text::draw(&mut c, MARGIN, 16.0, 24.0, INK, &spec.title);
    let subtitle = format!("{} · {}", o.subtitle, spec.unit_words);
    text::draw(&mut c, MARGIN, 52.0, 13.5, MUTED, &subtitle);
    draw_field(&mut c, grid, f, spec);
    draw_overlays(&mut c, grid, o);
    c.stroke_rect(
        f.x0 as i64 - 1,
        f.y0 as i64 - 1,
        (f.x0 + f.w) as i64 + 1,
        (f.y0 + f.h) as i64 + 1,
        1,
        MUTED,
    );
    legend(&mut c, o, spec);
    let mut y = h as f64 - FOOTER_H as f64 + 14.0;
    for l in text::wrap(crate::CAUTION, 12.0, IMAGE_WIDTH as f64 - 2.0 * MARGIN) {
        text::draw(&mut c, MARGIN, y, 12.0, MUTED, &l);
        y += 16.0;
    }
    c
}

/// What the maps say about the run, for their subtitles and notes.
pub struct MapContext<'a> {
    /// The case's title.
    pub title: &'a str,
    /// Output units.
    pub units: Units,
    /// Snowfall thresholds (output units): the colour classes.
    pub snow_thresholds: &'a [f64],
    /// The prior in words.
    pub prior_words: String,
    /// The period the totals cover, in words.
    pub period: &'a str,
    /// With several members or methods: the dominant source of the spread per cell
    /// ([`legend::SOURCE_CODES`]).
    pub dominant_source: Option<&'a [f32]>,
    /// With several members or methods: how many of each.
    pub groups: Option<(usize, usize)>,
}

/// The quicklook maps besides the baseline's, with what each needs from the scenarios.
pub const NEEDING: [(&str, Needs); 3] = [
    ("map_p90.png", Needs::Track),
    ("map_range.png", Needs::Comparison),
    ("map_flip_distance.png", Needs::Track),
];

/// Most scenario lines a map draws besides the baseline's: beyond a few dozen the lines merge
/// into a grey band that hides the field under them.
pub const MAP_LINES_MAX: usize = 40;

/// The scenarios (other than the baseline) whose rain–snow lines a map draws: all of them up to
/// `max`; else the outermost offsets (the smallest and largest cross- and along-track offset,
/// and the largest distance from the baseline, in that order of priority) and then an even
/// spread over the rest in the order the scenarios are listed (which runs through the offset
/// plane), in listed order.
///
/// ```
/// use trackswing::scenario::{scenario_product, Axes};
/// use trackswing::write::maps::drawn_scenarios;
/// let axes = Axes { cross_km: (-100..=100).map(f64::from).collect(), ..Axes::default() };
/// let scenarios = scenario_product(&axes);
/// let baseline = scenarios.iter().position(|s| s.is_baseline()).unwrap();
/// let drawn = drawn_scenarios(&scenarios, baseline, 40);
/// assert_eq!(drawn.len(), 40);
/// assert!(!drawn.contains(&baseline));
/// // The outermost offsets are among them.
/// assert!(drawn.iter().any(|&i| scenarios[i].cross_km == -100.0));
/// assert!(drawn.iter().any(|&i| scenarios[i].cross_km == 100.0));
/// ```
pub fn drawn_scenarios(scenarios: &[Scenario], baseline: usize, max: usize) -> Vec<usize> {
    let others: Vec<usize> = (0..scenarios.len()).filter(|&i| i != baseline).collect();
    if others.len() <= max {
        return others;
    }
    let by = |key: &dyn Fn(&Scenario) -> f64, largest: bool| -> usize {
        let pick = others.iter().copied().min_by(|&a, &b| {
            let (ka, kb) = (key(&scenarios[a]), key(&scenarios[b]));
            if largest {
                kb.total_cmp(&ka)
            } else {
                ka.total_cmp(&kb)
            }
        });
        pick.expect("more scenarios than max, so some")
    };
    let mut chosen: Vec<usize> = Vec::with_capacity(max);
    for i in [
        by(&|s| s.cross_km, false),
        by(&|s| s.cross_km, true),
        by(&|s| s.along_km, false),
        by(&|s| s.along_km, true),
        by(&|s| s.cross_km.hypot(s.along_km), true),
    ] {
        if !chosen.contains(&i) && chosen.len() < max {
            chosen.push(i);
        }
    }
    let rest: Vec<usize> = others
        .iter()
        .copied()
        .filter(|i| !chosen.contains(i))
        .collect();
    let want = max - chosen.len();
    chosen.extend((0..want).map(|k| rest[k * rest.len() / want]));
    chosen.sort_unstable();
    chosen
}

/// Writes the quicklook maps the run can draw: the baseline always, the others where their
/// inputs are given (`None` where the run could not compute them, see [`NEEDING`]).
pub fn write_maps(
    dir: &Path,
    r: &RunResult,
    ctx: &MapContext,
    decisions: Option<&Decisions>,
    snow_range_mm: Option<&[f32]>,
    ranked_towns: &[TownDecision],
    rain_snow: &[Vec<Vec<[f64; 2]>>],
) -> Result<Vec<Written>, WriteError> {
    let u = ctx.units;
    let su = u.snow_unit();
    let frame = Frame::of(&r.grid);
    // The drawn scenarios' rain–snow lines, the baseline's last (drawn on top).
    let drawn = drawn_scenarios(&r.scenarios, r.baseline, MAP_LINES_MAX);
    let mut lines: Vec<(bool, Vec<Vec<[f64; 2]>>)> = drawn
        .iter()
        .map(|&i| (false, rain_snow[i].clone()))
        .collect();
    lines.push((true, rain_snow[r.baseline].clone()));
    let others = r.scenarios.len() - 1;
    let other_lines = match others {
        0 => None,
        n if drawn.len() == n => Some(format!("the same line for each of the {n} other scenarios")),
        n => Some(format!(
            "the same line for {} of the {n} other scenarios (the outermost offsets and an even spread between; every line is in rain_snow_lines.geojson)",
            drawn.len()
        )),
    };
    let track = r
        .track
        .as_ref()
        .map(|t| t.points.iter().map(|p| (p.lon, p.lat)).collect())
        .unwrap_or_default();
    let centres = r.centres.iter().flatten().copied().collect();
    let far = r
        .scenarios
        .iter()
        .map(|s| s.cross_km.hypot(s.along_km))
        .fold(0.0, f64::max);
    let span = |v: &dyn Fn(&crate::scenario::Scenario) -> f64| {
        let (lo, hi) = r
            .scenarios
            .iter()
            .map(v)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                (a.min(x), b.max(x))
            });
        if lo == hi {
            u.distance(lo)
        } else {
            format!("{} … {}", u.distance(lo), u.distance(hi))
        }
    };
    let overlay = Overlay {
        frame,
        lines,
        other_lines,
        track,
        centres,
        towns: ranked_towns,
        subtitle: match ctx.groups {
            // A several-member case: the subtitle counts every group's scenarios.
            Some((members, methods)) => {
                let n = |k: usize, one: &str, many: &str| {
                    format!("{k} {}", if k == 1 { one } else { many })
                };
                format!(
                    "{} · {} × {} × {}",
                    ctx.title,
                    n(members, "member", "members"),
                    n(methods, "method combination", "method combinations"),
                    n(r.scenarios.len(), "track offset", "track offsets")
                )
            }
            None => format!("{} · {} track offsets", ctx.title, r.scenarios.len()),
        },
        notes: vec![
            format!(
                "Offsets: across the track {} (positive = left of the storm's motion), along it {} (positive = ahead).",
                span(&|s| s.cross_km),
                span(&|s| s.along_km)
            ),
            format!("Track-error prior: {}.", ctx.prior_words),
            format!("Totals over {}.", ctx.period),
        ],
    };
    let mut overlay = overlay;
    if ctx.groups.is_some() {
        overlay.notes.push(
            "The baseline and the rain–snow lines are the first member's, with the first methods; P90 and range pool every member, method and offset; flip distance is of their blend."
                .into(),
        );
    }

    let snow_words = format!(
        "snowfall in {}",
        match u {
            Units::Metric => "cm",
            Units::Us => "inches",
        }
    );
    let to_unit = |v: &[f32]| v.iter().map(|x| u.snow(*x)).collect::<Vec<f32>>();
    let baseline = to_unit(&r.totals[r.baseline].snowfall);
    let p90 = decisions.map(|d| to_unit(&d.snow.quantiles[2]));
    let range = snow_range_mm.map(to_unit);
    let mut specs = vec![MapSpec {
        file: "map_baseline.png",
        title: if ctx.groups.is_some() {
            "Snowfall as the first member models it (first methods)".into()
        } else {
            "Snowfall as modelled".into()
        },
        legend_title: format!("Total snowfall ({su}), track as modelled"),
        field: &baseline,
        classes: legend::snow_classes(ctx.snow_thresholds, su),
        nearest_only: false,
        unit_words: snow_words.clone(),
        units: su.into(),
        never: None,
    }];
    if let Some(p90) = &p90 {
        specs.push(MapSpec {
            file: "map_p90.png",
            title: if ctx.groups.is_some() {
                "P90 snowfall over every member, method and track offset".into()
            } else {
                legend::P90_TITLE.into()
            },
            legend_title: if ctx.groups.is_some() {
                format!("P90 snowfall ({su}): 1 in 10 outcomes, by blended weight, gives more")
            } else {
                format!("P90 snowfall ({su}): {}", legend::P90_MEANING)
            },
            field: p90,
            classes: legend::snow_classes(ctx.snow_thresholds, su),
            nearest_only: false,
            unit_words: snow_words.clone(),
            units: su.into(),
            never: None,
        });
    }
    if let Some(range) = &range {
        specs.push(MapSpec {
            file: "map_range.png",
            title: if ctx.groups.is_some() {
                "How much the snowfall varies over members, methods and track offsets".into()
            } else {
                "How much the snowfall depends on the track".into()
            },
            legend_title: format!("Largest minus smallest snowfall over the scenarios ({su})"),
            field: range,
            classes: legend::spread_classes(ctx.snow_thresholds, su),
            nearest_only: false,
            unit_words: snow_words.clone(),
            units: su.into(),
            never: None,
        });
    }
    if let Some(flip) = decisions.map(|d| &d.flip) {
        specs.push(MapSpec {
            file: "map_flip_distance.png",
            title: "How far the track must shift before the forecast flips".into(),
            legend_title: format!(
                "Smallest track shift ({}) that changes the main precipitation type or halves or doubles the snowfall",
                match u {
                    Units::Metric => "km",
                    Units::Us => "km, with miles",
                }
            ),
            field: &flip.distance_km,
            classes: legend::distance_classes(far, u),
            nearest_only: true,
            unit_words: match u {
                Units::Metric => "track shift in km".into(),
                Units::Us => "track shift in km (miles in the legend)".into(),
            },
            units: "km".into(),
            never: Some(&flip.kind),
        });
    }
    if let Some(field) = ctx.dominant_source {
        specs.push(MapSpec {
            file: "map_spread_source.png",
            title: "Where the spread comes from: members, methods or track".into(),
            legend_title:
                "Source of at least half the snowfall variance over every member, method and offset"
                    .into(),
            field,
            classes: legend::source_classes(),
            nearest_only: true,
            unit_words: "source of the spread".into(),
            units: "1".into(),
            never: None,
        });
    }
    let mut out = Vec::new();
    for spec in &specs {
        let canvas = render(&r.grid, spec, &overlay);
        let bytes = canvas.to_png();
        write_atomic(dir, spec.file, |tmp| {
            std::fs::write(tmp, &bytes).map_err(|source| WriteError::Io {
                path: tmp.to_path_buf(),
                source,
            })
        })?;
        out.push(Written {
            file: spec.file.into(),
            kind: Kind::Image,
            units: spec.units.clone(),
            description: format!(
                "Quicklook map (PNG): {} ({} · {}; totals over {})",
                spec.title, overlay.subtitle, spec.unit_words, ctx.period
            ),
            bands: Vec::new(),
            sha256: None,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_lengths() {
        assert_eq!(nice_length(180.0), 100.0);
        assert_eq!(nice_length(230.0), 200.0);
        assert_eq!(nice_length(60.0), 50.0);
    }
}
