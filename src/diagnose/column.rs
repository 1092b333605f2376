//! One column as a cell sees it after the shift, and the methods applied to it.

use super::ptype::{bourgouin, PtypeFractions, MAX_LEVELS};
use super::slr::{fixed_ratio, kuchera_ratio};
use super::thermo::{G, RD};
use crate::read::StepLayout;
use serde::Serialize;

/// Precipitation-type method.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PtypeMethod {
    /// Energy areas on the sounding, Bourgouin (2000).
    EnergyArea,
}

/// Snow-to-liquid ratio method.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SlrMethod {
    /// A fixed ratio (10:1 by common practice).
    Fixed(f64),
    /// From the warmest temperature between the ground and 500 hPa (the Kuchera method).
    MaxColumnTemperature,
}

/// The methods and constants one run uses.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Methods {
    /// Precipitation type.
    pub ptype: PtypeMethod,
    /// Snow-to-liquid ratio.
    pub slr: SlrMethod,
    /// Lapse rate used to move 2 m temperature over different terrain, K/m (ISO 2533: 0.0065).
    pub lapse_rate_k_per_m: f64,
}

/// What one column gives at the ground.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ColumnResult {
    /// Fractions of the liquid falling as each type.
    pub fractions: PtypeFractions,
    /// Snow depth per liquid depth for the snow part.
    pub snow_ratio: f64,
}

/// Warm layers above this pressure are ignored (SCIENCE.md §3: above ~500 hPa they do not melt
/// falling snow in winter storms).
pub const PROFILE_TOP_PA: f64 = 50_000.0;

