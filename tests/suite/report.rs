//! The audit report: a structural check of the page rendered from a real audit of a shipped circuit,
//! and of the min-max decimation that keeps plotted series small. The SVG blocks are checked with an
//! XML parser (roxmltree); the page itself is checked for the figures it promises, the method names,
//! the absence of external references, and escaping of user text.

use ringtrue::audit::results::Provenance;
use ringtrue::audit::{self, EvidenceValue, Flag, FlagKind, Options, Plan};
use ringtrue::report::plots::decimate_min_max;
use std::path::Path;

fn render_gate_drive(title: &str, add_flag: bool) -> String {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("reference_circuits/gate-drive-rlc.yaml");
    let (mut c, text) = ringtrue::circuit::load(&path).expect("shipped circuit loads");
    let mut a = audit::run(
        &c,
        &Plan::default(),
        &Options {
            jobs: 1,
            cell_seconds: 600.0,
        },
        &|_| {},
    )
    .expect("audit runs");
    if add_flag {
        let signal = a.labels[0].clone();
        let stop = c.run.stop;
        a.cells[0].flags.push(Flag {
            kind: FlagKind::NumericalRinging,
            signal,
            t_start: 0.2 * stop,
            t_end: 0.3 * stop,
            severity: f64::NAN,
            evidence: vec![
                ("<b>period</b>".into(), EvidenceValue::Number(2e-9)),
                ("ratio".into(), EvidenceValue::Number(f64::INFINITY)),
                (
                    "note".into(),
                    EvidenceValue::Text("<i>alternates</i>".into()),
                ),
            ],
        });
        // A flag on a signal the reference does not have must not break the page.
        a.cells[1].flags.push(Flag {
            kind: FlagKind::PhaseError,
            signal: "no-such-signal".into(),
            t_start: f64::NAN,
            t_end: 1.0,
            severity: 2.0,
            evidence: Vec::new(),
        });
    }
    c.title = title.to_string();
    let sha = ringtrue::audit::results::sha256_hex(text.as_bytes());
    let p = Provenance {
        file: &c.file,
        title: &c.title,
        sha256: &sha,
        created: "2024-01-01T00:00:00Z",
        command: "ringtrue audit reference_circuits/gate-drive-rlc.yaml",
        stop: c.run.stop,
    };
    ringtrue::report::render(&a, &c, &p)
}

/// Every `<svg ...>...</svg>` block of the page (SVG does not nest in this report except not at all).
fn svg_blocks(html: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find("<svg") {
        let tail = &rest[start..];
        let end = tail.find("</svg>").expect("every <svg> is closed") + "</svg>".len();
        out.push(&tail[..end]);
        rest = &tail[end..];
    }
    out
}

#[test]
fn report_is_self_contained_with_parseable_figures() {
    let html = render_gate_drive("<script>alert(1)</script>", true);
    let blocks = svg_blocks(&html);
    assert!(!blocks.is_empty(), "no inline SVG");
    for (i, b) in blocks.iter().enumerate() {
        if let Err(e) = roxmltree::Document::parse(b) {
            panic!(
                "SVG block {i} is not well-formed XML: {e}\n{}",
                &b[..b.len().min(400)]
            );
        }
    }
    // The figure kinds the report promises, each marked on its container.
    let kinds = [
        "work-precision-steps",
        "work-precision-cpu",
        "waveform",
        "error-time",
        "poles",
        "flag-zoom",
    ];
    for k in kinds {
        assert!(
            html.contains(&format!("<figure data-figure=\"{k}\"")),
            "missing figure {k}"
        );
    }
    let figures = html.matches("<figure data-figure=").count();
    assert!(figures >= 5, "only {figures} figures");
    for m in ["backward-euler", "trapezoidal", "bdf2", "tr-bdf2"] {
        assert!(html.contains(m), "method {m} missing");
    }
    for bad in ["http://", "https://", "src=", "<link", "<script src", "NaN"] {
        assert!(!html.contains(bad), "page contains {bad}");
    }
    // The sections, in order.
    let order = [
        "id=\"verdict\"",
        "id=\"flags\"",
        "id=\"matrix\"",
        "id=\"work\"",
        "id=\"waves\"",
        "id=\"errors\"",
        "id=\"poles\"",
        "id=\"provenance\"",
    ];
    let pos: Vec<usize> = order
        .iter()
        .map(|s| {
            html.find(s)
                .unwrap_or_else(|| panic!("section {s} missing"))
        })
        .collect();
    assert!(pos.windows(2).all(|w| w[0] < w[1]), "sections out of order");
    // Evidence names and values appear escaped in the flag table.
    assert!(html.contains("&lt;b&gt;period&lt;/b&gt;"));
    assert!(html.contains("&lt;i&gt;alternates&lt;/i&gt;"));
}

#[test]
fn circuit_title_appears_only_escaped() {
    let html = render_gate_drive("<script>alert(1)</script>", false);
    assert!(
        !html.contains("<script"),
        "unescaped script tag in the page"
    );
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(html.contains("No cell was flagged."));
}

#[test]
fn decimation_keeps_alternation_in_every_bucket() {
    let n = 100_000;
    let t: Vec<f64> = (0..n).map(|j| j as f64).collect();
    let v: Vec<f64> = (0..n)
        .map(|j| if j % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    let buckets = 1000;
    let (dt, dv) = decimate_min_max(&t, &v, buckets);
    assert_eq!(dt.len(), 2 * buckets);
    assert_eq!(dv.len(), 2 * buckets);
    assert!(dt.windows(2).all(|w| w[0] < w[1]), "not in time order");
    for (b, pair) in dv.chunks(2).enumerate() {
        assert!(
            pair.contains(&1.0) && pair.contains(&-1.0),
            "bucket {b} lost an extreme: {pair:?}"
        );
    }
    // Plain subsampling (every 100th sample) would have kept only +1: the decimated series must not.
    assert!(dv.windows(2).all(|w| w[0] != w[1]), "alternation lost");
}

#[test]
fn decimation_keeps_a_lone_spike() {
    let n = 50_000;
    let t: Vec<f64> = (0..n).map(|j| j as f64).collect();
    let mut v = vec![0.0; n];
    v[31_337] = 5.0;
    v[777] = f64::NAN;
    let (dt, dv) = decimate_min_max(&t, &v, 500);
    assert!(dv.contains(&5.0), "spike lost");
    assert!(dv.iter().all(|x| x.is_finite()));
    assert_eq!(dt.len(), dv.len());
}
