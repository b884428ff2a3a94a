//! GDSII stream records: a writer for the handful a mask needs (library,
//! structures, boundaries, text, structure references) and a reader that
//! dumps any stream as text, one record a line (the snapshot tests compare
//! those dumps, never raw bytes).
//!
//! The format as publicly described (Calma, "GDSII Stream Format Manual",
//! release 6.0, 1987; citation from memory): a stream is a sequence of records, each a 2-byte
//! big-endian length (header included), a record type byte and a data type
//! byte (0 none, 1 bit array, 2 two-byte integers, 3 four-byte integers,
//! 5 eight-byte reals, 6 ASCII text padded with NUL to an even length).
//! Eight-byte reals are excess-64 base-16: a sign bit, a 7-bit exponent
//! `e` and a 56-bit fraction `f`, the value `(-1)^s (f / 2^56) 16^(e - 64)`
//! with `1/16 <= f / 2^56 < 1`. An f64 converts exactly: its 53-bit
//! significand shifted by up to three bits fits the 56-bit fraction.
//!
//! Output is deterministic: both time stamps are 2000-01-01 00:00:00.

use std::fmt::Write as _;

/// Record types (first byte) and their data types (second byte).
mod rec {
    pub const HEADER: u16 = 0x0002;
    pub const BGNLIB: u16 = 0x0102;
    pub const LIBNAME: u16 = 0x0206;
    pub const UNITS: u16 = 0x0305;
    pub const ENDLIB: u16 = 0x0400;
    pub const BGNSTR: u16 = 0x0502;
    pub const STRNAME: u16 = 0x0606;
    pub const ENDSTR: u16 = 0x0700;
    pub const BOUNDARY: u16 = 0x0800;
    pub const SREF: u16 = 0x0A00;
    pub const TEXT: u16 = 0x0C00;
    pub const LAYER: u16 = 0x0D02;
    pub const DATATYPE: u16 = 0x0E02;
    pub const XY: u16 = 0x1003;
    pub const ENDEL: u16 = 0x1100;
    pub const SNAME: u16 = 0x1206;
    pub const TEXTTYPE: u16 = 0x1602;
    pub const PRESENTATION: u16 = 0x1701;
    pub const STRING: u16 = 0x1906;
    pub const STRANS: u16 = 0x1A01;
    pub const MAG: u16 = 0x1B05;
}

/// The most vertices a boundary may have (closing point included) in the
/// stream format's 2-byte record length: (65535 - 4) / 8.
pub const MAX_BOUNDARY_POINTS: usize = 8191;

const STAMP: [i16; 12] = [2000, 1, 1, 0, 0, 0, 2000, 1, 1, 0, 0, 0];

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GdsError {
    #[error("{0} cannot be written as a GDSII eight-byte real")]
    Real(f64),
    #[error("a boundary of {0} points is more than GDSII's {MAX_BOUNDARY_POINTS}")]
    TooManyPoints(usize),
    #[error("a coordinate of {0} database units is outside GDSII's 32-bit range")]
    Coordinate(i64),
    #[error("the stream ends inside a record at byte {0}")]
    Truncated(usize),
    #[error("a record at byte {0} has the impossible length {1}")]
    BadLength(usize, usize),
}

/// `x` as a GDSII eight-byte real (module doc), exactly.
pub fn real8(x: f64) -> Result<[u8; 8], GdsError> {
    if x == 0.0 {
        return Ok([0; 8]);
    }
    if !x.is_finite() || x.abs() < f64::MIN_POSITIVE {
        return Err(GdsError::Real(x));
    }
    let bits = x.to_bits();
    let sign = (bits >> 63) as u8;
    // |x| = (M / 2^53) 2^k with M the 53-bit significand.
    let significand = (bits & ((1u64 << 52) - 1)) | (1u64 << 52);
    let k = ((bits >> 52) & 0x7ff) as i64 - 1022;
    // 16^e with e = ceil(k / 4): the fraction is M / 2^53 / 2^s, s = 4e - k.
    let e = k.div_euclid(4) + i64::from(k.rem_euclid(4) != 0);
    let s = 4 * e - k;
    let biased = e + 64;
    if !(0..=127).contains(&biased) {
        return Err(GdsError::Real(x));
    }
    let fraction = significand << (3 - s);
    let mut out = [0u8; 8];
    out[0] = (sign << 7) | biased as u8;
    out[1..].copy_from_slice(&fraction.to_be_bytes()[1..]);
    Ok(out)
}

