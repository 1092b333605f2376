//! Cloud-optimised GeoTIFF writer: internal tiles, overviews and the layout of GDAL's COG driver
//! (GDAL documentation, "COG – Cloud Optimized GeoTIFF generator", section "File format
//! details"), written by its own TIFF 6.0 / BigTIFF serialiser.
//!
//! Why not the `tiff` crate's encoder: it writes each directory after its image data, so it
//! cannot put every IFD before the data, which is what lets a reader learn the whole file's
//! structure from its first bytes. The `tiff` crate still reads our files back (tests).
//!
//! Why not a COG writer crate: `geotiff-writer` 0.4.0 (pure Rust, deflate, floating-point
//! predictor, tiles, overviews) was tried on an 800×600×3 Float32 raster (EPSG:4326, nodata,
//! overviews 2 and 4). GDAL 3.6 opens it and reports LAYOUT=COG, but libtiff warns that its
//! directories' tags are not in ascending order (TIFF 6.0 §2 requires it), GDAL's
//! `validate_cloud_optimized_geotiff.py --full-check=yes` fails it ("The offset of the main IFD
//! should be 192. It is 191 instead"), and it has no way to write GDAL's metadata tag (42112),
//! which carries the band descriptions, units, scenario offsets and the Int16 scale and offset
//! the layers need. Checked 2026-12-02.
//!
//! File layout, in order:
//! 1. TIFF header (classic: 8 bytes; BigTIFF: 16), native byte order.
//! 2. GDAL's "ghost" structural metadata: `GDAL_STRUCTURAL_METADATA_SIZE=nnnnnn bytes\n` and
//!    `LAYOUT=IFDS_BEFORE_DATA`, `BLOCK_ORDER=ROW_MAJOR`, `BLOCK_LEADER=SIZE_AS_UINT4`,
//!    `BLOCK_TRAILER=LAST_4_BYTES_REPEATED`, `KNOWN_INCOMPATIBLE_EDITION=NO`, so GDAL reports
//!    `LAYOUT=COG` and its validator checks leaders and trailers.
//! 3. The full-resolution IFD, then each overview's IFD (NewSubfileType 1), largest first, each
//!    followed by its out-of-line tag values.
//! 4. Tile data, smallest overview first and full resolution last; within an image plane by
//!    plane (PlanarConfiguration 2), tiles row-major; each tile preceded by its byte count as a
//!    4-byte integer and followed by a copy of its last 4 bytes.
//!
//! Every tile is compressed independently (one rayon task each) and the results are collected in
//! file order, so the bytes do not depend on the number of threads.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::Path;

use rayon::prelude::*;

use super::geokeys::GeoKeys;
use super::metadata::{build_xml, format_number, BandItems};
use super::overview::{halve, overview_sizes};
use super::strip::{encode_strip, StripError, INT16_NODATA};
use super::validate::validate;
use super::{tag, BandSpec, GeoTiffError, Georef, SampleEncoding, WriteOptions};

/// When to write BigTIFF (64-bit offsets) instead of classic TIFF (32-bit).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BigTiff {
    /// Classic TIFF unless the file would pass 4 GiB.
    Auto,
    /// Always BigTIFF.
    Always,
}

/// Tiling and overview settings of [`write_cog`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CogOptions {
    /// Tile width and height in pixels; a multiple of 16 (TIFF 6.0 §15).
    pub tile_size: usize,
    /// Write overviews (halved until the image fits one tile).
    pub overviews: bool,
    /// Classic TIFF or BigTIFF.
    pub bigtiff: BigTiff,
}

impl Default for CogOptions {
    /// 256-pixel tiles (GDAL's COG default), overviews, BigTIFF only when needed.
    fn default() -> Self {
        Self {
            tile_size: 256,
            overviews: true,
            bigtiff: BigTiff::Auto,
        }
    }
}

/// What [`write_cog`] wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct CogReport {
    /// True when the file is BigTIFF.
    pub bigtiff: bool,
    /// Sizes (width, height) of the overviews, largest first.
    pub overviews: Vec<(usize, usize)>,
    /// File size, bytes.
    pub bytes: u64,
}

