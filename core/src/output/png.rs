//! PNG pictures of meshes through `plotters` (bitmap backend, no fonts needed).

use super::{write_atomically_via_path, OutputError};
use crate::mesh::Mesh;
use plotters::prelude::*;
use std::path::Path;

/// Picture settings.
#[derive(Clone, Copy, Debug)]
pub struct PngOptions {
    /// Width of the longer side in pixels.
    pub pixels: u32,
}

impl Default for PngOptions {
    fn default() -> Self {
        PngOptions { pixels: 1200 }
    }
}

/// Draws the mesh's edges (boundary loops darker) to a PNG file, atomically.
pub fn write_mesh_png(path: &Path, mesh: &Mesh, options: PngOptions) -> Result<(), OutputError> {
    let encode = |reason: String| OutputError::Encode {
        path: path.to_path_buf(),
        reason,
    };
    if mesh.num_nodes() == 0 {
        return Err(encode("empty mesh".into()));
    }
    let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
    for i in 0..mesh.num_nodes() {
        let p = mesh.node(i);
        for d in 0..2 {
            lo[d] = lo[d].min(p[d]);
            hi[d] = hi[d].max(p[d]);
        }
    }
    let (w, h) = ((hi[0] - lo[0]).max(1e-300), (hi[1] - lo[1]).max(1e-300));
    let long = options.pixels.clamp(16, 16384) as f64;
    let margin = 10.0;
    let scale = (long - 2.0 * margin) / w.max(h);
    let (px, py) = (
        (w * scale + 2.0 * margin).ceil() as u32,
        (h * scale + 2.0 * margin).ceil() as u32,
    );
    let to_px = |p: [f64; 2]| -> (i32, i32) {
        (
            (margin + (p[0] - lo[0]) * scale).round() as i32,
            (py as f64 - margin - (p[1] - lo[1]) * scale).round() as i32,
        )
    };
    write_atomically_via_path(path, |tmp| {
        let root = BitMapBackend::new(tmp, (px, py)).into_drawing_area();
        let e = |x: String| encode(x);
        root.fill(&RGBColor(250, 249, 244))
            .map_err(|x| e(x.to_string()))?;
        let interior = RGBColor(96, 128, 112);
        for edge in &mesh.edges {
            root.draw(&PathElement::new(
                vec![to_px(mesh.node(edge[0])), to_px(mesh.node(edge[1]))],
                interior,
            ))
            .map_err(|x| e(x.to_string()))?;
        }
        let outline = RGBColor(120, 40, 30).stroke_width(2);
        for b in &mesh.boundary {
            root.draw(&PathElement::new(
                vec![to_px(mesh.node(b.nodes[0])), to_px(mesh.node(b.nodes[1]))],
                outline,
            ))
            .map_err(|x| e(x.to_string()))?;
        }
        root.present().map_err(|x| e(x.to_string()))?;
        Ok(())
    })
}
