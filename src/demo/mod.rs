//! An invented demo storm on a lat/lon grid, for trying trackswing without model data.
//!
//! **Everything here is invented**: the region of Vellamark (its coastal plain, the Sallow
//! Flats; the Greymantle Ridge; the Wendle Valley behind it), its towns and the storm. It is
//! placed over open ocean at 41.6–52° N, 35–15.8° W so its layers land on a map without
//! implying any real place. The data is deterministic: the same spec gives the same bits.
//!
//! The storm is a deepening mid-latitude low (987.5 hPa falling to 974.5 hPa) crossing from
//! south-west to north-east just off the coast, with a warm sector and warm advection ahead and
//! right of it, cold air left and behind, a comma-head band left of the track and a
//! warm-frontal shield ahead. Warm air aloft runs over cold air trapped on the coastal plain
//! against the ridge, so freezing rain and sleet occur there; the valley behind the ridge holds
//! a cold pool too but lies at the dry edge of the precipitation. Heights are hypsometric from
//! sea-level pressure and virtual temperature (SCIENCE.md §2); the 2 m temperature is the
//! profile read at the ground height plus the near-ground anomaly (sea warmth, cold pools).
//!
//! Storm time runs from 0 at the first step to 1 at the last, whatever the step count, so every
//! [`DemoSpec::scaled`] grid shows the whole storm with the same storm totals.

mod calendar;
mod generate;
mod region;
mod storm;
pub mod thermo;
mod towns;

pub use generate::Generator;
pub use towns::towns;

/// Grid and time axis of a demo run.
#[derive(Debug, Clone, PartialEq)]
pub struct DemoSpec {
    /// Columns (west to east) and rows (north to south).
    pub nx: usize,
    pub ny: usize,
    /// Number of valid times, step 0 being the start of the run.
    pub steps: usize,
    /// Hours between valid times.
    pub step_hours: u32,
    /// Isobaric levels, hPa, in descending order (the heights are integrated upward).
    pub levels_hpa: Vec<f64>,
    /// Cell centre of the north-west cell, degrees; spacings are positive degrees; row 0 is
    /// north, so cell (i, j) is at (lat_north − j·dlat, lon_west + i·dlon).
    pub lon_west: f64,
    pub lat_north: f64,
    pub dlon: f64,
    pub dlat: f64,
    /// Year, month, day and hour (UTC) of step 0.
    pub start: (i32, u32, u32, u32),
    /// How this member differs from the demo storm (none for the demo itself).
    pub variant: Variant,
}

/// An invented variant of the demo storm, for a demo case of several members: the same region
/// and times, the low's path moved, the air warmer and the precipitation heavier.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Variant {
    /// The low's whole path moved by this much, km east and north.
    pub path_offset_km: (f64, f64),
    /// Added to every temperature (isobaric and 2 m), K.
    pub warm_k: f64,
    /// Factor on the precipitation, 0 meaning 1 (as generated).
    pub wet_factor: f64,
}

/// The shipped case's levels, hPa.
const DEMO_LEVELS_HPA: [f64; 5] = [1000.0, 925.0, 850.0, 700.0, 500.0];
/// Levels in the order [`DemoSpec::scaled`] adds them, so each count keeps the ones that matter
/// most for precipitation type (the warm nose lives between 925 and 700 hPa).
const LEVEL_PREFERENCE_HPA: [f64; 13] = [
    1000.0, 850.0, 500.0, 700.0, 925.0, 600.0, 950.0, 800.0, 975.0, 900.0, 750.0, 650.0, 550.0,
];

impl DemoSpec {
    /// The shipped case: 128 × 104 cells of 0.15° × 0.1° over the whole region, 25 steps two
    /// hours apart from 2026-01-13T12:00Z to 2026-01-15T12:00Z, levels 1000/925/850/700/500
    /// hPa. Two-hourly rather than three-hourly because the low moves about 55 km per step at
    /// that rate, which keeps step-to-step banding in the storm-total type maps small.
    pub fn demo() -> Self {
        let mut spec = Self::scaled(128, 104, 25, 2, DEMO_LEVELS_HPA.len());
        spec.levels_hpa = DEMO_LEVELS_HPA.to_vec();
        spec
    }