/// TIFF 6.0 / BigTIFF field types used here.
const TYPE_ASCII: u16 = 2;
const TYPE_SHORT: u16 = 3;
const TYPE_LONG: u16 = 4;
const TYPE_DOUBLE: u16 = 12;
const TYPE_LONG8: u16 = 16;

/// TIFF 6.0 tag numbers (baseline and extension sections) written here.
mod tags {
    pub const NEW_SUBFILE_TYPE: u16 = 254;
    pub const IMAGE_WIDTH: u16 = 256;
    pub const IMAGE_LENGTH: u16 = 257;
    pub const BITS_PER_SAMPLE: u16 = 258;
    pub const COMPRESSION: u16 = 259;
    pub const PHOTOMETRIC: u16 = 262;
    pub const SAMPLES_PER_PIXEL: u16 = 277;
    pub const PLANAR_CONFIGURATION: u16 = 284;
    pub const PREDICTOR: u16 = 317;
    pub const TILE_WIDTH: u16 = 322;
    pub const TILE_LENGTH: u16 = 323;
    pub const TILE_OFFSETS: u16 = 324;
    pub const TILE_BYTE_COUNTS: u16 = 325;
    pub const EXTRA_SAMPLES: u16 = 338;
    pub const SAMPLE_FORMAT: u16 = 339;
    pub const MODEL_PIXEL_SCALE: u16 = 33550;
    pub const MODEL_TIEPOINT: u16 = 33922;
    pub const GEO_KEY_DIRECTORY: u16 = 34735;
    pub const GEO_DOUBLE_PARAMS: u16 = 34736;
    pub const GEO_ASCII_PARAMS: u16 = 34737;
}

/// Value of one IFD entry.
#[derive(Debug, Clone)]
enum Value {
    Short(Vec<u16>),
    Long(Vec<u32>),
    Long8(Vec<u64>),
    Double(Vec<f64>),
    /// Text including its terminating NUL.
    Ascii(Vec<u8>),
}

impl Value {
    fn type_and_count(&self) -> (u16, usize) {
        match self {
            Value::Short(v) => (TYPE_SHORT, v.len()),
            Value::Long(v) => (TYPE_LONG, v.len()),
            Value::Long8(v) => (TYPE_LONG8, v.len()),
            Value::Double(v) => (TYPE_DOUBLE, v.len()),
            Value::Ascii(v) => (TYPE_ASCII, v.len()),
        }
    }

    fn bytes(&self) -> Vec<u8> {
        match self {
            Value::Short(v) => v.iter().flat_map(|x| x.to_ne_bytes()).collect(),
            Value::Long(v) => v.iter().flat_map(|x| x.to_ne_bytes()).collect(),
            Value::Long8(v) => v.iter().flat_map(|x| x.to_ne_bytes()).collect(),
            Value::Double(v) => v.iter().flat_map(|x| x.to_ne_bytes()).collect(),
            Value::Ascii(v) => v.clone(),
        }
    }
}

fn ascii(text: &str) -> Value {
    let mut b = text.as_bytes().to_vec();
    b.push(0);
    Value::Ascii(b)
}

/// Size of the offset/value field of an entry: 4 bytes classic, 8 BigTIFF.
fn word(big: bool) -> usize {
    if big {
        8
    } else {
        4
    }
}

/// Bytes an IFD takes with its out-of-line values (each starting on a word boundary, as TIFF 6.0
/// requires), independent of where it is placed.
fn ifd_len(entries: &[(u16, Value)], big: bool) -> usize {
    let w = word(big);
    let head = if big {
        8 + 20 * entries.len() + 8
    } else {
        2 + 12 * entries.len() + 4
    };
    let extra: usize = entries
        .iter()
        .map(|(_, v)| v.bytes().len())
        .filter(|&n| n > w)
        .map(|n| n.next_multiple_of(2))
        .sum();
    head + extra
}

