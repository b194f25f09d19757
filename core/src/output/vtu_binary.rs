//! VTK XML unstructured grids with inline binary (base64) arrays, plain or zlib-compressed.
//!
//! Hand-written rather than through `vtkio`: vtkio 0.6's compressed output is refused by
//! VTK 9.7.2's own reader ("Error reading compression header"), and its plain output goes
//! through a generic XML serializer that escapes the base64 text character by character
//! (about 0.1 s per 1e5-node state, several times the encoding itself). The layout follows
//! the VTK XML file-format description (Kitware, "VTK File Formats", XML section; common
//! practice of every VTK XML writer), `header_type="UInt64"`, every array `format="binary"`:
//!
//! - plain: the base64 of the array's byte count (little-endian u64) followed by its bytes,
//!   one base64 stream;
//! - `compressor="vtkZLibDataCompressor"`: the base64 of a header `[blocks, block size,
//!   size of the last block, compressed size of each block]` followed by the base64 of the
//!   concatenated zlib streams of its 32 KiB blocks. Blocks are compressed in parallel
//!   (rayon); each is an independent zlib stream, so the bytes do not depend on the thread
//!   count.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::Path;

use base64::Engine as _;
use flate2::write::ZlibEncoder;
use flate2::Compression;
use rayon::prelude::*;

use super::vtu::{check_lengths, Field};
use super::{write_atomically, OutputError};
use crate::mesh::Mesh;

/// Uncompressed bytes per block (VTK's own default block size, common practice).
const BLOCK: usize = 32 * 1024;

/// VTK cell type of a linear triangle (VTK File Formats, cell type table).
const VTK_TRIANGLE: u8 = 5;

/// Writes `mesh` with point and cell fields as a .vtu file with inline binary arrays,
/// atomically: zlib-compressed at `level` 1 (fastest) to 9 (smallest), or plain with `None`.
pub fn write_vtu_binary(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[Field],
    cell_fields: &[Field],
    level: Option<u32>,
) -> Result<(), OutputError> {
    check_lengths(path, mesh, point_fields, cell_fields)?;
    let level = level.map(|l| Compression::new(l.clamp(1, 9)));
    let n = mesh.num_nodes();
    let m = mesh.triangles.len();
    // Plain base64 is 4/3 of the bytes: reserve for points, cells and fields at once.
    let fields = point_fields.len() * n + cell_fields.len() * m;
    let capacity = match level {
        None => (8 * (3 * n + 4 * m + fields) + m) * 4 / 3 + 64 * 1024,
        Some(_) => 64 * 1024,
    };
    let mut xml = String::with_capacity(capacity);
    xml.push_str(
        "<?xml version=\"1.0\"?>\n<VTKFile type=\"UnstructuredGrid\" version=\"1.0\" \
         byte_order=\"LittleEndian\" header_type=\"UInt64\"",
    );
    if level.is_some() {
        xml.push_str(" compressor=\"vtkZLibDataCompressor\"");
    }
    xml.push_str(">\n  <UnstructuredGrid>\n");
    let _ = writeln!(
        xml,
        "    <Piece NumberOfPoints=\"{n}\" NumberOfCells=\"{m}\">"
    );
    let array = |xml: &mut String, name: Option<&str>, ty: &str, comps: usize, bytes: &[u8]| {
        let _ = write!(xml, "        <DataArray type=\"{ty}\"");
        if let Some(name) = name {
            let _ = write!(xml, " Name=\"{}\"", escape(name));
        }
        if comps > 1 {
            let _ = write!(xml, " NumberOfComponents=\"{comps}\"");
        }
        xml.push_str(" format=\"binary\">\n          ");
        encode_array(bytes, level, xml);
        xml.push_str("\n        </DataArray>\n");
    };
    let section = |xml: &mut String, tag: &str, fields: &[Field]| {
        if fields.is_empty() {
            return;
        }
        let _ = writeln!(xml, "      <{tag}>");
        for f in fields {
            array(xml, Some(f.name), "Float64", 1, &f64_bytes(f.values));
        }
        let _ = writeln!(xml, "      </{tag}>");
    };
    section(&mut xml, "PointData", point_fields);
    section(&mut xml, "CellData", cell_fields);
    let mut points = Vec::with_capacity(3 * n);
    for i in 0..n {
        let p = mesh.node(i);
        points.extend_from_slice(&[p[0], p[1], 0.0]);
    }
    xml.push_str("      <Points>\n");
    array(&mut xml, None, "Float64", 3, &f64_bytes(&points));
    xml.push_str("      </Points>\n      <Cells>\n");
    let connectivity: Vec<u8> = mesh
        .triangles
        .iter()
        .flat_map(|t| t.iter().flat_map(|&v| (v as i64).to_le_bytes()))
        .collect();
    let offsets: Vec<u8> = (1..=m as i64).flat_map(|k| (3 * k).to_le_bytes()).collect();
    array(&mut xml, Some("connectivity"), "Int64", 1, &connectivity);
    array(&mut xml, Some("offsets"), "Int64", 1, &offsets);
    array(&mut xml, Some("types"), "UInt8", 1, &vec![VTK_TRIANGLE; m]);
    xml.push_str("      </Cells>\n    </Piece>\n  </UnstructuredGrid>\n</VTKFile>\n");
    write_atomically(path, |w| {
        w.write_all(xml.as_bytes()).map_err(|e| OutputError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })
    })
}

