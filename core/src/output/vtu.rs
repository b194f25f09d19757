//! VTK XML unstructured grid (.vtu) files: plain base64 through `vtkio`, or zlib-compressed
//! through our own encoder (see `vtu_zlib`).

use super::{write_atomically, OutputError};
use crate::mesh::Mesh;
use std::path::Path;
use vtkio::model::{
    Attribute, Attributes, ByteOrder, CellType, Cells, DataSet, IOBuffer, UnstructuredGridPiece,
    Version, VertexNumbers, Vtk,
};

/// A named field on the mesh's nodes or triangles.
pub struct Field<'a> {
    /// Array name in the file.
    pub name: &'a str,
    /// One value per node (point field) or per triangle (cell field).
    pub values: &'a [f64],
}

/// How the arrays of a .vtu file are stored.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case", tag = "encoding")]
pub enum VtuEncoding {
    /// Raw little-endian values in base64 (largest, quickest to write).
    #[default]
    Base64,
    /// zlib-compressed 32 KiB blocks in base64, at zlib `level` 1 (fastest) to 9 (smallest).
    Zlib {
        /// zlib compression level.
        level: u32,
    },
}

/// Writes `mesh` with point and cell fields as a .vtu file (z = 0) in `encoding`,
/// atomically.
pub fn write_vtu_as(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[Field],
    cell_fields: &[Field],
    encoding: VtuEncoding,
) -> Result<(), OutputError> {
    match encoding {
        VtuEncoding::Base64 => write_vtu(path, mesh, point_fields, cell_fields),
        VtuEncoding::Zlib { level } => {
            super::vtu_zlib::write_vtu_zlib(path, mesh, point_fields, cell_fields, level)
        }
    }
}

/// Refuses fields whose length does not match the mesh.
pub(super) fn check_lengths(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[Field],
    cell_fields: &[Field],
) -> Result<(), OutputError> {
    let encode = |reason: String| OutputError::Encode {
        path: path.to_path_buf(),
        reason,
    };
    for f in point_fields {
        if f.values.len() != mesh.num_nodes() {
            return Err(encode(format!(
                "point field '{}' has {} values for {} nodes",
                f.name,
                f.values.len(),
                mesh.num_nodes()
            )));
        }
    }
    for f in cell_fields {
        if f.values.len() != mesh.triangles.len() {
            return Err(encode(format!(
                "cell field '{}' has {} values for {} triangles",
                f.name,
                f.values.len(),
                mesh.triangles.len()
            )));
        }
    }
    Ok(())
}

/// Writes `mesh` with point and cell fields as a plain base64 .vtu file (z = 0), atomically.
pub fn write_vtu(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[Field],
    cell_fields: &[Field],
) -> Result<(), OutputError> {
    check_lengths(path, mesh, point_fields, cell_fields)?;
    let encode = |reason: String| OutputError::Encode {
        path: path.to_path_buf(),
        reason,
    };
    let mut points = Vec::with_capacity(3 * mesh.num_nodes());
    for i in 0..mesh.num_nodes() {
        let p = mesh.node(i);
        points.extend_from_slice(&[p[0], p[1], 0.0]);
    }
    let connectivity: Vec<u64> = mesh
        .triangles
        .iter()
        .flat_map(|t| t.iter().map(|&v| v as u64))
        .collect();
    let offsets: Vec<u64> = (1..=mesh.triangles.len() as u64).map(|k| 3 * k).collect();
    let attr =
        |f: &Field| Attribute::scalars(f.name, 1).with_data(IOBuffer::F64(f.values.to_vec()));
    let vtk = Vtk {
        version: Version { major: 1, minor: 0 },
        title: String::new(),
        byte_order: ByteOrder::LittleEndian,
        file_path: None,
        data: DataSet::inline(UnstructuredGridPiece {
            points: IOBuffer::F64(points),
            cells: Cells {
                cell_verts: VertexNumbers::XML {
                    connectivity,
                    offsets,
                },
                types: vec![CellType::Triangle; mesh.triangles.len()],
            },
            data: Attributes {
                point: point_fields.iter().map(attr).collect(),
                cell: cell_fields.iter().map(attr).collect(),
            },
        }),
    };
    write_atomically(path, |w| {
        vtk.write_xml(w).map_err(|e| encode(e.to_string()))
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn round_trip_through_vtkio_reader() {
        let nodes = array![[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        let mesh = Mesh::from_parts(nodes, vec![[0, 1, 2], [0, 2, 3]], &|_| 0).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("m.vtu");
        let areas = mesh.node_areas.clone();
        write_vtu(
            &path,
            &mesh,
            &[Field {
                name: "node_area",
                values: &areas,
            }],
            &[],
        )
        .unwrap();
        let back = Vtk::import(&path).unwrap();
        let DataSet::UnstructuredGrid { pieces, .. } = back.data else {
            panic!("not a grid")
        };
        assert_eq!(pieces.len(), 1);
        let bad = write_vtu(
            &path,
            &mesh,
            &[Field {
                name: "short",
                values: &[1.0],
            }],
            &[],
        );
        assert!(bad.is_err());
    }
}
