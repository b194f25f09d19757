//! `agarium mesh`: build a plate's mesh, report its quality, write VTU and PNG.

use crate::error::CliError;
use crate::plate_args::{MeshingArgs, PlateArgs};
use agarium_core::mesh::{build_mesh, MeshError, QualityReport};
use agarium_core::output::{check_writable, write_mesh_png, write_vtu, Field, PngOptions};
use std::path::PathBuf;

/// Arguments of `agarium mesh`.
#[derive(clap::Args, Debug)]
pub struct MeshArgs {
    #[command(flatten)]
    plate: PlateArgs,
    #[command(flatten)]
    meshing: MeshingArgs,
    /// Write the mesh as a VTK XML unstructured grid (.vtu).
    #[arg(short, long, value_name = "FILE")]
    out: Option<PathBuf>,
    /// Write a picture of the mesh (.png).
    #[arg(long, value_name = "FILE")]
    png: Option<PathBuf>,
    /// Width of the picture's longer side in pixels.
    #[arg(long, value_name = "N", default_value_t = 1200)]
    png_pixels: u32,
    /// Print the quality report as JSON instead of a table.
    #[arg(long)]
    json: bool,
}

fn check_extension(path: &std::path::Path, ext: &str, flag: &str) -> Result<(), CliError> {
    match path.extension().and_then(|e| e.to_str()) {
        Some(e) if e.eq_ignore_ascii_case(ext) => Ok(()),
        _ => Err(CliError::input(format!(
            "{flag} {}: the file name must end in .{ext}",
            path.display()
        ))),
    }
}

/// Creates the directory an output file goes into (only once the mesh exists, so a refused
/// input creates nothing).
fn ensure_parent(path: &std::path::Path) -> Result<(), CliError> {
    match path.parent() {
        Some(dir) if !dir.as_os_str().is_empty() => std::fs::create_dir_all(dir).map_err(|e| {
            CliError::failure(format!("{}: cannot create directory: {e}", dir.display()))
        }),
        _ => Ok(()),
    }
}

/// Runs `agarium mesh`.
pub fn run(args: &MeshArgs) -> Result<(), CliError> {
    if let Some(p) = &args.out {
        check_extension(p, "vtu", "--out")?;
    }
    if let Some(p) = &args.png {
        check_extension(p, "png", "--png")?;
    }
    if !(16..=16384).contains(&args.png_pixels) {
        return Err(CliError::input(format!(
            "--png-pixels must be between 16 and 16384, got {}",
            args.png_pixels
        )));
    }
    // Every output is checked before any is written, so one bad path leaves nothing behind
    // (a path that cannot be written is a failure, exit 1, as a failed write is).
    for (flag, path) in [("--out", &args.out), ("--png", &args.png)] {
        if let Some(p) = path {
            check_writable(p).map_err(|e| CliError::failure(format!("{flag}: {e}")))?;
        }
    }
    let resolved = args.plate.resolve()?;
    let spec = resolved.spec;
    spec.check_numbers().map_err(CliError::input)?;
    let options = args.meshing.options(&spec)?;
    let built = build_mesh(&spec, &options).map_err(|e| match e {
        MeshError::Data(_) | MeshError::Triangulation(_) => CliError::failure(e),
        other => CliError::input(other),
    })?;
    let mesh = &built.mesh;
    let report = QualityReport::of_built(&built);

    for path in args.out.iter().chain(args.png.iter()) {
        ensure_parent(path)?;
    }
    if let Some(path) = &args.out {
        let loops: Vec<f64> = mesh
            .node_loops()
            .iter()
            .map(|t| t.map_or(-1.0, |k| k as f64))
            .collect();
        let target: Vec<f64> = (0..mesh.num_nodes())
            .map(|i| built.sizes.at(mesh.node(i)))
            .collect();
        let min_angle: Vec<f64> = (0..mesh.triangles.len())
            .map(|t| mesh.triangle_angles(t).into_iter().fold(180.0, f64::min))
            .collect();
        write_vtu(
            path,
            mesh,
            &[
                Field {
                    name: "node_area",
                    values: &mesh.node_areas,
                },
                Field {
                    name: "boundary_loop",
                    values: &loops,
                },
                Field {
                    name: "target_size",
                    values: &target,
                },
            ],
            &[
                Field {
                    name: "triangle_area",
                    values: &mesh.triangle_areas,
                },
                Field {
                    name: "min_angle",
                    values: &min_angle,
                },
            ],
        )
        .map_err(CliError::failure)?;
    }
    if let Some(path) = &args.png {
        write_mesh_png(
            path,
            mesh,
            PngOptions {
                pixels: args.png_pixels,
            },
        )
        .map_err(CliError::failure)?;
    }

    if args.json {
        let mut value = serde_json::to_value(&report).map_err(CliError::failure)?;
        if let Some(obj) = value.as_object_mut() {
            obj.insert("unit".into(), args.plate.unit.clone().into());
            if !resolved.loop_names.is_empty() {
                obj.insert("loop_names".into(), serde_json::json!(resolved.loop_names));
            }
        }
        println!(
            "{}",
            serde_json::to_string_pretty(&value).map_err(CliError::failure)?
        );
    } else {
        print!("{}", report.table(&args.plate.unit));
        if !resolved.loop_names.is_empty() {
            let names: Vec<String> = resolved
                .loop_names
                .iter()
                .enumerate()
                .map(|(k, n)| format!("{k}: {}", n.as_deref().unwrap_or("-")))
                .collect();
            println!("{:<28} {}", "boundary loop names", names.join(", "));
        }
        if let Some(p) = &args.out {
            println!("{:<28} {}", "mesh written to", p.display());
        }
        if let Some(p) = &args.png {
            println!("{:<28} {}", "picture written to", p.display());
        }
    }
    if report.negative_edge_weights > 0 {
        eprintln!(
            "warning: {} edge(s) have negative cotangent weight; positivity of the schemes is not guaranteed on this mesh",
            report.negative_edge_weights
        );
    }
    if report.min_angle_deg < options.min_angle_deg - 1e-9 {
        eprintln!(
            "warning: smallest angle {:.2}° is below the requested {:.2}° (the plate's sharpest corner is {:.2}°)",
            report.min_angle_deg,
            options.min_angle_deg,
            report.min_corner_angle_deg.unwrap_or(f64::NAN)
        );
    }
    Ok(())
}
