//! The gas library against its published source.

use kinflux::gas::{self, MolecularModel};

/// Every row's VHS and VSS diameters reproduce its reference viscosity through the
/// Chapman–Enskog relation (Bird 1994 eq. 4.62; table values from Bird 1994 Appendix A,
/// from memory): within 1.5 %, which catches a typo in any digit that matters.
#[test]
fn diameters_reproduce_reference_viscosities() {
    for model in [
        MolecularModel::Vhs,
        MolecularModel::Vss,
        MolecularModel::HardSphere,
    ] {
        for s in gas::library_with(model) {
            let mu = s.chapman_enskog_mu_ref();
            assert!(
                (mu / s.mu_ref - 1.0).abs() < 0.015,
                "{} ({model:?}): d = {:e} gives μ = {mu:e}, table μ = {:e}",
                s.name,
                s.d_ref,
                s.mu_ref
            );
        }
    }
}

/// The library holds the gases the design asks for, each citing its source.
#[test]
fn library_has_the_common_gases_with_sources() {
    for name in [
        "He", "Ne", "Ar", "Kr", "Xe", "H2", "N2", "O2", "CO", "CO2", "CH4", "air",
    ] {
        let s = gas::lookup(name).unwrap_or_else(|| panic!("{name} missing"));
        assert!(s.source.contains("Bird 1994"));
        assert!(s.mass > 0.0 && s.d_ref > 1e-10 && s.omega >= 0.5 && s.omega <= 1.0);
    }
    // molar masses (IUPAC standard atomic weights): Ar 39.95, N2 28.01, He 4.003 g/mol
    for (name, molar) in [("Ar", 39.95), ("N2", 28.01), ("He", 4.003)] {
        let m = gas::lookup(name).unwrap().molar_mass() * 1e3;
        assert!((m / molar - 1.0).abs() < 0.005, "{name}: {m} g/mol");
    }
}

/// Wilke's mixing rule (Wilke 1950) returns the pure viscosity for a one-component mixture and
/// lies between the component viscosities for He/Ar.
#[test]
fn mixture_viscosity_is_bounded() {
    let he = gas::lookup("He").unwrap();
    let ar = gas::lookup("Ar").unwrap();
    let mix = gas::Mixture {
        components: vec![
            gas::Component {
                species: he.clone(),
                mole_fraction: 0.5,
            },
            gas::Component {
                species: ar.clone(),
                mole_fraction: 0.5,
            },
        ],
    };
    let mu = mix.viscosity(295.0);
    let (a, b) = (he.viscosity(295.0), ar.viscosity(295.0));
    assert!(
        mu > a.min(b) && mu < a.max(b) * 1.05,
        "{mu} not near [{a}, {b}]"
    );
    let pure = gas::Mixture {
        components: vec![gas::Component {
            species: ar.clone(),
            mole_fraction: 1.0,
        }],
    };
    assert!((pure.viscosity(295.0) / ar.viscosity(295.0) - 1.0).abs() < 1e-14);
}
