//! The report folders of `sweep --report`, `merge --report` and `design --report`: each
//! SVG is well-formed XML with its series and its axis words (with units); what the
//! figures plot is the commands' own JSON (the front and the recommendation of the
//! sweep, the largest need, the recommended total and each layout's reachable levels of
//! the design), to the last bit; the PNG has the SVG's size; `report.html` holds the
//! figure inline, the recommendation first, the cautions and nothing from outside; and a
//! merge of shards writes the very bytes of the sweep run in one go.

use assert_cmd::Command;
use serde_json::Value;
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use tempfile::TempDir;

fn bankstep() -> Command {
    Command::cargo_bin("bankstep").expect("the bankstep binary is built")
}

fn scenarios() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios")
}

/// The welding workshop over one day (the bundled file runs a week), with a tariff so
/// that the cost view is drawn.
fn workshop_day(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(scenarios().join("welding-workshop.toml")).unwrap();
    let text = text.replace("duration_days = 7", "duration_days = 1");
    let text = format!(
        "{text}\n[tariff]\ncurrency = \"EUR\"\nreactive_price_per_kvarh = 0.02\n\
         contactor_price = 120\n"
    );
    let path = dir.join("workshop.toml");
    std::fs::write(&path, text).unwrap();
    path
}

const VARY: [&str; 4] = [
    "--vary",
    "controller.dead_band_fraction=0.5,0.8,1.0",
    "--vary",
    "controller.switching_delay_s=5,20,60",
];

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn json(path: &Path) -> Value {
    serde_json::from_str(&read(path)).unwrap()
}

/// Every text drawn in an SVG.
fn texts(doc: &roxmltree::Document<'_>) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or_default().trim().to_string())
        .collect()
}

/// One series of a figure's metadata: (min, max, points).
fn series(doc: &roxmltree::Document<'_>, name: &str) -> (f64, f64, usize) {
    let s = doc
        .descendants()
        .find(|n| n.has_tag_name("series") && n.attribute("name") == Some(name))
        .unwrap_or_else(|| panic!("no series {name:?}"));
    let num = |a: &str| s.attribute(a).unwrap().parse::<f64>().unwrap();
    (num("min"), num("max"), num("points") as usize)
}

/// The named points of a figure's metadata: (name, x, y, tags).
fn marks(doc: &roxmltree::Document<'_>) -> Vec<(String, f64, f64, String)> {
    doc.descendants()
        .filter(|n| n.has_tag_name("mark"))
        .map(|n| {
            let num = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
            (
                n.attribute("name").unwrap().to_string(),
                num("x"),
                num("y"),
                n.attribute("tags").unwrap_or_default().to_string(),
            )
        })
        .collect()
}

/// The PNG's pixel size.
fn png_size(path: &Path) -> (u32, u32) {
    let dec = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let r = dec.read_info().unwrap();
    (r.info().width, r.info().height)
}

/// Checks that the SVG's view box is the PNG's size.
fn same_size(doc: &roxmltree::Document<'_>, png: &Path) {
    let (w, h) = png_size(png);
    assert_eq!(
        doc.root_element().attribute("viewBox"),
        Some(format!("0 0 {w} {h}").as_str())
    );
}

/// Checks that a report page stands alone and holds `figures` inline figures.
fn self_contained(html: &str, figures: &[&str]) {
    let lower = html.to_lowercase();
    for bad in [
        "http:", "https:", "<script", "src=", "href=", "url(", "@import", "<link", "<iframe",
        "<object", "<embed",
    ] {
        assert!(!lower.contains(bad), "report.html contains {bad:?}");
    }
    assert_eq!(html.matches("<svg").count(), figures.len());
    assert_eq!(html.matches("</svg>").count(), figures.len());
    for f in figures {
        assert!(html.contains(&format!("id=\"fig-{f}\"")), "{f}");
    }
    assert!(html.contains("@media print"));
    assert!(html.contains("Caution: capacitors hold their charge"));
}

/// Text as the page escapes it.
fn escaped(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&#39;")
}