/// A GDSII eight-byte real as an f64 (rounded where its 56 bits exceed 53).
pub fn real8_value(b: [u8; 8]) -> f64 {
    let sign = if b[0] & 0x80 != 0 { -1.0 } else { 1.0 };
    let exponent = i32::from(b[0] & 0x7f) - 64;
    let mut f = [0u8; 8];
    f[1..].copy_from_slice(&b[1..]);
    let fraction = u64::from_be_bytes(f) as f64 / 2f64.powi(56);
    sign * fraction * 16f64.powi(exponent)
}

/// Writes a library record by record.
pub struct GdsWriter {
    out: Vec<u8>,
}

impl GdsWriter {
    /// A library of database unit `db_unit_m` metres and user unit
    /// `user_units_per_db` (1e-9 and 1e-3 for nanometres and micrometres).
    pub fn new(name: &str, user_units_per_db: f64, db_unit_m: f64) -> Result<GdsWriter, GdsError> {
        let mut w = GdsWriter { out: Vec::new() };
        w.int2(rec::HEADER, &[600]);
        w.int2(rec::BGNLIB, &STAMP);
        w.text_record(rec::LIBNAME, name);
        let mut units = Vec::with_capacity(16);
        units.extend_from_slice(&real8(user_units_per_db)?);
        units.extend_from_slice(&real8(db_unit_m)?);
        w.record(rec::UNITS, &units);
        Ok(w)
    }

    fn record(&mut self, kind: u16, data: &[u8]) {
        let len = (4 + data.len()) as u16;
        self.out.extend_from_slice(&len.to_be_bytes());
        self.out.extend_from_slice(&kind.to_be_bytes());
        self.out.extend_from_slice(data);
    }

    fn int2(&mut self, kind: u16, v: &[i16]) {
        let data: Vec<u8> = v.iter().flat_map(|x| x.to_be_bytes()).collect();
        self.record(kind, &data);
    }

    fn text_record(&mut self, kind: u16, s: &str) {
        let mut data: Vec<u8> = s
            .chars()
            .map(|c| {
                if c.is_ascii() && !c.is_ascii_control() {
                    c as u8
                } else {
                    b'?'
                }
            })
            .collect();
        if data.len() % 2 == 1 {
            data.push(0);
        }
        self.record(kind, &data);
    }

    fn xy(&mut self, points: &[(i64, i64)]) -> Result<(), GdsError> {
        let mut data = Vec::with_capacity(points.len() * 8);
        for &(x, y) in points {
            for v in [x, y] {
                let v32 = i32::try_from(v).map_err(|_| GdsError::Coordinate(v))?;
                data.extend_from_slice(&v32.to_be_bytes());
            }
        }
        self.record(rec::XY, &data);
        Ok(())
    }

    pub fn begin_structure(&mut self, name: &str) {
        self.int2(rec::BGNSTR, &STAMP);
        self.text_record(rec::STRNAME, name);
    }

    pub fn end_structure(&mut self) {
        self.record(rec::ENDSTR, &[]);
    }

    /// A closed polygon (the closing point is added) in database units.
    pub fn boundary(
        &mut self,
        layer: u16,
        datatype: u16,
        points: &[(i64, i64)],
    ) -> Result<(), GdsError> {
        if points.len() + 1 > MAX_BOUNDARY_POINTS {
            return Err(GdsError::TooManyPoints(points.len() + 1));
        }
        self.record(rec::BOUNDARY, &[]);
        self.int2(rec::LAYER, &[layer as i16]);
        self.int2(rec::DATATYPE, &[datatype as i16]);
        let mut closed = points.to_vec();
        if let Some(&first) = points.first() {
            closed.push(first);
        }
        self.xy(&closed)?;
        self.record(rec::ENDEL, &[]);
        Ok(())
    }

