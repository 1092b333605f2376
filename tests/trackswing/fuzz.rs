//! Bounded fuzzing on the stable toolchain: random and mutated inputs for the case-file parser,
//! the track and towns readers and the GeoTIFF and GRIB2 readers must give an error or a value, never a
//! panic. (cargo-fuzz needs a nightly toolchain, which this project's machines do not have;
//! proptest drives the same entry points with shrinking, and a failure prints its seed.)

use proptest::prelude::*;
use std::path::PathBuf;

/// `n` cases, or `TRACKSWING_FUZZ_CASES` for longer runs
/// (`TRACKSWING_FUZZ_CASES=200000 cargo test --release --test trackswing fuzz`).
fn cases(n: u32) -> ProptestConfig {
    let n = std::env::var("TRACKSWING_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(n);
    ProptestConfig {
        cases: n,
        failure_persistence: None,
        ..ProptestConfig::default()
    }
}

/// A valid small GeoTIFF to mutate (made once per test process).
fn seed_tiff() -> &'static [u8] {
    use std::sync::OnceLock;
    static SEED: OnceLock<Vec<u8>> = OnceLock::new();
    SEED.get_or_init(|| {
        use trackswing::geotiff::*;
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("s.tif");
        let a: Vec<f32> = (0..35 * 20).map(|i| (i % 17) as f32).collect();
        let b: Vec<f32> = (0..35 * 20)
            .map(|i| if i % 7 == 0 { f32::NAN } else { i as f32 })
            .collect();
        let bands = [
            BandSpec {
                data: &a,
                description: "air_temperature@850hPa".into(),
                metadata: vec![("units".into(), "K".into())],
            },
            BandSpec {
                data: &b,
                description: "precipitation_amount".into(),
                metadata: vec![],
            },
        ];
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [0.0, 0.5, 0.0, 10.0, 0.0, -0.5],
        };
        let opts = WriteOptions {
            encoding: SampleEncoding::Float32,
            nodata: -9999.0,
            dataset_metadata: vec![("valid_time".into(), "2026-01-14T00:00:00Z".into())],
            band_scaling: vec![],
        };
        write_cog(&p, 35, 20, &georef, &bands, &opts, &CogOptions::default()).unwrap();
        std::fs::read(&p).unwrap()
    })
}

/// One step file of a small GRIB2 case (every field of one valid time, precipitation as a
/// 0–3 h total, grid-point packing), made once per test process by the demo generator.
fn seed_grib2() -> &'static [u8] {
    use std::sync::OnceLock;
    static SEED: OnceLock<Vec<u8>> = OnceLock::new();
    SEED.get_or_init(|| {
        let d = tempfile::tempdir().unwrap();
        let spec = trackswing::demo::DemoSpec::scaled(9, 7, 2, 3, 3);
        trackswing::demo::grib2_case::write_case_grib2(d.path(), &spec).unwrap();
        let mut files: Vec<PathBuf> = std::fs::read_dir(d.path().join("fields"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        files.sort();
        std::fs::read(files.last().unwrap()).unwrap()
    })
}

fn in_temp(name: &str, bytes: &[u8]) -> (tempfile::TempDir, PathBuf) {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join(name);
    std::fs::write(&p, bytes).unwrap();
    (d, p)
}

/// Mutations of a byte string: flips, overwrites with boundary values, truncation.
fn mutated(seed: &'static [u8]) -> impl Strategy<Value = Vec<u8>> {
    let len = seed.len();
    (
        proptest::collection::vec((0..len, any::<u8>()), 1..12),
        prop_oneof![Just(len), 0..len],
    )
        .prop_map(move |(edits, keep)| {
            let mut v = seed.to_vec();
            for (i, b) in edits {
                v[i] = match b % 4 {
                    0 => b,
                    1 => 0xff,
                    2 => 0x00,
                    _ => v[i] ^ (1 << (b % 8)),
                };
            }
            v.truncate(keep.max(1));
            v
        })
}

const CASE: &str = "title = \"t\"\ntowns = \"towns.csv\"\n[[member]]\nname = \"m\"\nterrain = \"a.tif\"\nsteps = [\"a.tif\"]\ntrack = \"t.csv\"\n[offsets]\ncross_km = \"-20:20:10\"\n[shift]\ncore_radius_km = 100\nouter_radius_km = 300\n";
const TRACK: &str = "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n2026-01-14T06:00:00Z,41,-78\n";
const TOWNS: &str = "name,lat,lon\nAlder Ford,40.25,-80.5\n=cmd,41,-79\n";

fn text_mutations(seed: &'static str) -> impl Strategy<Value = String> {
    mutated(seed.as_bytes()).prop_map(|v| String::from_utf8_lossy(&v).into_owned())
}

proptest! {
    #![proptest_config(cases(400))]

    #[test]
    fn geotiff_reader_never_panics(bytes in mutated(seed_tiff())) {
        let (_d, p) = in_temp("x.tif", &bytes);
        let _ = trackswing::geotiff::read_geotiff(&p);
    }

    #[test]
    fn grib2_reader_never_panics(bytes in mutated(seed_grib2())) {
        use trackswing::read::grib::{inspect::inspect, GribSource};
        use trackswing::read::source::Source;
        let (_d, p) = in_temp("x.grib2", &bytes);
        let files = [p];
        let _ = inspect(&files);
        if let Ok(s) = GribSource::open(&files, &|_| {}) {
            for k in 0..s.step_count() {
                let _ = s.step(k);
                let _ = s.mslp(k);
            }
        }
    }

    #[test]
    fn case_parser_never_panics(text in text_mutations(CASE)) {
        let d = tempfile::tempdir().unwrap();
        for f in ["a.tif", "t.csv", "towns.csv"] {
            std::fs::write(d.path().join(f), b"x").unwrap();
        }
        let p = d.path().join("case.toml");
        std::fs::write(&p, text).unwrap();
        let _ = trackswing::case::Case::load(&p, &trackswing::case::Overrides::default());
    }

    #[test]
    fn track_reader_never_panics(text in text_mutations(TRACK)) {
        let (_d, p) = in_temp("t.csv", text.as_bytes());
        if let Ok(t) = trackswing::read::read_track(&p) {
            let (a, b) = t.span();
            prop_assert!(a < b);
            let _ = t.shifted_centre(a, 50.0, -20.0);
        }
    }

    #[test]
    fn towns_reader_never_panics(text in text_mutations(TOWNS)) {
        let (_d, p) = in_temp("towns.csv", text.as_bytes());
        let _ = trackswing::read::read_towns(&p);
    }

    #[test]
    fn offset_lists_never_panic(text in "[-0-9.:, e]{0,24}") {
        if let Ok(v) = trackswing::scenario::parse_offsets(&text) {
            prop_assert!(!v.is_empty() && v.len() <= 2001 * 8);
        }
    }
}

proptest! {
    #![proptest_config(cases(200))]

    #[test]
    fn random_bytes_are_not_geotiffs(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let (_d, p) = in_temp("x.tif", &bytes);
        let _ = trackswing::geotiff::read_geotiff(&p);
    }
}

/// The GRIB2 seed is a readable step, so the mutations start from the reader's full path.
#[test]
fn grib2_seed_reads_whole() {
    use trackswing::read::grib::GribSource;
    use trackswing::read::source::Source;
    let (_d, p) = in_temp("seed.grib2", seed_grib2());
    let s = GribSource::open(&[p], &|_| {}).unwrap();
    assert_eq!(s.step_count(), 1);
    let step = s.step(0).unwrap();
    assert_eq!(step.columns.len(), 9 * 7 * step.layout.nvar());
}
