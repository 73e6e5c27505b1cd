//! NumPy `.npy` files: our own reader and writer of the open format (NumPy Enhancement
//! Proposal 1, "A simple file format for NumPy arrays", format versions 1.0, 2.0 and 3.0).
//!
//! Owns [`NpyHeader`] (parsed header, checked against the file length), the whole-array
//! reader [`read_npy_f64`], the atomic writers [`write_npy_f64`] / [`write_npy_f32`] (format
//! 1.0, C order, little-endian) and [`NpySnapshots`], a [`SnapshotSource`] that seeks into
//! the file block by block so snapshot files larger than memory can be streamed.
//!
//! Supported element types: `<f4`, `<f8` (fields), `|b1`, `|u1`, `<i4` (masks). Big-endian
//! data, structured dtypes and Fortran-ordered arrays are refused with a message that says
//! so (refusing Fortran order keeps the flat index of every reader equal to C order; the
//! message tells the user to save with `np.ascontiguousarray`). This file does no
//! validation beyond the format itself; shapes are checked by the caller, with
//! [`check_shape`] for a uniform message.

use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::ops::Range;
use std::path::{Path, PathBuf};

use super::atomic::write_atomic;
use super::{IoError, SnapshotSource};

const MAGIC: &[u8; 6] = b"\x93NUMPY";
/// Largest header we accept; NumPy itself refuses headers above 10 000 bytes by default.
const MAX_HEADER_LEN: usize = 1 << 20;

/// Element type of an `.npy` array (only the ones crowsnest reads).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NpyDtype {
    /// `<f4`, little-endian IEEE single.
    F4,
    /// `<f8`, little-endian IEEE double.
    F8,
    /// `|b1`, one byte, 0 = false.
    Bool,
    /// `|u1`, unsigned byte.
    U1,
    /// `<i4`, little-endian 32-bit signed integer.
    I4,
}

impl NpyDtype {
    /// Bytes per element.
    pub fn size(self) -> usize {
        match self {
            NpyDtype::F4 | NpyDtype::I4 => 4,
            NpyDtype::F8 => 8,
            NpyDtype::Bool | NpyDtype::U1 => 1,
        }
    }

    /// The `descr` string NumPy writes for this type.
    pub fn descr(self) -> &'static str {
        match self {
            NpyDtype::F4 => "<f4",
            NpyDtype::F8 => "<f8",
            NpyDtype::Bool => "|b1",
            NpyDtype::U1 => "|u1",
            NpyDtype::I4 => "<i4",
        }
    }

    pub fn is_float(self) -> bool {
        matches!(self, NpyDtype::F4 | NpyDtype::F8)
    }

    fn from_descr(path: &Path, descr: &str) -> Result<Self, IoError> {
        let dtype = match descr {
            "<f4" => NpyDtype::F4,
            "<f8" => NpyDtype::F8,
            "|b1" | "<b1" | ">b1" | "=b1" => NpyDtype::Bool,
            "|u1" | "<u1" | ">u1" | "=u1" => NpyDtype::U1,
            "<i4" => NpyDtype::I4,
            other if other.starts_with('>') => {
                return Err(IoError::invalid(
                    path,
                    "header",
                    format!(
                        "big-endian dtype `{other}` is not supported; expected little-endian \
                         <f4 or <f8 (save with `a.astype('<f8')`)"
                    ),
                ))
            }
            other => {
                return Err(IoError::invalid(
                    path,
                    "header",
                    format!(
                        "unsupported dtype `{other}`; expected <f4 or <f8 (float32/float64), \
                         or |b1, |u1, <i4 for masks"
                    ),
                ))
            }
        };
        Ok(dtype)
    }

    fn decode(self, bytes: &[u8]) -> f64 {
        match self {
            NpyDtype::F4 => f64::from(f32::from_le_bytes([bytes[0], bytes[1], bytes[2], bytes[3]])),
            NpyDtype::F8 => f64::from_le_bytes([
                bytes[0], bytes[1], bytes[2], bytes[3], bytes[4], bytes[5], bytes[6], bytes[7],
            ]),
            NpyDtype::Bool | NpyDtype::U1 => f64::from(bytes[0]),
            NpyDtype::I4 => f64::from(i32::from_le_bytes([bytes[0], bytes[1], bytes[2], bytes[3]])),
        }
    }
}