    /// The same storm over the same region on `nx` × `ny` cells, `steps` valid times
    /// `step_hours` apart and `n_levels` isobaric levels between 1000 and 500 hPa (at least
    /// one cell, two steps' worth of storm time and two levels are always used). Up to 13
    /// levels come from a fixed list (1000, 850, 500, 700, 925, 600, …); more are spaced
    /// evenly in pressure.
    pub fn scaled(nx: usize, ny: usize, steps: usize, step_hours: u32, n_levels: usize) -> Self {
        let (nx, ny) = (nx.max(1), ny.max(1));
        let n_levels = n_levels.max(2);
        let mut levels_hpa: Vec<f64> = if n_levels <= LEVEL_PREFERENCE_HPA.len() {
            LEVEL_PREFERENCE_HPA[..n_levels].to_vec()
        } else {
            (0..n_levels)
                .map(|k| 1000.0 - 500.0 * k as f64 / (n_levels - 1) as f64)
                .collect()
        };
        levels_hpa.sort_by(|a, b| b.total_cmp(a));
        let dlon = (region::EAST - region::WEST) / nx as f64;
        let dlat = (region::NORTH - region::SOUTH) / ny as f64;
        DemoSpec {
            nx,
            ny,
            steps,
            step_hours,
            levels_hpa,
            lon_west: region::WEST + 0.5 * dlon,
            lat_north: region::NORTH - 0.5 * dlat,
            dlon,
            dlat,
            start: (2026, 1, 13, 12),
            variant: Variant::default(),
        }
    }
}

/// One gridded field.
#[derive(Debug, Clone, PartialEq)]
pub struct Field {
    /// CF standard name.
    pub name: &'static str,
    pub level: Level,
    /// UDUNITS string.
    pub units: &'static str,
    /// ny·nx values, row-major, row 0 north.
    pub data: Vec<f32>,
}

/// Vertical placement of a [`Field`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Level {
    Isobaric {
        hpa: f64,
    },
    HeightAboveGround {
        m: f64,
    },
    MeanSeaLevel,
    Surface,
    /// Accumulated over the step ending at the valid time.
    Accumulation,
}

/// Ground-attached fields: "surface_altitude" (m) and "land_area_fraction" (1), both Surface.
pub fn static_fields(spec: &DemoSpec) -> Vec<Field> {
    Generator::new(spec).static_fields()
}

/// The fields valid at `step` (see [`Generator::step_fields`] for the list and order). Builds
/// the ground each call; a caller streaming many steps should keep a [`Generator`].
pub fn step_fields(spec: &DemoSpec, step: usize) -> Vec<Field> {
    Generator::new(spec).step_fields(step)
}

/// Valid time of `step` as an RFC 3339 UTC timestamp, e.g. "2026-01-14T06:00:00Z".
pub fn valid_time_iso(spec: &DemoSpec, step: usize) -> String {
    calendar::iso_after(spec.start, step as u64 * u64::from(spec.step_hours))
}

/// One point of the storm track.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackPoint {
    pub time_iso: String,
    /// Degrees north and east.
    pub lat: f64,
    pub lon: f64,
    /// Sea-level pressure at the centre, Pa.
    pub mslp_pa: f64,
}

/// The low centre at every step: the true minimum of the generated sea-level pressure (found
/// on the analytic field, so it falls between grid cells).
pub fn track(spec: &DemoSpec) -> Vec<TrackPoint> {
    (0..spec.steps)
        .map(|step| {
            let (lat, lon, mslp_pa) = generate::low_centre(spec, step);
            TrackPoint {
                time_iso: valid_time_iso(spec, step),
                lat,
                lon,
                mslp_pa,
            }
        })
        .collect()
}

/// An invented town of the demo region.
#[derive(Debug, Clone, PartialEq)]
pub struct Town {
    pub name: &'static str,
    /// Degrees north and east.
    pub lat: f64,
    pub lon: f64,
}

#[cfg(test)]
mod tests {
    use super::thermo::{thickness, virtual_temperature_from_rh};
    use super::*;

    fn small() -> DemoSpec {
        DemoSpec::scaled(64, 52, 9, 6, 6)
    }