/// Diagnoses one column.
///
/// `col` holds the sampled storm-attached values in `layout` order (including the model terrain
/// height under the source point); `ground_m` is the terrain height of the target cell.
/// The 2 m temperature is moved to the target ground with `methods.lapse_rate_k_per_m`. The
/// surface pressure at the target ground comes from the hypsometric equation between the
/// isobaric heights that bracket it (temperature linear in height, moisture neglected: under
/// 0.5 % error in the layer thickness for the cold moist air of winter storms); levels at or
/// below the ground are not used. Returns `None` when the column has missing values or the
/// ground lies above the highest level.
pub fn diagnose_column(
    col: &[f32],
    layout: &StepLayout,
    ground_m: f32,
    methods: &Methods,
) -> Option<ColumnResult> {
    let nlev = layout.levels_pa.len();
    let z_src = col[layout.terrain()] as f64;
    let t2 = col[layout.t2()] as f64 - methods.lapse_rate_k_per_m * (ground_m as f64 - z_src);
    let zg = ground_m as f64;
    if !(t2.is_finite() && zg.is_finite()) {
        return None;
    }
    // Surface pressure at the target ground.
    let z = |k: usize| col[layout.z(k)] as f64;
    let t = |k: usize| col[layout.t(k)] as f64;
    let first_above = (0..nlev).find(|&k| z(k) > zg)?;
    let p_sfc = if first_above == 0 {
        let tm = 0.5 * (t2 + t(0));
        layout.levels_pa[0] * (G * (z(0) - zg) / (RD * tm)).exp()
    } else {
        let k = first_above - 1;
        let f = (zg - z(k)) / (z(k + 1) - z(k));
        let tg = t(k) + f * (t(k + 1) - t(k));
        let tm = 0.5 * (t(k) + tg);
        layout.levels_pa[k] * (-G * (zg - z(k)) / (RD * tm)).exp()
    };
    let mut p = [0.0f64; MAX_LEVELS];
    let mut tt = [0.0f64; MAX_LEVELS];
    p[0] = p_sfc;
    tt[0] = t2;
    let mut n = 1;
    for k in first_above..nlev {
        if n == MAX_LEVELS {
            break;
        }
        let pk = layout.levels_pa[k];
        if pk >= p_sfc {
            continue;
        }
        p[n] = pk;
        tt[n] = t(k);
        n += 1;
    }
    if tt[..n].iter().any(|v| !v.is_finite()) || !p_sfc.is_finite() {
        return None;
    }
    let fractions = match methods.ptype {
        PtypeMethod::EnergyArea => bourgouin(&p[..n], &tt[..n]),
    };
    let snow_ratio = match methods.slr {
        SlrMethod::Fixed(r) => fixed_ratio(r),
        SlrMethod::MaxColumnTemperature => {
            let tmax = p[..n]
                .iter()
                .zip(&tt[..n])
                .filter(|(pp, _)| **pp >= PROFILE_TOP_PA)
                .map(|(_, t)| *t)
                .fold(f64::NEG_INFINITY, f64::max);
            kuchera_ratio(tmax)
        }
    };
    Some(ColumnResult {
        fractions,
        snow_ratio,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnose::thermo::thickness_hydrostatic;

    /// A hydrostatically consistent column: isothermal layers of the given temperatures, heights
    /// from the hypsometric equation.
    fn column(levels_hpa: &[f64], temps: &[f64], t2: f64, z0: f64) -> (StepLayout, Vec<f32>) {
        let layout = StepLayout {
            levels_pa: levels_hpa.iter().map(|p| p * 100.0).collect(),
        };
        let mut col = vec![0.0f32; layout.nvar()];
        let mut z = z0;
        for k in 0..levels_hpa.len() {
            if k > 0 {
                let tm = 0.5 * (temps[k - 1] + temps[k]);
                z += thickness_hydrostatic(layout.levels_pa[k - 1], layout.levels_pa[k], tm);
            }
            col[layout.t(k)] = temps[k] as f32;
            col[layout.z(k)] = z as f32;
            col[layout.rh(k)] = 95.0;
        }
        col[layout.t2()] = t2 as f32;
        col[layout.rh2()] = 90.0;
        col[layout.precip()] = 1.0;
        col[layout.terrain()] = 0.0;
        (layout, col)
    }

    const LEVELS: [f64; 5] = [1000.0, 925.0, 850.0, 700.0, 500.0];
    const FIXED: Methods = Methods {
        ptype: PtypeMethod::EnergyArea,
        slr: SlrMethod::Fixed(10.0),
        lapse_rate_k_per_m: 0.0065,
    };

    #[test]
    fn cold_column_is_snow_and_warm_column_rain() {
        let (l, c) = column(&LEVELS, &[268.0, 266.0, 264.0, 256.0, 240.0], 268.5, 100.0);
        let r = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(r.fractions.snow > 0.999, "{:?}", r.fractions);
        assert_eq!(r.snow_ratio, 10.0);
        let (l, c) = column(&LEVELS, &[280.0, 278.0, 276.0, 268.0, 250.0], 281.0, 100.0);
        let r = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(r.fractions.rain > 0.999, "{:?}", r.fractions);
    }

    #[test]
    fn levels_below_ground_are_not_used() {
        // 1000 and 925 hPa are warm but lie below a 1200 m ridge top; above it the air is cold.
        let (l, c) = column(&LEVELS, &[283.0, 279.0, 268.0, 260.0, 245.0], 283.0, 100.0);
        let r = diagnose_column(&c, &l, 1600.0, &FIXED).unwrap();
        // 2 m temperature moved 1600 m up at 6.5 K/km: 283 − 10.4 = 272.6 K (below freezing).
        assert!(r.fractions.snow > 0.99, "{:?}", r.fractions);
        let at_sea = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(at_sea.fractions.rain > 0.99, "{:?}", at_sea.fractions);
    }

    #[test]
    fn kuchera_uses_the_warmest_level() {
        let (l, c) = column(&LEVELS, &[265.0, 267.16, 264.0, 256.0, 240.0], 265.0, 100.0);
        let m = Methods {
            slr: SlrMethod::MaxColumnTemperature,
            ..FIXED
        };
        let r = diagnose_column(&c, &l, 0.0, &m).unwrap();
        // Kuchera (common practice): Tmax 267.16 K ≤ 271.16 K → 12 + (271.16 − 267.16) = 16.
        assert!((r.snow_ratio - 16.0).abs() < 1e-3, "{}", r.snow_ratio);
    }

    #[test]
    fn missing_values_give_none() {
        let (l, mut c) = column(&LEVELS, &[265.0, 264.0, 263.0, 256.0, 240.0], 265.0, 100.0);
        c[l.t(2)] = f32::NAN;
        assert!(diagnose_column(&c, &l, 0.0, &FIXED).is_none());
    }

    #[test]
    fn surface_pressure_follows_the_hypsometric_equation() {
        // Isothermal 270 K column: the ground at the 925 hPa height must come out at 925 hPa.
        let (l, c) = column(&LEVELS, &[270.0; 5], 270.0, 100.0);
        let z925 = c[l.z(1)];
        let r = diagnose_column(&c, &l, z925 - 0.01, &FIXED).unwrap();
        assert!(r.fractions.snow > 0.99);
        let zg = z925 as f64 - 0.01;
        let f = (zg - c[l.z(0)] as f64) / (c[l.z(1)] as f64 - c[l.z(0)] as f64);
        assert!(f > 0.99 && f < 1.0);
    }
}