/// A parsed `.npy` header.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NpyHeader {
    pub shape: Vec<usize>,
    pub dtype: NpyDtype,
    /// Byte offset of the first element.
    pub data_offset: u64,
    /// `true` when the file stores the array in Fortran (column-major) order. The readers in
    /// this module refuse such files; the header reader reports it faithfully.
    pub fortran_order: bool,
}

impl NpyHeader {
    /// Number of elements (1 for a 0-d array).
    pub fn n_elements(&self) -> usize {
        self.shape.iter().product()
    }

    /// Refuses Fortran-ordered data with a message saying how to fix the file.
    pub fn require_c_order(&self, path: &Path) -> Result<(), IoError> {
        if self.fortran_order {
            return Err(IoError::invalid(
                path,
                "header",
                "Fortran-ordered (column-major) arrays are refused; save a C-ordered copy \
                 with `np.save(path, np.ascontiguousarray(a))`",
            ));
        }
        Ok(())
    }
}

/// Reads and checks the header of `path`: magic, version, dtype, shape, and that the file is
/// long enough for the data it announces (a truncated file is refused here).
pub fn read_npy_header(path: &Path) -> Result<NpyHeader, IoError> {
    let mut file = File::open(path).map_err(|e| IoError::file(path, e))?;
    let file_len = file.metadata().map_err(|e| IoError::file(path, e))?.len();
    let header = parse_header(path, &mut file)?;
    check_data_length(path, &header, file_len)?;
    Ok(header)
}

/// [`read_npy_header`] on the bytes of a whole file already in memory; `path` only names
/// the file in messages. The path reader and this one share every check.
pub fn parse_npy_header(path: &Path, bytes: &[u8]) -> Result<NpyHeader, IoError> {
    let mut reader = bytes;
    let header = parse_header(path, &mut reader)?;
    check_data_length(path, &header, bytes.len() as u64)?;
    Ok(header)
}

/// Refuses a file too short for the data its header announces. The header parser has
/// already checked that the data size fits in a `usize`.
fn check_data_length(path: &Path, header: &NpyHeader, file_len: u64) -> Result<(), IoError> {
    let n_bytes = (header.n_elements() as u64).saturating_mul(header.dtype.size() as u64);
    let available = file_len.saturating_sub(header.data_offset);
    if available < n_bytes {
        return Err(IoError::invalid(
            path,
            "data",
            format!(
                "truncated: shape {} of {} needs {n_bytes} data bytes, the file holds {available}",
                shape_text(&header.shape),
                header.dtype.descr()
            ),
        ));
    }
    Ok(())
}

fn bad_header(path: &Path, message: impl Into<String>) -> IoError {
    IoError::invalid(path, "header", message)
}

