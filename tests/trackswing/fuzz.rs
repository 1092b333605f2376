//! Bounded fuzzing on the stable toolchain: random and mutated inputs for the case-file parser,
//! the track and towns readers and the GeoTIFF reader must give an error or a value, never a
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
        write_geotiff(&p, 35, 20, &georef, &bands, &opts).unwrap();
        std::fs::read(&p).unwrap()
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
