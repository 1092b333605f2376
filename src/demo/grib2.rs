//! A small GRIB2 writer for the demo and the tests: grid templates 3.0 (lat/lon), 3.20 (polar
//! stereographic) and 3.30 (Lambert conformal), product templates 4.0 and 4.8, data
//! representation template 5.0 (simple packing), bit maps (explicit, or 254 "previously
//! defined"), several fields per message.
//!
//! Written octet by octet from WMO-No. 306, Vol. I.2, FM 92 GRIB edition 2 (the section and
//! template layouts are quoted beside each field below); files are checked by reading them with
//! GDAL in the tests. Kept separate from the reader so that one does not hide the other's
//! mistakes. Signed integers use GRIB's sign-and-magnitude form (regulation 92.1.5).

use chrono::{DateTime, Datelike, Timelike, Utc};

/// Grid of a message; angles in degrees, lengths in metres. Earth: code table 3.2 shape 6
/// (sphere of radius 6 371 229 m).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum GridDef {
    /// Template 3.0: `ni`×`nj` points from (`la1`, `lo1`), increments `di`, `dj`, scanning
    /// mode `scan` (flag table 3.4).
    LatLon {
        /// Points along a parallel.
        ni: u32,
        /// Points along a meridian.
        nj: u32,
        /// First point.
        la1: f64,
        /// First point (0…360 or −180…180; stored 0…360).
        lo1: f64,
        /// Increment.
        di: f64,
        /// Increment.
        dj: f64,
        /// Flag table 3.4.
        scan: u8,
    },
    /// Template 3.30, tangent or secant cone.
    Lambert {
        /// Points along x.
        nx: u32,
        /// Points along y.
        ny: u32,
        /// First point.
        la1: f64,
        /// First point.
        lo1: f64,
        /// LaD.
        lad: f64,
        /// LoV.
        lov: f64,
        /// Grid length, m.
        dx: f64,
        /// Grid length, m.
        dy: f64,
        /// Standard parallels.
        latin1: f64,
        /// Standard parallels.
        latin2: f64,
        /// Flag table 3.4.
        scan: u8,
    },
    /// Template 3.20, north-polar aspect.
    PolarStereographic {
        /// Points along x.
        nx: u32,
        /// Points along y.
        ny: u32,
        /// First point.
        la1: f64,
        /// First point.
        lo1: f64,
        /// Latitude of true scale.
        lad: f64,
        /// Orientation.
        lov: f64,
        /// Grid length, m.
        dx: f64,
        /// Grid length, m.
        dy: f64,
        /// Flag table 3.4.
        scan: u8,
    },
}

impl GridDef {
    /// Number of points.
    pub fn len(&self) -> usize {
        match *self {
            Self::LatLon { ni, nj, .. } => ni as usize * nj as usize,
            Self::Lambert { nx, ny, .. } | Self::PolarStereographic { nx, ny, .. } => {
                nx as usize * ny as usize
            }
        }
    }

    /// True for a grid without points.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// How missing values are marked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BitMap {
    /// Indicator 0 where values are NaN, 255 otherwise.
    Auto,
    /// Indicator 254: reuse the bit map of an earlier field of the message (the caller makes
    /// sure the NaNs agree).
    Previous,
}

/// One field to write.
#[derive(Clone, Debug)]
pub struct FieldDef<'a> {
    /// Discipline, parameter category and number (code tables 0.0, 4.1, 4.2).
    pub param: (u8, u8, u8),
    /// First fixed surface: type (code table 4.5), scale factor and scaled value.
    pub surface: (u8, i8, i32),
    /// Reference time.
    pub reference: DateTime<Utc>,
    /// Forecast time, hours (template 4.0), or the start of the accumulation (template 4.8).
    pub forecast_hours: u32,
    /// Length of the accumulation, hours: template 4.8 with statistical process 1.
    pub accumulation_hours: Option<u32>,
    /// Decimal scale factor D of simple packing: values are kept to 10^−D.
    pub decimal_scale: i16,
    /// Values in the grid's scanning order; NaN is missing.
    pub values: &'a [f32],
    /// Bit-map handling.
    pub bitmap: BitMap,
}