fn parse_header(path: &Path, file: &mut impl Read) -> Result<NpyHeader, IoError> {
    let mut prefix = [0u8; 8];
    read_exact_or(
        path,
        file,
        &mut prefix,
        "the file is shorter than an .npy header",
    )?;
    if &prefix[..6] != MAGIC {
        return Err(bad_header(
            path,
            "not an .npy file (the magic string \\x93NUMPY is missing)",
        ));
    }
    let (major, minor) = (prefix[6], prefix[7]);
    let (header_len, len_bytes) = match major {
        1 => {
            let mut b = [0u8; 2];
            read_exact_or(path, file, &mut b, "truncated header")?;
            (usize::from(u16::from_le_bytes(b)), 2)
        }
        2 | 3 => {
            let mut b = [0u8; 4];
            read_exact_or(path, file, &mut b, "truncated header")?;
            (u32::from_le_bytes(b) as usize, 4)
        }
        _ => {
            return Err(bad_header(
                path,
                format!(
                    "unsupported .npy format version {major}.{minor}; expected 1.0, 2.0 or 3.0"
                ),
            ))
        }
    };
    if header_len > MAX_HEADER_LEN {
        return Err(bad_header(
            path,
            format!("header of {header_len} bytes is implausibly long"),
        ));
    }
    let mut text = vec![0u8; header_len];
    read_exact_or(path, file, &mut text, "truncated header")?;
    // Version 3.0 only differs by allowing UTF-8; versions 1 and 2 are Latin-1, and every
    // header we can use is plain ASCII anyway.
    let text = String::from_utf8_lossy(&text);
    let dict = parse_dict(path, &text)?;
    let descr = match dict.iter().find(|(k, _)| k == "descr") {
        Some((_, PyValue::Str(s))) => s.clone(),
        Some((_, PyValue::Other)) => {
            return Err(bad_header(
                path,
                "unsupported dtype: structured (record) arrays are not supported; expected a \
                 plain <f4 or <f8 array",
            ))
        }
        _ => return Err(bad_header(path, "the header has no `descr` string")),
    };
    let dtype = NpyDtype::from_descr(path, &descr)?;
    let fortran_order = match dict.iter().find(|(k, _)| k == "fortran_order") {
        Some((_, PyValue::Bool(b))) => *b,
        _ => {
            return Err(bad_header(
                path,
                "the header has no `fortran_order` True/False",
            ))
        }
    };
    let shape = match dict.iter().find(|(k, _)| k == "shape") {
        Some((_, PyValue::Tuple(s))) => s.clone(),
        _ => return Err(bad_header(path, "the header has no `shape` tuple")),
    };
    // Every product of axis lengths (the element count, one snapshot's length, the byte
    // count) must fit in a usize: a crafted shape must not wrap around and slip past the
    // length check. Zero-length axes are counted as 1 so a leading 0 cannot hide the rest.
    let fits = shape
        .iter()
        .try_fold(dtype.size(), |acc, &dim| acc.checked_mul(dim.max(1)))
        .is_some_and(|n_bytes| n_bytes <= isize::MAX as usize);
    if !fits {
        return Err(IoError::invalid(
            path,
            "shape",
            format!(
                "shape {} of {} is too large: its size in bytes overflows; expected a real \
                 array's shape",
                shape_text(&shape),
                dtype.descr()
            ),
        ));
    }
    let data_offset = (6 + 2 + len_bytes + header_len) as u64;
    Ok(NpyHeader {
        shape,
        dtype,
        data_offset,
        fortran_order,
    })
}

fn read_exact_or(
    path: &Path,
    file: &mut impl Read,
    buf: &mut [u8],
    what: &str,
) -> Result<(), IoError> {
    file.read_exact(buf).map_err(|e| {
        if e.kind() == std::io::ErrorKind::UnexpectedEof {
            bad_header(path, what.to_string())
        } else {
            IoError::file(path, e)
        }
    })
}

#[derive(Debug, Clone)]
enum PyValue {
    Str(String),
    Bool(bool),
    Tuple(Vec<usize>),
    /// Anything else (a list, as in structured dtypes); enough to give a precise error.
    Other,
}

