//! Renderings of workspace values: plain text (for `icefield run` and notebooks), HTML
//! tables, SVG figures, and the machine record printed by `icefield run --json`.

use serde::Serialize;
use serde_json::{json, Map, Value as Json};

use crate::units::format_number;
use crate::workspace::{Figure, Table};

/// A value shown during a cell (public contract type).
#[derive(Clone, Debug, Serialize)]
pub struct Rendering {
    /// Always present.
    pub plain: String,
    /// Tables.
    pub html: Option<String>,
    /// Figures.
    pub svg: Option<String>,
    /// `{"name", "kind", "units", "values", ...}`: one JSON object per result.
    pub record: Json,
}

/// Header text of a column: "energy [K]" or "monopole_density".
pub fn header(name: &str, unit: &str) -> String {
    if unit.is_empty() {
        name.to_string()
    } else {
        format!("{name} [{unit}]")
    }
}

/// `value ± error` with the error to two significant digits and the value to the same
/// decimal place (common practice for quoting a mean with its standard error).
pub fn format_with_error(value: f64, error: f64) -> String {
    if !value.is_finite() {
        return format!("{value}");
    }
    // An error far below the value's own rounding (a frozen column whose spread is
    // float noise) is quoted as zero rather than with a dozen meaningless digits.
    if !(error.is_finite() && error > 1e-9 * value.abs()) {
        return format!("{} ± 0", format_number(value));
    }
    let magnitude = value.abs().max(error);
    if !(1e-6..1e7).contains(&magnitude) {
        return format!("{} ± {}", format_number(value), format_number(error));
    }
    let decimals = (1 - error.log10().floor() as i32).clamp(0, 12) as usize;
    format!("{value:.decimals$} ± {error:.decimals$}")
}

fn cell_text(table: &Table, column: usize, row: usize) -> String {
    let c = &table.columns[column];
    let value = c.values.get(row).copied().unwrap_or(f64::NAN);
    match c.errors.as_ref().and_then(|e| e.get(row)) {
        Some(error) => format_with_error(value, *error),
        None => format_number(value),
    }
}

