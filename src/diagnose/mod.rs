//! Stage 3, diagnose: precipitation type and snow-to-liquid ratio for one column.
//!
//! [`thermo`], [`ptype`] and [`slr`] are pure physics functions with their sources;
//! [`subcloud`] takes dry air below the cloud into account; [`column`] builds the column a cell
//! sees after the shift (cut at the ground, 2 m temperature corrected for terrain, warm-layer
//! bias applied) and applies the chosen methods.

pub mod column;
pub mod ptype;
pub mod slr;
pub mod subcloud;
pub mod thermo;
pub mod thermo_table;

pub use column::{
    diagnose_column, step_column, ColumnMissing, ColumnResult, ColumnStep, Methods, Profile,
    PtypeMethod, SlrMethod,
};
pub use ptype::PtypeFractions;