/// Encodes an IFD placed at file offset `at`, pointing to the next IFD at `next` (0 for none).
/// Entries must be sorted by tag.
fn encode_ifd(entries: &[(u16, Value)], at: u64, next: u64, big: bool) -> Vec<u8> {
    let w = word(big);
    let mut head = Vec::new();
    let mut tail = Vec::new();
    let head_len = if big {
        8 + 20 * entries.len() + 8
    } else {
        2 + 12 * entries.len() + 4
    };
    if big {
        head.extend_from_slice(&(entries.len() as u64).to_ne_bytes());
    } else {
        head.extend_from_slice(&(entries.len() as u16).to_ne_bytes());
    }
    for (t, v) in entries {
        let (ty, count) = v.type_and_count();
        head.extend_from_slice(&t.to_ne_bytes());
        head.extend_from_slice(&ty.to_ne_bytes());
        if big {
            head.extend_from_slice(&(count as u64).to_ne_bytes());
        } else {
            head.extend_from_slice(&(count as u32).to_ne_bytes());
        }
        let data = v.bytes();
        if data.len() <= w {
            let mut field = data;
            field.resize(w, 0);
            head.extend_from_slice(&field);
        } else {
            let pos = at + (head_len + tail.len()) as u64;
            if big {
                head.extend_from_slice(&pos.to_ne_bytes());
            } else {
                head.extend_from_slice(&(pos as u32).to_ne_bytes());
            }
            tail.extend_from_slice(&data);
            if tail.len() % 2 == 1 {
                tail.push(0);
            }
        }
    }
    if big {
        head.extend_from_slice(&next.to_ne_bytes());
    } else {
        head.extend_from_slice(&(next as u32).to_ne_bytes());
    }
    head.extend_from_slice(&tail);
    head
}

/// GDAL's structural metadata block that follows the header (see the module notes).
fn ghost_area() -> Vec<u8> {
    let body = "LAYOUT=IFDS_BEFORE_DATA\nBLOCK_ORDER=ROW_MAJOR\nBLOCK_LEADER=SIZE_AS_UINT4\n\
                BLOCK_TRAILER=LAST_4_BYTES_REPEATED\nKNOWN_INCOMPATIBLE_EDITION=NO\n ";
    format!(
        "GDAL_STRUCTURAL_METADATA_SIZE={:06} bytes\n{body}",
        body.len()
    )
    .into_bytes()
}

/// One image of the file: full resolution (level 0) or an overview.
struct Level<'a> {
    width: usize,
    height: usize,
    /// One slice per band.
    bands: Vec<std::borrow::Cow<'a, [f32]>>,
}

