//! Circuits built by program, shared by the benchmarks and tests: families whose size is a parameter.

/// An RC ladder of `stages` sections (1 kohm, 1 pF each) driven by a 1 V step with a 1 ns rise at
/// 1 ns, watched at its first, middle and last node. The run lasts long enough for the far end to
/// settle (about 2 N^2 RC, at least 50 ns).
pub fn rc_ladder(stages: usize) -> String {
    let stages = stages.max(1);
    let mut s = format!(
        "name: rc-ladder-{stages}\nelements:\n  - {{ kind: voltage_source, name: vin, nodes: [n0, gnd], waveform: {{ step: {{ to: 1, at: 1n, rise: 1n }} }} }}\n"
    );
    for k in 1..=stages {
        s.push_str(&format!(
            "  - {{ kind: resistor, name: r{k}, nodes: [n{}, n{k}], value: 1k }}\n  - {{ kind: capacitor, name: c{k}, nodes: [n{k}, gnd], value: 1p }}\n",
            k - 1
        ));
    }
    let stop = (2.0 * (stages * stages) as f64 * 1e-9).max(50e-9);
    let mid = stages.div_ceil(2);
    let mut watch = vec![format!("n1"), format!("n{mid}"), format!("n{stages}")];
    watch.dedup();
    s.push_str(&format!(
        "run: {{ stop: {stop:e} }}\nwatch: [{}]\n",
        watch.join(", ")
    ));
    s
}
