//! A scan's JSON rows have the CSV header's keys, in its order, with the CSV's values.

mod common;
use common::efold;

fn model(name: &str) -> String {
    format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

/// The same scan in both formats.
fn both(args: &[&str]) -> (Vec<String>, Vec<Vec<String>>, Vec<serde_json::Value>) {
    let run = |format: &str| {
        let mut a = args.to_vec();
        a.extend(["--format", format]);
        let r = efold(&a);
        assert_eq!(r.code, 0, "{}", r.stderr);
        r.stdout
    };
    let csv = run("csv");
    let mut lines = csv.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    // no field of these scans holds a comma or a quote
    let cells: Vec<Vec<String>> = lines.map(|l| l.split(',').map(String::from).collect()).collect();
    let json: Vec<serde_json::Value> = serde_json::from_str(&run("json")).unwrap();
    assert_eq!(cells.len(), json.len());
    (header, cells, json)
}

/// The keys of a JSON object in the order the text gives them (serde_json's map sorts them).
fn keys_in_order(text: &str) -> Vec<Vec<String>> {
    struct Keys(Vec<String>);
    impl<'de> serde::Deserialize<'de> for Keys {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Keys, D::Error> {
            struct V;
            impl<'de> serde::de::Visitor<'de> for V {
                type Value = Keys;
                fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                    f.write_str("an object")
                }
                fn visit_map<A: serde::de::MapAccess<'de>>(self, mut a: A) -> Result<Keys, A::Error> {
                    let mut k = Vec::new();
                    while let Some((key, _)) = a.next_entry::<String, serde::de::IgnoredAny>()? {
                        k.push(key);
                    }
                    Ok(Keys(k))
                }
            }
            d.deserialize_map(V)
        }
    }
    let rows: Vec<Keys> = serde_json::from_str(text).unwrap();
    rows.into_iter().map(|k| k.0).collect()
}

/// Every row that predicts: JSON keys = CSV header, in order; numbers equal as doubles, words
/// equal, an empty CSV cell a JSON null.
#[test]
fn json_keys_and_values_are_the_csv_columns() {
    let m = model("pole-order-2-quadratic");
    let args = ["scan", m.as_str(), "--vary", "alpha=0.5:8:3:log", "--efolds", "50,60"];
    let (header, cells, json) = both(&args);
    // pole_n_s, pole_r and n_reh are among the columns, just before `error`
    assert_eq!(
        header[header.len() - 4..],
        ["pole_n_s", "pole_r", "n_reh", "error"].map(String::from)
    );
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let order = keys_in_order(&efold(&a).stdout);
    for ((row, obj), keys) in cells.iter().zip(&json).zip(&order) {
        assert_eq!(keys, &header, "JSON keys in the CSV's order");
        for (key, cell) in header.iter().zip(row) {
            let v = &obj[key];
            match v {
                serde_json::Value::Null => assert!(cell.is_empty(), "{key}: null vs {cell:?}"),
                serde_json::Value::String(s) => assert_eq!(s, cell, "{key}"),
                _ => assert_eq!(
                    v.as_f64().unwrap(),
                    cell.parse::<f64>().unwrap(),
                    "{key}: {v} vs {cell}"
                ),
            }
        }
        // the pole-only prediction of this model is there, as in the CSV
        assert!(obj["pole_n_s"].is_f64() && obj["pole_r"].is_f64());
    }
}

/// A failed point keeps its row in both: in JSON with the point, the parameters, N_* and the
/// error, in the CSV's order.
#[test]
fn failed_points_keep_their_keys_in_order() {
    let args = [
        "scan",
        "--potential",
        "phi^p",
        "--param",
        "p=2",
        "--range",
        "0",
        "12",
        "--vary",
        "p=1:3:3",
        "--efolds",
        "55",
    ];
    let (header, cells, json) = both(&args);
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let order = keys_in_order(&efold(&a).stdout);
    let mut failed = 0;
    for ((row, obj), keys) in cells.iter().zip(&json).zip(&order) {
        if obj["error"].is_null() {
            assert_eq!(keys, &header);
            // no pole at the top of phi^p: the pole columns are empty and null
            assert!(obj["pole_n_s"].is_null() && row[header.len() - 4].is_empty());
        } else {
            failed += 1;
            assert_eq!(keys, &["point", "p", "n_star", "error"].map(String::from));
            assert_eq!(obj["n_star"].as_f64().unwrap(), row[2].parse::<f64>().unwrap());
        }
    }
    assert!(failed > 0 && failed < json.len(), "{failed} of {} failed", json.len());
}