fn f64_bytes(values: &[f64]) -> Vec<u8> {
    values.iter().flat_map(|v| v.to_le_bytes()).collect()
}

/// Appends `bytes` base64-encoded with their header: plain (`None`) or as zlib blocks.
fn encode_array(bytes: &[u8], level: Option<Compression>, out: &mut String) {
    let b64 = base64::engine::general_purpose::STANDARD;
    let Some(level) = level else {
        let mut plain = Vec::with_capacity(8 + bytes.len());
        plain.extend_from_slice(&(bytes.len() as u64).to_le_bytes());
        plain.extend_from_slice(bytes);
        b64.encode_string(&plain, out);
        return;
    };
    let blocks: Vec<Vec<u8>> = bytes
        .par_chunks(BLOCK)
        .map(|chunk| {
            let mut z = ZlibEncoder::new(Vec::with_capacity(chunk.len() / 2 + 64), level);
            // Writing into a Vec cannot fail.
            let _ = z.write_all(chunk);
            z.finish().unwrap_or_default()
        })
        .collect();
    let last = match bytes.len() % BLOCK {
        0 if !bytes.is_empty() => BLOCK,
        r => r,
    };
    let mut header: Vec<u8> = Vec::with_capacity(8 * (3 + blocks.len()));
    for v in [blocks.len(), BLOCK, last]
        .into_iter()
        .chain(blocks.iter().map(Vec::len))
    {
        header.extend_from_slice(&(v as u64).to_le_bytes());
    }
    b64.encode_string(&header, out);
    b64.encode_string(blocks.concat(), out);
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

#[cfg(test)]
mod tests {
    use super::*;
    use flate2::read::ZlibDecoder;
    use ndarray::array;
    use std::io::Read as _;

    /// Decodes one array written by `encode_array` (the inverse, for the round trip).
    fn decode(text: &str) -> Vec<u8> {
        let b64 = base64::engine::general_purpose::STANDARD;
        // The first three header words say how many block sizes follow.
        let head3 = b64.decode(&text[..32]).unwrap();
        let blocks = u64::from_le_bytes(head3[..8].try_into().unwrap()) as usize;
        let header_chars = (8 * (3 + blocks)).div_ceil(3) * 4;
        let header = b64.decode(&text[..header_chars]).unwrap();
        let sizes: Vec<usize> = (0..blocks)
            .map(|b| {
                let at = 8 * (3 + b);
                u64::from_le_bytes(header[at..at + 8].try_into().unwrap()) as usize
            })
            .collect();
        let data = b64.decode(&text[header_chars..]).unwrap();
        let mut out = Vec::new();
        let mut at = 0;
        for s in sizes {
            ZlibDecoder::new(&data[at..at + s])
                .read_to_end(&mut out)
                .unwrap();
            at += s;
        }
        out
    }

    #[test]
    fn arrays_round_trip_across_block_boundaries() {
        for len in [1usize, 8, BLOCK - 1, BLOCK, BLOCK + 1, 3 * BLOCK + 17] {
            let bytes: Vec<u8> = (0..len).map(|i| (i * 7919 % 251) as u8).collect();
            let mut s = String::new();
            encode_array(&bytes, Some(Compression::new(6)), &mut s);
            assert_eq!(decode(&s), bytes, "length {len}");
        }
    }

    #[test]
    fn a_file_names_its_compressor_and_counts() {
        let nodes = array![[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        let mesh = Mesh::from_parts(nodes, vec![[0, 1, 2], [0, 2, 3]], &|_| 0).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("m.vtu");
        let u = [1.0, 2.0, 3.0, 4.0];
        let field = Field {
            name: "u<1>",
            values: &u,
        };
        write_vtu_binary(&path, &mesh, &[field], &[], Some(6)).unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(text.contains("compressor=\"vtkZLibDataCompressor\""));
        assert!(text.contains("NumberOfPoints=\"4\" NumberOfCells=\"2\""));
        assert!(text.contains("Name=\"u&lt;1&gt;\""));
        let start = text.find("Name=\"u&lt;1&gt;\" format=\"binary\">").unwrap();
        let body = text[start..].lines().nth(1).unwrap().trim();
        let back: Vec<f64> = decode(body)
            .chunks(8)
            .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
            .collect();
        assert_eq!(back, u);
        let short = Field {
            name: "short",
            values: &[1.0],
        };
        assert!(write_vtu_binary(&path, &mesh, &[short], &[], Some(6)).is_err());
    }

    #[test]
    fn plain_arrays_are_one_base64_stream_of_count_and_bytes() {
        for len in [0usize, 1, 2, 3, 8, 1000] {
            let bytes: Vec<u8> = (0..len).map(|i| (i * 31 % 256) as u8).collect();
            let mut s = String::new();
            encode_array(&bytes, None, &mut s);
            let raw = base64::engine::general_purpose::STANDARD
                .decode(&s)
                .unwrap();
            assert_eq!(u64::from_le_bytes(raw[..8].try_into().unwrap()), len as u64);
            assert_eq!(&raw[8..], bytes.as_slice());
        }
    }
}
