//! Field files: `fields.h5` (HDF5) with the grid and every sampled field, each with a `units`
//! attribute and the run metadata as file attributes, and `fields.xdmf`, an XDMF 3 description
//! of the same arrays so that ParaView or VisIt open them directly (XDMF is an open standard).
//!
//! Layout of fields.h5: `/grid/{z_edges, r_edges, z_centers, r_centers}` (m), `/grid/cell_volume`
//! (m³, nz × nr), `/fields/<name>` (nz × nr, row-major: cell (iz, ir) at iz · nr + ir, NaN where
//! nothing was sampled), `/fields/species/<gas>_number_density`, and the axis profile of the beam
//! (`beam::axis_profile`, the first radial row of cells, 1-D over nz): `/axis/z` (m),
//! `/axis/number_density` (1/m³), `/axis/number_density_over_upstream` (1),
//! `/axis/samples` (1) and `/axis/species/<gas>_mole_fraction` (1). In the XDMF file the mesh is
//! a 2-D rectilinear mesh with x = r and y = z (the axis group is not part of it). Invariant: both files are written to temporary
//! names and renamed into place, so a reader never sees a partial file.

use crate::error::{Error, Result};
use crate::numerics::Plan;
use crate::sample::Fields;
use std::path::{Path, PathBuf};

/// HDF5 file name inside a run directory.
pub const HDF5_FILE: &str = "fields.h5";
/// XDMF file name inside a run directory.
pub const XDMF_FILE: &str = "fields.xdmf";

/// Write fields.h5 and fields.xdmf into `dir`. `meta` are (name, value) file attributes.
pub fn write(
    dir: &Path,
    plan: &Plan,
    fields: &Fields,
    meta: &[(&str, String)],
) -> Result<Vec<PathBuf>> {
    let h5 = dir.join(HDF5_FILE);
    write_hdf5(&h5, plan, fields, meta)?;
    let xdmf = dir.join(XDMF_FILE);
    crate::output::write_atomic(&xdmf, xdmf_text(plan, fields).as_bytes())?;
    Ok(vec![h5, xdmf])
}

/// Edges of an axis.
fn edges(axis: &crate::grid::Axis) -> Vec<f64> {
    let mut e: Vec<f64> = (0..axis.len()).map(|i| axis.edges(i).0).collect();
    e.push(axis.edges(axis.len() - 1).1);
    e
}

