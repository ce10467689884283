//! NumPy array files, written by hand to the documented formats: `.npy` (NumPy Enhancement
//! Proposal 1, "A simple file format for NumPy arrays", format version 1.0) and `.npz` (a
//! ZIP archive of `.npy` members named `<array>.npy`, as `numpy.savez` writes it; the
//! archive follows PKWARE's APPNOTE.TXT with every member stored, not compressed).
//!
//! A `.npy` file is the magic string `\x93NUMPY`, the version bytes 1 and 0, the header
//! length (little-endian u16), then the header: a Python dictionary literal with `descr`
//! (the dtype: `<f8`, `<c16`, `<i8` or `<U<n>` here), `fortran_order` (always `False`: C
//! order, the last index varies fastest) and `shape`, padded with spaces and ended with a
//! newline so that the data starts at a multiple of 64 bytes. The data follows, little
//! endian.
//!
//! ```
//! use sweepgate_host::formats::npy::{npy_bytes, Array};
//! let a = Array::f64("x", vec![2], &[1.0, 2.0]).unwrap();
//! let b = npy_bytes(&a).unwrap();
//! assert_eq!(&b[..6], b"\x93NUMPY");
//! assert_eq!(b.len(), 128 + 16);
//! ```

use std::fmt;

use num_complex::Complex64;

/// Why an array or archive cannot be written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NpyError {
    /// The data does not hold the product of the shape's sizes.
    ShapeMismatch {
        /// The array's name.
        name: String,
        /// Values the shape needs.
        needed: usize,
        /// Values given.
        given: usize,
    },
    /// The header would not fit the version 1.0 length field.
    HeaderTooLong(String),
    /// The archive would need ZIP64 (a member or the whole over 4 GiB, or 65535 members).
    ArchiveTooLarge,
}

impl fmt::Display for NpyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NpyError::ShapeMismatch {
                name,
                needed,
                given,
            } => write!(
                f,
                "array `{name}`: its shape needs {needed} values but {given} were given"
            ),
            NpyError::HeaderTooLong(name) => {
                write!(f, "array `{name}`: its header is over 65535 bytes")
            }
            NpyError::ArchiveTooLarge => write!(
                f,
                "the archive would pass 4 GiB or 65535 members (ZIP64 is not written)"
            ),
        }
    }
}

impl std::error::Error for NpyError {}

/// One named array: its dtype, shape and little-endian bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct Array {
    /// The name (the `.npz` member is `<name>.npy`).
    pub name: String,
    /// The dtype as NumPy writes it (`<f8`, `<c16`, `<i8`, `<U<n>`).
    pub descr: String,
    /// Sizes, outermost first.
    pub shape: Vec<usize>,
    /// The data, C order, little endian.
    pub data: Vec<u8>,
}

impl Array {
    fn checked(name: &str, shape: &[usize], given: usize) -> Result<(), NpyError> {
        let needed = shape.iter().product::<usize>();
        if needed != given {
            return Err(NpyError::ShapeMismatch {
                name: name.to_string(),
                needed,
                given,
            });
        }
        Ok(())
    }

    /// 64-bit floats (`<f8`).
    pub fn f64(name: &str, shape: Vec<usize>, values: &[f64]) -> Result<Self, NpyError> {
        Self::checked(name, &shape, values.len())?;
        let data = values.iter().flat_map(|v| v.to_le_bytes()).collect();
        Ok(Self {
            name: name.to_string(),
            descr: "<f8".into(),
            shape,
            data,
        })
    }

    /// 64-bit signed integers (`<i8`).
    pub fn i64(name: &str, shape: Vec<usize>, values: &[i64]) -> Result<Self, NpyError> {
        Self::checked(name, &shape, values.len())?;
        let data = values.iter().flat_map(|v| v.to_le_bytes()).collect();
        Ok(Self {
            name: name.to_string(),
            descr: "<i8".into(),
            shape,
            data,
        })
    }

    /// Complex numbers of two 64-bit floats (`<c16`: real part, then imaginary part).
    pub fn c128(name: &str, shape: Vec<usize>, values: &[Complex64]) -> Result<Self, NpyError> {
        Self::checked(name, &shape, values.len())?;
        let data = values
            .iter()
            .flat_map(|v| v.re.to_le_bytes().into_iter().chain(v.im.to_le_bytes()))
            .collect();
        Ok(Self {
            name: name.to_string(),
            descr: "<c16".into(),
            shape,
            data,
        })
    }

