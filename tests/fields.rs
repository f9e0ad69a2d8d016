//! Sampled fields and their files: the free-molecular density on the axis of a thin orifice
//! against collisionless kinetic theory, and fields.h5 / fields.xdmf read back by an
//! independent reader (h5dump from the HDF5 tools).

use crate::util::{check_axis_density, fm_case, run_in, temp_dir, write};

/// Collisionless flow through a thin orifice into vacuum: at a point on the axis the velocity
/// distribution is the upstream Maxwellian along every direction whose backward ray ends on an
/// equilibrium surface and empty along directions through the hole (collisionless kinetic
/// theory, e.g. Bird 1994 ch. 7, section from memory). With Ω the solid angle of the hole seen
/// from the point, n = n1 (1 − Ω/4π) upstream and n = n1 Ω/4π downstream, where
/// Ω/4π = (1 − d/sqrt(d² + a²))/2 at distance d. Checked on axis cells with radial weighting
/// on (the check that caught clones released one snapshot late) within 3 %, or within four
/// standard errors of the cell's sampled count where that is wider. The far downstream axis
/// cells hold few molecules (7 500 to 25 000 samples here against 60 000 to 78 000 upstream):
/// over seeds 1–4 their density scatters by 2–5 % both before and after velocities became f32
/// and the molecule order changed (the same seeds gave −3.8 % and −4.6 % in the last cell),
/// so a flat 3 % failed on sampling noise alone. A molecule crosses such a cell in under a
/// step, so successive samples are nearly independent, but clones are delayed copies of one
/// trajectory (weight ratio 3 here), so the effective count is taken as half the sampled one:
/// standard error sqrt(2/N). Upstream, where N is large, the 3 % bound is the one that acts.
#[test]
fn free_molecular_axis_density_follows_the_hole_solid_angle() {
    let text = fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0 mm",
        "molecules = 300000\nmax_steps = 700\n[domain]\ncell_size = 0.125\nradial_weight_ratio = 3",
    );
    let a = 0.1e-3;
    let checked = check_axis_density(
        &text,
        700,
        |d| 0.5 * (1.0 - d / (d * d + a * a).sqrt()),
        0.03,
        2.0,
    );
    assert!(checked >= 8);
}

/// fields.h5 holds the documented datasets, each with a units attribute, readable by h5dump;
/// fields.xdmf is well-formed XML whose data items name datasets that exist.
#[test]
fn field_files_are_readable_by_an_independent_reader() {
    let dir = temp_dir();
    let text = fm_case(
        "{ He = 0.5, Ar = 0.5 }",
        "0.5 Pa",
        "0 Pa",
        "0.2 mm",
        "0.1 mm",
        "molecules = 20000\nmax_steps = 200",
    );
    write(dir.path(), "case.toml", &text);
    let out = run_in(dir.path(), &["run", "case.toml", "--out", "res", "--quiet"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let h5 = dir.path().join("res/fields.h5");
    let xdmf = std::fs::read_to_string(dir.path().join("res/fields.xdmf")).unwrap();
    let dump = match std::process::Command::new("h5dump")
        .arg("-A")
        .arg(&h5)
        .output()
    {
        Ok(o) if o.status.success() => String::from_utf8_lossy(&o.stdout).into_owned(),
        _ => {
            if std::env::var("CI").is_ok() {
                panic!("h5dump (hdf5-tools) is missing on CI");
            }
            eprintln!("SKIPPED: h5dump not found; install hdf5-tools to read fields.h5 back");
            return;
        }
    };
    for name in [
        "number_density",
        "mass_density",
        "velocity_z",
        "velocity_r",
        "velocity_theta",
        "temperature_z",
        "temperature_r",
        "temperature_theta",
        "translational_temperature",
        "rotational_temperature",
        "temperature",
        "pressure",
        "mach_number",
        "mean_free_path",
        "knudsen_number",
        "samples",
        "He_number_density",
        "Ar_number_density",
    ] {
        assert!(
            dump.contains(&format!("DATASET \"{name}\"")),
            "fields.h5 lacks {name}"
        );
        assert!(
            xdmf.contains(&format!("Name=\"{name}\"")),
            "fields.xdmf lacks {name}"
        );
    }
    // the beam's axis profile (group /axis), 1-D over the axial cells
    for name in [
        "z",
        "number_density_over_upstream",
        "He_mole_fraction",
        "Ar_mole_fraction",
    ] {
        assert!(
            dump.contains(&format!("DATASET \"{name}\"")),
            "fields.h5 lacks axis/{name}"
        );
    }
    assert!(dump.contains("GROUP \"axis\""));
    // the summary carries the plume and beam figures under their contract keys
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("res/summary.json")).unwrap(),
    )
    .unwrap();
    for key in [
        "/plume/peaking_factor",
        "/plume/centreline_intensity_per_s_sr",
        "/plume/flux_per_solid_angle_over_cosine_law_ci95",
        "/plume/free_molecular_over_cosine_law",
        "/plume/free_molecular_peaking_factor",
        "/beam/axis_number_density_per_m3",
        "/beam/axis_light_mole_fraction",
        "/beam/aperture_light_enrichment",
        "/beam/far_field",
    ] {
        assert!(summary.pointer(key).is_some(), "summary.json lacks {key}");
    }
    assert_eq!(summary["beam"]["light_species"], "He");
    for name in [
        "z_edges",
        "r_edges",
        "z_centers",
        "r_centers",
        "cell_volume",
    ] {
        assert!(
            dump.contains(&format!("DATASET \"{name}\"")),
            "fields.h5 lacks grid/{name}"
        );
    }
    // every dataset carries a units attribute
    assert_eq!(
        dump.matches("DATASET \"").count(),
        dump.matches("ATTRIBUTE \"units\"").count()
    );
    for attr in ["title", "kinflux_version", "sampling_steps", "caution"] {
        assert!(
            dump.contains(&format!("ATTRIBUTE \"{attr}\"")),
            "missing file attribute {attr}"
        );
    }
    // the charts: SVG with labelled axes
    for (file, label) in [
        ("convergence.svg", "mass flow rate (kg/s)"),
        ("number_density.svg", "z / a"),
        ("mach_number.svg", "r / a"),
        ("temperature.svg", "K"),
        ("beam.svg", "polar angle from the axis (degrees)"),
    ] {
        let svg = std::fs::read_to_string(dir.path().join("res").join(file))
            .unwrap_or_else(|_| panic!("{file} missing"));
        assert!(
            svg.contains("<svg") && svg.trim_end().ends_with("</svg>"),
            "{file} is not a complete SVG"
        );
        assert!(svg.contains(label), "{file} lacks the label {label}");
    }
    // XDMF: balanced elements, and every referenced dataset exists in the HDF5 file
    assert!(xdmf.starts_with("<?xml"));
    for tag in [
        "Xdmf",
        "Domain",
        "Grid",
        "Geometry",
        "Attribute",
        "DataItem",
    ] {
        let open =
            xdmf.matches(&format!("<{tag} ")).count() + xdmf.matches(&format!("<{tag}>")).count();
        let close = xdmf.matches(&format!("</{tag}>")).count();
        assert_eq!(open, close, "unbalanced <{tag}>");
    }
    for line in xdmf.lines().filter(|l| l.contains("fields.h5:")) {
        let path = line
            .split("fields.h5:")
            .nth(1)
            .unwrap()
            .split('<')
            .next()
            .unwrap();
        let leaf = path.rsplit('/').next().unwrap();
        assert!(
            dump.contains(&format!("DATASET \"{leaf}\"")),
            "XDMF names a missing dataset {path}"
        );
    }
}
