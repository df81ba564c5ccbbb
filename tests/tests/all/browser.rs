//! The audit page as a reviewer sees it: loaded by a real browser (headless Chromium, from
//! Debian's `chromium` package, which `.ci/run` installs), rendered to PNG and to PDF.
//! The page must load without errors, must not be blank, and its text, as the browser
//! holds it after loading, must carry the verdict, each log's unit counts and the
//! sweep's recommendation from audit.json.

use std::path::Path;
use std::process::{Command, Output};

/// The Chromium binary on this machine, if any.
fn chromium() -> Option<&'static str> {
    ["chromium", "chromium-browser", "google-chrome"]
        .into_iter()
        .find(|b| {
            Command::new(b)
                .arg("--version")
                .output()
                .is_ok_and(|o| o.status.success())
        })
}

/// Headless Chromium on `page` with `args`. No sandbox: CI runs as root in a container.
fn headless(bin: &str, page: &Path, args: &[String]) -> Output {
    Command::new(bin)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
            "--no-pdf-header-footer",
        ])
        .args(args)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium runs")
}

#[test]
fn the_demo_audit_page_renders_in_a_browser() {
    let Some(bin) = chromium() else {
        crate::skip_or_fail(
            "audit page in a browser",
            "Chromium is not installed (apt-get install chromium)",
        );
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().join("demo");
    host_trainer::demo::run(&d, false).unwrap();
    let page = d.join("audit.html");
    let audit: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("audit.json")).unwrap()).unwrap();

    // The page as the browser holds it after loading: no load errors, the figures there.
    let dom = headless(bin, &page, &["--dump-dom".into()]);
    assert!(dom.status.success(), "chromium --dump-dom failed");
    let err = String::from_utf8_lossy(&dom.stderr);
    for bad in ["Uncaught", "net::ERR_", "Failed to load resource"] {
        assert!(!err.contains(bad), "the page loads without errors: {err}");
    }
    let text = String::from_utf8_lossy(&dom.stdout);
    let verdict = if audit["passed"] == true {
        "PASSED"
    } else {
        "FAILED"
    };
    assert!(
        text.contains(&format!("Linegate release audit: {verdict}")),
        "verdict"
    );
    for set in audit["sets"].as_array().unwrap() {
        let name = set["name"].as_str().unwrap();
        let units = set["units"].as_u64().unwrap();
        let row = format!("<td>{name}</td><td>{units}</td>");
        assert!(text.contains(&row), "{name}: {units} units in its row");
    }
    let best = audit["recommended"]
        .as_u64()
        .expect("the demo recommends a format") as usize;
    let row = &audit["sweep"][best];
    let recommended = format!(
        "{}-bit <strong>(recommended)</strong></td><td>{}-bit",
        row["weight_bits"], row["input_bits"]
    );
    assert!(text.contains(&recommended), "the sweep's recommendation");

    // Rendered: a screenshot that is not blank, and a PDF for the release record.
    let png = dir.path().join("audit.png");
    let shot = headless(
        bin,
        &page,
        &[
            format!("--screenshot={}", png.display()),
            "--window-size=1200,3000".into(),
        ],
    );
    assert!(shot.status.success(), "screenshot");
    let bytes = std::fs::read(&png).unwrap();
    assert!(bytes.starts_with(b"\x89PNG\r\n\x1a\n"), "a PNG");
    // A blank 1200 × 3000 page compresses to a few KiB; text, tables and charts do not.
    assert!(bytes.len() > 100_000, "not blank: {} bytes", bytes.len());
    let pdf = dir.path().join("audit.pdf");
    let printed = headless(bin, &page, &[format!("--print-to-pdf={}", pdf.display())]);
    assert!(printed.status.success(), "print to PDF");
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF-"), "a PDF");
    assert!(bytes.len() > 50_000, "not blank: {} bytes", bytes.len());
}

