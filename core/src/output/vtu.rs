//! VTK XML unstructured grid (.vtu) files with inline base64 arrays, plain or
//! zlib-compressed, through our own encoder (see `vtu_binary` for why not `vtkio`'s writer;
//! `vtkio` reads the files back in the tests).

use super::vtu_binary::write_vtu_binary;
use super::OutputError;
use crate::mesh::Mesh;
use std::path::Path;

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
            write_vtu_binary(path, mesh, point_fields, cell_fields, Some(level))
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
    write_vtu_binary(path, mesh, point_fields, cell_fields, None)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;
    use vtkio::model::{Attribute, DataArray, DataSet, IOBuffer, Piece, VertexNumbers, Vtk};

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
        let Piece::Inline(piece) = &pieces[0] else {
            panic!("not inline")
        };
        assert_eq!(piece.num_points(), 4);
        let Attribute::DataArray(DataArray { name, data, .. }) = &piece.data.point[0] else {
            panic!("not a data array")
        };
        assert_eq!(name, "node_area");
        assert_eq!(data, &IOBuffer::F64(areas.clone()));
        let VertexNumbers::XML {
            connectivity,
            offsets,
        } = &piece.cells.cell_verts
        else {
            panic!("not XML cells")
        };
        assert_eq!(connectivity, &[0, 1, 2, 0, 2, 3]);
        assert_eq!(offsets, &[3, 6]);
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
