//! Stage 3, diagnose: precipitation type and snow-to-liquid ratio for one column.
//!
//! [`thermo`], [`ptype`] and [`slr`] are pure physics functions with their sources;
//! [`profile`] builds the sounding a cell sees after the shift (cut at the ground, 2 m
//! temperature corrected for terrain, warm-layer bias applied) and measures it; [`subcloud`]
//! takes dry air below the cloud into account; [`column`] applies the chosen methods to one
//! cell's step. `ptype` has one room per precipitation-type method.

pub mod column;
pub mod profile;
pub mod ptype;
pub mod slr;
pub mod subcloud;
pub mod thermo;
pub mod thermo_table;

pub use column::{
    diagnose_column, step_column, ColumnMissing, ColumnResult, ColumnStep, Methods, PtypeMethod,
    SlrMethod,
};
pub use profile::Profile;
pub use ptype::PtypeFractions;