/// Writes `bands` as a tiled, cloud-optimised GeoTIFF with overviews (see the module notes).
///
/// Takes the bands, the georeferencing, the encoding and the tiling options, and returns what
/// was written. The bytes depend only on the arguments, never on the number of rayon threads.
///
/// ```
/// use trackswing::geotiff::*;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("swing.tif");
/// let data: Vec<f32> = (0..600 * 300).map(|i| (i % 600) as f32 * 0.1).collect();
/// let georef = Georef { crs: Crs::Wgs84Geographic, geotransform: [-100.0, 0.05, 0.0, 50.0, 0.0, -0.05] };
/// let band = BandSpec { data: &data, description: "snowfall".into(), metadata: vec![] };
/// let opts = WriteOptions { encoding: SampleEncoding::Float32, nodata: -9999.0, dataset_metadata: vec![], band_scaling: vec![] };
/// let report = write_cog(&path, 600, 300, &georef, &[band], &opts, &CogOptions::default()).unwrap();
/// assert_eq!(report.overviews, vec![(300, 150), (150, 75)]);
/// assert!(!report.bigtiff);
/// let r = read_geotiff(&path).unwrap();
/// assert_eq!(r.bands[0], data);
/// ```
pub fn write_cog(
    path: &Path,
    width: usize,
    height: usize,
    georef: &Georef,
    bands: &[BandSpec],
    opts: &WriteOptions,
    cog: &CogOptions,
) -> Result<CogReport, GeoTiffError> {
    validate(path, width, height, georef, bands, opts)?;
    let t = cog.tile_size;
    if t == 0 || !t.is_multiple_of(16) || t > 4096 {
        return Err(GeoTiffError::InvalidOption {
            path: path.to_path_buf(),
            what: format!("tile size {t} must be a positive multiple of 16, at most 4096"),
        });
    }
    georef
        .crs
        .check()
        .map_err(|what| GeoTiffError::InvalidOption {
            path: path.to_path_buf(),
            what: format!("CRS {:?}: {what}", georef.crs),
        })?;

    let mut levels = vec![Level {
        width,
        height,
        bands: bands
            .iter()
            .map(|b| std::borrow::Cow::Borrowed(b.data))
            .collect(),
    }];
    let sizes = if cog.overviews {
        overview_sizes(width, height, t)
    } else {
        Vec::new()
    };
    for &(w, h) in &sizes {
        let prev = levels.last().expect("level 0 exists");
        let halved: Vec<std::borrow::Cow<[f32]>> = prev
            .bands
            .par_iter()
            .map(|b| std::borrow::Cow::Owned(halve(b, prev.width, prev.height, opts.nodata)))
            .collect();
        levels.push(Level {
            width: w,
            height: h,
            bands: halved,
        });
    }

    let tiles = encode_tiles(path, &levels, t, opts)?;

    let n = bands.len();
    let (sample_format, bits, predictor, nodata_text) = match opts.encoding {
        SampleEncoding::Float32 => (
            3u16,
            32u16,
            3u16,
            format_number(f64::from(opts.nodata as f32)),
        ),
        SampleEncoding::Int16Scaled { .. } => (2, 16, 2, INT16_NODATA.to_string()),
    };
    let items: Vec<BandItems> = bands
        .iter()
        .enumerate()
        .map(|(i, b)| BandItems {
            description: &b.description,
            metadata: &b.metadata,
            scale_offset: match opts.band_encoding(i) {
                SampleEncoding::Float32 => None,
                SampleEncoding::Int16Scaled { scale, offset } => Some((scale, offset)),
            },
        })
        .collect();
    let xml = build_xml(&opts.dataset_metadata, &items);
    let geokeys = GeoKeys::for_crs(georef.crs).encode();
    let gt = georef.geotransform;

    // Entries of each IFD except the tile offsets, which depend on the layout.
    let ifd_entries = |level: usize, big: bool, offsets: Vec<u64>, counts: Vec<u32>| {
        let l = &levels[level];
        let mut e: Vec<(u16, Value)> = Vec::new();
        if level > 0 {
            // NewSubfileType bit 0: a reduced-resolution version of another image.
            e.push((tags::NEW_SUBFILE_TYPE, Value::Long(vec![1])));
        }
        e.push((tags::IMAGE_WIDTH, Value::Long(vec![l.width as u32])));
        e.push((tags::IMAGE_LENGTH, Value::Long(vec![l.height as u32])));
        e.push((tags::BITS_PER_SAMPLE, Value::Short(vec![bits; n])));
        // Compression 8: Deflate (Adobe), as GDAL writes it.
        e.push((tags::COMPRESSION, Value::Short(vec![8])));
        // Photometric 1: BlackIsZero.
        e.push((tags::PHOTOMETRIC, Value::Short(vec![1])));
        e.push((tags::SAMPLES_PER_PIXEL, Value::Short(vec![n as u16])));
        // PlanarConfiguration 2: one plane per band, so a viewer showing one band reads only it.
        e.push((tags::PLANAR_CONFIGURATION, Value::Short(vec![2])));
        e.push((tags::PREDICTOR, Value::Short(vec![predictor])));
        e.push((tags::TILE_WIDTH, Value::Long(vec![t as u32])));
        e.push((tags::TILE_LENGTH, Value::Long(vec![t as u32])));
        e.push((
            tags::TILE_OFFSETS,
            if big {
                Value::Long8(offsets)
            } else {
                Value::Long(offsets.iter().map(|&o| o as u32).collect())
            },
        ));
        e.push((tags::TILE_BYTE_COUNTS, Value::Long(counts)));
        if n > 1 {
            // ExtraSamples 0: unspecified data, as GDAL marks bands beyond the first.
            e.push((tags::EXTRA_SAMPLES, Value::Short(vec![0; n - 1])));
        }
        e.push((tags::SAMPLE_FORMAT, Value::Short(vec![sample_format; n])));
        if level == 0 {
            // OGC 19-008r4 §7.2: ModelPixelScale (ScaleX, ScaleY, ScaleZ), ScaleY positive for
            // north-up; ModelTiepoint (I, J, K, X, Y, Z) ties raster (0, 0) to the outer corner.
            e.push((
                tags::MODEL_PIXEL_SCALE,
                Value::Double(vec![gt[1], -gt[5], 0.0]),
            ));
            e.push((
                tags::MODEL_TIEPOINT,
                Value::Double(vec![0.0, 0.0, 0.0, gt[0], gt[3], 0.0]),
            ));
            e.push((
                tags::GEO_KEY_DIRECTORY,
                Value::Short(geokeys.directory.clone()),
            ));
            if !geokeys.doubles.is_empty() {
                e.push((
                    tags::GEO_DOUBLE_PARAMS,
                    Value::Double(geokeys.doubles.clone()),
                ));
            }
            if !geokeys.ascii.is_empty() {
                e.push((tags::GEO_ASCII_PARAMS, ascii(&geokeys.ascii)));
            }
            if let Some(x) = &xml {
                e.push((tag::GDAL_METADATA, ascii(x)));
            }
        }
        e.push((tag::GDAL_NODATA, ascii(&nodata_text)));
        e
    };

    let layout = |big: bool| {
        let header = if big { 16u64 } else { 8 };
        let ghost = ghost_area();
        let first_ifd = (header + ghost.len() as u64).next_multiple_of(2);
        let mut ifd_at = Vec::with_capacity(levels.len());
        let mut pos = first_ifd;
        for (l, lt) in tiles.iter().enumerate() {
            ifd_at.push(pos);
            let placeholder = ifd_entries(l, big, vec![0; lt.len()], vec![0; lt.len()]);
            pos += ifd_len(&placeholder, big) as u64;
        }
        let mut offsets: Vec<Vec<u64>> = tiles.iter().map(|lt| vec![0; lt.len()]).collect();
        for l in (0..levels.len()).rev() {
            for (i, tile) in tiles[l].iter().enumerate() {
                offsets[l][i] = pos + 4;
                pos += 4 + tile.len() as u64 + 4;
            }
        }
        (ifd_at, offsets, pos)
    };
    let (mut big, mut plan) = (
        cog.bigtiff == BigTiff::Always,
        layout(cog.bigtiff == BigTiff::Always),
    );
    if !big && plan.2 > u64::from(u32::MAX) {
        big = true;
        plan = layout(true);
    }
    let (ifd_at, offsets, total) = plan;

    let io = |source| GeoTiffError::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = File::create(path).map_err(io)?;
    let mut out = BufWriter::with_capacity(1 << 20, file);
    let order: &[u8; 2] = if cfg!(target_endian = "little") {
        b"II"
    } else {
        b"MM"
    };
    out.write_all(order).map_err(io)?;
    if big {
        out.write_all(&43u16.to_ne_bytes()).map_err(io)?;
        out.write_all(&8u16.to_ne_bytes()).map_err(io)?;
        out.write_all(&0u16.to_ne_bytes()).map_err(io)?;
        out.write_all(&ifd_at[0].to_ne_bytes()).map_err(io)?;
    } else {
        out.write_all(&42u16.to_ne_bytes()).map_err(io)?;
        out.write_all(&(ifd_at[0] as u32).to_ne_bytes())
            .map_err(io)?;
    }
    let ghost = ghost_area();
    out.write_all(&ghost).map_err(io)?;
    let header = if big { 16 } else { 8 };
    if (header + ghost.len()) % 2 == 1 {
        out.write_all(&[0]).map_err(io)?;
    }
    for l in 0..levels.len() {
        let counts = tiles[l].iter().map(|t| t.len() as u32).collect();
        let entries = ifd_entries(l, big, offsets[l].clone(), counts);
        let next = ifd_at.get(l + 1).copied().unwrap_or(0);
        out.write_all(&encode_ifd(&entries, ifd_at[l], next, big))
            .map_err(io)?;
    }
    for l in (0..levels.len()).rev() {
        for tile in &tiles[l] {
            out.write_all(&(tile.len() as u32).to_ne_bytes())
                .map_err(io)?;
            out.write_all(tile).map_err(io)?;
            out.write_all(&tile[tile.len() - 4..]).map_err(io)?;
        }
    }
    out.flush().map_err(io)?;
    Ok(CogReport {
        bigtiff: big,
        overviews: sizes,
        bytes: total,
    })
}

