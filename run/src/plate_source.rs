//! Where a plate comes from: a shape, an outline file (`x y` loops, SVG or GeoJSON) or a
//! photograph, with holes and cuts. The command line's plate options and a run file's `[plate]`
//! table both become a [`PlateSource`] and are resolved here into the [`PlateSpec`] a run
//! records, so both take the same sources with the same words (`--photo-width` on the command
//! line is `photo_width` in the run file).

use std::path::PathBuf;

use agarium_core::geometry::{
    read_outline_file, trace_file, write_overlay, Cut, PlateSpec, Scale, Shape, TraceError,
    TraceOptions,
};
use serde::Deserialize;

use crate::error::RunError;

/// A plate as written in a run file's `[plate]` table or on the command line: exactly one of
/// `outer`, `outline` and `photo`, then holes and cuts.
#[derive(Clone, Debug, Default, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PlateSource {
    /// The outer shape (`--plate` on the command line).
    pub outer: Option<Shape>,
    /// An outline file: `x y` loops, an SVG drawing (`.svg`) or GeoJSON (`.geojson`, `.json`).
    pub outline: Option<PathBuf>,
    /// A photograph (PNG or JPEG) whose plate region is traced.
    pub photo: Option<PathBuf>,
    /// Grey level above which a pixel is plate (default: Otsu's threshold).
    pub photo_threshold: Option<u8>,
    /// Take dark pixels as plate.
    #[serde(default)]
    pub photo_invert: bool,
    /// The plate is the region under this pixel (column, row from the top).
    pub photo_pixel: Option<[u32; 2]>,
    /// Length per pixel.
    pub photo_scale: Option<f64>,
    /// Real width of the plate (its extent along x), instead of `photo_scale`.
    pub photo_width: Option<f64>,
    /// Wells and specks smaller than this many pixels are dropped.
    pub photo_speck: Option<f64>,
    /// Douglas–Peucker tolerance in pixels.
    pub photo_tolerance: Option<f64>,
    /// Where the photograph with the traced loops is written (default:
    /// `traced-<photo name>.png` in the current directory).
    pub photo_overlay: Option<PathBuf>,
    /// Name of the length unit (default mm); an SVG drawn in physical units is converted to it.
    pub unit: Option<String>,
    /// Holes: wells, obstacles.
    #[serde(default)]
    pub holes: Vec<Shape>,
    /// Cuts applied in order.
    #[serde(default)]
    pub cuts: Vec<Cut>,
}

/// A resolved plate and the names its outline file gave its loops (outer first; empty when
/// the plate is not from such a file).
#[derive(Clone, Debug, PartialEq)]
pub struct ResolvedPlate {
    /// The plate description a run records.
    pub spec: PlateSpec,
    /// Loop names from an SVG's ids or a GeoJSON's `name` properties, outer first, then the
    /// file's holes (`None` where the file named none).
    pub loop_names: Vec<Option<String>>,
}

impl PlateSource {
    /// The length unit (default mm).
    pub fn unit(&self) -> &str {
        self.unit.as_deref().unwrap_or("mm")
    }

    /// Whether the source names an outer outline at all.
    pub fn names_a_plate(&self) -> bool {
        self.outer.is_some() || self.outline.is_some() || self.photo.is_some()
    }

    /// Joins relative file names to `base` (a run file's folder).
    pub fn resolve_paths(&mut self, base: &std::path::Path) {
        for p in [&mut self.outline, &mut self.photo, &mut self.photo_overlay] {
            if let Some(q) = p.as_mut() {
                if q.is_relative() {
                    *q = base.join(&*q);
                }
            }
        }
    }

    /// Reads the outline file or traces the photograph (writing its overlay) and adds the
    /// holes and cuts.
    pub fn resolve(&self) -> Result<ResolvedPlate, RunError> {
        let photo_options = self.photo_threshold.is_some()
            || self.photo_invert
            || self.photo_pixel.is_some()
            || self.photo_scale.is_some()
            || self.photo_width.is_some()
            || self.photo_speck.is_some()
            || self.photo_tolerance.is_some()
            || self.photo_overlay.is_some();
        if photo_options && self.photo.is_none() {
            return Err(RunError::input(
                "the photo_* settings (--photo-*) need a photograph: photo (--photo)",
            ));
        }
        let (outer, mut holes, loop_names) = match (&self.outer, &self.outline, &self.photo) {
            (Some(shape), None, None) => (shape.clone(), Vec::new(), Vec::new()),
            (None, Some(path), None) => {
                let outline = read_outline_file(path, self.unit()).map_err(RunError::input)?;
                let names = outline.names();
                let (outer, holes) = outline.shapes();
                let names = if names.iter().all(Option::is_none) {
                    Vec::new()
                } else {
                    names
                };
                (outer, holes, names)
            }
            (None, None, Some(photo)) => {
                let (outer, holes) = self.traced(photo)?;
                (outer, holes, Vec::new())
            }
            (None, None, None) => {
                return Err(RunError::input(
                    "the plate needs an outer outline: outer (--plate), outline (--outline) or photo (--photo)",
                ))
            }
            _ => {
                return Err(RunError::input(
                    "the plate takes one outer outline: outer (--plate), outline (--outline) or photo (--photo), not several",
                ))
            }
        };
        holes.extend(self.holes.iter().cloned());
        Ok(ResolvedPlate {
            spec: PlateSpec {
                outer,
                holes,
                cuts: self.cuts.clone(),
            },
            loop_names,
        })
    }

    /// Traces the photograph and writes its overlay.
    fn traced(&self, photo: &std::path::Path) -> Result<(Shape, Vec<Shape>), RunError> {
        let scale = match (self.photo_scale, self.photo_width) {
            (Some(_), Some(_)) => {
                return Err(RunError::input(
                    "give the photograph's scale once: photo_scale (--photo-scale) or photo_width (--photo-width)",
                ))
            }
            (None, Some(w)) => Scale::Width(w),
            (Some(s), None) => Scale::PerPixel(s),
            (None, None) => {
                return Err(RunError::input(format!(
                    "{}: the photograph needs a scale: photo_scale (--photo-scale, length per pixel) or photo_width (--photo-width, the plate's real width)",
                    photo.display()
                )))
            }
        };
        let defaults = TraceOptions::default();
        let opts = TraceOptions {
            threshold: self.photo_threshold,
            invert: self.photo_invert,
            seed: self.photo_pixel.map(|[x, y]| (x, y)),
            min_area_px: self.photo_speck.unwrap_or(defaults.min_area_px),
            tolerance_px: self.photo_tolerance.unwrap_or(defaults.tolerance_px),
            scale,
        };
        let overlay = self.photo_overlay.clone().unwrap_or_else(|| {
            let stem = photo
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "photo".into());
            PathBuf::from(format!("traced-{stem}.png"))
        });
        // Checked before tracing, so an overlay that cannot be written stops everything early.
        agarium_core::output::check_writable(&overlay)
            .map_err(|e| RunError::input(format!("photo overlay (--photo-overlay): {e}")))?;
        let traced = trace_file(photo, &opts).map_err(|e| match e {
            TraceError::Unreadable { .. } => RunError::input(e),
            _ => RunError::input(format!("{}: {e}", photo.display())),
        })?;
        write_overlay(photo, &traced, &overlay).map_err(RunError::input)?;
        Ok(traced.shapes())
    }
}
