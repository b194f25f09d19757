//! The .vtu files are read back by independent readers: the VTK library's own XML reader
//! (`vtk` on PyPI) and `meshio`. Node and cell counts, cell type and the range of a field must
//! match what `agarium mesh` reported.

use std::path::Path;
use std::process::{Command, Output};

const READER: &str = r#"
import json, sys
import vtk
from vtk.util.numpy_support import vtk_to_numpy
import meshio

path = sys.argv[1]
r = vtk.vtkXMLUnstructuredGridReader()
r.SetFileName(path)
r.Update()
g = r.GetOutput()
area = vtk_to_numpy(g.GetPointData().GetArray("node_area"))
loops = vtk_to_numpy(g.GetPointData().GetArray("boundary_loop"))
tri_area = vtk_to_numpy(g.GetCellData().GetArray("triangle_area"))
types = {int(g.GetCellType(i)) for i in range(g.GetNumberOfCells())}
m = meshio.read(path)
print(json.dumps({
    "vtk_points": g.GetNumberOfPoints(),
    "vtk_cells": g.GetNumberOfCells(),
    "vtk_cell_types": sorted(types),
    "node_area_min": float(area.min()),
    "node_area_sum": float(area.sum()),
    "loop_max": float(loops.max()),
    "triangle_area_sum": float(tri_area.sum()),
    "meshio_points": int(m.points.shape[0]),
    "meshio_triangles": int(sum(len(c.data) for c in m.cells if c.type == "triangle")),
    "meshio_node_area_max": float(m.point_data["node_area"].max()),
}))
"#;

fn python_with_readers() -> Option<String> {
    let python = std::env::var("AGARIUM_PYTHON").unwrap_or_else(|_| "python3".into());
    let ok = Command::new(&python)
        .args(["-c", "import vtk, meshio"])
        .output()
        .map(|o| o.status.success());
    match ok {
        Ok(true) => Some(python),
        _ => {
            let msg = format!(
                "python '{python}' with the 'vtk' and 'meshio' packages is not available; `pip install vtk meshio` (CI installs them)"
            );
            if std::env::var_os("CI").is_some() {
                panic!("{msg}");
            }
            eprintln!("\n*** SKIPPED vtu_reader: {msg} ***\n");
            None
        }
    }
}

