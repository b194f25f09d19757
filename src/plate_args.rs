//! Command-line description of a plate and of meshing options, shared by every command that
//! builds a mesh.
//!
//! Shapes are written `KIND:NUMBERS[@X,Y]`, e.g. `circle:45`, `ellipse:40,25@5,0`,
//! `rect:80,50`, `annulus:45,12`, `polygon:0,0;30,0;30,20;0,20`.

use crate::error::CliError;
use agarium_core::geometry::{Cut, PlateSpec, Shape};
use agarium_core::mesh::{MeshOptions, Spot};
use agarium_run::{PlateSource, ResolvedPlate};
use std::path::PathBuf;

/// Plate options.
#[derive(clap::Args, Debug, Clone)]
pub struct PlateArgs {
    /// Outer outline: circle:R, ellipse:A,B, rect:W,H, annulus:R,r or polygon:x,y;x,y;...
    /// (append @X,Y to move the centre of a circle, ellipse, rectangle or annulus).
    // Not required by the parser: `run` may take the plate from a run file, and `spec()`
    // says what is missing.
    #[arg(long, value_name = "SHAPE", conflicts_with_all = ["outline", "photo"])]
    pub plate: Option<String>,
    /// Outline file: an SVG drawing (.svg: closed paths, the largest is the plate), GeoJSON
    /// (.geojson/.json: one polygon, first ring the plate) or lines of `x y` (loops separated by
    /// blank lines, first outer, then holes).
    #[arg(long, value_name = "FILE", conflicts_with = "photo")]
    pub outline: Option<PathBuf>,
    /// Photograph of the plate (PNG or JPEG): its outline and wells are traced.
    #[arg(long, value_name = "FILE")]
    pub photo: Option<PathBuf>,
    /// Grey level (0-255) above which a pixel is plate [default: Otsu's automatic threshold].
    #[arg(long, value_name = "LEVEL", requires = "photo")]
    pub photo_threshold: Option<u8>,
    /// Take dark pixels as plate.
    #[arg(long, requires = "photo")]
    pub photo_invert: bool,
    /// The plate is the region under pixel X,Y (column, row from the top) [default: the largest].
    #[arg(long, value_name = "X,Y", requires = "photo")]
    pub photo_pixel: Option<String>,
    /// Length per pixel (in the length unit).
    #[arg(
        long,
        value_name = "L",
        requires = "photo",
        conflicts_with = "photo_width"
    )]
    pub photo_scale: Option<f64>,
    /// Real width of the plate (its extent along x), instead of --photo-scale.
    #[arg(long, value_name = "W", requires = "photo")]
    pub photo_width: Option<f64>,
    /// Wells and specks smaller than this many pixels are dropped [default: 16].
    #[arg(long, value_name = "PX", requires = "photo")]
    pub photo_speck: Option<f64>,
    /// Simplification tolerance in pixels (Douglas-Peucker) [default: 0.7].
    #[arg(long, value_name = "PX", requires = "photo")]
    pub photo_tolerance: Option<f64>,
    /// Where to write the photograph with the traced loops drawn on it
    /// [default: traced-<photo name>.png in the current directory].
    #[arg(long, value_name = "FILE", requires = "photo")]
    pub photo_overlay: Option<PathBuf>,
    /// A hole in the plate (well, obstacle), same syntax as --plate; repeatable.
    #[arg(long, value_name = "SHAPE")]
    pub hole: Vec<String>,
    /// Cut off the side NX*x + NY*y > D of the plate; repeatable.
    #[arg(long, value_name = "NX,NY,D", allow_hyphen_values = true)]
    pub trim: Vec<String>,
    /// Remove the wedge with apex (X,Y) between directions FROM and TO (degrees,
    /// counter-clockwise); repeatable. Applied after every --trim.
    #[arg(long, value_name = "X,Y,FROM,TO", allow_hyphen_values = true)]
    pub wedge: Vec<String>,
    /// Name of the length unit of all coordinates and sizes (for reports; an SVG drawn in mm,
    /// cm, in, pt or pc is converted to it, which must then be mm, cm, m, um or in).
    #[arg(long, value_name = "NAME", default_value = "mm")]
    pub unit: String,
}