    /// A text label at `at`, `height` user units high, anchored at its
    /// middle left.
    pub fn text(
        &mut self,
        layer: u16,
        texttype: u16,
        at: (i64, i64),
        height: f64,
        s: &str,
    ) -> Result<(), GdsError> {
        self.record(rec::TEXT, &[]);
        self.int2(rec::LAYER, &[layer as i16]);
        self.int2(rec::TEXTTYPE, &[texttype as i16]);
        // Bits 10-11 vertical (01 middle), 12-13 horizontal (00 left).
        self.record(rec::PRESENTATION, &0x0004u16.to_be_bytes());
        self.record(rec::STRANS, &0u16.to_be_bytes());
        self.record(rec::MAG, &real8(height)?);
        self.xy(&[at])?;
        self.text_record(rec::STRING, s);
        self.record(rec::ENDEL, &[]);
        Ok(())
    }

    /// An instance of structure `name` with its origin at `at`.
    pub fn sref(&mut self, name: &str, at: (i64, i64)) -> Result<(), GdsError> {
        self.record(rec::SREF, &[]);
        self.text_record(rec::SNAME, name);
        self.xy(&[at])?;
        self.record(rec::ENDEL, &[]);
        Ok(())
    }

    pub fn finish(mut self) -> Vec<u8> {
        self.record(rec::ENDLIB, &[]);
        self.out
    }
}

fn record_name(kind: u8) -> &'static str {
    match kind {
        0x00 => "HEADER",
        0x01 => "BGNLIB",
        0x02 => "LIBNAME",
        0x03 => "UNITS",
        0x04 => "ENDLIB",
        0x05 => "BGNSTR",
        0x06 => "STRNAME",
        0x07 => "ENDSTR",
        0x08 => "BOUNDARY",
        0x09 => "PATH",
        0x0A => "SREF",
        0x0B => "AREF",
        0x0C => "TEXT",
        0x0D => "LAYER",
        0x0E => "DATATYPE",
        0x0F => "WIDTH",
        0x10 => "XY",
        0x11 => "ENDEL",
        0x12 => "SNAME",
        0x13 => "COLROW",
        0x16 => "TEXTTYPE",
        0x17 => "PRESENTATION",
        0x19 => "STRING",
        0x1A => "STRANS",
        0x1B => "MAG",
        0x1C => "ANGLE",
        _ => "RECORD",
    }
}

