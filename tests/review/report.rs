//! `veer report`: one self-contained HTML file with the plots, the margin table, the caution and,
//! with a baseline, the changes in numbers. (The browser check is scripts/check_report.py.)

use super::plant;
use crate::support::num;

#[test]
fn report_stands_alone_and_compares_with_the_baseline() {
    let p = plant();
    let base = p.event_id("tg-1", "run-up");
    let now = p.event_id("tg-1", "coast-down");
    let out = p.dir.join("report.html");
    let o = out.display().to_string();
    p.run(&p.db_args(&[
        "report",
        &now.to_string(),
        "--baseline",
        &base.to_string(),
        "--out",
        &o,
    ]));
    let html = std::fs::read_to_string(&out).expect("written");
    assert!(html.starts_with("<!DOCTYPE html>"));
    for bad in ["http:", "https:", "<script", " src=", " href=", "url("] {
        assert!(
            !html.contains(bad),
            "the report refers outside itself: {bad}"
        );
    }
    assert_eq!(html.matches("<svg").count(), 3, "Bode, polar and order map");
    assert!(html.contains("not a machinery protection system"));
    assert!(html.contains(&format!("Change from baseline event {base}")));
    // The change of each critical's speed, as show gives both.
    let a = p.json(&p.db_args(&["show", &now.to_string(), "--json"]));
    let b = p.json(&p.db_args(&["show", &base.to_string(), "--json"]));
    let nc_now = num(&a["channels"][0]["criticals"][0], "speed_rpm");
    let nc_base = num(&b["channels"][0]["criticals"][0], "speed_rpm");
    let cell = format!("<td>{:+.0}</td>", nc_now - nc_base);
    assert!(html.contains(&cell), "no ΔNc cell {cell}");
    // Both runs on the Bode plot: the baseline's dashes are there.
    assert!(html.contains("stroke=\"#E69F00\""));
    // A baseline of another machine is refused.
    let other = p.event_id("comp-3", "run-up").to_string();
    let args = p.db_args(&[
        "report",
        &now.to_string(),
        "--baseline",
        &other,
        "--out",
        &o,
    ]);
    let v: Vec<&str> = args.iter().map(String::as_str).collect();
    let fail = crate::support::veer(&v, &p.dir);
    crate::support::error_naming(&fail, &["baseline"]);
}