/// Compresses every tile of every level, in file order within each level: band by band, tiles
/// row-major. Partial edge tiles are padded with nodata.
fn encode_tiles(
    path: &Path,
    levels: &[Level],
    t: usize,
    opts: &WriteOptions,
) -> Result<Vec<Vec<Vec<u8>>>, GeoTiffError> {
    levels
        .iter()
        .map(|l| {
            let (across, down) = (l.width.div_ceil(t), l.height.div_ceil(t));
            let jobs: Vec<(usize, usize, usize)> = (0..l.bands.len())
                .flat_map(|b| (0..down).flat_map(move |ty| (0..across).map(move |tx| (b, ty, tx))))
                .collect();
            jobs.par_iter()
                .map(|&(b, ty, tx)| {
                    let data = &l.bands[b];
                    let mut buf = vec![f32::NAN; t * t];
                    let (c0, r0) = (tx * t, ty * t);
                    let cols = t.min(l.width - c0);
                    for r in 0..t.min(l.height - r0) {
                        let src = (r0 + r) * l.width + c0;
                        buf[r * t..r * t + cols].copy_from_slice(&data[src..src + cols]);
                    }
                    let enc = opts.band_encoding(b);
                    encode_strip(&buf, t, enc, opts.nodata).map_err(|e| match e {
                        StripError::OutOfRange { index, value } => {
                            let (scale, offset) = match enc {
                                SampleEncoding::Int16Scaled { scale, offset } => (scale, offset),
                                SampleEncoding::Float32 => (1.0, 0.0),
                            };
                            GeoTiffError::OutOfRange {
                                path: path.to_path_buf(),
                                band: b,
                                row: r0 + index / t,
                                col: c0 + index % t,
                                value,
                                scale,
                                offset,
                            }
                        }
                        StripError::Io(source) => GeoTiffError::Io {
                            path: path.to_path_buf(),
                            source,
                        },
                    })
                })
                .collect()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ghost_area_is_gdal_shaped() {
        // GDAL's validator reads exactly this prefix and a 6-digit size (validate_cloud_optimized
        // _geotiff.py, GDAL 3.6), then the IFD on the next even offset.
        let g = String::from_utf8(ghost_area()).unwrap();
        let (head, body) = g.split_once('\n').unwrap();
        assert_eq!(
            head,
            format!("GDAL_STRUCTURAL_METADATA_SIZE={:06} bytes", body.len())
        );
        for k in [
            "LAYOUT=IFDS_BEFORE_DATA",
            "BLOCK_ORDER=ROW_MAJOR",
            "BLOCK_LEADER=SIZE_AS_UINT4",
            "BLOCK_TRAILER=LAST_4_BYTES_REPEATED",
            "KNOWN_INCOMPATIBLE_EDITION=NO",
        ] {
            assert!(body.lines().any(|l| l == k), "{k}");
        }
    }

    #[test]
    fn ifd_encoding_follows_tiff_6_layout() {
        // TIFF 6.0 §2: count (2 bytes), 12-byte entries (tag, type, count, value/offset), next
        // offset (4 bytes); values over 4 bytes stored elsewhere, here right after the entries.
        let entries = vec![
            (256u16, Value::Long(vec![7])),
            (258, Value::Short(vec![32, 32, 32])),
        ];
        let at = 100u64;
        let b = encode_ifd(&entries, at, 0, false);
        assert_eq!(b.len(), ifd_len(&entries, false));
        assert_eq!(u16::from_ne_bytes([b[0], b[1]]), 2);
        let e1 = &b[2 + 12..2 + 24];
        assert_eq!(u16::from_ne_bytes([e1[0], e1[1]]), 258);
        assert_eq!(u16::from_ne_bytes([e1[2], e1[3]]), TYPE_SHORT);
        assert_eq!(u32::from_ne_bytes([e1[4], e1[5], e1[6], e1[7]]), 3);
        let off = u32::from_ne_bytes([e1[8], e1[9], e1[10], e1[11]]) as usize;
        assert_eq!(
            off,
            100 + 2 + 24 + 4,
            "out-of-line value follows the entries"
        );
        let v = &b[off - 100..off - 100 + 6];
        assert_eq!(u16::from_ne_bytes([v[4], v[5]]), 32);
        // BigTIFF (BigTIFF proposal, Aware Systems 2004): 8-byte count, 20-byte entries, 8-byte
        // next offset; 6 bytes of shorts fit the 8-byte value field.
        let big = encode_ifd(&entries, at, 0, true);
        assert_eq!(big.len(), 8 + 40 + 8);
    }
}
