//! Invariants that hold whatever the physics: molecules never end inside a wall or pass
//! through the partition outside the hole; particle balance closes exactly; thread count does
//! not change results.

use crate::util::fm_case;
use kinflux::case;
use kinflux::geometry::{Domain, SurfaceRole, Symmetry};
use kinflux::mover::{advance, Fate, Flight, WallReflection};

/// `advance` with the diffuse-emission flag discarded.
#[allow(clippy::too_many_arguments)]
fn advance_checked<F: FnMut(f64, f64)>(
    geom: &Domain,
    wall: &WallReflection,
    f: &mut Flight,
    dt: f64,
    last: Option<usize>,
    plane: f64,
    rng: &mut SmallRng,
    on_cross: &mut F,
) -> Fate {
    let mut diffused = false;
    advance(
        geom,
        wall,
        f,
        dt,
        last,
        plane,
        rng,
        &mut |s, r, _cos| on_cross(s, r),
        &mut diffused,
    )
}
use kinflux::numerics::Plan;
use kinflux::simulation::Simulation;
use rand::rngs::SmallRng;
use rand::{Rng, SeedableRng};

/// Random rays in thin and thick partitions, diffuse, specular and mixed walls, about an axis
/// (holes and tubes) and across a mirror plane (slits and channels): no flight ever ends inside
/// the solid, and every crossing of the partition's exit plane is inside the opening.
#[test]
fn random_rays_never_enter_walls_or_leak_past_the_partition() {
    let mut rng = SmallRng::seed_from_u64(2024);
    for case in 0..60 {
        let symmetry = if case < 40 {
            Symmetry::Axisymmetric
        } else {
            Symmetry::Planar
        };
        let a = 1.0;
        let t = if case % 4 == 0 {
            0.0
        } else {
            rng.random_range(0.05..6.0)
        };
        let geom = Domain::new(
            symmetry,
            a,
            t,
            rng.random_range(0.6..4.0),
            rng.random_range(0.6..4.0),
            rng.random_range(1.2..5.0),
        );
        let wall = WallReflection {
            accommodation: [1.0, 0.0, 0.5][case % 3],
            sigma: 1.0,
        };
        let mut leaks = 0;
        let mut inside = 0;
        for _ in 0..5000 {
            // random start in the gas
            let f0 = loop {
                let z = rng.random_range(geom.z_min..geom.z_max);
                let r = geom.r_max * rng.random::<f64>().sqrt();
                if !geom.is_outside_gas(z, r, 0.0) {
                    break Flight {
                        z,
                        r,
                        vz: rng.random_range(-3.0..3.0),
                        vr: rng.random_range(-3.0..3.0),
                        vt: rng.random_range(-3.0..3.0),
                    };
                }
            };
            // Count at the partition's upstream face plane and exit plane in two passes.
            for plane in [0.0, t] {
                let mut f = f0;
                let mut bad = false;
                let fate = advance_checked(
                    &geom,
                    &wall,
                    &mut f,
                    rng.random_range(0.1..20.0),
                    None,
                    plane,
                    &mut rng,
                    &mut |_, r| {
                        if r > a * (1.0 + 1e-9) {
                            bad = true;
                        }
                    },
                );
                if bad {
                    leaks += 1;
                }
                if fate == Fate::Stays && geom.is_outside_gas(f.z, f.r, 1e-9 * a) {
                    inside += 1;
                }
            }
        }
        assert_eq!(leaks, 0, "geometry {case}: crossings outside the hole");
        assert_eq!(
            inside, 0,
            "geometry {case}: molecules ended inside the solid"
        );
    }
}