/// Meshing options.
#[derive(clap::Args, Debug, Clone)]
pub struct MeshingArgs {
    /// Target edge length away from spots [default: 1/50 of the plate's widest extent].
    #[arg(
        long,
        value_name = "H",
        conflicts_with = "max_area",
        allow_hyphen_values = true
    )]
    pub size: Option<f64>,
    /// Largest triangle area instead of an edge length.
    #[arg(
        long = "largest-triangle",
        alias = "max-area",
        value_name = "A",
        allow_hyphen_values = true
    )]
    pub max_area: Option<f64>,
    /// Smallest triangle angle in degrees (at most 34).
    #[arg(
        long = "smallest-angle",
        alias = "min-angle",
        value_name = "DEG",
        default_value_t = 30.0,
        allow_hyphen_values = true
    )]
    pub min_angle: f64,
    /// Refine near (X,Y) to edge length H [default H: a fifth of --size]; repeatable.
    #[arg(long, value_name = "X,Y[,H]", allow_hyphen_values = true)]
    pub spot: Vec<String>,
    /// Growth of the edge length per unit distance from a spot.
    #[arg(
        long,
        value_name = "G",
        default_value_t = 0.25,
        allow_hyphen_values = true
    )]
    pub grading: f64,
    /// Most nodes the mesh may have.
    #[arg(long, value_name = "N", default_value_t = 2_000_000)]
    pub max_nodes: usize,
}

pub(crate) use agarium_run::numbers;

/// Memory a mesh node costs at least while meshing and solving (coordinates, triangles,
/// edges and the triangulation's own structures, a few hundred bytes; the solver's matrices
/// more): the estimate `--max-nodes` is held against.
pub const BYTES_PER_NODE: u64 = 1024;

/// The default `--max-nodes`, never refused (a machine too small for it fails later).
const DEFAULT_MAX_NODES: usize = 2_000_000;

/// The machine's memory in bytes (Linux: `MemTotal` of /proc/meminfo; `None` elsewhere, and
/// then `--max-nodes` is not checked against it).
fn machine_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kib.checked_mul(1024)
}

/// A node budget above the default whose mesh could not fit in `memory` bytes is refused.
pub fn check_node_budget(max_nodes: usize, memory: Option<u64>) -> Result<(), CliError> {
    let Some(memory) = memory else { return Ok(()) };
    let need = (max_nodes as u64).saturating_mul(BYTES_PER_NODE);
    if max_nodes > DEFAULT_MAX_NODES && need > memory {
        let gib = |b: u64| b as f64 / (1u64 << 30) as f64;
        return Err(CliError::input(format!(
            "--max-nodes {max_nodes}: a mesh of that many nodes needs at least {:.1} GiB ({BYTES_PER_NODE} bytes per node), more than this machine's {:.1} GiB of memory; give at most {}",
            gib(need),
            gib(memory),
            memory / BYTES_PER_NODE
        )));
    }
    Ok(())
}

/// Parses `KIND:NUMBERS[@X,Y]`; `flag` names the option in messages.
pub fn parse_shape(flag: &str, text: &str) -> Result<Shape, CliError> {
    let what = format!("{flag} '{text}'");
    let err = |m: String| CliError::input(m);
    let (kind, rest) = text
        .split_once(':')
        .ok_or_else(|| err(format!("{what}: expected KIND:NUMBERS, e.g. circle:45")))?;
    let (body, at) = match rest.split_once('@') {
        Some((b, a)) => (b, Some(a)),
        None => (rest, None),
    };
    let centre = match at {
        Some(a) => {
            let c = numbers(&what, a, ',').map_err(err)?;
            if c.len() != 2 {
                return Err(err(format!(
                    "{what}: the centre after @ needs two numbers X,Y"
                )));
            }
            [c[0], c[1]]
        }
        None => [0.0, 0.0],
    };
    let count = |v: &[f64], n: usize, names: &str| -> Result<(), CliError> {
        if v.len() == n {
            Ok(())
        } else {
            Err(err(format!(
                "{what}: {kind} takes {names}, got {} number(s)",
                v.len()
            )))
        }
    };
    let shape = match kind.trim() {
        "circle" => {
            let v = numbers(&what, body, ',').map_err(err)?;
            count(&v, 1, "a radius R")?;
            Shape::Circle {
                centre,
                radius: v[0],
            }
        }
        "ellipse" => {
            let v = numbers(&what, body, ',').map_err(err)?;
            count(&v, 2, "semi-axes A,B")?;
            Shape::Ellipse {
                centre,
                semi_x: v[0],
                semi_y: v[1],
            }
        }
        "rect" => {
            let v = numbers(&what, body, ',').map_err(err)?;
            count(&v, 2, "width and height W,H")?;
            Shape::Rectangle {
                centre,
                width: v[0],
                height: v[1],
            }
        }
        "annulus" => {
            let v = numbers(&what, body, ',').map_err(err)?;
            count(&v, 2, "outer and inner radius R,r")?;
            Shape::Annulus {
                centre,
                outer: v[0],
                inner: v[1],
            }
        }
        "polygon" => {
            if at.is_some() {
                return Err(err(format!(
                    "{what}: a polygon has no centre; give its points where they are"
                )));
            }
            let mut points = Vec::new();
            for (k, pair) in body.split(';').filter(|s| !s.trim().is_empty()).enumerate() {
                let v = numbers(&what, pair, ',').map_err(err)?;
                if v.len() != 2 {
                    return Err(err(format!(
                        "{what}: point {} '{pair}' needs two numbers x,y",
                        k + 1
                    )));
                }
                points.push([v[0], v[1]]);
            }
            Shape::Polygon { points }
        }
        other => {
            return Err(err(format!(
                "{what}: unknown shape '{other}' (use circle, ellipse, rect, annulus or polygon)"
            )))
        }
    };
    Ok(shape)
}

