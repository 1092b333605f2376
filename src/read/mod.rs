//! Stage 1, read: model fields per time step, the storm track and the towns.
//!
//! Model fields come through a [`source::Source`]: GeoTIFF ([`fields`]), GRIB2 ([`grib`]) or,
//! with the `gdal` feature, any raster GDAL reads (`gdal`), cut to a [`region`] when the case
//! asks for one. A
//! track can also be found from the model's sea-level pressure ([`track_finder`]).

pub mod accumulation;
pub mod choose;
pub mod fields;
#[cfg(feature = "gdal")]
pub mod gdal;
pub mod grib;
pub mod member;
pub mod open;
pub mod region;
pub mod source;
pub mod towns;
pub mod track;
pub mod track_finder;

pub use fields::{FieldError, StaticFields, StepFields, StepLayout};
pub use open::open_member;
pub use source::{Source, SourceError};
pub use towns::{read_towns, Town, TownsError};
pub use track::{read_track, Track, TrackError, TrackPoint};