#[cfg(feature = "hdf5-output")]
fn write_hdf5(path: &Path, plan: &Plan, fields: &Fields, meta: &[(&str, String)]) -> Result<()> {
    use hdf5::types::VarLenUnicode;
    let tmp = path.with_file_name(format!(".{HDF5_FILE}.{}.tmp", std::process::id()));
    let fail = |e: hdf5::Error| Error::io(path, std::io::Error::other(e.to_string()));
    let text = |s: &str| -> Result<VarLenUnicode> {
        s.parse::<VarLenUnicode>()
            .map_err(|e| Error::io(path, std::io::Error::other(e.to_string())))
    };
    let result = (|| -> Result<()> {
        let file = hdf5::File::create(&tmp).map_err(fail)?;
        for (k, v) in meta {
            file.new_attr::<VarLenUnicode>()
                .create(*k)
                .map_err(fail)?
                .write_scalar(&text(v)?)
                .map_err(fail)?;
        }
        let g = &plan.grid;
        let (nz, nr) = (g.z.len(), g.r.len());
        let grid = file.create_group("grid").map_err(fail)?;
        // One dataset with its units and description; 1-D when `shape` is None, nz × nr otherwise.
        let put = |group: &hdf5::Group,
                   name: &str,
                   data: &[f64],
                   two_d: bool,
                   units: &str,
                   what: &str|
         -> Result<()> {
            let shape: Vec<usize> = if two_d {
                vec![nz, nr]
            } else {
                vec![data.len()]
            };
            let ds = group
                .new_dataset::<f64>()
                .shape(shape)
                .create(name)
                .map_err(fail)?;
            ds.write_raw(data).map_err(fail)?;
            for (key, value) in [("units", units), ("description", what)] {
                ds.new_attr::<VarLenUnicode>()
                    .create(key)
                    .map_err(fail)?
                    .write_scalar(&text(value)?)
                    .map_err(fail)?;
            }
            Ok(())
        };
        let put1 = |group: &hdf5::Group, name: &str, data: &[f64], units: &str, what: &str| {
            put(group, name, data, false, units, what)
        };
        let put2 = |group: &hdf5::Group, name: &str, data: &[f64], units: &str, what: &str| {
            put(group, name, data, true, units, what)
        };
        put1(
            &grid,
            "z_edges",
            &edges(&g.z),
            "m",
            "axial cell edges (flow direction +z; partition faces at z = 0 and z = thickness)",
        )?;
        put1(&grid, "r_edges", &edges(&g.r), "m", "radial cell edges")?;
        put1(
            &grid,
            "z_centers",
            &(0..nz).map(|i| g.z.center(i)).collect::<Vec<_>>(),
            "m",
            "axial cell centres",
        )?;
        put1(
            &grid,
            "r_centers",
            &(0..nr).map(|i| g.r.center(i)).collect::<Vec<_>>(),
            "m",
            "radial cell centres",
        )?;
        put2(
            &grid,
            "cell_volume",
            &g.volume,
            "m^3",
            "gas volume of each cell (0 inside the partition)",
        )?;
        let fg = file.create_group("fields").map_err(fail)?;
        for (name, units, what, data) in fields.named() {
            put2(&fg, name, data, units, what)?;
        }
        let sg = fg.create_group("species").map_err(fail)?;
        for (s, c) in plan.case.gas.components.iter().enumerate() {
            put2(
                &sg,
                &format!("{}_number_density", c.species.name),
                &fields.species_density[s],
                "1/m^3",
                "number density of one species",
            )?;
        }
        let axis = crate::beam::axis_profile(plan, fields);
        let ag = file.create_group("axis").map_err(fail)?;
        put1(
            &ag,
            "z",
            &axis.z,
            "m",
            "axial position of the axis cells (first radial row); exit plane at z = thickness",
        )?;
        put1(
            &ag,
            "number_density",
            &axis.number_density,
            "1/m^3",
            "number density on the axis",
        )?;
        put1(
            &ag,
            "number_density_over_upstream",
            &axis.over_upstream,
            "1",
            "number density on the axis over the upstream reservoir's p1/(k T1)",
        )?;
        put1(
            &ag,
            "samples",
            &axis.samples,
            "1",
            "simulated molecules sampled in each axis cell",
        )?;
        let asg = ag.create_group("species").map_err(fail)?;
        for (s, c) in plan.case.gas.components.iter().enumerate() {
            put1(
                &asg,
                &format!("{}_mole_fraction", c.species.name),
                &axis.mole_fraction[s],
                "1",
                "mole fraction of one species on the axis",
            )?;
        }
        file.close().map_err(fail)?;
        std::fs::rename(&tmp, path).map_err(|e| Error::io(path, e))
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(not(feature = "hdf5-output"))]
fn write_hdf5(path: &Path, _plan: &Plan, _fields: &Fields, _meta: &[(&str, String)]) -> Result<()> {
    Err(Error::io(
        path,
        std::io::Error::other("this kinflux was built without HDF5 support (feature hdf5-output)"),
    ))
}

/// The XDMF description of fields.h5.
pub fn xdmf_text(plan: &Plan, fields: &Fields) -> String {
    let (nz, nr) = (plan.grid.z.len(), plan.grid.r.len());
    let item = |dims: &str, path: &str| {
        format!("<DataItem Dimensions=\"{dims}\" NumberType=\"Float\" Precision=\"8\" Format=\"HDF\">{HDF5_FILE}:{path}</DataItem>")
    };
    let mut x = String::new();
    x.push_str("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    x.push_str("<Xdmf Version=\"3.0\">\n <Domain>\n");
    x.push_str(&format!(
        "  <Grid Name=\"{}\" GridType=\"Uniform\">\n",
        xml_escape(&plan.case.title)
    ));
    x.push_str(&format!(
        "   <Topology TopologyType=\"2DRectMesh\" Dimensions=\"{} {}\"/>\n",
        nz + 1,
        nr + 1
    ));
    x.push_str("   <Geometry GeometryType=\"VXVY\">\n");
    x.push_str(&format!(
        "    {}\n",
        item(&format!("{}", nr + 1), "/grid/r_edges")
    ));
    x.push_str(&format!(
        "    {}\n",
        item(&format!("{}", nz + 1), "/grid/z_edges")
    ));
    x.push_str("   </Geometry>\n");
    let mut attr = |name: &str, path: &str| {
        x.push_str(&format!(
            "   <Attribute Name=\"{name}\" AttributeType=\"Scalar\" Center=\"Cell\">\n"
        ));
        x.push_str(&format!("    {}\n", item(&format!("{nz} {nr}"), path)));
        x.push_str("   </Attribute>\n");
    };
    for (name, _, _, _) in fields.named() {
        attr(name, &format!("/fields/{name}"));
    }
    attr("cell_volume", "/grid/cell_volume");
    for c in &plan.case.gas.components {
        let n = format!("{}_number_density", c.species.name);
        attr(&n, &format!("/fields/species/{n}"));
    }
    x.push_str("  </Grid>\n </Domain>\n</Xdmf>\n");
    x
}

fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&apos;")
}