impl PlateArgs {
    /// Whether these options name an outer outline (a shape, an outline file or a photograph).
    pub fn names_a_plate(&self) -> bool {
        self.plate.is_some() || self.outline.is_some() || self.photo.is_some()
    }

    /// The plate source these options give: the same value a run file's `[plate]` table reads.
    pub fn source(&self) -> Result<PlateSource, CliError> {
        let photo_pixel = match &self.photo_pixel {
            None => None,
            Some(t) => {
                let v: Vec<&str> = t.split(',').collect();
                match (
                    v.first().map(|s| s.trim().parse::<u32>()),
                    v.get(1).map(|s| s.trim().parse::<u32>()),
                ) {
                    (Some(Ok(x)), Some(Ok(y))) if v.len() == 2 => Some([x, y]),
                    _ => {
                        return Err(CliError::input(format!(
                            "--photo-pixel '{t}': expected two whole numbers X,Y"
                        )))
                    }
                }
            }
        };
        let outer = match &self.plate {
            Some(text) => Some(parse_shape("--plate", text)?),
            None => None,
        };
        if !self.names_a_plate() {
            return Err(CliError::input(
                "give the plate with --plate, --outline or --photo",
            ));
        }
        let holes = self
            .hole
            .iter()
            .map(|h| parse_shape("--hole", h))
            .collect::<Result<Vec<_>, _>>()?;
        let mut cuts = Vec::new();
        for t in &self.trim {
            let v = numbers(&format!("--trim '{t}'"), t, ',').map_err(CliError::input)?;
            if v.len() != 3 {
                return Err(CliError::input(format!(
                    "--trim '{t}': expected three numbers NX,NY,D"
                )));
            }
            cuts.push(Cut::HalfPlane {
                normal: [v[0], v[1]],
                offset: v[2],
            });
        }
        for w in &self.wedge {
            let v = numbers(&format!("--wedge '{w}'"), w, ',').map_err(CliError::input)?;
            if v.len() != 4 {
                return Err(CliError::input(format!(
                    "--wedge '{w}': expected four numbers X,Y,FROM,TO"
                )));
            }
            cuts.push(Cut::Wedge {
                apex: [v[0], v[1]],
                from_deg: v[2],
                to_deg: v[3],
            });
        }
        Ok(PlateSource {
            outer,
            outline: self.outline.clone(),
            photo: self.photo.clone(),
            photo_threshold: self.photo_threshold,
            photo_invert: self.photo_invert,
            photo_pixel,
            photo_scale: self.photo_scale,
            photo_width: self.photo_width,
            photo_speck: self.photo_speck,
            photo_tolerance: self.photo_tolerance,
            photo_overlay: self.photo_overlay.clone(),
            unit: Some(self.unit.clone()),
            holes,
            cuts,
        })
    }

    /// The plate these options give, with the names of its loops.
    pub fn resolve(&self) -> Result<ResolvedPlate, CliError> {
        Ok(self.source()?.resolve()?)
    }

    /// The plate description these options give.
    pub fn spec(&self) -> Result<PlateSpec, CliError> {
        Ok(self.resolve()?.spec)
    }
}

