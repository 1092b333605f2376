//! The thermodynamic kernels evaluated on a table of points, for comparison with an independent
//! library (tests/ref/check_thermo.py runs `trackswing thermo-table` and compares with MetPy).
//!
//! Input: CSV with a header naming `p_pa`, `t_k` and `rh_pct` (any order, other columns
//! ignored). Output: CSV with those three and `es_pa` ([`saturation_vapor_pressure`]),
//! `td_k` ([`dewpoint_from_rh`]), `tw_k` ([`wet_bulb`], Normand's rule, from T and Td),
//! `tw_isobaric_k` ([`isobaric_wet_bulb`]), `theta_k` ([`potential_temperature`]) and
//! `thickness_m` ([`thickness_hydrostatic`] of the isothermal layer from p to 0.8·p at T).
//! Out-of-domain values are written empty (NaN).

use super::thermo::{
    dewpoint_from_rh, isobaric_wet_bulb, potential_temperature, saturation_vapor_pressure,
    thickness_hydrostatic, wet_bulb,
};
use std::io::{Read, Write};

/// Why the table cannot be made.
#[derive(Debug, thiserror::Error)]
pub enum TableError {
    /// CSV syntax or I/O.
    #[error("thermo table: {0}")]
    Csv(#[from] csv::Error),
    /// A required column is missing.
    #[error("thermo table: the header has no '{0}' column (expected p_pa,t_k,rh_pct)")]
    Column(&'static str),
    /// A value is not a number.
    #[error("thermo table: line {line}: '{value}' in column '{column}' is not a number")]
    Number {
        /// 1-based line.
        line: usize,
        /// Column.
        column: &'static str,
        /// The text.
        value: String,
    },
}

/// Layer top of the thickness column, as a share of the point's pressure.
pub const THICKNESS_TOP_RATIO: f64 = 0.8;

/// Reads points from `input`, writes the table to `output`.
///
/// ```
/// let mut out = Vec::new();
/// trackswing::diagnose::thermo_table::thermo_table("p_pa,t_k,rh_pct\n100000,293.15,50\n".as_bytes(), &mut out).unwrap();
/// let text = String::from_utf8(out).unwrap();
/// // Bolton (1980) eq. 10: 20 °C → 2336.95 Pa.
/// assert!(text.lines().nth(1).unwrap().split(',').nth(3).unwrap().starts_with("2336.9"));
/// ```
pub fn thermo_table(input: impl Read, output: impl Write) -> Result<(), TableError> {
    let mut r = csv::Reader::from_reader(input);
    let header = r.headers()?.clone();
    let find = |name: &'static str| {
        header
            .iter()
            .position(|h| h.trim() == name)
            .ok_or(TableError::Column(name))
    };
    let (ip, it, ir) = (find("p_pa")?, find("t_k")?, find("rh_pct")?);
    let mut w = csv::Writer::from_writer(output);
    w.write_record([
        "p_pa",
        "t_k",
        "rh_pct",
        "es_pa",
        "td_k",
        "tw_k",
        "tw_isobaric_k",
        "theta_k",
        "thickness_m",
    ])?;
    for (n, rec) in r.records().enumerate() {
        let rec = rec?;
        let line = n + 2;
        let num = |i: usize, column: &'static str| -> Result<f64, TableError> {
            let text = rec.get(i).unwrap_or("").trim();
            text.parse::<f64>().map_err(|_| TableError::Number {
                line,
                column,
                value: text.to_string(),
            })
        };
        let (p, t, rh) = (num(ip, "p_pa")?, num(it, "t_k")?, num(ir, "rh_pct")?);
        let td = dewpoint_from_rh(t, rh);
        let values = [
            p,
            t,
            rh,
            saturation_vapor_pressure(t),
            td,
            wet_bulb(p, t, td),
            isobaric_wet_bulb(p, t, rh),
            potential_temperature(p, t),
            thickness_hydrostatic(p, THICKNESS_TOP_RATIO * p, t),
        ];
        w.write_record(values.iter().map(|v| {
            if v.is_finite() {
                format!("{v:.6}")
            } else {
                String::new()
            }
        }))?;
    }
    w.flush().map_err(csv::Error::from)?;
    Ok(())
}
