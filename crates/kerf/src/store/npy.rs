//! NumPy .npy files (format version 1.0) of f32 rows, written whole or streamed row by row.
//!
//! The layout follows the NumPy format specification (NEP 1): magic `\x93NUMPY`, version 1.0, a
//! little-endian u16 header length, a Python-literal header dict padded with spaces to a
//! multiple of 64 bytes and ending in a newline, then the raw little-endian f32 rows. A stream
//! does not know its row count until the end, so [`NpyWriter`] writes the header last, over a
//! placeholder of the same length.
use std::fs::File;
use std::io::{BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use super::StoreError;

/// The header (magic, version, length, padded dict) of a `rows` x `cols` f32 matrix.
pub fn npy_header(rows: usize, cols: usize) -> Vec<u8> {
    let dict = format!("{{'descr': '<f4', 'fortran_order': False, 'shape': ({rows}, {cols}), }}");
    let unpadded = 10 + dict.len() + 1;
    let pad = (64 - unpadded % 64) % 64;
    let mut header = dict;
    header.push_str(&" ".repeat(pad));
    header.push('\n');
    let mut out = Vec::with_capacity(10 + header.len());
    out.extend_from_slice(b"\x93NUMPY\x01\x00");
    out.extend_from_slice(&(header.len() as u16).to_le_bytes());
    out.extend_from_slice(header.as_bytes());
    out
}

/// Serialise a row-major f32 matrix as .npy bytes.
pub fn npy_f32(rows: usize, cols: usize, data: &[f32]) -> Vec<u8> {
    assert_eq!(
        data.len(),
        rows * cols,
        "matrix shape and data length agree"
    );
    let mut out = npy_header(rows, cols);
    out.reserve(data.len() * 4);
    for x in data {
        out.extend_from_slice(&x.to_le_bytes());
    }
    out
}

/// Read back an .npy f32 matrix written by [`npy_f32`] or [`NpyWriter`].
pub fn read_npy_f32(bytes: &[u8]) -> Option<(usize, usize, Vec<f32>)> {
    if bytes.len() < 10 || &bytes[..8] != b"\x93NUMPY\x01\x00" {
        return None;
    }
    let hlen = u16::from_le_bytes([bytes[8], bytes[9]]) as usize;
    let header = std::str::from_utf8(bytes.get(10..10 + hlen)?).ok()?;
    if !header.contains("'descr': '<f4'") {
        return None;
    }
    let shape = header.split("'shape': (").nth(1)?.split(')').next()?;
    let dims: Vec<usize> = shape
        .split(',')
        .filter_map(|s| s.trim().parse().ok())
        .collect();
    let (r, c) = (*dims.first()?, *dims.get(1)?);
    let body = &bytes[10 + hlen..];
    if body.len() != r.checked_mul(c)?.checked_mul(4)? {
        return None;
    }
    Some((
        r,
        c,
        body.chunks_exact(4)
            .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]))
            .collect(),
    ))
}

/// Hex sha256 of bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

fn hex(d: &[u8]) -> String {
    d.iter().map(|b| format!("{b:02x}")).collect()
}

/// Hex sha256 of a file's contents, read in pieces.
pub fn sha256_file(path: &Path) -> Result<(String, u64), StoreError> {
    let mut f = File::open(path).map_err(StoreError::io(path))?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut total = 0u64;
    loop {
        let n = f.read(&mut buf).map_err(StoreError::io(path))?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
        total += n as u64;
    }
    Ok((hex(&h.finalize()), total))
}

/// An .npy file of f32 rows written as they come; the header is settled by [`NpyWriter::finish`].
pub struct NpyWriter {
    path: PathBuf,
    out: BufWriter<File>,
    cols: usize,
    rows: usize,
    header_len: usize,
}

impl NpyWriter {
    /// Create `path` for rows of `cols` values.
    pub fn create(path: &Path, cols: usize) -> Result<Self, StoreError> {
        let file = File::create(path).map_err(StoreError::io(path))?;
        let mut out = BufWriter::with_capacity(1 << 20, file);
        let placeholder = npy_header(0, cols);
        out.write_all(&placeholder).map_err(StoreError::io(path))?;
        Ok(Self {
            path: path.to_path_buf(),
            out,
            cols,
            rows: 0,
            header_len: placeholder.len(),
        })
    }