#[test]
fn sweep_report_plots_the_front_and_the_recommendation_of_the_json() {
    let tmp = TempDir::new().unwrap();
    let sc = workshop_day(tmp.path());
    let dir = tmp.path().join("report");
    let js = tmp.path().join("sweep.json");
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(VARY)
        .args(["--seeds", "2"])
        .arg("--report")
        .arg(&dir)
        .arg("--json")
        .arg(&js)
        .arg("--quiet")
        .assert()
        .success();
    let v = json(&js);
    let svg = read(&dir.join("sweep-tradeoff.svg"));
    let doc = roxmltree::Document::parse(&svg).expect("sweep-tradeoff.svg is XML");
    same_size(&doc, &dir.join("sweep-tradeoff.png"));
    let t = texts(&doc);
    for axis in [
        "operations a year (fewer is better), count/year",
        "billed PF (higher is better), 0 to 1",
    ] {
        assert!(t.iter().any(|s| s == axis), "axis {axis:?} missing: {t:?}");
    }
    for key in ["candidate", "recommended", "scenario's own settings"] {
        assert!(t.iter().any(|s| s == key), "legend {key:?} missing");
    }

    // One mark per setting, at the setting's medians in the JSON, to the bit.
    let settings = v["settings"].as_array().unwrap();
    let m = marks(&doc);
    assert_eq!(m.len(), settings.len());
    for (s, (name, x, y, _)) in settings.iter().zip(&m) {
        assert_eq!(name, &format!("setting {}", s["setting"]));
        assert_eq!(*x, s["operations_per_year"]["median"].as_f64().unwrap());
        assert_eq!(*y, s["billed_pf"]["median"].as_f64().unwrap());
    }
    // The front drawn is the JSON's front; the ringed point is the recommendation; the
    // boxed one is setting 0.
    let tagged = |tag: &str| -> BTreeSet<String> {
        m.iter()
            .filter(|x| x.3.split(' ').any(|t| t == tag))
            .map(|x| x.0.clone())
            .collect()
    };
    let front: BTreeSet<String> = v["front"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| format!("setting {s}"))
        .collect();
    assert!(!front.is_empty());
    assert_eq!(tagged("front"), front);
    let rec = v["recommendation"]["setting"].as_u64().unwrap();
    assert_eq!(
        tagged("recommended"),
        BTreeSet::from([format!("setting {rec}")])
    );
    assert_eq!(
        tagged("reference"),
        BTreeSet::from(["setting 0".to_string()])
    );
    // The extremes drawn are the JSON's.
    let ys: Vec<f64> = settings
        .iter()
        .map(|s| s["billed_pf"]["median"].as_f64().unwrap())
        .collect();
    let (lo, hi, n) = series(&doc, "candidates y");
    assert_eq!(n, settings.len());
    assert_eq!(lo, ys.iter().copied().fold(f64::INFINITY, f64::min));
    assert_eq!(hi, ys.iter().copied().fold(f64::NEG_INFINITY, f64::max));

    let html = read(&dir.join("report.html"));
    self_contained(&html, &["sweep-tradeoff"]);
    // The recommendation first, in the sweep's own words, before the figure.
    let first = v["recommendation"]["sentences"][0].as_str().unwrap();
    let at = html
        .find(&escaped(first))
        .expect("the recommendation sentence");
    assert!(at < html.find("id=\"fig-sweep-tradeoff\"").unwrap());
    for section in ["front", "settings", "varied", "cost", "seeds", "provenance"] {
        assert!(
            html.contains(&format!("<section id=\"{section}\"")),
            "{section}"
        );
    }
    assert!(html.contains(v["provenance"]["scenario_sha256"].as_str().unwrap()));
    // With two seeds the figure draws whiskers: a spread line per setting at least.
    assert!(svg.matches("<polyline").count() >= settings.len());
}

#[test]
fn merged_shards_write_the_report_of_the_sweep_run_in_one_go() {
    let tmp = TempDir::new().unwrap();
    let sc = workshop_day(tmp.path());
    let whole = tmp.path().join("whole");
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(VARY)
        .arg("--report")
        .arg(&whole)
        .arg("--quiet")
        .assert()
        .success();
    let mut shards = Vec::new();
    for k in 1..=3 {
        let f = tmp.path().join(format!("shard{k}.json"));
        bankstep()
            .arg("sweep")
            .arg(&sc)
            .args(VARY)
            .args(["--shard", &format!("{k}/3")])
            .arg("--json")
            .arg(&f)
            .arg("--quiet")
            .assert()
            .success();
        shards.push(f);
    }
    let merged = tmp.path().join("merged");
    bankstep()
        .arg("merge")
        .args(&shards)
        .arg("--report")
        .arg(&merged)
        .arg("--quiet")
        .assert()
        .success();
    let names = |d: &Path| -> BTreeSet<String> {
        std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
            .collect()
    };
    assert_eq!(
        names(&whole),
        BTreeSet::from([
            "report.html".to_string(),
            "sweep-tradeoff.png".to_string(),
            "sweep-tradeoff.svg".to_string()
        ])
    );
    assert_eq!(names(&whole), names(&merged));
    for f in names(&whole) {
        let a = std::fs::read(whole.join(&f)).unwrap();
        let b = std::fs::read(merged.join(&f)).unwrap();
        assert!(a == b, "{f} differs between the sweep and the merge");
    }
}

