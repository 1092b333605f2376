//! Splitting a GRIB2 file into messages and fields without decoding any values.
//!
//! A message (WMO-No. 306, Vol. I.2, GRIB2 regulations 92.1–92.10) is Section 0 (16 octets:
//! "GRIB", two reserved octets, discipline, edition number, total length as an 8-octet
//! integer), then sections 1–7, each starting with its length (4 octets) and number (1 octet),
//! and ends with "7777" (Section 8). Sections 2–7, 3–7 or 4–7 may repeat inside one message; each
//! Section 7 closes one field, which uses the latest Sections 1, 3, 4, 5 and 6 before it. A bit
//! map indicator of 254 in Section 6 (code table 6.0) means "the bit map previously defined in
//! this message applies", so the scanner hands such a field the location of that earlier bit
//! map.
//!
//! Only sections 1, 3 and 4 (a few dozen octets) are read here; sections 5–7 are remembered as
//! file offsets and read when the field is decoded.

use super::GribError;
use std::io::{Read, Seek, SeekFrom};
use std::path::Path;

/// Where a section lies in its file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Span {
    /// Offset of the section's first octet (its length field) in the file.
    pub offset: u64,
    /// Length of the section, octets, including its 5-octet header.
    pub len: u32,
}

/// One field of a message, with the sections that describe it.
#[derive(Clone, Debug)]
pub struct RawField {
    /// 1-based message number in the file.
    pub message: usize,
    /// 1-based field number within the message (1 unless sections repeat).
    pub field: usize,
    /// Discipline (Section 0, code table 0.0).
    pub discipline: u8,
    /// Section 1, whole.
    pub sect1: Vec<u8>,
    /// Section 3, whole.
    pub sect3: Vec<u8>,
    /// Section 4, whole.
    pub sect4: Vec<u8>,
    /// Section 5.
    pub sect5: Span,
    /// Section 6 as written (its indicator may be 254).
    pub sect6: Span,
    /// Section 7.
    pub sect7: Span,
    /// The bit map that applies when Section 6 says 254: the Section 6 of an earlier field of
    /// the same message that holds a bit map (indicator 0).
    pub bitmap: Option<Span>,
    /// Bit-map indicator of this field's own Section 6 (code table 6.0).
    pub bitmap_indicator: u8,
}

/// What a file holds.
#[derive(Debug, Default)]
pub struct Scanned {
    /// Every GRIB2 field.
    pub fields: Vec<RawField>,
    /// Messages of GRIB edition 1 (not read by this reader), by message number.
    pub edition1: Vec<usize>,
}

fn io(path: &Path) -> impl Fn(std::io::Error) -> GribError + '_ {
    move |source| GribError::Io {
        path: path.to_path_buf(),
        source,
    }
}

fn be_u32(b: &[u8]) -> u32 {
    u32::from_be_bytes([b[0], b[1], b[2], b[3]])
}

/// Reads `len` octets at `offset`.
pub fn read_span<R: Read + Seek>(r: &mut R, span: Span) -> std::io::Result<Vec<u8>> {
    r.seek(SeekFrom::Start(span.offset))?;
    let mut buf = vec![0u8; span.len as usize];
    r.read_exact(&mut buf)?;
    Ok(buf)
}

/// Finds the next "GRIB" at or after `from`; `None` at the end of the file.
fn find_marker<R: Read + Seek>(r: &mut R, from: u64, end: u64) -> std::io::Result<Option<u64>> {
    let mut pos = from;
    let mut buf = vec![0u8; 64 * 1024];
    while pos + 4 <= end {
        r.seek(SeekFrom::Start(pos))?;
        let want = ((end - pos) as usize).min(buf.len());
        r.read_exact(&mut buf[..want])?;
        if let Some(i) = buf[..want].windows(4).position(|w| w == b"GRIB") {
            return Ok(Some(pos + i as u64));
        }
        if want < 4 {
            break;
        }
        pos += (want - 3) as u64;
    }
    Ok(None)
}