/// Runs `cmd`, insisting that it succeeds (its stderr is the failure message).
fn succeed(cmd: &mut Command) -> Output {
    let out = cmd.output().expect("start the command");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn mesh(dir: &Path, args: &[&str]) -> serde_json::Value {
    let mut all = vec!["mesh"];
    all.extend(args);
    all.extend(["-o", "m.vtu", "--json"]);
    let out = succeed(
        Command::new(env!("CARGO_BIN_EXE_agarium"))
            .args(&all)
            .current_dir(dir),
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn independent_readers_agree_with_the_report() {
    let Some(python) = python_with_readers() else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let report = mesh(
        dir.path(),
        &[
            "--plate",
            "annulus:20,5",
            "--hole",
            "circle:2@12,0",
            "--size",
            "1",
        ],
    );
    let out = succeed(
        Command::new(&python)
            .args(["-c", READER, "m.vtu"])
            .current_dir(dir.path()),
    );
    let got: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let nodes = report["nodes"].as_u64().unwrap();
    let tris = report["triangles"].as_u64().unwrap();
    assert_eq!(got["vtk_points"].as_u64(), Some(nodes));
    assert_eq!(got["meshio_points"].as_u64(), Some(nodes));
    assert_eq!(got["vtk_cells"].as_u64(), Some(tris));
    assert_eq!(got["meshio_triangles"].as_u64(), Some(tris));
    // VTK_TRIANGLE is cell type 5 in the VTK file format specification.
    assert_eq!(got["vtk_cell_types"], serde_json::json!([5]));
    let area = report["area"].as_f64().unwrap();
    assert!(got["node_area_min"].as_f64().unwrap() > 0.0);
    assert!((got["node_area_sum"].as_f64().unwrap() - area).abs() < 1e-9 * area);
    assert!((got["triangle_area_sum"].as_f64().unwrap() - area).abs() < 1e-9 * area);
    assert_eq!(
        got["loop_max"].as_f64(),
        Some(2.0),
        "outer, annulus hole and one more hole"
    );
    assert!(got["meshio_node_area_max"].as_f64().unwrap() > got["node_area_min"].as_f64().unwrap());
}

const RUN_READER: &str = r#"
import json, sys
import vtk
from vtk.util.numpy_support import vtk_to_numpy
import meshio

path = sys.argv[1]
r = vtk.vtkXMLUnstructuredGridReader()
r.SetFileName(path)
r.Update()
g = r.GetOutput()
pd = g.GetPointData()
names = [pd.GetArrayName(i) for i in range(pd.GetNumberOfArrays())]
ranges = {n: [float(vtk_to_numpy(pd.GetArray(n)).min()), float(vtk_to_numpy(pd.GetArray(n)).max())] for n in names}
m = meshio.read(path)
print(json.dumps({
    "points": g.GetNumberOfPoints(),
    "names": names,
    "ranges": ranges,
    "meshio_names": sorted(m.point_data.keys()),
    "meshio_u_max": float(m.point_data["u"].max()),
}))
"#;

/// The last state of a run, read by VTK's XML reader and by meshio: every species and the
/// declared field are present and their ranges are the ones the run's summary printed.
#[test]
fn independent_readers_read_run_states() {
    let Some(python) = python_with_readers() else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let out = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args([
            "run", model, "--plate", "circle:4", "--size", "0.4", "--spot", "0,0,0.1", "--end",
            "0.5", "--every", "0.5", "-o", "r",
        ])
        .current_dir(dir.path())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(out.status.success(), "{err}");
    let read = succeed(
        Command::new(&python)
            .args(["-c", RUN_READER])
            .arg(dir.path().join("r/colony_4species_0001.vtu")),
    );
    let v: serde_json::Value = serde_json::from_slice(&read.stdout).unwrap();
    let names: Vec<&str> = v["names"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert_eq!(names, ["u", "c", "n", "w", "all_cells"]);
    let nodes: u64 = err
        .lines()
        .next()
        .and_then(|l| l.split(" on ").nth(1))
        .and_then(|l| l.split(' ').next())
        .and_then(|n| n.replace(',', "").parse().ok())
        .expect("node count in the first line");
    assert_eq!(v["points"].as_u64(), Some(nodes));
    // The summary's min and max of each species, printed with 7 significant digits.
    for s in ["u", "c", "n", "w"] {
        let line = err
            .lines()
            .find(|l| l.trim_start().starts_with(&format!("{s} ")))
            .expect("species line");
        let cols: Vec<f64> = line
            .split_whitespace()
            .skip(1)
            .map(|x| x.parse().unwrap())
            .collect();
        let range = &v["ranges"][s];
        for (got, want) in [
            (range[0].as_f64().unwrap(), cols[1]),
            (range[1].as_f64().unwrap(), cols[2]),
        ] {
            assert!(
                (got - want).abs() <= 1e-6 * want.abs().max(1e-300),
                "{s}: {got} vs {want}"
            );
        }
    }
    assert_eq!(v["meshio_u_max"], v["ranges"]["u"][1]);
}

const SERIES_READER: &str = r#"
import json, os, sys
import xml.etree.ElementTree as ET
import numpy as np
import vtk
from vtk.util.numpy_support import vtk_to_numpy
import meshio

def read(path):
    r = vtk.vtkXMLUnstructuredGridReader()
    r.SetFileName(path)
    r.Update()
    if r.GetErrorCode() != 0:
        raise SystemExit("VTK could not read " + path)
    g = r.GetOutput()
    pd = g.GetPointData()
    arrays = {pd.GetArrayName(i): vtk_to_numpy(pd.GetArray(i)) for i in range(pd.GetNumberOfArrays())}
    pts = vtk_to_numpy(g.GetPoints().GetData())
    conn = vtk_to_numpy(g.GetCells().GetConnectivityArray())
    return g.GetNumberOfPoints(), g.GetNumberOfCells(), arrays, pts, conn

out = {}
for folder in sys.argv[1:]:
    pvd = [f for f in os.listdir(folder) if f.endswith(".pvd")][0]
    root = ET.parse(os.path.join(folder, pvd)).getroot()
    assert root.get("type") == "Collection", root.attrib
    entries = []
    for ds in root.iter("DataSet"):
        path = os.path.join(folder, ds.get("file"))
        n, c, arrays, pts, conn = read(path)
        m = meshio.read(path)
        meshio_same = all(np.array_equal(np.ravel(m.point_data[k]), v) for k, v in arrays.items())
        entries.append({
            "t": float(ds.get("timestep")), "file": ds.get("file"), "points": n, "cells": c,
            "bytes": os.path.getsize(path), "meshio_same": bool(meshio_same),
            "arrays": {k: v.tolist() for k, v in arrays.items()},
            "points_xy": pts[:, :2].tolist(), "connectivity": conn.tolist(),
        })
    import csv
    with open(os.path.join(folder, "colony_4species_diagnostics.csv"), newline="") as f:
        rows = list(csv.DictReader(f))
    out[folder + "_csv"] = {
        "columns": list(rows[0].keys()),
        "rows": len(rows),
        "t_last": float(rows[-1]["t"]),
        "worst_drift": max(abs(float(r["biomass_and_food_drift"])) for r in rows),
        "min_u": min(float(r["u_min"]) for r in rows),
    }
    out[folder] = entries
print(json.dumps(out))
"#;

/// The .pvd index and the states it lists, plain and zlib-compressed, read by an XML parser
/// (Python's), VTK's reader and meshio: the index lists every output time with a readable
/// file, and the compressed files hold exactly the plain files' values.
#[test]
fn series_index_and_compressed_states_read_back_identically() {
    let Some(python) = python_with_readers() else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    for (folder, extra) in [("plain", None), ("zlib", Some("--compress"))] {
        let mut args = vec![
            "run", model, "--plate", "circle:4", "--size", "0.3", "--spot", "0,0,0.1", "--end",
            "0.5", "--every", "0.25", "-q", "-o", folder,
        ];
        args.extend(extra);
        succeed(
            Command::new(env!("CARGO_BIN_EXE_agarium"))
                .env("RAYON_NUM_THREADS", "1")
                .args(&args)
                .current_dir(dir.path()),
        );
    }
    let read = succeed(
        Command::new(&python)
            .args(["-c", SERIES_READER, "plain", "zlib"])
            .current_dir(dir.path()),
    );
    let v: serde_json::Value = serde_json::from_slice(&read.stdout).unwrap();
    // The diagnostics table, parsed by Python's csv module: the documented columns, one row
    // per accepted step up to the end, and the model's conserved combination conserved.
    let table = &v["plain_csv"];
    let columns: Vec<&str> = table["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    assert_eq!(
        columns[..5],
        ["t", "dt", "newton_iterations", "rejections", "u_integral"]
    );
    assert!(columns.contains(&"biomass_and_food_drift"), "{columns:?}");
    assert!(table["rows"].as_u64().unwrap() > 3);
    assert_eq!(table["t_last"], 0.5);
    assert!(table["worst_drift"].as_f64().unwrap() < 1e-10, "{table}");
    assert!(table["min_u"].as_f64().unwrap() >= 0.0, "{table}");
    let (plain, zlib) = (
        v["plain"].as_array().unwrap(),
        v["zlib"].as_array().unwrap(),
    );
    let times: Vec<f64> = plain.iter().map(|e| e["t"].as_f64().unwrap()).collect();
    assert_eq!(times, [0.0, 0.25, 0.5]);
    assert_eq!(plain.len(), zlib.len());
    for (p, z) in plain.iter().zip(zlib) {
        assert_eq!(p["t"], z["t"]);
        assert_eq!(p["points"], z["points"]);
        assert_eq!(p["cells"], z["cells"]);
        assert!(p["meshio_same"].as_bool().unwrap() && z["meshio_same"].as_bool().unwrap());
        for key in ["arrays", "points_xy", "connectivity"] {
            assert!(p[key] == z[key], "{key} differs at t = {}", p["t"]);
        }
        assert_eq!(
            p["arrays"].as_object().unwrap().keys().collect::<Vec<_>>(),
            ["all_cells", "c", "n", "u", "w"]
        );
        // Smooth fields compress: the file is smaller, not merely different.
        assert!(
            z["bytes"].as_u64().unwrap() < p["bytes"].as_u64().unwrap(),
            "{} vs {} bytes",
            z["bytes"],
            p["bytes"]
        );
    }
}
