//! The grid of a GDAL dataset: its size, geotransform and map projection as GDAL gives them,
//! turned into what [`crate::grid::Grid`] takes, and compared between datasets.

use crate::geotiff::{Datum, Projected, Projection};
use ::gdal::Dataset;

/// The grid as GDAL gives it, before building a [`Grid`].
#[derive(Clone, Debug, PartialEq)]
pub(super) struct RawGrid {
    pub(super) nx: usize,
    pub(super) ny: usize,
    pub(super) gt: [f64; 6],
    /// The projected CRS (its false origin moved into `gt`), `None` on lat/lon.
    pub(super) projected: Option<Projected>,
    /// GDAL's rows run south to north (positive row spacing): flipped on reading.
    pub(super) flip: bool,
}

/// Parses the `+key=value` items of a PROJ string.
fn proj_params(s: &str) -> Vec<(String, String)> {
    s.split_whitespace()
        .filter_map(|t| t.strip_prefix('+'))
        .map(|t| match t.split_once('=') {
            Some((k, v)) => (k.to_string(), v.to_string()),
            None => (t.to_string(), String::new()),
        })
        .collect()
}

/// The projected CRS of a PROJ string GDAL gives for a projected grid (without its false origin)
/// and the false easting and northing (m). Lambert conformal conic and polar stereographic, the
/// projections [`Grid::new`] takes.
fn projected_crs(proj: &str) -> Result<(Projected, f64, f64), String> {
    let p = proj_params(proj);
    let num = |k: &str| -> Option<f64> {
        p.iter()
            .find(|(key, _)| key == k)
            .and_then(|(_, v)| v.parse().ok())
    };
    let text = |k: &str| p.iter().find(|(key, _)| key == k).map(|(_, v)| v.as_str());
    let datum = if let Some(r) = num("R") {
        Datum::Sphere { radius_m: r }
    } else if let Some(a) = num("a") {
        let b = num("b")
            .or_else(|| num("rf").map(|rf| a * (1.0 - 1.0 / rf)))
            .unwrap_or(a);
        Datum::from_axes(a, b).map_err(|e| format!("'{proj}': {e}"))?
    } else if matches!(text("ellps"), Some("WGS84") | Some("GRS80"))
        || text("datum") == Some("WGS84")
    {
        Datum::Wgs84
    } else {
        return Err(format!("'{proj}': no Earth radius or known ellipsoid"));
    };
    if num("k")
        .or(num("k_0"))
        .is_some_and(|k| (k - 1.0).abs() > 1e-9)
    {
        return Err(format!(
            "'{proj}': a scale factor other than 1 is not supported"
        ));
    }
    let need = |k: &str| num(k).ok_or_else(|| format!("'{proj}': no +{k}"));
    let projection = match text("proj") {
        Some("lcc") => {
            let lat_1 = need("lat_1")?;
            Projection::LambertConformal2Sp {
                lat_1,
                lat_2: num("lat_2").unwrap_or(lat_1),
                lat_0: num("lat_0").unwrap_or(lat_1),
                lon_0: num("lon_0").unwrap_or(0.0),
            }
        }
        Some("stere") => {
            let lat_0 = need("lat_0")?;
            if (lat_0.abs() - 90.0).abs() > 1e-9 {
                return Err(format!(
                    "'{proj}': only the polar aspect of the stereographic projection is supported"
                ));
            }
            // The pole is the sign of lat_0; the CRS carries it as the sign of lat_ts.
            let lat_ts = num("lat_ts").unwrap_or(lat_0).abs();
            Projection::PolarStereographic {
                lat_ts: if lat_0 > 0.0 { lat_ts } else { -lat_ts },
                lon_0: num("lon_0").unwrap_or(0.0),
            }
        }
        other => {
            return Err(format!(
                "projection '{}' ('{proj}'); trackswing reads lat/lon, Lambert conformal conic and polar stereographic grids",
                other.unwrap_or("?")
            ))
        }
    };
    Ok((
        Projected {
            datum,
            projection,
            false_easting_m: 0.0,
            false_northing_m: 0.0,
        },
        num("x_0").unwrap_or(0.0),
        num("y_0").unwrap_or(0.0),
    ))
}

