//! Every field of a set of GRIB2 files, identified but not decoded: what `trackswing inspect`
//! lists and what the case's fields are chosen from.

use super::decode::{packing_name, DECODED_TEMPLATES};
use super::gridspec::{grid_spec, GridSpec, Placement};
use super::product::{product, Param, Product};
use super::scan::{read_span, scan, RawField};
use super::GribError;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// One field trackswing can use, or could use if its grid or packing were supported.
#[derive(Clone, Debug)]
pub struct Entry {
    /// Index into [`Catalog::files`].
    pub file: usize,
    /// Where its sections are.
    pub raw: RawField,
    /// What it is.
    pub product: Product,
    /// Index into [`Catalog::grids`], when the grid is supported.
    pub grid: Option<usize>,
    /// Data representation template number.
    pub packing: u16,
    /// The packing's step between representable values, 2^E·10^−D in the field's units (0
    /// where the template does not say): a decoded value lies within half of it of the value
    /// packed.
    pub quantum: f64,
    /// Why it cannot be read, if it cannot.
    pub problem: Option<String>,
}

impl Entry {
    /// The parameter (entries always have one).
    pub fn param(&self) -> Param {
        self.product
            .param
            .expect("catalog entries have a known parameter")
    }
}

/// A grid found in the files, placed once.
#[derive(Clone, Debug)]
pub struct CatalogGrid {
    /// As GRIB describes it.
    pub spec: GridSpec,
    /// In the crate's orientation, or why it cannot be placed.
    pub placement: Result<Placement, String>,
}

/// The fields of a set of files.
#[derive(Debug, Default)]
pub struct Catalog {
    /// The files, in the order given.
    pub files: Vec<PathBuf>,
    /// Distinct grids.
    pub grids: Vec<CatalogGrid>,
    /// Fields with a parameter trackswing reads.
    pub entries: Vec<Entry>,
    /// Fields passed over, counted by reason.
    pub skipped: BTreeMap<String, usize>,
}

impl Catalog {
    /// Keeps only the fields of ensemble member `perturbation` (and fields without one, such
    /// as a terrain field shared by every member); the others are counted as skipped.
    pub fn keep_member(&mut self, perturbation: u8) {
        let before = self.entries.len();
        self.entries
            .retain(|e| e.product.member.is_none_or(|m| m == perturbation));
        let other = before - self.entries.len();
        if other > 0 {
            *self
                .skipped
                .entry("fields of other ensemble members".into())
                .or_default() += other;
        }
    }

    /// Scans every file. Structural damage (not GRIB, truncated, broken sections) is an error
    /// naming the file and message; fields of parameters or templates not used are counted in
    /// [`Catalog::skipped`].
    pub fn scan(files: &[PathBuf]) -> Result<Self, GribError> {
        let mut cat = Catalog {
            files: files.to_vec(),
            ..Default::default()
        };
        for (fi, path) in files.iter().enumerate() {
            let scanned = scan(path)?;
            if !scanned.edition1.is_empty() {
                *cat.skipped
                    .entry("GRIB edition 1 messages (trackswing reads GRIB2)".into())
                    .or_default() += scanned.edition1.len();
            }
            for raw in scanned.fields {
                cat.add(fi, path, raw)?;
            }
        }
        Ok(cat)
    }

    fn add(&mut self, fi: usize, path: &Path, raw: RawField) -> Result<(), GribError> {
        let prod = match product(path, raw.message, raw.discipline, &raw.sect1, &raw.sect4)? {
            Ok(p) => p,
            Err(u) => {
                *self.skipped.entry(u.0).or_default() += 1;
                return Ok(());
            }
        };
        if prod.param.is_none() {
            *self
                .skipped
                .entry("parameters trackswing does not use".into())
                .or_default() += 1;
            return Ok(());
        }
        let io = |source| GribError::Io {
            path: path.to_path_buf(),
            source,
        };
        let mut f = std::fs::File::open(path).map_err(io)?;
        let s5 = read_span(&mut f, raw.sect5).map_err(io)?;
        if s5.len() < 11 {
            return Err(GribError::Structure {
                path: path.to_path_buf(),
                message: raw.message,
                what: "Section 5 is shorter than 11 octets".into(),
            });
        }
        let packing = u16::from_be_bytes([s5[9], s5[10]]);
        let quantum = packing_quantum(packing, &s5);
        let mut problem = None;
        if !DECODED_TEMPLATES.contains(&packing) {
            problem = Some(format!(
                "data representation template 5.{packing} ({}) is not supported",
                packing_name(packing)
            ));
        }
        if !matches!(raw.bitmap_indicator, 0 | 254 | 255) {
            problem = Some(format!(
                "bit map indicator {} (a predetermined bit map, code table 6.0) is not supported",
                raw.bitmap_indicator
            ));
        }
        let grid = match grid_spec(&raw.sect3) {
            Ok(spec) => {
                let gi = match self.grids.iter().position(|g| g.spec == spec) {
                    Some(i) => i,
                    None => {
                        let placement = spec.place().map_err(|e| e.to_string());
                        self.grids.push(CatalogGrid { spec, placement });
                        self.grids.len() - 1
                    }
                };
                if let Err(e) = &self.grids[gi].placement {
                    problem.get_or_insert_with(|| format!("its grid cannot be used: {e}"));
                }
                Some(gi)
            }
            Err(u) => {
                problem.get_or_insert_with(|| format!("{} is not supported", u.0));
                None
            }
        };
        self.entries.push(Entry {
            file: fi,
            raw,
            product: prod,
            grid,
            packing,
            quantum,
            problem,
        });
        Ok(())
    }

    /// Where an entry came from: `file: message 3` (and `field 2` inside multi-field messages).
    pub fn origin(&self, e: &Entry) -> String {
        let field = if e.raw.field > 1 {
            format!(", field {}", e.raw.field)
        } else {
            String::new()
        };
        format!(
            "{}: message {}{field}",
            self.files[e.file].display(),
            e.raw.message
        )
    }
}

/// The step between representable values of the grid-point packings this reader decodes
/// (templates 5.0, 5.2, 5.3, 5.40, 5.41, 5.42 share the layout): octets 16–17 hold the binary
/// scale factor E and 18–19 the decimal scale factor D, both sign-and-magnitude (WMO Manual on
/// Codes, GRIB2 regulation 92.1.5), and Y = (R + X·2^E)·10^−D, so values step by 2^E·10^−D.
/// 0 for other templates or a short section.
///
/// ```
/// use trackswing::read::grib::catalog::packing_quantum;
/// let mut s5 = vec![0u8; 21];
/// s5[15..17].copy_from_slice(&0x8002u16.to_be_bytes()); // E = −2
/// s5[17..19].copy_from_slice(&1u16.to_be_bytes()); // D = 1
/// assert_eq!(packing_quantum(0, &s5), 0.025);
/// assert_eq!(packing_quantum(4, &s5), 0.0);
/// ```
pub fn packing_quantum(template: u16, s5: &[u8]) -> f64 {
    if !matches!(template, 0 | 2 | 3 | 40 | 41 | 42) || s5.len() < 19 {
        return 0.0;
    }
    let signed = |hi: u8, lo: u8| {
        let v = i32::from(u16::from_be_bytes([hi & 0x7f, lo]));
        if hi & 0x80 != 0 {
            -v
        } else {
            v
        }
    };
    let (e, d) = (signed(s5[15], s5[16]), signed(s5[17], s5[18]));
    2f64.powi(e) * 10f64.powi(-d)
}
