//! Stage 3, diagnose: precipitation type and snow-to-liquid ratio for one column.
//!
//! [`thermo`], [`ptype`] and [`slr`] are pure physics functions with their sources;
//! [`column`] builds the column a cell sees after the shift (cut at the ground, 2 m temperature
//! corrected for terrain) and applies the chosen methods.

pub mod column;
pub mod ptype;
pub mod slr;
pub mod thermo;

pub use column::{diagnose_column, ColumnResult, Methods, PtypeMethod, SlrMethod};
pub use ptype::PtypeFractions;
