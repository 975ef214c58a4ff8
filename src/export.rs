//! Writing vectors for other tools: NumPy .npy (format version 1.0), Parquet, and the manifest.
//!
//! The .npy layout follows the NumPy format specification (NEP 1): magic `\x93NUMPY`, version
//! 1.0, a little-endian u16 header length, a Python-literal header dict padded with spaces to a
//! multiple of 64 bytes and ending in a newline, then the raw little-endian f32 rows.
use std::io::Write;
use std::path::Path;
use std::sync::Arc;

use sha2::{Digest, Sha256};

/// Serialise a row-major f32 matrix as .npy bytes.
pub fn npy_f32(rows: usize, cols: usize, data: &[f32]) -> Vec<u8> {
    assert_eq!(
        data.len(),
        rows * cols,
        "matrix shape and data length agree"
    );
    let dict = format!("{{'descr': '<f4', 'fortran_order': False, 'shape': ({rows}, {cols}), }}");
    let unpadded = 10 + dict.len() + 1;
    let pad = (64 - unpadded % 64) % 64;
    let mut header = dict;
    header.push_str(&" ".repeat(pad));
    header.push('\n');
    let mut out = Vec::with_capacity(10 + header.len() + data.len() * 4);
    out.extend_from_slice(b"\x93NUMPY\x01\x00");
    out.extend_from_slice(&(header.len() as u16).to_le_bytes());
    out.extend_from_slice(header.as_bytes());
    for x in data {
        out.extend_from_slice(&x.to_le_bytes());
    }
    out
}

/// Read back an .npy f32 matrix written by [`npy_f32`] (for tests and resumption checks).
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
    if body.len() != r * c * 4 {
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
    let d = Sha256::digest(bytes);
    d.iter().map(|b| format!("{b:02x}")).collect()
}

/// Rows for the chunk Parquet file.
pub struct ChunkRows<'a> {
    /// Document id of each chunk.
    pub doc: Vec<&'a str>,
    /// Chunk index within its document.
    pub chunk: Vec<u32>,
    /// Byte start in the source.
    pub byte_start: Vec<u64>,
    /// Byte end in the source.
    pub byte_end: Vec<u64>,
    /// Encoder-input tokens.
    pub tokens: Vec<u32>,
    /// Chunk text.
    pub text: Vec<&'a str>,
}

fn vector_array(dim: usize, data: &[f32]) -> Arc<dyn arrow_array::Array> {
    use arrow_array::{FixedSizeListArray, Float32Array};
    use arrow_schema::{DataType, Field};
    let values = Arc::new(Float32Array::from(data.to_vec()));
    let field = Arc::new(Field::new("item", DataType::Float32, false));
    Arc::new(FixedSizeListArray::new(field, dim as i32, values, None))
}

fn write_batch(path: &Path, batch: arrow_array::RecordBatch) -> Result<Vec<u8>, String> {
    let mut buf = Vec::new();
    {
        let mut w = parquet::arrow::ArrowWriter::try_new(&mut buf, batch.schema(), None)
            .map_err(|e| e.to_string())?;
        w.write(&batch).map_err(|e| e.to_string())?;
        w.close().map_err(|e| e.to_string())?;
    }
    let _ = path;
    Ok(buf)
}

/// Parquet bytes of chunk rows with their vectors (`vector`: fixed-size list of f32).
pub fn chunks_parquet(rows: &ChunkRows, dim: usize, vectors: &[f32]) -> Result<Vec<u8>, String> {
    use arrow_array::{ArrayRef, RecordBatch, StringArray, UInt32Array, UInt64Array};
    let cols: Vec<(&str, ArrayRef)> = vec![
        ("doc", Arc::new(StringArray::from(rows.doc.clone()))),
        ("chunk", Arc::new(UInt32Array::from(rows.chunk.clone()))),
        (
            "byte_start",
            Arc::new(UInt64Array::from(rows.byte_start.clone())),
        ),
        (
            "byte_end",
            Arc::new(UInt64Array::from(rows.byte_end.clone())),
        ),
        ("tokens", Arc::new(UInt32Array::from(rows.tokens.clone()))),
        ("text", Arc::new(StringArray::from(rows.text.clone()))),
        ("vector", vector_array(dim, vectors)),
    ];
    let batch = RecordBatch::try_from_iter(cols).map_err(|e| e.to_string())?;
    write_batch(Path::new("chunks.parquet"), batch)
}

/// Parquet bytes of document ids with their vectors.
pub fn docs_parquet(ids: &[&str], dim: usize, vectors: &[f32]) -> Result<Vec<u8>, String> {
    use arrow_array::{ArrayRef, RecordBatch, StringArray};
    let cols: Vec<(&str, ArrayRef)> = vec![
        ("doc", Arc::new(StringArray::from(ids.to_vec()))),
        ("vector", vector_array(dim, vectors)),
    ];
    let batch = RecordBatch::try_from_iter(cols).map_err(|e| e.to_string())?;
    write_batch(Path::new("documents.parquet"), batch)
}

/// Write bytes to `dir/name` and return the file's checksum.
pub fn write_file(dir: &Path, name: &str, bytes: &[u8]) -> std::io::Result<String> {
    let mut f = std::fs::File::create(dir.join(name))?;
    f.write_all(bytes)?;
    f.sync_all()?;
    Ok(sha256_hex(bytes))
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

    #[test]
    fn parquet_writes() {
        let rows = ChunkRows {
            doc: vec!["a", "a"],
            chunk: vec![0, 1],
            byte_start: vec![0, 5],
            byte_end: vec![5, 9],
            tokens: vec![4, 3],
            text: vec!["hello", "you"],
        };
        let b = chunks_parquet(&rows, 2, &[1.0, 0.0, 0.0, 1.0]).unwrap();
        assert_eq!(&b[..4], b"PAR1");
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("c.parquet");
        std::fs::write(&f, &b).unwrap();
        let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(
            std::fs::File::open(&f).unwrap(),
        )
        .unwrap()
        .build()
        .unwrap();
        let batches: Vec<_> = reader.map(|r| r.unwrap()).collect();
        assert_eq!(batches.iter().map(|b| b.num_rows()).sum::<usize>(), 2);
        let names: Vec<String> = batches[0]
            .schema()
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect();
        assert_eq!(
            names,
            [
                "doc",
                "chunk",
                "byte_start",
                "byte_end",
                "tokens",
                "text",
                "vector"
            ]
        );
    }
}
