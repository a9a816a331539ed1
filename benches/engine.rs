//! Steps per second of the transient engine on RC ladders of 10, 100 and 1000 stages at rtol 1e-4,
//! for each method. Run with `cargo bench --bench engine`; pass a number to limit the largest ladder
//! (e.g. `cargo bench --bench engine -- 100`).

use ringtrue::catalogue::rc_ladder;
use ringtrue::circuit;
use ringtrue::integrate;
use ringtrue::settings::{MethodName, Settings};
use std::time::Instant;

fn main() {
    let largest: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(1000);
    println!(
        "{:>7} {:>15} {:>8} {:>9} {:>8} {:>10} {:>12}",
        "stages", "method", "steps", "rejected", "factors", "seconds", "steps/s"
    );
    for stages in [10usize, 100, 1000].into_iter().filter(|&n| n <= largest) {
        let text = rc_ladder(stages);
        let c = circuit::parse(&text, "ladder").expect("the ladder parses");
        for m in MethodName::ALL {
            let mut s = Settings::new(m);
            s.tolerances.rtol = 1e-4;
            // best of three, so a busy moment does not decide the figure
            let mut best = f64::INFINITY;
            let mut last = None;
            for _ in 0..3 {
                let t0 = Instant::now();
                let r = integrate::simulate(&c, &s).expect("the ladder runs");
                best = best.min(t0.elapsed().as_secs_f64());
                last = Some(r.stats);
                if best > 20.0 {
                    break;
                }
            }
            let st = last.expect("ran at least once");
            println!(
                "{stages:>7} {:>15} {:>8} {:>9} {:>8} {best:>10.4} {:>12.0}",
                m.as_str(),
                st.steps,
                st.rejected_steps,
                st.factorizations,
                st.steps as f64 / best
            );
        }
    }
}