/// Parses the Python dict literal of an `.npy` header, e.g.
/// `{'descr': '<f8', 'fortran_order': False, 'shape': (3, 4), }`.
fn parse_dict(path: &Path, text: &str) -> Result<Vec<(String, PyValue)>, IoError> {
    let err = |what: &str| {
        bad_header(
            path,
            format!("cannot parse the header dict ({what}): {}", text.trim()),
        )
    };
    let chars: Vec<char> = text.chars().collect();
    let mut pos = 0;
    let skip_ws = |pos: &mut usize| {
        while *pos < chars.len() && chars[*pos].is_whitespace() {
            *pos += 1;
        }
    };
    skip_ws(&mut pos);
    if chars.get(pos) != Some(&'{') {
        return Err(err("expected `{`"));
    }
    pos += 1;
    let mut entries = Vec::new();
    loop {
        skip_ws(&mut pos);
        match chars.get(pos) {
            Some('}') => break,
            Some('\'') | Some('"') => {}
            _ => return Err(err("expected a quoted key")),
        }
        let key = parse_py_string(&chars, &mut pos).ok_or_else(|| err("unterminated key"))?;
        skip_ws(&mut pos);
        if chars.get(pos) != Some(&':') {
            return Err(err("expected `:`"));
        }
        pos += 1;
        skip_ws(&mut pos);
        let value = match chars.get(pos) {
            Some('\'') | Some('"') => PyValue::Str(
                parse_py_string(&chars, &mut pos).ok_or_else(|| err("unterminated string"))?,
            ),
            Some('(') => {
                pos += 1;
                let mut dims = Vec::new();
                loop {
                    skip_ws(&mut pos);
                    match chars.get(pos) {
                        Some(')') => {
                            pos += 1;
                            break;
                        }
                        Some(',') => pos += 1,
                        Some(c) if c.is_ascii_digit() => {
                            let start = pos;
                            while pos < chars.len() && chars[pos].is_ascii_digit() {
                                pos += 1;
                            }
                            let digits: String = chars[start..pos].iter().collect();
                            let dim = digits
                                .parse::<usize>()
                                .map_err(|_| err("dimension too large"))?;
                            dims.push(dim);
                            // Python 2 wrote long integers with an `L` suffix.
                            if chars.get(pos) == Some(&'L') {
                                pos += 1;
                            }
                        }
                        _ => return Err(err("bad shape tuple")),
                    }
                }
                PyValue::Tuple(dims)
            }
            Some('[') => {
                // Skip a (possibly nested) list; only structured dtypes use one.
                let mut depth = 0usize;
                while pos < chars.len() {
                    match chars[pos] {
                        '[' => depth += 1,
                        ']' => {
                            depth -= 1;
                            if depth == 0 {
                                pos += 1;
                                break;
                            }
                        }
                        _ => {}
                    }
                    pos += 1;
                }
                PyValue::Other
            }
            _ => {
                let rest: String = chars[pos..].iter().collect();
                if rest.starts_with("True") {
                    pos += 4;
                    PyValue::Bool(true)
                } else if rest.starts_with("False") {
                    pos += 5;
                    PyValue::Bool(false)
                } else {
                    return Err(err("unexpected value"));
                }
            }
        };
        entries.push((key, value));
        skip_ws(&mut pos);
        if chars.get(pos) == Some(&',') {
            pos += 1;
        }
    }
    Ok(entries)
}

fn parse_py_string(chars: &[char], pos: &mut usize) -> Option<String> {
    let quote = *chars.get(*pos)?;
    *pos += 1;
    let start = *pos;
    while *pos < chars.len() && chars[*pos] != quote {
        *pos += 1;
    }
    if *pos >= chars.len() {
        return None;
    }
    let s: String = chars[start..*pos].iter().collect();
    *pos += 1;
    Some(s)
}

