//! Mime bundles for Jupyter display messages, built from `icefield_lang::Rendering`
//! and from long-run progress.
//!
//! Every bundle has `text/plain`. Figures add `image/svg+xml` (a string), tables add
//! `text/html`, and every value carries its machine-readable record.
//!
//! The record travels as `application/vnd.icefield.record+json`, not bare
//! `application/json`: JupyterLab 4 ranks its JSON renderer first (rank 0, before HTML
//! and SVG; see `@jupyterlab/json-extension`), so a bundle holding `application/json`
//! would show a JSON tree instead of the figure or table. A `+json` vendor type is still
//! stored by nbformat as a JSON object (nbformat v4 schema, "mimebundle"), so notebook
//! readers and tests get the same record, while front ends show the figure.

use icefield_lang::{Progress, Rendering};
use serde_json::{json, Map, Value};

pub const TEXT_PLAIN: &str = "text/plain";
pub const TEXT_HTML: &str = "text/html";
pub const IMAGE_SVG: &str = "image/svg+xml";
/// Vendor mime type of `Rendering::record` (see the module comment for why not bare JSON).
pub const RECORD_JSON: &str = "application/vnd.icefield.record+json";

/// The display bundle of one rendered value.
pub fn rendering_bundle(rendering: &Rendering) -> Value {
    let mut data = Map::new();
    data.insert(TEXT_PLAIN.into(), Value::String(rendering.plain.clone()));
    if let Some(svg) = &rendering.svg {
        data.insert(IMAGE_SVG.into(), Value::String(svg.clone()));
    }
    if let Some(html) = &rendering.html {
        data.insert(TEXT_HTML.into(), Value::String(html.clone()));
    }
    if !rendering.record.is_null() {
        data.insert(RECORD_JSON.into(), rendering.record.clone());
    }
    Value::Object(data)
}

fn fraction_done(progress: &Progress) -> f64 {
    if progress.total == 0 {
        0.0
    } else {
        (progress.done as f64 / progress.total as f64).clamp(0.0, 1.0)
    }
}

/// The part of a progress label that names the run: the text before " — ". What follows
/// is detail that changes while the run goes (simulated time, time left; see
/// `PROGRESS_DETAIL_SEPARATOR` in lang's `run/dynamics.rs`), so one run keeps one bar.
pub fn progress_identity(label: &str) -> &str {
    label
        .split_once(" — ")
        .map_or(label, |(identity, _)| identity)
}

/// One-line text progress bar, e.g. `scan: [#######-------] 3/6 (50%)`.
pub fn progress_text(progress: &Progress) -> String {
    let fraction = fraction_done(progress);
    let percent = (fraction * 100.0).round() as u32;
    let width = 30usize;
    let filled = ((fraction * width as f64).round() as usize).min(width);
    let bar: String = "#".repeat(filled) + "-".repeat(width - filled).as_str();
    format!(
        "{}: [{}] {}/{} ({}%)",
        progress.label, bar, progress.done, progress.total, percent
    )
}

/// A progress bar: plain text for consoles, an HTML `<progress>` element for JupyterLab.
pub fn progress_bundle(progress: &Progress) -> Value {
    let percent = (fraction_done(progress) * 100.0).round() as u32;
    let plain = progress_text(progress);
    let html = format!(
        "<div class=\"icefield-progress\"><progress value=\"{}\" max=\"{}\" \
         style=\"width: 20em; vertical-align: middle\"></progress> \
         <span style=\"font-family: monospace\">{} — {}/{} ({}%)</span></div>",
        progress.done.min(progress.total),
        progress.total.max(1),
        escape_html(&progress.label),
        progress.done,
        progress.total,
        percent
    );
    json!({ TEXT_PLAIN: plain, TEXT_HTML: html })
}

/// Minimal HTML escaping for text placed inside elements.
pub fn escape_html(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rendering(svg: Option<&str>, html: Option<&str>) -> Rendering {
        Rendering {
            plain: "E = -1.0 K".into(),
            html: html.map(str::to_owned),
            svg: svg.map(str::to_owned),
            record: json!({"name": "E", "kind": "quantity", "units": "K", "values": [-1.0]}),
        }
    }

    #[test]
    fn plain_and_record_always_present() {
        let bundle = rendering_bundle(&rendering(None, None));
        assert_eq!(bundle[TEXT_PLAIN], "E = -1.0 K");
        assert_eq!(bundle[RECORD_JSON]["units"], "K");
        assert!(bundle.get(IMAGE_SVG).is_none());
        assert!(bundle.get(TEXT_HTML).is_none());
    }

    #[test]
    fn figures_and_tables_add_their_types() {
        let bundle = rendering_bundle(&rendering(Some("<svg/>"), Some("<table/>")));
        assert_eq!(bundle[IMAGE_SVG], "<svg/>");
        assert_eq!(bundle[TEXT_HTML], "<table/>");
    }

    #[test]
    fn null_record_is_left_out() {
        let mut r = rendering(None, None);
        r.record = Value::Null;
        assert!(rendering_bundle(&r).get(RECORD_JSON).is_none());
    }

    #[test]
    fn a_progress_label_keeps_its_identity_while_its_detail_changes() {
        assert_eq!(
            progress_identity("noise: evolve — t = 1 ms of 10 ms, about 3 s left"),
            "noise: evolve"
        );
        assert_eq!(
            progress_identity("thermo: temperature scan"),
            "thermo: temperature scan"
        );
    }

    #[test]
    fn progress_bar_text_and_html() {
        let p = Progress {
            label: "scan <T>".into(),
            done: 3,
            total: 12,
        };
        let bundle = progress_bundle(&p);
        let plain = bundle[TEXT_PLAIN].as_str().unwrap();
        assert!(plain.starts_with("scan <T>: ["), "{plain}");
        assert!(plain.ends_with("3/12 (25%)"), "{plain}");
        let html = bundle[TEXT_HTML].as_str().unwrap();
        assert!(html.contains("value=\"3\" max=\"12\""));
        assert!(html.contains("scan &lt;T&gt;"));
        // total 0 must not divide by zero
        let empty = progress_bundle(&Progress {
            label: "x".into(),
            done: 0,
            total: 0,
        });
        assert!(empty[TEXT_PLAIN].as_str().unwrap().ends_with("0/0 (0%)"));
    }
}