fn signed32(v: i64) -> [u8; 4] {
    let m = v.unsigned_abs() as u32 & 0x7fff_ffff;
    (if v < 0 { m | 0x8000_0000 } else { m }).to_be_bytes()
}

fn signed16(v: i32) -> [u8; 2] {
    let m = v.unsigned_abs() as u16 & 0x7fff;
    (if v < 0 { m | 0x8000 } else { m }).to_be_bytes()
}

fn micro(deg: f64) -> i64 {
    (deg * 1e6).round() as i64
}

fn micro_lon(deg: f64) -> [u8; 4] {
    (micro(deg.rem_euclid(360.0)) as u32).to_be_bytes()
}

fn section(num: u8, body: &[u8]) -> Vec<u8> {
    let mut s = Vec::with_capacity(body.len() + 5);
    s.extend_from_slice(&((body.len() + 5) as u32).to_be_bytes());
    s.push(num);
    s.extend_from_slice(body);
    s
}

/// Earth shape 6 and its (missing) radius and axes: octets 15–30 of templates 3.0/3.20/3.30.
fn earth() -> Vec<u8> {
    let mut b = vec![6u8, 0xff];
    b.extend_from_slice(&[0xff; 4]);
    b.push(0xff);
    b.extend_from_slice(&[0xff; 4]);
    b.push(0xff);
    b.extend_from_slice(&[0xff; 4]);
    b
}

fn section3(g: &GridDef) -> Vec<u8> {
    // Octets 6–14: source 0, number of points, no optional list, template number.
    let mut b = vec![0u8];
    b.extend_from_slice(&(g.len() as u32).to_be_bytes());
    b.extend_from_slice(&[0, 0]);
    match *g {
        GridDef::LatLon {
            ni,
            nj,
            la1,
            lo1,
            di,
            dj,
            scan,
        } => {
            b.extend_from_slice(&0u16.to_be_bytes());
            b.extend(earth());
            b.extend_from_slice(&ni.to_be_bytes());
            b.extend_from_slice(&nj.to_be_bytes());
            // Basic angle 0 and subdivisions missing: units of 10^-6 degree.
            b.extend_from_slice(&0u32.to_be_bytes());
            b.extend_from_slice(&[0xff; 4]);
            let sj = if scan & 0x40 != 0 { 1.0 } else { -1.0 };
            let si = if scan & 0x80 != 0 { -1.0 } else { 1.0 };
            let la2 = la1 + sj * (nj as f64 - 1.0) * dj;
            let lo2 = lo1 + si * (ni as f64 - 1.0) * di;
            b.extend_from_slice(&signed32(micro(la1)));
            b.extend_from_slice(&micro_lon(lo1));
            // Flag table 3.3: i and j increments given.
            b.push(0x30);
            b.extend_from_slice(&signed32(micro(la2)));
            b.extend_from_slice(&micro_lon(lo2));
            b.extend_from_slice(&(micro(di) as u32).to_be_bytes());
            b.extend_from_slice(&(micro(dj) as u32).to_be_bytes());
            b.push(scan);
        }
        GridDef::Lambert {
            nx,
            ny,
            la1,
            lo1,
            lad,
            lov,
            dx,
            dy,
            latin1,
            latin2,
            scan,
        } => {
            b.extend_from_slice(&30u16.to_be_bytes());
            b.extend(earth());
            b.extend_from_slice(&nx.to_be_bytes());
            b.extend_from_slice(&ny.to_be_bytes());
            b.extend_from_slice(&signed32(micro(la1)));
            b.extend_from_slice(&micro_lon(lo1));
            b.push(0x30);
            b.extend_from_slice(&signed32(micro(lad)));
            b.extend_from_slice(&micro_lon(lov));
            b.extend_from_slice(&((dx * 1000.0).round() as u32).to_be_bytes());
            b.extend_from_slice(&((dy * 1000.0).round() as u32).to_be_bytes());
            // Projection centre flag: north pole on the plane, bipolar off.
            b.push(0);
            b.push(scan);
            b.extend_from_slice(&signed32(micro(latin1)));
            b.extend_from_slice(&signed32(micro(latin2)));
            b.extend_from_slice(&signed32(micro(-90.0)));
            b.extend_from_slice(&0u32.to_be_bytes());
        }
        GridDef::PolarStereographic {
            nx,
            ny,
            la1,
            lo1,
            lad,
            lov,
            dx,
            dy,
            scan,
        } => {
            b.extend_from_slice(&20u16.to_be_bytes());
            b.extend(earth());
            b.extend_from_slice(&nx.to_be_bytes());
            b.extend_from_slice(&ny.to_be_bytes());
            b.extend_from_slice(&signed32(micro(la1)));
            b.extend_from_slice(&micro_lon(lo1));
            b.push(0x30);
            b.extend_from_slice(&signed32(micro(lad)));
            b.extend_from_slice(&micro_lon(lov));
            b.extend_from_slice(&((dx * 1000.0).round() as u32).to_be_bytes());
            b.extend_from_slice(&((dy * 1000.0).round() as u32).to_be_bytes());
            b.push(0);
            b.push(scan);
        }
    }
    section(3, &b)
}

