//! The rows of a scan of a model of several fields as CSV and JSON: `point`, the varied names,
//! the columns of `efold predict --format csv` ([`crate::report::multi::csv`], read from it so
//! that the two tables always agree), `error`. A JSON row has the CSV header's keys in its
//! order: a number for each cell, `null` for an empty one; a failed point keeps `point`, its
//! varied values, `n_star` and `error`, as for one field ([`crate::report::scan`]).

use crate::analysis::multi::predict::MultiReport;
use crate::analysis::multi::trajectory::MaxTurn;
use crate::drivers::scan_multi::MultiScanRow;
use crate::report::multi;
use crate::report::scan::{csv_field, JsonRow};

/// The predict CSV's lines, split into cells (its cells are numbers or empty: no quoting).
fn split(table: &str) -> Vec<Vec<String>> {
    table
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

/// The header of `efold predict --format csv` for these fields: `n_star`, `FIELD_star`, ...
pub fn header_cells(fields: &[String]) -> Vec<String> {
    let empty = MultiReport {
        fields: fields.to_vec(),
        n_total: 0.0,
        stages: Vec::new(),
        max_turn: MaxTurn {
            turn_rate: 0.0,
            n_before_end: 0.0,
            fields: vec![0.0; fields.len()],
        },
        predictions: Vec::new(),
    };
    split(&multi::csv(&empty)).swap_remove(0)
}

/// The cells of `efold predict --format csv`, one row per prediction of `rep`.
pub fn row_cells(rep: &MultiReport) -> Vec<Vec<String>> {
    let mut lines = split(&multi::csv(rep));
    lines.remove(0);
    lines
}

/// The CSV lines of these rows (without the header); `width` is the number of predict
/// columns, so that a failed row has its empty cells.
pub fn csv_rows(rows: &[MultiScanRow], width: usize) -> String {
    let mut o = String::new();
    for r in rows {
        let mut f: Vec<String> = vec![r.point.to_string()];
        f.extend(r.params.iter().map(|(_, v)| format!("{v:e}")));
        match &r.result {
            Ok(cells) => {
                f.extend(cells.iter().cloned());
                f.push(String::new());
            }
            Err(e) => {
                f.push(format!("{}", r.n_star));
                f.extend((1..width).map(|_| String::new()));
                f.push(csv_field(e.message()));
            }
        }
        o.push_str(&f.join(","));
        o.push('\n');
    }
    o
}

/// A cell as JSON: its number, or `null` when empty.
fn cell_value(cell: &str) -> serde_json::Value {
    match cell.parse::<f64>() {
        Ok(x) if x.is_finite() => serde_json::json!(x),
        _ => serde_json::Value::Null,
    }
}

/// One row as a flat JSON object with the CSV header's keys (`header`: the predict columns).
pub fn json_row(r: &MultiScanRow, header: &[String]) -> JsonRow {
    let mut m = JsonRow::default();
    m.0.push(("point".into(), serde_json::json!(r.point)));
    for (n, v) in &r.params {
        m.0.push((n.clone(), serde_json::json!(v)));
    }
    match &r.result {
        Ok(cells) => {
            for (k, c) in header.iter().zip(cells) {
                m.0.push((k.clone(), cell_value(c)));
            }
            m.0.push(("error".into(), serde_json::Value::Null));
        }
        Err(e) => {
            m.0.push(("n_star".into(), serde_json::json!(r.n_star)));
            m.0.push(("error".into(), serde_json::json!(e.message())));
        }
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diag::Diagnostic;
    use crate::drivers::scan::PointError;

    #[test]
    fn rows_follow_the_predict_columns() {
        let header = header_cells(&["x".to_string(), "y".to_string()]);
        assert_eq!(&header[..3], ["n_star", "x_star", "y_star"]);
        assert_eq!(header.len(), 3 + multi::CSV_KEYS.len());
        let ok = MultiScanRow {
            point: 0,
            params: vec![("ratio".into(), 9.0)],
            n_star: 55.0,
            result: Ok((0..header.len())
                .map(|i| if i == 10 { String::new() } else { format!("{i}e0") })
                .collect()),
        };
        let failed = MultiScanRow {
            point: 1,
            params: vec![("ratio".into(), -1.0)],
            n_star: 55.0,
            result: Err(PointError::Model(Box::new(Diagnostic::new("V is \"negative\"")))),
        };
        let csv = csv_rows(&[ok.clone(), failed.clone()], header.len());
        let lines: Vec<&str> = csv.lines().collect();
        // point, ratio, the predict cells, error: the same count on both rows
        assert_eq!(lines[0].split(',').count(), header.len() + 3);
        assert_eq!(lines[1].split(',').count(), header.len() + 3);
        assert!(lines[1].ends_with(",\"V is \"\"negative\"\"\""), "{}", lines[1]);
        let j = json_row(&ok, &header);
        assert_eq!(j.get("x_star"), Some(&serde_json::json!(1.0)));
        assert_eq!(j.get(&header[10]), Some(&serde_json::Value::Null));
        let keys: Vec<&str> = j.0.iter().map(|(k, _)| k.as_str()).collect();
        assert_eq!(keys.len(), header.len() + 3);
        let j = json_row(&failed, &header);
        assert_eq!(j.get("error"), Some(&serde_json::json!("V is \"negative\"")));
    }
}