/// The stream as text, one record a line: its name and its data (integers,
/// reals to 15 significant digits, text, XY as `x,y` pairs).
pub fn dump(bytes: &[u8]) -> Result<String, GdsError> {
    let mut out = String::new();
    let mut at = 0;
    while at < bytes.len() {
        if at + 4 > bytes.len() {
            return Err(GdsError::Truncated(at));
        }
        let len = usize::from(u16::from_be_bytes([bytes[at], bytes[at + 1]]));
        if len < 4 || len % 2 == 1 {
            return Err(GdsError::BadLength(at, len));
        }
        if at + len > bytes.len() {
            return Err(GdsError::Truncated(at));
        }
        let (kind, dtype) = (bytes[at + 2], bytes[at + 3]);
        let data = &bytes[at + 4..at + len];
        out.push_str(record_name(kind));
        match dtype {
            1 | 2 => {
                for c in data.chunks_exact(2) {
                    let v = i16::from_be_bytes([c[0], c[1]]);
                    if dtype == 1 {
                        let _ = write!(out, " 0x{:04x}", v as u16);
                    } else {
                        let _ = write!(out, " {v}");
                    }
                }
            }
            3 => {
                let v: Vec<i32> = data
                    .chunks_exact(4)
                    .map(|c| i32::from_be_bytes([c[0], c[1], c[2], c[3]]))
                    .collect();
                if kind == 0x10 {
                    for p in v.chunks_exact(2) {
                        let _ = write!(out, " {},{}", p[0], p[1]);
                    }
                } else {
                    for x in v {
                        let _ = write!(out, " {x}");
                    }
                }
            }
            5 => {
                for c in data.chunks_exact(8) {
                    let b: [u8; 8] = c.try_into().expect("eight bytes");
                    let _ = write!(out, " {:.15e}", real8_value(b));
                }
            }
            6 => {
                let text: String = data
                    .iter()
                    .take_while(|&&b| b != 0)
                    .map(|&b| b as char)
                    .collect();
                let _ = write!(out, " {text}");
            }
            _ => {}
        }
        out.push('\n');
        at += len;
        if kind == 0x04 {
            break;
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn eight_byte_reals_match_values_worked_by_hand() {
        // Worked by hand from the format description (module doc), and
        // checked with Python's exact `fractions.Fraction`: the fraction is
        // in [1/16, 1), so 1 = (1/16) 16^1: exponent 65 = 0x41, fraction
        // 0x10000000000000; 0.5 = (8/16) 16^0: 0x40, 0x80...; -2 =
        // -(2/16) 16^1: sign bit with 0x41, 0x20...; 16 = (1/16) 16^2.
        let cases: [(f64, [u8; 8]); 6] = [
            (1.0, [0x41, 0x10, 0, 0, 0, 0, 0, 0]),
            (0.5, [0x40, 0x80, 0, 0, 0, 0, 0, 0]),
            (-2.0, [0xC1, 0x20, 0, 0, 0, 0, 0, 0]),
            (16.0, [0x42, 0x10, 0, 0, 0, 0, 0, 0]),
            (1.0 / 16.0, [0x40, 0x10, 0, 0, 0, 0, 0, 0]),
            (0.0, [0; 8]),
        ];
        for (x, want) in cases {
            assert_eq!(real8(x).unwrap(), want, "{x}");
            assert_eq!(real8_value(want), x);
        }
        // 1e-3 (the user unit of a micrometre library): f64(1e-3) is
        // 0x3F50624DD2F1A9FC, i.e. 0x10624DD2F1A9FC / 2^53 * 2^-9; with
        // 16^-2 the fraction is that significand over 2^54: shifted left
        // by two into 56 bits, 0x4189374BC6A7F0, exponent 62 = 0x3E.
        assert_eq!(
            real8(1e-3).unwrap(),
            [0x3E, 0x41, 0x89, 0x37, 0x4B, 0xC6, 0xA7, 0xF0]
        );
        // 1e-9 (a nanometre in metres): f64 0x3E112E0BE826D695 =
        // 0x112E0BE826D695 / 2^53 * 2^-29; 16^-7 = 2^-28, so s = 1 and
        // the fraction is the significand shifted left by two:
        // 0x44B82FA09B5A54, exponent 57 = 0x39.
        assert_eq!(
            real8(1e-9).unwrap(),
            [0x39, 0x44, 0xB8, 0x2F, 0xA0, 0x9B, 0x5A, 0x54]
        );
        for x in [1e-3, 1e-9, 3.25, -123.456, 1e30, 7e-70] {
            assert_eq!(real8_value(real8(x).unwrap()), x);
        }
        assert!(real8(f64::NAN).is_err());
        assert!(real8(1e80).is_err());
    }

    #[test]
    fn a_small_library_dumps_record_by_record() {
        let mut w = GdsWriter::new("lib", 1e-3, 1e-9).unwrap();
        w.begin_structure("square");
        w.boundary(1, 0, &[(0, 0), (1000, 0), (1000, 1000), (0, 1000)])
            .unwrap();
        w.end_structure();
        w.begin_structure("top");
        w.sref("square", (-5, 7)).unwrap();
        w.text(100, 0, (1, 2), 0.5, "hi").unwrap();
        w.end_structure();
        let bytes = w.finish();
        assert_eq!(bytes.len() % 2, 0);
        let text = dump(&bytes).unwrap();
        let want = "HEADER 600
BGNLIB 2000 1 1 0 0 0 2000 1 1 0 0 0
LIBNAME lib
UNITS 1.000000000000000e-3 1.000000000000000e-9
BGNSTR 2000 1 1 0 0 0 2000 1 1 0 0 0
STRNAME square
BOUNDARY
LAYER 1
DATATYPE 0
XY 0,0 1000,0 1000,1000 0,1000 0,0
ENDEL
ENDSTR
BGNSTR 2000 1 1 0 0 0 2000 1 1 0 0 0
STRNAME top
SREF
SNAME square
XY -5,7
ENDEL
TEXT
LAYER 100
TEXTTYPE 0
PRESENTATION 0x0004
STRANS 0x0000
MAG 5.000000000000000e-1
XY 1,2
STRING hi
ENDEL
ENDSTR
ENDLIB
";
        assert_eq!(text, want);
        assert!(matches!(
            dump(&bytes[..bytes.len() - 1]),
            Err(GdsError::Truncated(_))
        ));
        let mut w = GdsWriter::new("lib", 1e-3, 1e-9).unwrap();
        assert!(w.boundary(1, 0, &vec![(0, 0); 9000]).is_err());
        assert!(w.sref("x", (1 << 40, 0)).is_err());
    }
}