    /// A one-dimensional array of strings (`<U<n>`: n UTF-32 code units each, zero padded).
    pub fn text(name: &str, values: &[&str]) -> Self {
        let width = values
            .iter()
            .map(|s| s.chars().count())
            .max()
            .unwrap_or(0)
            .max(1);
        let mut data = Vec::with_capacity(values.len() * width * 4);
        for s in values {
            let mut n = 0;
            for c in s.chars() {
                data.extend_from_slice(&u32::from(c).to_le_bytes());
                n += 1;
            }
            data.resize(data.len() + (width - n) * 4, 0);
        }
        Self {
            name: name.to_string(),
            descr: format!("<U{width}"),
            shape: vec![values.len()],
            data,
        }
    }
}

/// The header dictionary, padded so that magic + length + header is a multiple of 64.
fn header(a: &Array) -> Result<Vec<u8>, NpyError> {
    let shape = match a.shape.as_slice() {
        [one] => format!("({one},)"),
        s => format!(
            "({})",
            s.iter()
                .map(|n| n.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let mut h = format!(
        "{{'descr': '{}', 'fortran_order': False, 'shape': {shape}, }}",
        a.descr
    );
    let unpadded = 10 + h.len() + 1;
    h.push_str(&" ".repeat((64 - unpadded % 64) % 64));
    h.push('\n');
    if h.len() > usize::from(u16::MAX) {
        return Err(NpyError::HeaderTooLong(a.name.clone()));
    }
    Ok(h.into_bytes())
}

/// The `.npy` file of one array (format version 1.0).
pub fn npy_bytes(a: &Array) -> Result<Vec<u8>, NpyError> {
    let h = header(a)?;
    let mut out = Vec::with_capacity(10 + h.len() + a.data.len());
    out.extend_from_slice(b"\x93NUMPY\x01\x00");
    out.extend_from_slice(&(h.len() as u16).to_le_bytes());
    out.extend_from_slice(&h);
    out.extend_from_slice(&a.data);
    Ok(out)
}

/// MS-DOS date of 1980-01-01 (the earliest a ZIP member can carry), time 00:00: fixed, so
/// that the same arrays give the same bytes.
const DOS_DATE: u16 = (1 << 5) | 1;

/// One member's fields shared by its local header and its central directory entry.
struct Member {
    name: Vec<u8>,
    crc: u32,
    size: u32,
    offset: u32,
}

fn put16(out: &mut Vec<u8>, v: u16) {
    out.extend_from_slice(&v.to_le_bytes());
}

fn put32(out: &mut Vec<u8>, v: u32) {
    out.extend_from_slice(&v.to_le_bytes());
}

/// Version 2.0 of the format, no flags, stored, fixed time and date, CRC, both sizes.
fn common_fields(out: &mut Vec<u8>, m: &Member) {
    put16(out, 20);
    put16(out, 0);
    put16(out, 0);
    put16(out, 0);
    put16(out, DOS_DATE);
    put32(out, m.crc);
    put32(out, m.size);
    put32(out, m.size);
    put16(out, m.name.len() as u16);
    put16(out, 0);
}

/// The `.npz` archive of `arrays`: one stored member `<name>.npy` per array.
pub fn npz_bytes(arrays: &[Array]) -> Result<Vec<u8>, NpyError> {
    let too_large = |n: usize| u32::try_from(n).map_err(|_| NpyError::ArchiveTooLarge);
    if arrays.len() >= usize::from(u16::MAX) {
        return Err(NpyError::ArchiveTooLarge);
    }
    let mut out = Vec::new();
    let mut members = Vec::with_capacity(arrays.len());
    for a in arrays {
        let body = npy_bytes(a)?;
        let m = Member {
            name: format!("{}.npy", a.name).into_bytes(),
            crc: crc32fast::hash(&body),
            size: too_large(body.len())?,
            offset: too_large(out.len())?,
        };
        put32(&mut out, 0x0403_4b50);
        common_fields(&mut out, &m);
        out.extend_from_slice(&m.name);
        out.extend_from_slice(&body);
        members.push(m);
    }
    let directory_at = too_large(out.len())?;
    for m in &members {
        put32(&mut out, 0x0201_4b50);
        put16(&mut out, 20);
        common_fields(&mut out, m);
        put16(&mut out, 0); // comment length
        put16(&mut out, 0); // disk number
        put16(&mut out, 0); // internal attributes
        put32(&mut out, 0); // external attributes
        put32(&mut out, m.offset);
        out.extend_from_slice(&m.name);
    }
    let directory_size = too_large(out.len())? - directory_at;
    put32(&mut out, 0x0605_4b50);
    put16(&mut out, 0);
    put16(&mut out, 0);
    put16(&mut out, members.len() as u16);
    put16(&mut out, members.len() as u16);
    put32(&mut out, directory_size);
    put32(&mut out, directory_at);
    put16(&mut out, 0);
    too_large(out.len())?;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_one_element_array_matches_numpy_save_byte_for_byte() {
        // `numpy.save(f, numpy.array([1.0]))` (NumPy 1.x and 2.x) writes this header:
        // 118 bytes, so that the data starts at byte 128.
        let a = Array::f64("x", vec![1], &[1.0]).unwrap();
        let b = npy_bytes(&a).unwrap();
        let want_header = "{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }";
        assert_eq!(&b[..10], b"\x93NUMPY\x01\x00\x76\x00");
        let h = std::str::from_utf8(&b[10..128]).unwrap();
        assert_eq!(h.trim_end(), want_header);
        assert!(h.ends_with('\n'));
        assert_eq!(&b[128..], &1.0f64.to_le_bytes());
    }

    #[test]
    fn shapes_are_written_as_python_tuples_and_checked() {
        let z = Complex64::new(0.5, -0.25);
        let a = Array::c128("d", vec![2, 3, 1], &[z; 6]).unwrap();
        let b = npy_bytes(&a).unwrap();
        let hlen = usize::from(u16::from_le_bytes([b[8], b[9]]));
        assert_eq!((10 + hlen) % 64, 0);
        let h = std::str::from_utf8(&b[10..10 + hlen]).unwrap();
        assert!(h.contains("'shape': (2, 3, 1)"), "{h}");
        assert!(h.contains("'descr': '<c16'"), "{h}");
        assert_eq!(b.len(), 10 + hlen + 6 * 16);
        assert_eq!(&b[10 + hlen..10 + hlen + 8], &0.5f64.to_le_bytes());
        assert_eq!(
            Array::f64("x", vec![2, 2], &[1.0; 3]),
            Err(NpyError::ShapeMismatch {
                name: "x".into(),
                needed: 4,
                given: 3
            })
        );
    }

    #[test]
    fn strings_are_utf32_padded_to_the_longest() {
        let a = Array::text("t", &["raw", "gated"]);
        assert_eq!(a.descr, "<U5");
        assert_eq!(a.data.len(), 2 * 5 * 4);
        assert_eq!(&a.data[..4], &u32::from('r').to_le_bytes());
        assert_eq!(&a.data[12..20], &[0; 8]);
    }

    #[test]
    fn the_archive_directory_points_at_each_member() {
        let arrays = [
            Array::f64("a", vec![2], &[1.0, 2.0]).unwrap(),
            Array::i64("b", vec![1], &[7]).unwrap(),
        ];
        let z = npz_bytes(&arrays).unwrap();
        // End of central directory: last 22 bytes.
        let end = &z[z.len() - 22..];
        assert_eq!(&end[..4], &0x0605_4b50u32.to_le_bytes());
        let rd32 =
            |b: &[u8], at: usize| u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]]);
        let rd16 = |b: &[u8], at: usize| usize::from(u16::from_le_bytes([b[at], b[at + 1]]));
        assert_eq!(rd16(end, 10), 2);
        let mut at = rd32(end, 16) as usize;
        for a in &arrays {
            assert_eq!(rd32(&z, at), 0x0201_4b50);
            let size = rd32(&z, at + 24) as usize;
            let name_len = rd16(&z, at + 28);
            let local = rd32(&z, at + 42) as usize;
            let name = &z[at + 46..at + 46 + name_len];
            assert_eq!(name, format!("{}.npy", a.name).as_bytes());
            assert_eq!(rd32(&z, local), 0x0403_4b50);
            let body_at = local + 30 + name_len;
            let body = &z[body_at..body_at + size];
            assert_eq!(body, npy_bytes(a).unwrap().as_slice());
            assert_eq!(rd32(&z, at + 16), crc32fast::hash(body));
            at += 46 + name_len;
        }
    }
}