/// Molecules reaching an outer boundary leave through it, on the right side of the partition.
#[test]
fn boundary_exits_are_on_the_right_side() {
    let geom = Domain::new(Symmetry::Axisymmetric, 1.0, 1.0, 2.0, 2.0, 3.0);
    let wall = WallReflection {
        accommodation: 1.0,
        sigma: 1.0,
    };
    let mut rng = SmallRng::seed_from_u64(5);
    let mut f = Flight {
        z: -1.0,
        r: 0.5,
        vz: -1.0,
        vr: 0.0,
        vt: 0.0,
    };
    assert_eq!(
        advance_checked(
            &geom,
            &wall,
            &mut f,
            10.0,
            None,
            1.0,
            &mut rng,
            &mut |_, _| {}
        ),
        Fate::Left(SurfaceRole::UpstreamBoundary)
    );
    let mut f = Flight {
        z: 0.5,
        r: 0.5,
        vz: 1.0,
        vr: 0.0,
        vt: 0.0,
    };
    let mut crossed = 0.0;
    assert_eq!(
        advance_checked(
            &geom,
            &wall,
            &mut f,
            10.0,
            None,
            1.0,
            &mut rng,
            &mut |s, _| crossed += s
        ),
        Fate::Left(SurfaceRole::DownstreamBoundary)
    );
    assert_eq!(crossed, 1.0);
}

/// Particle balance: initial + injected + clones released − left − deleted = population,
/// exactly, after every step (with radial weighting on, so clones and deletions happen).
#[test]
fn particle_balance_closes_every_step() {
    let text = fm_case(
        "{ Ar = 1.0 }",
        "0.5 Pa",
        "0.1 Pa",
        "0.2 mm",
        "0.1 mm",
        "molecules = 20000\n[domain]\nradial_weight_ratio = 4.0",
    );
    let c = case::parse(&text, "t.toml", &[]).unwrap();
    let mut sim = Simulation::new(Plan::new(&c).unwrap());
    for _ in 0..200 {
        sim.step();
        assert_eq!(sim.balance.expected_population(), sim.population());
        let g = &sim.plan.geometry;
        for i in 0..sim.molecules.len() {
            assert!(
                !g.is_outside_gas(sim.molecules.z[i], sim.molecules.r[i], 1e-12),
                "molecule {i} outside the gas"
            );
        }
    }
    assert!(sim.balance.clones_released > 0 && sim.balance.deleted_by_weighting > 0);
    assert!(sim.balance.left_upstream > 0 && sim.balance.left_downstream > 0);
}

/// Same seed and case: identical flux history on 1 and 2 threads (fixed work chunks with their
/// own random streams).
#[test]
fn results_do_not_depend_on_thread_count() {
    let text = fm_case(
        "{ He = 0.3, Ar = 0.7 }",
        "0.5 Pa",
        "0.05 Pa",
        "0.2 mm",
        "0.05 mm",
        "molecules = 30000\nmax_steps = 60",
    );
    let c = case::parse(&text, "t.toml", &[]).unwrap();
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut sim = Simulation::new(Plan::new(&c).unwrap());
            for _ in 0..60 {
                sim.step();
            }
            (sim.flux.mass_per_step.clone(), sim.molecules.z.clone())
        })
    };
    let one = run(1);
    let two = run(2);
    assert_eq!(one.0, two.0);
    assert_eq!(one.1, two.1);
}

/// The same with collisions on: sorting, collision blocks and their random streams are fixed
/// by the cell layout, so 1 and 2 threads give bit-identical molecules and flux.
#[test]
fn dsmc_results_do_not_depend_on_thread_count() {
    let text = fm_case(
        "{ He = 0.3, N2 = 0.7 }",
        "60 Pa",
        "5 Pa",
        "0.2 mm",
        "0.05 mm",
        "molecules_per_cell = 6\n[domain]\nupstream_length = 3\ndownstream_length = 3\nouter_radius = 3",
    )
    .replace("collisions = false", "collisions = true");
    let c = case::parse(&text, "t.toml", &[]).unwrap();
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut sim = Simulation::new(Plan::new(&c).unwrap());
            for _ in 0..80 {
                sim.step();
            }
            assert!(sim.collision_stats.collisions > 0 || sim.step < sim.plan.startup_steps);
            (
                sim.flux.mass_per_step.clone(),
                sim.molecules.vz.clone(),
                sim.molecules.erot.clone(),
            )
        })
    };
    assert_eq!(run(1), run(2));
}