fn section4(f: &FieldDef<'_>) -> Vec<u8> {
    let template: u16 = if f.accumulation_hours.is_some() { 8 } else { 0 };
    let mut b = Vec::new();
    // Octets 6–9: no coordinate values; template number.
    b.extend_from_slice(&0u16.to_be_bytes());
    b.extend_from_slice(&template.to_be_bytes());
    // 10–11 category, number; 12 generating process 2 (forecast); 13 background 0; 14
    // process id 255 (missing); 15–17 no cut-off; 18 unit 1 (hour); 19–22 forecast time.
    b.extend_from_slice(&[f.param.1, f.param.2, 2, 0, 255, 0, 0, 0, 1]);
    b.extend_from_slice(&(f.forecast_hours).to_be_bytes());
    // 23–28 first fixed surface; 29–34 second surface missing.
    b.push(f.surface.0);
    b.push(f.surface.1 as u8);
    b.extend_from_slice(&signed32(i64::from(f.surface.2)));
    b.extend_from_slice(&[255, 0xff, 0xff, 0xff, 0xff, 0xff]);
    if let Some(h) = f.accumulation_hours {
        let end = f.reference + chrono::Duration::hours(i64::from(f.forecast_hours + h));
        // 35–41 end of the overall interval; 42 one time range; 43–46 none missing.
        b.extend_from_slice(&(end.year() as u16).to_be_bytes());
        b.extend_from_slice(&[
            end.month() as u8,
            end.day() as u8,
            end.hour() as u8,
            end.minute() as u8,
            end.second() as u8,
            1,
        ]);
        b.extend_from_slice(&0u32.to_be_bytes());
        // 47 process 1 (accumulation); 48 increment type 2; 49 unit hour; 50–53 length;
        // 54 increment unit hour; 55–58 increment 0 (continuous).
        b.extend_from_slice(&[1, 2, 1]);
        b.extend_from_slice(&h.to_be_bytes());
        b.push(1);
        b.extend_from_slice(&0u32.to_be_bytes());
    }
    section(4, &b)
}