fn escape_html(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// One-line description of where a table came from.
pub fn provenance_line(table: &Table) -> String {
    match &table.provenance {
        Some(p) if p.kinetics.is_some() => p
            .kinetics
            .as_ref()
            .map(|k| k.line(p, table.row_count()))
            .unwrap_or_default(),
        Some(p) => {
            let mut text = format!(
                "{}; {}; {}; seed {}; {} sweeps (after {} to equilibrate) per temperature",
                p.source, p.lattice, p.model, p.seed, p.measurement_sweeps, p.equilibration_sweeps
            );
            if p.interrupted {
                text.push_str(&format!(
                    "; INTERRUPTED: {} of {} temperatures",
                    table.row_count(),
                    p.temperatures_requested
                ));
            }
            text
        }
        None => String::new(),
    }
}

/// A table as aligned plain text, HTML and a record. `columns`: a subset to show.
pub fn table(table: &Table, columns: Option<&[String]>) -> Rendering {
    let indices: Vec<usize> = match columns {
        Some(names) => names
            .iter()
            .filter_map(|n| table.columns.iter().position(|c| &c.name == n))
            .collect(),
        None => (0..table.columns.len()).collect(),
    };
    let rows = table.row_count();
    let headers: Vec<String> = indices
        .iter()
        .map(|&i| header(&table.columns[i].name, &table.columns[i].unit))
        .collect();
    let cells: Vec<Vec<String>> = (0..rows)
        .map(|r| indices.iter().map(|&c| cell_text(table, c, r)).collect())
        .collect();
    let widths: Vec<usize> = (0..indices.len())
        .map(|c| {
            cells
                .iter()
                .map(|row| row[c].chars().count())
                .chain(std::iter::once(headers[c].chars().count()))
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut plain = format!(
        "{} ({} row{})\n",
        table.name,
        rows,
        if rows == 1 { "" } else { "s" }
    );
    let line = |texts: &[String]| -> String {
        texts
            .iter()
            .zip(&widths)
            .map(|(t, w)| format!("{}{t}", " ".repeat(w - t.chars().count())))
            .collect::<Vec<_>>()
            .join("  ")
    };
    plain.push_str(&line(&headers));
    plain.push('\n');
    for row in &cells {
        plain.push_str(&line(row));
        plain.push('\n');
    }
    let provenance = provenance_line(table);
    if !provenance.is_empty() {
        plain.push_str(&provenance);
        plain.push('\n');
    }

    let mut html = String::from("<table class=\"icefield-table\">\n");
    html.push_str(&format!(
        "<caption><b>{}</b> — {} rows{}</caption>\n<thead><tr>",
        escape_html(&table.name),
        rows,
        if provenance.is_empty() {
            String::new()
        } else {
            format!("<br><small>{}</small>", escape_html(&provenance))
        }
    ));
    for h in &headers {
        html.push_str(&format!("<th>{}</th>", escape_html(h)));
    }
    html.push_str("</tr></thead>\n<tbody>\n");
    for row in &cells {
        html.push_str("<tr>");
        for cell in row {
            html.push_str(&format!(
                "<td style=\"text-align:right\">{}</td>",
                escape_html(cell)
            ));
        }
        html.push_str("</tr>\n");
    }
    html.push_str("</tbody>\n</table>");

    let mut units = Map::new();
    let mut values = Map::new();
    let mut errors = Map::new();
    for &i in &indices {
        let c = &table.columns[i];
        units.insert(c.name.clone(), json!(c.unit));
        values.insert(c.name.clone(), json!(c.values));
        if let Some(e) = &c.errors {
            errors.insert(c.name.clone(), json!(e));
        }
    }
    let record = json!({
        "name": table.name,
        "kind": "table",
        "units": units,
        "values": values,
        "errors": errors,
        "provenance": table.provenance,
    });
    Rendering {
        plain,
        html: Some(html),
        svg: None,
        record,
    }
}

/// A figure: its SVG, a plain-text description and a record of the plotted data.
pub fn figure(figure: &Figure) -> Rendering {
    let points: usize = figure.series.iter().map(|s| s.x.len()).sum();
    let mut plain = format!(
        "figure{}: {} against {} ({} series, {} points)\n",
        if figure.name.is_empty() {
            String::new()
        } else {
            format!(" `{}`", figure.name)
        },
        header(&figure.y_label, &figure.y_unit),
        header(&figure.x_label, &figure.x_unit),
        figure.series.len(),
        points
    );
    for s in &figure.series {
        let range = |v: &[f64]| {
            let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            format!("{} … {}", format_number(lo), format_number(hi))
        };
        plain.push_str(&format!(
            "  {}: x {}, y {}\n",
            s.label,
            range(&s.x),
            range(&s.y)
        ));
    }
    let mut units = Map::new();
    let mut values = Map::new();
    let mut errors = Map::new();
    let single = figure.series.len() == 1;
    for s in &figure.series {
        let (x_key, y_key) = if single {
            (figure.x_label.clone(), figure.y_label.clone())
        } else {
            let table = s.label.split('.').next().unwrap_or("");
            (format!("{table}.{}", figure.x_label), s.label.clone())
        };
        units.insert(x_key.clone(), json!(figure.x_unit));
        units.insert(y_key.clone(), json!(figure.y_unit));
        values.insert(x_key, json!(s.x));
        if let Some(e) = &s.y_error {
            errors.insert(y_key.clone(), json!(e));
        }
        values.insert(y_key, json!(s.y));
    }
    let record = json!({
        "name": if figure.name.is_empty() { figure.title.clone() } else { figure.name.clone() },
        "kind": "figure",
        "units": units,
        "values": values,
        "errors": errors,
        "title": figure.title,
    });
    Rendering {
        plain,
        html: None,
        svg: Some(figure.svg.clone()),
        record,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn errors_have_two_significant_digits_and_values_follow() {
        // Common practice for quoting a mean with its standard error.
        assert_eq!(format_with_error(0.123456, 0.00123), "0.1235 ± 0.0012");
        assert_eq!(format_with_error(-1.638, 0.0235), "-1.638 ± 0.024");
        assert_eq!(format_with_error(1234.5, 27.0), "1234 ± 27");
        assert_eq!(format_with_error(2.0, 0.0), "2 ± 0");
        assert_eq!(format_with_error(0.5, 3e-17), "0.5 ± 0");
        assert_eq!(format_with_error(1.5e-9, 2e-10), "1.5e-9 ± 2e-10");
    }

    #[test]
    fn headers_carry_units() {
        assert_eq!(header("energy", "K"), "energy [K]");
        assert_eq!(header("monopole_density", ""), "monopole_density");
    }
}