/// A failed audit must look failed at a glance, and a passed one must not: the browser's
/// page of each carries its own verdict box first, the failed one naming its failed gates.
#[test]
fn a_failed_audit_page_looks_failed_and_a_passed_one_does_not() {
    use host_trainer::ingest::LogOptions;
    use host_trainer::release::applying;
    use host_trainer::release::gates::AuditConfig;
    use host_trainer::release::quantise::QuantConfig;
    use host_trainer::train::float_model::FloatModel;
    let Some(bin) = chromium() else {
        crate::skip_or_fail(
            "audit verdict in a browser",
            "Chromium is not installed (apt-get install chromium)",
        );
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().join("demo");
    host_trainer::demo::run(&d, false).unwrap();
    let fm = FloatModel::read(&d.join("model.json")).unwrap();
    let train = host_trainer::workflow::load_for_model(
        &[d.join("train-synthetic.csv")],
        &LogOptions::default(),
        &fm,
    )
    .unwrap();
    for (cfg, passed) in [
        (AuditConfig::default(), true),
        // A margin no model of the demo's has fails the audit.
        (
            AuditConfig {
                min_margin_lsb: 1e15,
                ..AuditConfig::default()
            },
            false,
        ),
    ] {
        let (_, r) = applying::release(&fm, &train, &[], QuantConfig::default(), &[], cfg).unwrap();
        assert_eq!(r.passed, passed);
        let doc = host_trainer::report::document(&fm, &r, None);
        let page = dir.path().join(format!("{passed}.html"));
        std::fs::write(&page, host_trainer::report::html(&fm, &r, None, &doc)).unwrap();
        let dom = headless(bin, &page, &["--dump-dom".into()]);
        assert!(dom.status.success(), "chromium --dump-dom failed");
        let text = String::from_utf8_lossy(&dom.stdout);
        let (mine, other) = if passed {
            ("verdict passed", "verdict failed")
        } else {
            ("verdict failed", "verdict passed")
        };
        let at = text.find(mine).unwrap_or_else(|| panic!("no '{mine}' box"));
        assert!(!text.contains(other), "only one verdict box");
        // The box comes before any chart or table.
        for later in ["<svg", "<table"] {
            assert!(
                text.find(later).is_none_or(|k| k > at),
                "{later} before the verdict"
            );
        }
        if !passed {
            assert!(text.contains("FAILED: do not release"));
            assert!(
                text[at..].contains("smallest fixed margin"),
                "the failed gate is named"
            );
            assert!(text.contains("<title>Linegate audit: FAILED</title>"));
        }
    }
}

/// Measures, in the browser, every label of the trade-off chart as laid out: appended to
/// the page as a script, it writes what it found into a `<pre id="probe">`.
const LABEL_PROBE: &str = r#"<script>
(() => {
  const out = document.createElement('pre');
  out.id = 'probe';
  const svg = document.getElementById('trade-off-chart');
  if (!svg) { out.textContent = 'no chart'; document.body.appendChild(out); return; }
  const r = svg.getBoundingClientRect();
  const boxes = [...svg.querySelectorAll('text')]
    .filter(t => t.textContent.trim() !== '')
    .map(t => ({ t: t.textContent.trim(), b: t.getBoundingClientRect() }));
  const bad = [];
  // One pixel of slack: the glyph boxes of neighbouring tick labels may touch.
  for (let i = 0; i < boxes.length; i++) {
    for (let j = i + 1; j < boxes.length; j++) {
      const a = boxes[i].b, b = boxes[j].b;
      if (a.left < b.right - 1 && b.left < a.right - 1 && a.top < b.bottom - 1 && b.top < a.bottom - 1) {
        bad.push(boxes[i].t + ' / ' + boxes[j].t);
      }
    }
  }
  const outside = boxes
    .filter(x => x.b.left < r.left - 1 || x.b.right > r.right + 1 || x.b.top < r.top - 1 || x.b.bottom > r.bottom + 1)
    .map(x => x.t);
  out.textContent = 'size ' + Math.round(r.width) + 'x' + Math.round(r.height) + '; labels ' + boxes.length
    + '; overlaps: ' + (bad.join(' | ') || 'none') + '; outside: ' + (outside.join(' | ') || 'none') + ';';
  document.body.appendChild(out);
})();
</script>"#;

/// A model with an operating point: its page shows the trade-off chart (id
/// `trade-off-chart`) inside the "Operating point" section, with both series in its legend
/// and the chosen point labelled, and the browser lays it out with no two labels
/// overlapping and none outside the chart.
#[test]
fn a_model_with_an_operating_point_shows_its_trade_off_chart() {
    use host_trainer::ingest::LogOptions;
    use host_trainer::release::applying;
    use host_trainer::release::gates::AuditConfig;
    use host_trainer::release::quantise::QuantConfig;
    use host_trainer::train::eval::HeldOut;
    use host_trainer::train::float_model::FloatModel;
    use host_trainer::train::operating_point::{Target, choose};
    let Some(bin) = chromium() else {
        crate::skip_or_fail(
            "trade-off chart in a browser",
            "Chromium is not installed (apt-get install chromium)",
        );
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().join("demo");
    host_trainer::demo::run(&d, false).unwrap();
    let fm = FloatModel::read(&d.join("model.json")).unwrap();
    let train = host_trainer::workflow::load_for_model(
        &[d.join("train-synthetic.csv")],
        &LogOptions::default(),
        &fm,
    )
    .unwrap();
    // Held-out scores whose classes overlap around 0, two GO units FAULT.
    let held: Vec<HeldOut> = (0..400)
        .map(|unit| {
            let go = unit % 2 == 0;
            let spread = (unit / 2) as f64 / 200.0;
            HeldOut {
                unit,
                distance: if go { spread - 0.15 } else { 0.15 - spread } * 1e-3,
                go,
                fault: go && unit % 200 == 0,
            }
        })
        .collect();
    let target = Target::RecheckBudget {
        share: 0.05,
        false_go_weight: 2.0,
    };
    let op = choose(&held, target, 1.0, "synthetic held-out scores".into()).unwrap();
    let qc = QuantConfig {
        recheck_band: op.band,
        ..QuantConfig::default()
    };
    let fm = fm.with_operating_point(op);
    let (_, r) = applying::release(&fm, &train, &[], qc, &[], AuditConfig::default()).unwrap();
    let doc = host_trainer::report::document(&fm, &r, None);
    let html = host_trainer::report::html(&fm, &r, None, &doc);
    let page = dir.path().join("operating-point.html");
    std::fs::write(
        &page,
        html.replace("</body>", &format!("{LABEL_PROBE}</body>")),
    )
    .unwrap();
    let dom = headless(bin, &page, &["--dump-dom".into()]);
    assert!(dom.status.success(), "chromium --dump-dom failed");
    let err = String::from_utf8_lossy(&dom.stderr);
    for bad in ["Uncaught", "net::ERR_", "Failed to load resource"] {
        assert!(!err.contains(bad), "the page loads without errors: {err}");
    }
    let text = String::from_utf8_lossy(&dom.stdout);
    let section = text
        .find("<h2>Operating point</h2>")
        .expect("an Operating point section");
    let chart = text
        .find("id=\"trade-off-chart\"")
        .expect("the trade-off chart");
    let next = text[section + 4..]
        .find("<h2>")
        .map_or(text.len(), |k| section + 4 + k);
    assert!(
        section < chart && chart < next,
        "the chart is in its section"
    );
    let svg = &text[chart..chart + text[chart..].find("</svg>").unwrap()];
    for label in [
        "false GO (% of 200 NO-GO units)",
        "false NO-GO (% of 200 GO units)",
        "chosen: threshold",
    ] {
        assert!(svg.contains(label), "{label} on the chart");
    }
    let probe = text
        .split("<pre id=\"probe\">")
        .nth(1)
        .and_then(|p| p.split("</pre>").next())
        .expect("the probe ran");
    assert!(
        probe.starts_with("size 800x420;"),
        "drawn at its size: {probe}"
    );
    assert!(probe.contains("overlaps: none;"), "labels overlap: {probe}");
    assert!(
        probe.contains("outside: none;"),
        "labels outside the chart: {probe}"
    );
}