    /// Append one row.
    pub fn push(&mut self, row: &[f32]) -> Result<(), StoreError> {
        if row.len() != self.cols {
            return Err(StoreError::Width {
                path: self.path.clone(),
                expected: self.cols,
                got: row.len(),
            });
        }
        let mut bytes = Vec::with_capacity(row.len() * 4);
        for x in row {
            bytes.extend_from_slice(&x.to_le_bytes());
        }
        self.out
            .write_all(&bytes)
            .map_err(StoreError::io(&self.path))?;
        self.rows += 1;
        Ok(())
    }

    /// Rows written so far.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Write the real header and sync. Where the real header is longer than the placeholder
    /// (a row count with more digits than the padding absorbs), the body is copied behind it.
    pub fn finish(self) -> Result<(), StoreError> {
        let io = StoreError::io(&self.path);
        let mut file = self.out.into_inner().map_err(|e| {
            let path = self.path.clone();
            StoreError::Io {
                path,
                source: e.into_error(),
            }
        })?;
        let header = npy_header(self.rows, self.cols);
        if header.len() == self.header_len {
            file.seek(SeekFrom::Start(0))
                .and_then(|_| file.write_all(&header))
                .and_then(|_| file.sync_all())
                .map_err(io)?;
            return Ok(());
        }
        let moved = self.path.with_extension("npy.body");
        std::fs::rename(&self.path, &moved).map_err(StoreError::io(&self.path))?;
        let mut src = File::open(&moved).map_err(StoreError::io(&moved))?;
        src.seek(SeekFrom::Start(self.header_len as u64))
            .map_err(StoreError::io(&moved))?;
        let mut dst = File::create(&self.path).map_err(StoreError::io(&self.path))?;
        dst.write_all(&header)
            .and_then(|_| std::io::copy(&mut src, &mut dst).map(|_| ()))
            .and_then(|_| dst.sync_all())
            .map_err(StoreError::io(&self.path))?;
        std::fs::remove_file(&moved).map_err(StoreError::io(&moved))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn npy_header_is_aligned_and_round_trips() {
        let data = [1.0f32, -2.5, 3.25, 0.0, 7.0, 8.5];
        let b = npy_f32(2, 3, &data);
        // NEP 1: magic, version 1.0, total header a multiple of 64 bytes, ends in newline.
        assert_eq!(&b[..8], b"\x93NUMPY\x01\x00");
        let hlen = u16::from_le_bytes([b[8], b[9]]) as usize;
        assert_eq!((10 + hlen) % 64, 0);
        assert_eq!(b[10 + hlen - 1], b'\n');
        assert_eq!(read_npy_f32(&b), Some((2, 3, data.to_vec())));
    }

    #[test]
    fn npy_bytes_match_numpy() {
        // numpy.save of np.array([[1, 2]], dtype='<f4') (numpy 1.x/2.x write format 1.0 for this
        // header), from memory of the format: the dict text below padded to 118 bytes + newline.
        let b = npy_f32(1, 2, &[1.0, 2.0]);
        let header = std::str::from_utf8(&b[10..128]).unwrap();
        assert!(header.starts_with("{'descr': '<f4', 'fortran_order': False, 'shape': (1, 2), }"));
        assert_eq!(&b[128..], &[0, 0, 0x80, 0x3f, 0, 0, 0, 0x40]);
    }
}

#[cfg(test)]
mod stream_tests {
    use super::*;

    #[test]
    fn streamed_file_equals_whole_file() {
        let dir = tempfile::tempdir().unwrap();
        for rows in [0usize, 1, 3, 1000] {
            let data: Vec<f32> = (0..rows * 3).map(|i| i as f32 * 0.5 - 7.0).collect();
            let p = dir.path().join(format!("m{rows}.npy"));
            let mut w = NpyWriter::create(&p, 3).unwrap();
            for r in data.chunks(3) {
                w.push(r).unwrap();
            }
            w.finish().unwrap();
            assert_eq!(
                std::fs::read(&p).unwrap(),
                npy_f32(rows, 3, &data),
                "{rows} rows"
            );
        }
    }

    #[test]
    fn a_row_of_the_wrong_width_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let mut w = NpyWriter::create(&dir.path().join("m.npy"), 3).unwrap();
        assert!(matches!(w.push(&[1.0]), Err(StoreError::Width { .. })));
    }

    #[test]
    fn header_length_holds_for_any_realistic_row_count() {
        // The placeholder is written for 0 rows; the header keeps its length for any usize row
        // count at these widths, so the copy path in `finish` is a safety net.
        for cols in [1usize, 384, 768, 4096] {
            assert_eq!(
                npy_header(0, cols).len(),
                npy_header(usize::MAX, cols).len()
            );
        }
    }
}