/// Splits `path` into fields. A file that does not start with a GRIB message, a message that
/// runs past the end of the file or whose sections do not add up, is an error naming the
/// message; octets between messages (padding some archives add) are passed over.
pub fn scan(path: &Path) -> Result<Scanned, GribError> {
    let mut f = std::fs::File::open(path).map_err(io(path))?;
    let end = f.metadata().map_err(io(path))?.len();
    let mut out = Scanned::default();
    let mut pos = 0u64;
    let mut message = 0usize;
    loop {
        let start = match find_marker(&mut f, pos, end).map_err(io(path))? {
            Some(s) => s,
            None if message == 0 => {
                return Err(GribError::NotGrib {
                    path: path.to_path_buf(),
                })
            }
            None => break,
        };
        if message == 0 && start != 0 {
            return Err(GribError::NotGrib {
                path: path.to_path_buf(),
            });
        }
        message += 1;
        let bad = |what: String| GribError::Structure {
            path: path.to_path_buf(),
            message,
            what,
        };
        if end - start < 16 {
            return Err(bad(format!(
                "truncated: the file ends {} octets into the message, inside Section 0 (16 octets)",
                end - start
            )));
        }
        let mut s0 = [0u8; 16];
        f.seek(SeekFrom::Start(start)).map_err(io(path))?;
        f.read_exact(&mut s0).map_err(io(path))?;
        let edition = s0[7];
        let total = if edition == 1 {
            // GRIB1 Section 0 holds a 3-octet total length.
            u64::from(u32::from_be_bytes([0, s0[4], s0[5], s0[6]]))
        } else {
            u64::from_be_bytes(s0[8..16].try_into().expect("8 octets"))
        };
        if total < 20 {
            return Err(bad(format!(
                "Section 0 gives a total length of {total} octets, too short for a message"
            )));
        }
        if start + total > end {
            return Err(bad(format!(
                "truncated: the message declares {total} octets but the file ends after {} (is the download complete?)",
                end - start
            )));
        }
        let mut tail = [0u8; 4];
        f.seek(SeekFrom::Start(start + total - 4))
            .map_err(io(path))?;
        f.read_exact(&mut tail).map_err(io(path))?;
        if &tail != b"7777" {
            return Err(bad(format!(
                "does not end with \"7777\" at octet {total} (corrupt, or truncated and followed by other data)"
            )));
        }
        pos = start + total;
        match edition {
            2 => scan_message(&mut f, path, message, start, total, s0[6], &mut out.fields)?,
            1 => out.edition1.push(message),
            e => return Err(bad(format!("GRIB edition {e} is not known (expected 2)"))),
        }
    }
    Ok(out)
}

fn scan_message(
    f: &mut std::fs::File,
    path: &Path,
    message: usize,
    start: u64,
    total: u64,
    discipline: u8,
    out: &mut Vec<RawField>,
) -> Result<(), GribError> {
    let bad = |what: String| GribError::Structure {
        path: path.to_path_buf(),
        message,
        what,
    };
    let body_end = start + total - 4;
    let mut pos = start + 16;
    let (mut s1, mut s3, mut s4) = (Vec::new(), Vec::new(), Vec::new());
    let (mut s5, mut s6): (Option<Span>, Option<(Span, u8)>) = (None, None);
    let mut last_bitmap: Option<Span> = None;
    let mut field = 0usize;
    let mut previous = 0u8;
    while pos < body_end {
        if body_end - pos < 5 {
            return Err(bad(format!(
                "{} stray octets before \"7777\"",
                body_end - pos
            )));
        }
        let mut h = [0u8; 5];
        f.seek(SeekFrom::Start(pos)).map_err(io(path))?;
        f.read_exact(&mut h).map_err(io(path))?;
        let len = be_u32(&h);
        let num = h[4];
        if len < 5 || pos + u64::from(len) > body_end {
            return Err(bad(format!(
                "Section {num} at octet {} declares {len} octets, which runs past the end of the message",
                pos - start + 1
            )));
        }
        let span = Span { offset: pos, len };
        let order_ok = match num {
            1 => previous == 0,
            2 => previous == 1 || previous == 7,
            3 => matches!(previous, 1 | 2 | 7),
            4 => matches!(previous, 3 | 7),
            5 => previous == 4,
            6 => previous == 5,
            7 => previous == 6,
            _ => false,
        };
        if !order_ok {
            return Err(bad(format!(
                "Section {num} follows Section {previous}; the sections are out of order or the message is corrupt"
            )));
        }
        let read = |f: &mut std::fs::File| read_span(f, span).map_err(io(path));
        match num {
            1 => s1 = read(f)?,
            3 => s3 = read(f)?,
            4 => s4 = read(f)?,
            5 => s5 = Some(span),
            6 => {
                if len < 6 {
                    return Err(bad("Section 6 is shorter than 6 octets".into()));
                }
                let b = read(f)?;
                let indicator = b[5];
                if indicator == 0 {
                    last_bitmap = Some(span);
                }
                s6 = Some((span, indicator));
            }
            7 => {
                field += 1;
                let (sect6, indicator) = s6.expect("Section 6 precedes 7 (order checked)");
                let bitmap = match indicator {
                    254 => Some(last_bitmap.ok_or_else(|| {
                        bad(format!(
                            "field {field}: bit map indicator 254 (previously defined bit map) but no earlier field of this message defines one"
                        ))
                    })?),
                    _ => None,
                };
                out.push(RawField {
                    message,
                    field,
                    discipline,
                    sect1: s1.clone(),
                    sect3: s3.clone(),
                    sect4: s4.clone(),
                    sect5: s5.expect("Section 5 precedes 6 (order checked)"),
                    sect6,
                    sect7: span,
                    bitmap,
                    bitmap_indicator: indicator,
                });
            }
            _ => {}
        }
        previous = num;
        pos += u64::from(len);
    }
    if previous != 7 {
        return Err(bad(format!(
            "ends after Section {previous}; a message must end with a Section 7 before \"7777\""
        )));
    }
    Ok(())
}