    fn get<'a>(fields: &'a [Field], name: &str, level: Level) -> &'a [f32] {
        &fields
            .iter()
            .find(|f| f.name == name && f.level == level)
            .unwrap_or_else(|| panic!("{name} at {level:?} missing"))
            .data
    }

    fn bits(fields: &[Field]) -> Vec<Vec<u32>> {
        fields
            .iter()
            .map(|f| f.data.iter().map(|v| v.to_bits()).collect())
            .collect()
    }

    #[test]
    fn same_bits_every_call() {
        let spec = DemoSpec::demo();
        for step in [0, 7, 24] {
            assert_eq!(
                bits(&step_fields(&spec, step)),
                bits(&step_fields(&spec, step))
            );
        }
        assert_eq!(bits(&static_fields(&spec)), bits(&static_fields(&spec)));
        assert_eq!(track(&spec), track(&spec));
    }

    #[test]
    fn shapes_names_and_units() {
        let spec = small();
        let n = spec.nx * spec.ny;
        let fields = step_fields(&spec, 3);
        assert_eq!(fields.len(), 3 * spec.levels_hpa.len() + 4);
        assert!(fields.iter().all(|f| f.data.len() == n));
        for &hpa in &spec.levels_hpa {
            let lv = Level::Isobaric { hpa };
            for (name, units) in [
                ("air_temperature", "K"),
                ("geopotential_height", "m"),
                ("relative_humidity", "%"),
            ] {
                let f = fields.iter().find(|f| f.name == name && f.level == lv);
                assert_eq!(f.map(|f| f.units), Some(units));
            }
        }
        let pr = fields.iter().find(|f| f.name == "precipitation_amount");
        assert_eq!(
            pr.map(|f| (f.level, f.units)),
            Some((Level::Accumulation, "kg m-2"))
        );
        let st = static_fields(&spec);
        assert_eq!(st[0].name, "surface_altitude");
        assert_eq!(st[0].data.len(), n);
        assert_eq!(track(&spec).len(), spec.steps);
    }

    #[test]
    fn demo_and_scaled_grids_cover_the_region() {
        let demo = DemoSpec::demo();
        assert!(demo.nx >= 120 && demo.ny >= 100 && demo.steps >= 16);
        assert_eq!(demo.levels_hpa, vec![1000.0, 925.0, 850.0, 700.0, 500.0]);
        for spec in [
            demo,
            DemoSpec::scaled(400, 300, 48, 1, 6),
            DemoSpec::scaled(1800, 1060, 24, 3, 6),
        ] {
            let east = spec.lon_west + (spec.nx as f64 - 0.5) * spec.dlon;
            let south = spec.lat_north - (spec.ny as f64 - 0.5) * spec.dlat;
            assert!((spec.lon_west - 0.5 * spec.dlon - region::WEST).abs() < 1e-9);
            assert!((spec.lat_north + 0.5 * spec.dlat - region::NORTH).abs() < 1e-9);
            assert!((east - region::EAST).abs() < 1e-9 && (south - region::SOUTH).abs() < 1e-9);
        }
        let six = DemoSpec::scaled(10, 10, 2, 1, 6).levels_hpa;
        assert_eq!(six, vec![1000.0, 925.0, 850.0, 700.0, 600.0, 500.0]);
        let many = DemoSpec::scaled(10, 10, 2, 1, 21).levels_hpa;
        assert!(many.len() == 21 && many.windows(2).all(|w| w[0] > w[1]));
    }

    #[test]
    fn valid_times() {
        let spec = DemoSpec::demo();
        assert_eq!(valid_time_iso(&spec, 0), "2026-01-13T12:00:00Z");
        assert_eq!(valid_time_iso(&spec, 9), "2026-01-14T06:00:00Z");
        assert_eq!(track(&spec)[24].time_iso, "2026-01-15T12:00:00Z");
    }

    #[test]
    fn physical_ranges() {
        let spec = DemoSpec::demo();
        let mut max_total: f32 = 0.0;
        let mut total = vec![0f32; spec.nx * spec.ny];
        for step in 0..spec.steps {
            let f = step_fields(&spec, step);
            for &hpa in &spec.levels_hpa {
                let lv = Level::Isobaric { hpa };
                assert!(get(&f, "air_temperature", lv)
                    .iter()
                    .all(|t| (215.0..300.0).contains(t)));
                assert!(get(&f, "relative_humidity", lv)
                    .iter()
                    .all(|r| (0.0..=100.0).contains(r)));
            }
            let z500 = get(&f, "geopotential_height", Level::Isobaric { hpa: 500.0 });
            assert!(z500.iter().all(|z| (4900.0..5900.0).contains(z)));
            let two_m = Level::HeightAboveGround { m: 2.0 };
            assert!(get(&f, "air_temperature", two_m)
                .iter()
                .all(|t| (250.0..295.0).contains(t)));
            assert!(get(&f, "relative_humidity", two_m)
                .iter()
                .all(|r| (0.0..=100.0).contains(r)));
            let mslp = get(&f, "air_pressure_at_mean_sea_level", Level::MeanSeaLevel);
            assert!(mslp.iter().all(|p| (96_500.0..103_500.0).contains(p)));
            let pr = get(&f, "precipitation_amount", Level::Accumulation);
            assert!(pr.iter().all(|p| p.is_finite() && *p >= 0.0));
            if step == 0 {
                assert!(pr.iter().all(|p| *p == 0.0));
            }
            for (t, p) in total.iter_mut().zip(pr) {
                *t += p;
            }
        }
        max_total = total.iter().fold(max_total, |m, &t| m.max(t));
        // Design figure from the brief: storm totals up to about 30–40 mm, none far away.
        assert!(
            (30.0..=40.0).contains(&max_total),
            "max storm total {max_total}"
        );
        assert!(total.iter().filter(|&&t| t == 0.0).count() > total.len() / 5);
        let lows: Vec<f64> = track(&spec).iter().map(|p| p.mslp_pa).collect();
        assert!(
            lows[0] > 98_400.0 && lows[lows.len() - 1] < 97_600.0,
            "{lows:?}"
        );
    }

    #[test]
    fn demo_has_the_features_it_promises() {
        // Design properties from the brief: a warm nose (850 hPa above 0 °C over a subfreezing
        // surface) and a rain–snow line (precipitation over both warm and cold ground).
        let spec = DemoSpec::demo();
        let (mut nose, mut warm, mut cold) = (0, 0, 0);
        for step in 1..spec.steps {
            let f = step_fields(&spec, step);
            let t850 = get(&f, "air_temperature", Level::Isobaric { hpa: 850.0 });
            let t2 = get(&f, "air_temperature", Level::HeightAboveGround { m: 2.0 });
            let pr = get(&f, "precipitation_amount", Level::Accumulation);
            for i in (0..pr.len()).filter(|&i| pr[i] > 0.5) {
                nose += usize::from(t850[i] > 274.15 && t2[i] < 272.15);
                warm += usize::from(t2[i] > 276.15);
                cold += usize::from(t2[i] < 270.15);
            }
        }
        assert!(
            nose > 100 && warm > 100 && cold > 100,
            "{nose} {warm} {cold}"
        );
    }

    #[test]
    fn heights_are_hypsometric() {
        // Hypsometric equation, SCIENCE.md §2 (Wallace & Hobbs 2006 eq. 3.29, from memory):
        // each layer's thickness must match (Rd·T̄v/g)·ln(p1/p2) within 1 m, with T̄v the mean
        // over ln p of the virtual temperature, recomputed here from the written T and RH with
        // Bolton (1980) eq. 10.
        let spec = small();
        for step in [0, 4, 8] {
            let f = step_fields(&spec, step);
            for w in spec.levels_hpa.windows(2) {
                let (lo, hi) = (Level::Isobaric { hpa: w[0] }, Level::Isobaric { hpa: w[1] });
                let tv = |lv: Level, i: usize, hpa: f64| {
                    let t = f64::from(get(&f, "air_temperature", lv)[i]);
                    let rh = f64::from(get(&f, "relative_humidity", lv)[i]);
                    virtual_temperature_from_rh(t, rh, hpa * 100.0)
                };
                let (z_lo, z_hi) = (
                    get(&f, "geopotential_height", lo),
                    get(&f, "geopotential_height", hi),
                );
                for i in 0..z_lo.len() {
                    let mean = 0.5 * (tv(lo, i, w[0]) + tv(hi, i, w[1]));
                    let expected = thickness(mean, w[0] * 100.0, w[1] * 100.0);
                    let got = f64::from(z_hi[i]) - f64::from(z_lo[i]);
                    assert!(
                        (got - expected).abs() < 1.0,
                        "{w:?} cell {i}: {got} vs {expected}"
                    );
                }
            }
        }
    }

    #[test]
    fn two_metre_temperature_follows_the_profile_on_the_ridge() {
        // On the ridge crest, clear of the sea and the cold pools, the 2 m temperature is the
        // written profile read at the ground height (linear in height between levels).
        let spec = DemoSpec::demo();
        let terrain = &static_fields(&spec)[0].data;
        let f = step_fields(&spec, 12);
        let two_m = get(&f, "air_temperature", Level::HeightAboveGround { m: 2.0 });
        let mut checked = 0;
        for (i, &z) in terrain.iter().enumerate().filter(|(_, &z)| z > 1250.0) {
            let z = f64::from(z);
            let column: Vec<(f64, f64)> = spec
                .levels_hpa
                .iter()
                .map(|&hpa| {
                    let lv = Level::Isobaric { hpa };
                    let zl = f64::from(get(&f, "geopotential_height", lv)[i]);
                    (zl, f64::from(get(&f, "air_temperature", lv)[i]))
                })
                .collect();
            let k = column
                .iter()
                .position(|c| c.0 > z)
                .expect("ridge below 500 hPa");
            let ((z0, t0), (z1, t1)) = (column[k - 1], column[k]);
            let expected = t0 + (z - z0) / (z1 - z0) * (t1 - t0);
            assert!((f64::from(two_m[i]) - expected).abs() < 0.01, "cell {i}");
            checked += 1;
        }
        assert!(checked > 10, "only {checked} crest cells");
    }

    #[test]
    fn track_is_the_pressure_minimum() {
        for spec in [DemoSpec::demo(), small()] {
            for (step, point) in track(&spec).iter().enumerate() {
                let f = step_fields(&spec, step);
                let mslp = get(&f, "air_pressure_at_mean_sea_level", Level::MeanSeaLevel);
                let (k, min) =
                    mslp.iter()
                        .enumerate()
                        .fold((0, f32::MAX), |m, (k, &p)| if p < m.1 { (k, p) } else { m });
                let (i, j) = ((k % spec.nx) as f64, (k / spec.nx) as f64);
                let fi = (point.lon - spec.lon_west) / spec.dlon;
                let fj = (spec.lat_north - point.lat) / spec.dlat;
                assert!(
                    (fi - i).abs() <= 1.0 && (fj - j).abs() <= 1.0,
                    "step {step}"
                );
                assert!(
                    f64::from(min) >= point.mslp_pa - 1.0,
                    "grid below the minimum"
                );
            }
        }
    }

    #[test]
    fn storm_totals_do_not_depend_on_the_step_count() {
        let two_hourly = DemoSpec::scaled(32, 26, 25, 2, 5);
        let hourly = DemoSpec::scaled(32, 26, 49, 1, 5);
        let total = |spec: &DemoSpec| {
            let gen = Generator::new(spec);
            let mut sum = vec![0f64; spec.nx * spec.ny];
            for step in 0..spec.steps {
                let f = gen.step_fields(step);
                for (s, &p) in
                    sum.iter_mut()
                        .zip(get(&f, "precipitation_amount", Level::Accumulation))
                {
                    *s += f64::from(p);
                }
            }
            sum
        };
        for (a, b) in total(&two_hourly).iter().zip(total(&hourly)) {
            assert!((a - b).abs() <= 0.02 * a.max(b) + 0.05, "{a} vs {b}");
        }
    }

    #[test]
    fn degenerate_specs_do_not_panic() {
        let mut spec = DemoSpec::scaled(0, 0, 1, 0, 0);
        assert_eq!(step_fields(&spec, 0).len(), 3 * 2 + 4);
        spec.levels_hpa.clear();
        assert_eq!(step_fields(&spec, 5).len(), 4);
        assert_eq!(track(&spec).len(), 1);
    }
}

pub mod files;
pub mod grib2;
pub mod grib2_case;

/// The shipped demo spec, or the same storm at another size when any dimension is given.
pub fn spec_from(
    nx: Option<usize>,
    ny: Option<usize>,
    steps: Option<usize>,
    step_hours: Option<u32>,
    levels: Option<usize>,
) -> DemoSpec {
    let d = DemoSpec::demo();
    if nx.is_none() && ny.is_none() && steps.is_none() && step_hours.is_none() && levels.is_none() {
        return d;
    }
    DemoSpec::scaled(
        nx.unwrap_or(d.nx),
        ny.unwrap_or(d.ny),
        steps.unwrap_or(d.steps),
        step_hours.unwrap_or(d.step_hours),
        levels.unwrap_or(d.levels_hpa.len()),
    )
}
