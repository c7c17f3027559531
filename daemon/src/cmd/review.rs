//! The review commands: `events`, `show`, `plot`, `report` and `margins`.

use super::status::open;
use crate::cli::{EventsArgs, MarginsArgs, PlotArgs, ReportArgs, ShowArgs};
use crate::review;
use anyhow::{Context, Result};

fn print_json(doc: &serde_json::Value) -> Result<()> {
    let mut t = serde_json::to_string_pretty(doc)?;
    t.push('\n');
    super::print_out(&t)
}

fn write_file(path: &std::path::Path, text: &str) -> Result<()> {
    std::fs::write(path, text).with_context(|| format!("writing {}", path.display()))
}

/// `veer events`.
pub(crate) fn events(a: EventsArgs) -> Result<()> {
    let (store, _) = open(&a.source)?;
    let since = a
        .since
        .as_deref()
        .map(review::events::parse_since)
        .transpose()?;
    let doc = review::events::document(&store, a.machine.as_deref(), since)?;
    if a.json {
        print_json(&doc)
    } else {
        super::print_out(&review::events::text(&doc))
    }
}

/// `veer show`.
pub(crate) fn show(a: ShowArgs) -> Result<()> {
    let (store, cfg) = open(&a.source)?;
    let doc = review::show::document(&store, cfg.as_ref(), a.event)?;
    if a.json {
        print_json(&doc)
    } else {
        super::print_out(&review::show::text(&doc))
    }
}

/// `veer plot`.
pub(crate) fn plot(a: PlotArgs) -> Result<()> {
    let (store, cfg) = open(&a.source)?;
    let ev = review::load(&store, cfg.as_ref(), a.event)?;
    let svg = review::plot::render(a.kind, &ev, a.channel.as_deref(), None)?;
    write_file(&a.out, &svg)
}

/// `veer report`.
pub(crate) fn report(a: ReportArgs) -> Result<()> {
    let (store, cfg) = open(&a.source)?;
    let html = review::report::render(&store, cfg.as_ref(), a.event, a.baseline)?;
    write_file(&a.out, &html)
}

/// `veer margins`.
pub(crate) fn margins(a: MarginsArgs) -> Result<()> {
    let (store, cfg) = open(&a.source)?;
    let doc = review::margins::document(&store, cfg.as_ref(), &a.machine, &a.zones)?;
    // The plot before the document: a machine without estimates fails with one line and prints
    // nothing else.
    if let Some(path) = &a.plot {
        let svg = review::margins::plot(&store, cfg.as_ref(), &a.machine)?;
        write_file(path, &svg)?;
    }
    if a.json {
        print_json(&doc)
    } else {
        super::print_out(&review::margins::text(&doc))
    }
}