/// Sections 5, 6 and 7 of a field: simple packing with binary scale 0 and decimal scale D,
/// Y = (R + X)/10^D, R the floor of the scaled minimum.
fn data_sections(f: &FieldDef<'_>) -> Vec<u8> {
    let k = 10f64.powi(i32::from(f.decimal_scale));
    let present: Vec<f64> = f
        .values
        .iter()
        .filter(|v| v.is_finite())
        .map(|&v| f64::from(v) * k)
        .collect();
    let r = present
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .floor();
    let r = if r.is_finite() { r } else { 0.0 };
    let ints: Vec<u64> = present
        .iter()
        .map(|v| (v - r).round().max(0.0) as u64)
        .collect();
    let max = ints.iter().copied().max().unwrap_or(0);
    let bits = 64 - max.leading_zeros() as u8;
    let mut s5 = Vec::new();
    s5.extend_from_slice(&(present.len() as u32).to_be_bytes());
    s5.extend_from_slice(&0u16.to_be_bytes());
    s5.extend_from_slice(&(r as f32).to_be_bytes());
    s5.extend_from_slice(&signed16(0));
    s5.extend_from_slice(&signed16(i32::from(f.decimal_scale)));
    s5.push(bits);
    s5.push(0);
    let missing = present.len() < f.values.len();
    let s6 = match (f.bitmap, missing) {
        (BitMap::Previous, _) => vec![254u8],
        (BitMap::Auto, false) => vec![255u8],
        (BitMap::Auto, true) => {
            let mut b = vec![0u8];
            b.extend(pack_bits(
                f.values.iter().map(|v| u64::from(v.is_finite())),
                1,
            ));
            b
        }
    };
    let s7 = pack_bits(ints.into_iter(), bits);
    let mut out = section(5, &s5);
    out.extend(section(6, &s6));
    out.extend(section(7, &s7));
    out
}

fn pack_bits(values: impl Iterator<Item = u64>, bits: u8) -> Vec<u8> {
    let mut out = Vec::new();
    if bits == 0 {
        return out;
    }
    let (mut acc, mut n) = (0u128, 0u32);
    for v in values {
        acc = (acc << bits) | u128::from(v);
        n += u32::from(bits);
        while n >= 8 {
            out.push((acc >> (n - 8)) as u8);
            n -= 8;
            acc &= (1u128 << n) - 1;
        }
    }
    if n > 0 {
        out.push((acc << (8 - n)) as u8);
    }
    out
}

/// One GRIB2 message holding `fields` (all of one discipline and reference time) on `grid`.
pub fn message(grid: &GridDef, fields: &[FieldDef<'_>]) -> Vec<u8> {
    let first = &fields[0];
    let t = first.reference;
    // Section 1: centre 255 (missing), subcentre 0, master tables 4, local 0, significance 1
    // (start of forecast), reference time, status 2 (research), type 1 (forecast).
    let mut s1 = Vec::new();
    s1.extend_from_slice(&255u16.to_be_bytes());
    s1.extend_from_slice(&0u16.to_be_bytes());
    s1.extend_from_slice(&[4, 0, 1]);
    s1.extend_from_slice(&(t.year() as u16).to_be_bytes());
    s1.extend_from_slice(&[
        t.month() as u8,
        t.day() as u8,
        t.hour() as u8,
        t.minute() as u8,
        t.second() as u8,
        2,
        1,
    ]);
    let mut body = section(1, &s1);
    body.extend(section3(grid));
    for f in fields {
        assert_eq!(f.values.len(), grid.len(), "one value per grid point");
        body.extend(section4(f));
        body.extend(data_sections(f));
    }
    let total = 16 + body.len() + 4;
    let mut m = Vec::with_capacity(total);
    m.extend_from_slice(b"GRIB");
    m.extend_from_slice(&[0, 0, first.param.0, 2]);
    m.extend_from_slice(&(total as u64).to_be_bytes());
    m.extend(body);
    m.extend_from_slice(b"7777");
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sign_and_magnitude_integers() {
        // WMO-No. 306 regulation 92.1.5: the leftmost bit is the sign, the rest the magnitude.
        assert_eq!(signed32(-1), [0x80, 0, 0, 1]);
        assert_eq!(signed32(90_000_000), 90_000_000u32.to_be_bytes());
        assert_eq!(signed16(-3), [0x80, 3]);
    }

    #[test]
    fn bits_pack_most_significant_first() {
        assert_eq!(pack_bits([1u64, 0, 1, 1].into_iter(), 1), vec![0b1011_0000]);
        assert_eq!(
            pack_bits([0x3ffu64, 1].into_iter(), 10),
            vec![0xff, 0xc0, 0x10]
        );
    }
}
