//! Wall time of the default plan (four methods, rtol 1e-2 to 1e-6) on the shipped 20-stage RC ladder
//! with one and with two worker threads, and the parallel efficiency t1 / (2 t2). Run with
//! `cargo bench --bench audit`.

use ringtrue::audit::{self, Options, Plan};
use ringtrue::circuit;
use std::path::Path;
use std::time::Instant;

fn main() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("reference_circuits/rc-ladder-20.yaml");
    let (c, _) = circuit::load(&path).expect("the shipped ladder loads");
    let plan = Plan::default();
    let mut best = [f64::INFINITY; 2];
    for _ in 0..3 {
        for (k, jobs) in [1usize, 2].into_iter().enumerate() {
            let t0 = Instant::now();
            let a = audit::run(
                &c,
                &plan,
                &Options {
                    jobs,
                    cell_seconds: 600.0,
                },
                &|_| {},
            )
            .expect("the audit runs");
            best[k] = best[k].min(t0.elapsed().as_secs_f64());
            assert_eq!(a.cells.len(), 20);
        }
    }
    println!("default plan on rc-ladder-20: {} cells", plan.size());
    println!("  --jobs 1: {:.3} s", best[0]);
    println!("  --jobs 2: {:.3} s", best[1]);
    println!(
        "  parallel efficiency t1 / (2 t2): {:.2}",
        best[0] / (2.0 * best[1])
    );
}