#[test]
fn sweep_report_with_a_shard_is_refused() {
    let tmp = TempDir::new().unwrap();
    let sc = workshop_day(tmp.path());
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(VARY)
        .args(["--shard", "1/2", "--json"])
        .arg(tmp.path().join("s.json"))
        .arg("--report")
        .arg(tmp.path().join("r"))
        .assert()
        .code(2);
}

#[test]
fn design_report_plots_the_need_and_the_levels_of_the_json() {
    let tmp = TempDir::new().unwrap();
    let dir = tmp.path().join("report");
    let js = tmp.path().join("design.json");
    bankstep()
        .arg("design")
        .arg(scenarios().join("pumping-station.toml"))
        .arg("--report")
        .arg(&dir)
        .arg("--json")
        .arg(&js)
        .arg("--quiet")
        .assert()
        .success();
    let v = json(&js);
    let svg = read(&dir.join("kvar-duration.svg"));
    let doc = roxmltree::Document::parse(&svg).expect("kvar-duration.svg is XML");
    same_size(&doc, &dir.join("kvar-duration.png"));
    let t = texts(&doc);
    for axis in [
        "kvar needed for the target, kvar",
        "share of time, %",
        "levels each layout reaches, kvar",
    ] {
        assert!(t.iter().any(|s| s == axis), "axis {axis:?} missing: {t:?}");
    }

    // The curve reaches the largest need at its top and the JSON curve's last point
    // (the need exceeded all the time) at its bottom.
    let need = &v["need"];
    let (lo, hi, n) = series(&doc, "kvar needed");
    assert_eq!(hi, need["max_kvar"].as_f64().unwrap());
    let curve = need["curve"].as_array().unwrap();
    assert_eq!(
        lo,
        curve.last().unwrap()["kvar"].as_f64().unwrap(),
        "the smallest need"
    );
    assert_eq!(n, 1001);
    // The dashed line is the recommended total.
    let rec = need["recommended_kvar"].as_f64().unwrap();
    let name = format!("recommended total {} kvar", format_args!("{:.1}", rec));
    assert_eq!(series(&doc, &name).1, rec);
    assert!(t.iter().any(|s| s == &name), "legend {name:?}");

    // The levels drawn are each of the best four candidates' reachable kvar, exactly.
    let cands = v["candidates"].as_array().unwrap();
    assert!(cands.len() >= 4);
    let m = marks(&doc);
    for (i, c) in cands.iter().take(4).enumerate() {
        let label = c["label"].as_str().unwrap();
        let drawn: Vec<f64> = m
            .iter()
            .filter(|x| x.0 == label && x.3 == "level")
            .map(|x| {
                assert_eq!(x.1, i as f64, "column of {label}");
                x.2
            })
            .collect();
        let want: Vec<f64> = c["reachable_kvar"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        assert_eq!(drawn, want, "levels of {label}");
        assert!(
            t.iter().any(|s| s == &format!("#{} {label}", i + 1)),
            "key of {label}"
        );
    }
    // No fifth column.
    let fifth = cands[4]["label"].as_str().unwrap();
    assert!(!m.iter().any(|x| x.0 == fifth && x.3 == "level"));

    let html = read(&dir.join("report.html"));
    self_contained(&html, &["kvar-duration"]);
    // The recommended layout and its reason first; the cautions of a design.
    let first = &cands[0];
    let at = html
        .find(&escaped(first["reason"].as_str().unwrap()))
        .expect("the recommended layout's reason");
    assert!(at < html.find("id=\"fig-kvar-duration\"").unwrap());
    assert!(html.contains("Detuning reactors raise the voltage across the"));
    assert!(html.contains("local codes and licensed practice"));
    for c in cands {
        assert!(
            html.contains(&escaped(c["reason"].as_str().unwrap())),
            "reason of #{}",
            c["rank"]
        );
    }
    for section in ["recommended", "need", "candidates", "provenance"] {
        assert!(
            html.contains(&format!("<section id=\"{section}\"")),
            "{section}"
        );
    }
    assert!(html.contains(v["provenance"]["scenario_sha256"].as_str().unwrap()));
}