/// `(3, 4)` in Python notation, `(3,)` for one axis.
pub fn shape_text(shape: &[usize]) -> String {
    match shape {
        [n] => format!("({n},)"),
        _ => format!(
            "({})",
            shape
                .iter()
                .map(|d| d.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// Checks `shape` against `expected` (`None` = any length on that axis) and names both in
/// the error, e.g. "wrong rank: found 3-D array (10, 6, 8), expected 4-D (T, ny, nx, C) =
/// (T, 6, 8, 2)". `axis_names` labels the expected axes.
pub fn check_shape(
    path: &Path,
    shape: &[usize],
    expected: &[Option<usize>],
    axis_names: &[&str],
) -> Result<(), IoError> {
    assert_eq!(
        expected.len(),
        axis_names.len(),
        "one name per expected axis"
    );
    let wanted = format!(
        "({}) = ({})",
        axis_names.join(", "),
        expected
            .iter()
            .zip(axis_names)
            .map(|(e, n)| e.map_or_else(|| n.to_string(), |v| v.to_string()))
            .collect::<Vec<_>>()
            .join(", ")
    );
    if shape.len() != expected.len() {
        return Err(IoError::invalid(
            path,
            "shape",
            format!(
                "wrong rank: found {}-D array {}, expected {}-D {wanted}",
                shape.len(),
                shape_text(shape),
                expected.len()
            ),
        ));
    }
    for (axis_idx, ((&found, want), name)) in shape.iter().zip(expected).zip(axis_names).enumerate()
    {
        if let Some(want) = want {
            if found != *want {
                return Err(IoError::invalid(
                    path,
                    "shape",
                    format!(
                        "shape {} disagrees with the site: axis {axis_idx} ({name}) is {found}, \
                         expected {want}; expected {wanted}",
                        shape_text(shape)
                    ),
                ));
            }
        }
    }
    Ok(())
}

/// Reads a whole C-ordered array of any supported dtype as `f64` (booleans and bytes as 0/1
/// or their value). Returns the shape and the values in C order. NaN and infinity are passed
/// through; callers that need finite values check them.
pub fn read_npy_f64(path: &Path) -> Result<(Vec<usize>, Vec<f64>), IoError> {
    // Check the header before reading the data, so a bad header is refused without reading
    // a large file.
    read_npy_header(path)?.require_c_order(path)?;
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, e))?;
    parse_npy_f64(path, &bytes)
}

/// [`read_npy_f64`] on the bytes of a whole file already in memory; `path` only names the
/// file in messages.
pub fn parse_npy_f64(path: &Path, bytes: &[u8]) -> Result<(Vec<usize>, Vec<f64>), IoError> {
    let header = parse_npy_header(path, bytes)?;
    header.require_c_order(path)?;
    let size = header.dtype.size();
    let start = usize::try_from(header.data_offset).unwrap_or(usize::MAX);
    // `parse_npy_header` checked that the data are all there.
    let data = bytes
        .get(start..)
        .and_then(|rest| rest.get(..header.n_elements() * size))
        .ok_or_else(|| IoError::invalid(path, "data", "truncated data"))?;
    let values = data
        .chunks_exact(size)
        .map(|b| header.dtype.decode(b))
        .collect();
    Ok((header.shape, values))
}

/// The header bytes (magic through the newline) of a format-1.0 C-order file, padded so the
/// data start on a 64-byte boundary as NumPy does.
pub(super) fn header_bytes(dtype: NpyDtype, shape: &[usize]) -> Vec<u8> {
    let dict = format!(
        "{{'descr': '{}', 'fortran_order': False, 'shape': {}, }}",
        dtype.descr(),
        shape_text(shape)
    );
    let unpadded = MAGIC.len() + 2 + 2 + dict.len() + 1;
    let padded = unpadded.div_ceil(64) * 64;
    let header_len = padded - MAGIC.len() - 2 - 2;
    assert!(
        header_len <= usize::from(u16::MAX),
        "shape too long for an .npy 1.0 header"
    );
    let mut out = Vec::with_capacity(padded);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    out.extend_from_slice(&(header_len as u16).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out.resize(padded - 1, b' ');
    out.push(b'\n');
    out
}

/// Writes `data` (C order) as a little-endian float64 `.npy` file, atomically.
#[track_caller]
pub fn write_npy_f64(path: &Path, shape: &[usize], data: &[f64]) -> Result<(), IoError> {
    assert_eq!(
        shape.iter().product::<usize>(),
        data.len(),
        "npy shape and data length"
    );
    let header = header_bytes(NpyDtype::F8, shape);
    write_atomic(path, |w| {
        w.write_all(&header)?;
        for chunk in data.chunks(8192) {
            let bytes: Vec<u8> = chunk.iter().flat_map(|v| v.to_le_bytes()).collect();
            w.write_all(&bytes)?;
        }
        Ok(())
    })
}

/// Writes `data` (C order) as a little-endian float32 `.npy` file, atomically.
#[track_caller]
pub fn write_npy_f32(path: &Path, shape: &[usize], data: &[f32]) -> Result<(), IoError> {
    assert_eq!(
        shape.iter().product::<usize>(),
        data.len(),
        "npy shape and data length"
    );
    let header = header_bytes(NpyDtype::F4, shape);
    write_atomic(path, |w| {
        w.write_all(&header)?;
        for chunk in data.chunks(8192) {
            let bytes: Vec<u8> = chunk.iter().flat_map(|v| v.to_le_bytes()).collect();
            w.write_all(&bytes)?;
        }
        Ok(())
    })
}

/// Snapshots in an `.npy` file of shape `(T, …)`: the first axis is time, the rest is one
/// snapshot in field order. Reads by seeking; never holds more than one block.
#[derive(Debug)]
pub struct NpySnapshots {
    path: PathBuf,
    file: File,
    header: NpyHeader,
    n_snapshots: usize,
    n_dof: usize,
    /// Last axis length when the array has at least 3 axes (channels), else 1.
    n_channels: usize,
    /// `nx` for `(T, ny, nx, C)` arrays, to name the grid node of a bad value.
    grid_nx: Option<usize>,
}

impl NpySnapshots {
    /// Opens `path`; refuses non-float dtypes, Fortran order, truncation and arrays with
    /// fewer than two axes. Shapes against the site are checked by the site loader.
    pub fn open(path: &Path) -> Result<Self, IoError> {
        let header = read_npy_header(path)?;
        header.require_c_order(path)?;
        if !header.dtype.is_float() {
            return Err(IoError::invalid(
                path,
                "header",
                format!(
                    "unsupported dtype `{}` for snapshots; expected <f4 or <f8",
                    header.dtype.descr()
                ),
            ));
        }
        if header.shape.len() < 2 {
            return Err(IoError::invalid(
                path,
                "shape",
                format!(
                    "wrong rank: found {}-D array {}, expected (T, ny, nx, C) or (T, N, C)",
                    header.shape.len(),
                    shape_text(&header.shape)
                ),
            ));
        }
        let file = File::open(path).map_err(|e| IoError::file(path, e))?;
        let n_snapshots = header.shape[0];
        let n_dof = header.shape[1..].iter().product();
        let n_channels = if header.shape.len() >= 3 {
            header.shape[header.shape.len() - 1]
        } else {
            1
        };
        let grid_nx = (header.shape.len() == 4).then(|| header.shape[2]);
        Ok(Self {
            path: path.to_path_buf(),
            file,
            header,
            n_snapshots,
            n_dof,
            n_channels,
            grid_nx,
        })
    }

    pub fn header(&self) -> &NpyHeader {
        &self.header
    }

    pub fn path(&self) -> &Path {
        &self.path
    }

    fn bad_value(&self, time_idx: usize, dof_idx: usize, value: f64) -> IoError {
        let point_idx = dof_idx / self.n_channels.max(1);
        let channel_idx = dof_idx % self.n_channels.max(1);
        let node = match self.grid_nx {
            Some(nx) if nx > 0 => format!(" (i={}, j={})", point_idx % nx, point_idx / nx),
            _ => String::new(),
        };
        IoError::invalid(
            &self.path,
            format!("time index {time_idx}, point {point_idx}{node}, channel {channel_idx}"),
            format!("found {value}; every snapshot value must be finite"),
        )
    }
}

impl SnapshotSource for NpySnapshots {
    fn n_snapshots(&self) -> usize {
        self.n_snapshots
    }

    fn n_dof(&self) -> usize {
        self.n_dof
    }

    fn read_block(
        &mut self,
        times: Range<usize>,
        dofs: Range<usize>,
        out: &mut [f64],
    ) -> Result<(), IoError> {
        assert!(
            times.end <= self.n_snapshots && dofs.end <= self.n_dof,
            "block out of range"
        );
        assert_eq!(out.len(), times.len() * dofs.len(), "block buffer length");
        let size = self.header.dtype.size();
        let width = dofs.len();
        let mut bytes = vec![0u8; width * size];
        for (row, time_idx) in times.enumerate() {
            let offset =
                self.header.data_offset + ((time_idx * self.n_dof + dofs.start) * size) as u64;
            self.file
                .seek(SeekFrom::Start(offset))
                .map_err(|e| IoError::file(&self.path, e))?;
            self.file
                .read_exact(&mut bytes)
                .map_err(|e| IoError::file(&self.path, e))?;
            let dst = &mut out[row * width..(row + 1) * width];
            // One loop per dtype so the hot loop has no per-value dispatch.
            match self.header.dtype {
                NpyDtype::F8 => {
                    for (slot, b) in dst.iter_mut().zip(bytes.chunks_exact(8)) {
                        let mut raw = [0u8; 8];
                        raw.copy_from_slice(b);
                        *slot = f64::from_le_bytes(raw);
                    }
                }
                NpyDtype::F4 => {
                    for (slot, b) in dst.iter_mut().zip(bytes.chunks_exact(4)) {
                        let mut raw = [0u8; 4];
                        raw.copy_from_slice(b);
                        *slot = f64::from(f32::from_le_bytes(raw));
                    }
                }
                other => {
                    for (slot, b) in dst.iter_mut().zip(bytes.chunks_exact(size)) {
                        *slot = other.decode(b);
                    }
                }
            }
            if let Some(col) = dst.iter().position(|v| !v.is_finite()) {
                return Err(self.bad_value(time_idx, dofs.start + col, dst[col]));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn raw_npy(dir: &Path, name: &str, dict: &str, data: &[u8], version: u8) -> PathBuf {
        let mut bytes = MAGIC.to_vec();
        bytes.push(version);
        bytes.push(0);
        let text = format!("{dict}\n");
        if version == 1 {
            bytes.extend_from_slice(&(text.len() as u16).to_le_bytes());
        } else {
            bytes.extend_from_slice(&(text.len() as u32).to_le_bytes());
        }
        bytes.extend_from_slice(text.as_bytes());
        bytes.extend_from_slice(data);
        let path = dir.join(name);
        std::fs::write(&path, bytes).unwrap();
        path
    }

    #[test]
    fn round_trip_f64_and_f32() {
        let dir = tempfile::tempdir().unwrap();
        let data: Vec<f64> = (0..24).map(|v| f64::from(v) * 0.5 - 3.0).collect();
        let p = dir.path().join("a.npy");
        write_npy_f64(&p, &[2, 3, 4], &data).unwrap();
        let header = read_npy_header(&p).unwrap();
        assert_eq!(header.shape, vec![2, 3, 4]);
        assert_eq!(header.dtype, NpyDtype::F8);
        // NEP 1 recommends (and NumPy writes) data aligned to 64 bytes.
        assert_eq!(header.data_offset % 64, 0);
        let (shape, back) = read_npy_f64(&p).unwrap();
        assert_eq!(shape, vec![2, 3, 4]);
        assert_eq!(back, data);

        let data32: Vec<f32> = (0..5).map(|v| v as f32 * 0.25).collect();
        let p32 = dir.path().join("b.npy");
        write_npy_f32(&p32, &[5], &data32).unwrap();
        let (shape, back) = read_npy_f64(&p32).unwrap();
        assert_eq!(shape, vec![5]);
        for (a, b) in back.iter().zip(&data32) {
            assert!((a - f64::from(*b)).abs() < 1e-12);
        }
    }

    #[test]
    fn writer_matches_numpy_byte_for_byte() {
        // Reference files from NumPy 2.4.6 `np.save`, made by
        // tests/fixtures/npy/make_reference.py.
        let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/npy");
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.npy");
        let values: Vec<f64> = (0..24).map(|v| f64::from(v) * 0.5).collect();
        write_npy_f64(&a, &[2, 3, 4], &values).unwrap();
        assert_eq!(
            std::fs::read(&a).unwrap(),
            std::fs::read(fixtures.join("f8_2x3x4.npy")).unwrap()
        );
        let b = dir.path().join("b.npy");
        write_npy_f32(&b, &[3], &[0.0, 1.0, 2.0]).unwrap();
        assert_eq!(
            std::fs::read(&b).unwrap(),
            std::fs::read(fixtures.join("f4_3.npy")).unwrap()
        );
        let c = dir.path().join("c.npy");
        write_npy_f64(&c, &[], &[4.5]).unwrap();
        assert_eq!(
            std::fs::read(&c).unwrap(),
            std::fs::read(fixtures.join("f8_scalar.npy")).unwrap()
        );
        let (shape, back) = read_npy_f64(&fixtures.join("f8_scalar.npy")).unwrap();
        assert!(shape.is_empty());
        assert_eq!(back, vec![4.5]);
    }

    #[test]
    fn versions_two_and_three_and_masks() {
        let dir = tempfile::tempdir().unwrap();
        let p = raw_npy(
            dir.path(),
            "v2.npy",
            "{'descr': '|b1', 'fortran_order': False, 'shape': (2, 2), }",
            &[0, 1, 1, 0],
            2,
        );
        let (shape, v) = read_npy_f64(&p).unwrap();
        assert_eq!(shape, vec![2, 2]);
        assert_eq!(v, vec![0.0, 1.0, 1.0, 0.0]);
        let ints: Vec<u8> = [-1i32, 7].iter().flat_map(|v| v.to_le_bytes()).collect();
        let p = raw_npy(
            dir.path(),
            "v3.npy",
            "{\"descr\": \"<i4\", \"fortran_order\": False, \"shape\": (2L,)}",
            &ints,
            3,
        );
        assert_eq!(read_npy_f64(&p).unwrap().1, vec![-1.0, 7.0]);
    }

    #[test]
    fn refusals_say_why() {
        let dir = tempfile::tempdir().unwrap();
        let msg = |p: &Path| read_npy_f64(p).unwrap_err().to_string();
        let p = raw_npy(
            dir.path(),
            "c.npy",
            "{'descr': '<c16', 'fortran_order': False, 'shape': (1,), }",
            &[0; 16],
            1,
        );
        assert!(msg(&p).contains("unsupported dtype `<c16`"), "{}", msg(&p));
        let p = raw_npy(
            dir.path(),
            "be.npy",
            "{'descr': '>f8', 'fortran_order': False, 'shape': (1,), }",
            &[0; 8],
            1,
        );
        assert!(msg(&p).contains("big-endian"), "{}", msg(&p));
        let p = raw_npy(
            dir.path(),
            "f.npy",
            "{'descr': '<f8', 'fortran_order': True, 'shape': (1, 2), }",
            &[0; 16],
            1,
        );
        assert!(msg(&p).contains("Fortran-ordered"), "{}", msg(&p));
        assert!(read_npy_header(&p).unwrap().fortran_order);
        let p = raw_npy(
            dir.path(),
            "t.npy",
            "{'descr': '<f8', 'fortran_order': False, 'shape': (3,), }",
            &[0; 16],
            1,
        );
        assert!(msg(&p).contains("truncated"), "{}", msg(&p));
        let p = raw_npy(
            dir.path(),
            "s.npy",
            "{'descr': [('a', '<f8')], 'fortran_order': False, 'shape': (1,), }",
            &[0; 8],
            1,
        );
        assert!(msg(&p).contains("structured"), "{}", msg(&p));
        std::fs::write(dir.path().join("x.npy"), b"hello").unwrap();
        assert!(msg(&dir.path().join("x.npy")).contains("shorter"));
    }

    #[test]
    fn snapshots_stream_and_name_bad_values() {
        let dir = tempfile::tempdir().unwrap();
        // (T=3, ny=2, nx=2, C=2): value = 100 t + dof.
        let mut data: Vec<f32> = (0..3)
            .flat_map(|t| (0..8).map(move |d| (100 * t + d) as f32))
            .collect();
        let p = dir.path().join("s.npy");
        write_npy_f32(&p, &[3, 2, 2, 2], &data).unwrap();
        let mut src = NpySnapshots::open(&p).unwrap();
        assert_eq!((src.n_snapshots(), src.n_dof()), (3, 8));
        let mut out = vec![0.0; 2 * 3];
        src.read_block(1..3, 2..5, &mut out).unwrap();
        assert_eq!(out, vec![102.0, 103.0, 104.0, 202.0, 203.0, 204.0]);

        // dof 5 = point 2 (i=0, j=1), channel 1.
        data[2 * 8 + 5] = f32::NAN;
        write_npy_f32(&p, &[3, 2, 2, 2], &data).unwrap();
        let mut src = NpySnapshots::open(&p).unwrap();
        let mut out = vec![0.0; 3 * 8];
        let err = src
            .read_block(0..3, 0..8, &mut out)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("time index 2, point 2 (i=0, j=1), channel 1") && err.contains("NaN"),
            "{err}"
        );
    }

    #[test]
    fn check_shape_messages() {
        let p = Path::new("s.npy");
        let e = check_shape(
            p,
            &[10, 6, 8],
            &[None, Some(6), Some(8), Some(2)],
            &["T", "ny", "nx", "C"],
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("wrong rank: found 3-D array (10, 6, 8), expected 4-D (T, ny, nx, C) = (T, 6, 8, 2)"), "{e}");
        let e = check_shape(
            p,
            &[10, 6, 7, 2],
            &[None, Some(6), Some(8), Some(2)],
            &["T", "ny", "nx", "C"],
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("axis 2 (nx) is 7, expected 8"), "{e}");
        assert!(check_shape(
            p,
            &[10, 6, 8, 2],
            &[None, Some(6), Some(8), Some(2)],
            &["T", "ny", "nx", "C"]
        )
        .is_ok());
    }
}