/// Widest extent of a shape, for the default edge length.
fn extent(shape: &Shape) -> f64 {
    match shape {
        Shape::Circle { radius, .. } => 2.0 * radius,
        Shape::Ellipse { semi_x, semi_y, .. } => 2.0 * semi_x.max(*semi_y),
        Shape::Rectangle { width, height, .. } => width.max(*height),
        Shape::Annulus { outer, .. } => 2.0 * outer,
        Shape::Polygon { points } => {
            let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
            for p in points {
                for d in 0..2 {
                    lo[d] = lo[d].min(p[d]);
                    hi[d] = hi[d].max(p[d]);
                }
            }
            (hi[0] - lo[0]).max(hi[1] - lo[1])
        }
    }
}

/// The earlier spellings of the mesh options, still accepted for a release, and their names
/// now.
const OLD_MESH_NAMES: [(&str, &str); 2] = [
    ("--max-area", "--largest-triangle"),
    ("--min-angle", "--smallest-angle"),
];

/// Prints a warning on standard error for each earlier mesh option spelling among `args`.
fn warn_old_mesh_names(args: impl Iterator<Item = std::ffi::OsString>) {
    for arg in args {
        let Some(arg) = arg.to_str() else { continue };
        for (old, new) in OLD_MESH_NAMES {
            if arg == old || arg.starts_with(&format!("{old}=")) {
                eprintln!(
                    "warning: {old} is now called {new}; the old name goes in a later release"
                );
            }
        }
    }
}

impl MeshingArgs {
    /// The meshing options, with defaults that depend on the plate.
    pub fn options(&self, spec: &PlateSpec) -> Result<MeshOptions, CliError> {
        warn_old_mesh_names(std::env::args_os());
        check_node_budget(self.max_nodes, machine_memory())?;
        let size = match (self.size, self.max_area) {
            (Some(h), _) => h,
            (None, Some(a)) => {
                if !(a.is_finite() && a > 0.0) {
                    return Err(CliError::input(format!(
                        "--largest-triangle must be a positive number, got {a}"
                    )));
                }
                MeshOptions::size_for_max_area(a)
            }
            (None, None) => {
                let h = extent(&spec.outer) / 50.0;
                if !(h.is_finite() && h > 0.0) {
                    return Err(CliError::input(format!(
                        "the plate is too large to compute with: its extent is {:e}; express it in another length unit",
                        extent(&spec.outer)
                    )));
                }
                h
            }
        };
        if !(size.is_finite() && size > 0.0) {
            return Err(CliError::input(format!(
                "--size must be a positive number, got {size}"
            )));
        }
        let mut spots = Vec::new();
        for s in &self.spot {
            let v = numbers(&format!("--spot '{s}'"), s, ',').map_err(CliError::input)?;
            let spot = match v.as_slice() {
                [x, y] => Spot {
                    centre: [*x, *y],
                    size: size / 5.0,
                },
                [x, y, h] => Spot {
                    centre: [*x, *y],
                    size: *h,
                },
                _ => {
                    return Err(CliError::input(format!(
                        "--spot '{s}': expected X,Y or X,Y,H"
                    )))
                }
            };
            spots.push(spot);
        }
        Ok(MeshOptions {
            size,
            min_angle_deg: self.min_angle,
            spots,
            grading: self.grading,
            max_nodes: self.max_nodes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shapes_parse() {
        assert_eq!(
            parse_shape("--plate", "circle:45").unwrap(),
            Shape::Circle {
                centre: [0.0, 0.0],
                radius: 45.0
            }
        );
        assert_eq!(
            parse_shape("--hole", "rect:4,2@10,-3").unwrap(),
            Shape::Rectangle {
                centre: [10.0, -3.0],
                width: 4.0,
                height: 2.0
            }
        );
        assert_eq!(
            parse_shape("--plate", "polygon:0,0;1,0;0,1").unwrap(),
            Shape::Polygon {
                points: vec![[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]
            }
        );
        for bad in [
            "circle",
            "circle:x",
            "circle:1,2",
            "blob:3",
            "polygon:0,0;1",
            "circle:3@1",
            "polygon:0,0@1,1",
        ] {
            let e = parse_shape("--plate", bad).unwrap_err();
            assert_eq!(e.code, 2);
            assert!(e.message.contains(bad), "{}", e.message);
        }
    }
}