pub(super) fn raw_grid(ds: &Dataset) -> Result<RawGrid, String> {
    let (nx, ny) = ds.raster_size();
    let mut gt = ds
        .geo_transform()
        .map_err(|e| format!("no geotransform ({e}); the grid must be regular"))?;
    let flip = gt[5] > 0.0;
    if flip {
        gt[3] += ny as f64 * gt[5];
        gt[5] = -gt[5];
    }
    let srs = ds.spatial_ref().ok();
    let projected = match &srs {
        Some(s) if s.is_projected() => {
            let proj = s.to_proj4().map_err(|e| e.to_string())?;
            let (crs, x0, y0) = projected_crs(&proj)?;
            gt[0] -= x0;
            gt[3] -= y0;
            Some(crs)
        }
        Some(s) if s.is_geographic() => None,
        Some(_) => {
            return Err(
                "its coordinate reference system is neither geographic nor projected".into(),
            )
        }
        None => {
            let inside = gt[0] >= -360.0
                && gt[0] + nx as f64 * gt[1] <= 360.0
                && gt[3] <= 90.0 + 1e-6
                && gt[3] + ny as f64 * gt[5] >= -90.0 - 1e-6;
            if !inside {
                return Err("no coordinate reference system, and its coordinates are not longitudes and latitudes".into());
            }
            None
        }
    };
    // Lat/lon grids stored 180…360 (GRIB's usual longitudes) are given as −180…0, as the GRIB2
    // reader gives them.
    if projected.is_none()
        && gt[0] + 0.5 * gt[1] >= 180.0
        && gt[0] + nx as f64 * gt[1] <= 360.0 + 1e-9
    {
        gt[0] -= 360.0;
    }
    Ok(RawGrid {
        nx,
        ny,
        gt,
        projected,
        flip,
    })
}

pub(super) fn raw_text(g: &RawGrid) -> String {
    format!(
        "{}×{} cells, origin {:.6},{:.6}, spacing {:.6}×{:.6}{}",
        g.nx,
        g.ny,
        g.gt[0],
        g.gt[3],
        g.gt[1],
        g.gt[5],
        g.projected
            .map(|p| format!(", {}", p.describe()))
            .unwrap_or_default()
    )
}

pub(super) fn same_grid(a: &RawGrid, b: &RawGrid) -> bool {
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0);
    a.nx == b.nx
        && a.ny == b.ny
        && a.projected == b.projected
        && a.flip == b.flip
        && a.gt.iter().zip(&b.gt).all(|(x, y)| close(*x, *y))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn proj_strings_gdal_writes_become_projected_crs() {
        // The PROJ strings are those `gdalsrsinfo -o proj4` prints for a Lambert conformal
        // and a north polar stereographic grid on a sphere of radius 6371229 m (GDAL 3.6).
        let (p, x0, y0) = projected_crs(
            "+proj=lcc +lat_0=25 +lon_0=265 +lat_1=25 +lat_2=25 +x_0=0 +y_0=0 +R=6371229 +units=m +no_defs",
        )
        .unwrap();
        assert_eq!((x0, y0), (0.0, 0.0));
        assert_eq!(
            p.projection,
            Projection::LambertConformal2Sp {
                lat_1: 25.0,
                lat_2: 25.0,
                lat_0: 25.0,
                lon_0: 265.0
            }
        );
        assert_eq!(
            p.datum,
            Datum::Sphere {
                radius_m: 6371229.0
            }
        );
        let (p, _, _) = projected_crs(
            "+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-105 +k=1 +x_0=0 +y_0=0 +R=6371229 +units=m +no_defs",
        )
        .unwrap();
        assert!(matches!(
            p.projection,
            Projection::PolarStereographic { lat_ts, .. } if lat_ts == 60.0
        ));
        let e = projected_crs("+proj=merc +lon_0=0 +R=6371229").unwrap_err();
        assert!(e.contains("merc") && e.contains("Lambert"), "{e}");
    }
}
