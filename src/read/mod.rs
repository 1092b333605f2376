//! Stage 1, read: model fields per time step, the storm track and the towns.

pub mod fields;
pub mod towns;
pub mod track;

pub use fields::{FieldError, StaticFields, StepFields, StepLayout};
pub use towns::{read_towns, Town, TownsError};
pub use track::{read_track, Track, TrackError, TrackPoint};
