//! `efold inspect` run as a user would: reports for every shipped model, JSON keys, the
//! figure, and each kind of bad model input.

use std::path::Path;

mod common;
use common::efold;

fn shipped_models() -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(Path::new(env!("CARGO_MANIFEST_DIR")).join("models"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .map(|p| p.display().to_string())
        .collect();
    v.sort();
    v
}

#[test]
fn report_for_every_shipped_model() {
    let models = shipped_models();
    assert!(models.len() >= 8, "{models:?}");
    for path in models {
        let r = efold(&["inspect", &path]);
        assert_eq!(r.code, 0, "{path}: {}", r.stderr);
        let name = Path::new(&path).file_stem().unwrap().to_string_lossy().into_owned();
        insta::assert_snapshot!(format!("inspect_{name}"), r.stdout);
    }
}

#[test]
fn json_has_the_documented_keys() {
    let m = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&["inspect", &m, "--format", "json", "--table", "5"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let poles = v["poles"].as_array().unwrap();
    assert_eq!(poles.len(), 2);
    for p in poles {
        assert!(p["phi"].is_number() && p["order"].is_number() && p["residue"].is_number());
    }
    let asym = v["asymptotics"].as_array().unwrap();
    assert_eq!(asym.len(), 2);
    for a in asym {
        assert_eq!(a["kind"], "exponential-plateau");
        assert!(a["end"].is_number());
        for key in ["height", "scale", "alpha"] {
            assert!(a[key].is_number(), "{key}");
        }
    }
    assert_eq!(v["table"].as_array().unwrap().len(), 5);
    // Infinite ends are the strings "inf" / "-inf".
    let r = efold(&["inspect", "--potential", "phi^2", "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(v["asymptotics"][1]["end"], "inf");
    assert_eq!(v["asymptotics"][0]["end"], "-inf");
}

#[test]
fn figure_has_both_panels_and_markers() {
    let dir = std::env::temp_dir().join(format!("efold-fig-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let svg = dir.join("pole.svg");
    let m = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&["inspect", &m, "--svg", svg.to_str().unwrap()]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = std::fs::read_to_string(&svg).unwrap();
    // Structure, not pixels: two panels, axes, labels, the series, pole lines, the minimum.
    assert_eq!(text.matches("class=\"panel\"").count(), 2);
    assert_eq!(text.matches("class=\"axes\"").count(), 2);
    // Symbols as a reader sees them: V(φ), χ in italics, M_p^4 with a sub- and a superscript.
    assert!(text.contains("<tspan font-style=\"italic\">V</tspan>(<tspan font-style=\"italic\">φ</tspan>)"));
    assert!(text.contains("<tspan font-style=\"italic\">χ</tspan> [<tspan font-style=\"italic\">M</tspan><tspan dy=\"2.64\" font-size=\"8.4\">p</tspan>"));
    assert!(text.contains("class=\"xlabel\" ") && text.contains("canonical field<"));
    assert!(text.contains("font-family=\"'DejaVu Sans', Helvetica, Arial, sans-serif\""));
    assert_eq!(text.matches("class=\"series\"").count(), 2);
    assert_eq!(text.matches("class=\"vline\"").count(), 2);
    assert!(text.contains(">minimum<"));
    std::fs::remove_dir_all(&dir).unwrap();
}

/// The characters a PDF's fonts map to (the ToUnicode tables, written uncompressed).
fn pdf_font_chars(pdf: &[u8]) -> std::collections::BTreeSet<char> {
    let text = String::from_utf8_lossy(pdf);
    let mut out = std::collections::BTreeSet::new();
    for block in text.split("beginbfchar").skip(1) {
        let block = block.split("endbfchar").next().unwrap();
        for line in block.lines() {
            let hex: Vec<&str> = line.split(['<', '>']).filter(|s| !s.trim().is_empty()).collect();
            if let [_, uni] = hex[..] {
                for k in (0..uni.len()).step_by(4) {
                    let code = u32::from_str_radix(&uni[k..k + 4], 16).unwrap();
                    out.extend(char::from_u32(code));
                }
            }
        }
    }
    out
}

/// The decompressed streams of a PDF that are Flate-compressed.
fn pdf_streams(pdf: &[u8]) -> Vec<Vec<u8>> {
    let mut out = Vec::new();
    let mut at = 0;
    while let Some(i) = pdf[at..].windows(7).position(|w| w == b"stream\n") {
        let start = at + i + 7;
        let Some(len) = pdf[start..].windows(9).position(|w| w == b"endstream") else {
            break;
        };
        if let Ok(d) = miniz_oxide::inflate::decompress_to_vec_zlib(&pdf[start..start + len]) {
            out.push(d);
        }
        at = start + len;
    }
    out
}

#[test]
fn pdf_beside_svg_embeds_its_fonts() {
    let dir = std::env::temp_dir().join(format!("efold-pdf-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let pdf = dir.join("pole.pdf");
    let m = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&["predict", &m, "--pdf", pdf.to_str().unwrap()]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF-"));
    let text = String::from_utf8_lossy(&bytes);
    assert!(text.contains("/FontFile2"), "no embedded font");
    // The labels are text in the embedded fonts: every character of them has a glyph there.
    let chars = pdf_font_chars(&bytes);
    for label in ["V(φ)", "χ", "N = 55", "end", "minimum", "pole, p = 2", "M"] {
        for c in label.chars().filter(|c| *c != ' ') {
            assert!(
                chars.contains(&c),
                "{c:?} of {label:?} not in the PDF's fonts: {chars:?}"
            );
        }
    }
    // The page draws text with text operators (not outlines).
    assert!(pdf_streams(&bytes)
        .iter()
        .any(|s| s.windows(3).any(|w| w == b"Tj\n" || w == b"TJ\n")));
    // A bad width is an error, exit code 2, and no file.
    let wide = dir.join("wide.pdf");
    let r = efold(&["predict", &m, "--pdf", wide.to_str().unwrap(), "--figure-width", "wide"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("not a figure width"), "{}", r.stderr);
    assert!(!wide.exists());
    // A failed write leaves nothing behind and exits with 2.
    let bad = dir.join("no-such-dir").join("p.pdf");
    let r = efold(&["predict", &m, "--pdf", bad.to_str().unwrap()]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("cannot write"), "{}", r.stderr);
    std::fs::remove_dir_all(&dir).unwrap();
}

/// Bad input: each a clear error, exit code 2, nothing on stdout.
#[test]
fn bad_models() {
    let dir = std::env::temp_dir().join(format!("efold-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let write = |name: &str, text: &str| {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p.display().to_string()
    };
    let unknown_param = write(
        "unknown-param.toml",
        "potential = \"m^2*phi^2/2\"\n\n[params]\nmass = 1\n",
    );
    let malformed = write("malformed.toml", "potential = \"phi^2\nkinetic = 1\n");
    let unknown_key = write("unknown-key.toml", "potential = \"phi^2\"\nkinetc = \"1\"\n");
    let bad_expr = write(
        "bad-expr.toml",
        "name = \"x\"\npotential = \"phi^2 * (1 + tanhh(phi))\"\n",
    );
    let cases: Vec<(&str, Vec<&str>)> = vec![
        (
            "k_negative",
            vec![
                "inspect",
                "--potential",
                "phi^2",
                "--kinetic",
                "1 - phi^2",
                "--range",
                "-2",
                "2",
            ],
        ),
        (
            "k_zero",
            vec![
                "inspect",
                "--potential",
                "phi^2",
                "--kinetic",
                "(phi - 0.3)^2",
                "--range",
                "-1",
                "1",
            ],
        ),
        (
            "v_complex",
            vec!["inspect", "--potential", "log(phi)", "--range", "-1", "1"],
        ),
        ("unknown_param", vec!["inspect", &unknown_param]),
        ("malformed_toml", vec!["inspect", &malformed]),
        ("unknown_key", vec!["inspect", &unknown_key]),
        ("expression_in_file", vec!["inspect", &bad_expr]),
        ("no_model", vec!["inspect"]),
        ("missing_file", vec!["inspect", "no-such-model.toml"]),
        (
            "empty_range",
            vec!["inspect", "--potential", "phi^2", "--range", "1", "0"],
        ),
    ];
    for (name, args) in cases {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}");
        let stderr = r.stderr.replace(&dir.display().to_string(), "TMP");
        insta::assert_snapshot!(format!("inspect_error_{name}"), stderr);
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

/// A misspelt table header is reported at its own line, with the table it resembles; an
/// unknown key inside [settings] is an unknown setting, with the list of settings.
#[test]
fn misspelt_tables_and_settings() {
    let dir = std::env::temp_dir().join(format!("efold-tables-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let cases = [
        (
            "setings",
            "potential = \"phi^2/(6*alpha)\"\n\n[params]\nalpha = 1\n\n[setings]\nefolds = [50, 60]\n",
        ),
        ("param", "potential = \"phi^2/(6*alpha)\"\n\n[param]\nalpha = 1\n"),
        (
            "unknown_setting",
            "potential = \"phi^2\"\n\n[settings]\nefolds = [50, 60]\nefold = [55]\n",
        ),
    ];
    for (name, text) in cases {
        let p = dir.join(format!("{name}.toml"));
        std::fs::write(&p, text).unwrap();
        let r = efold(&["inspect", p.to_str().unwrap()]);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}");
        let stderr = r.stderr.replace(&dir.display().to_string(), "TMP");
        insta::assert_snapshot!(format!("inspect_error_table_{name}"), stderr);
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

/// The character columns of the decimal points in one line's whitespace-separated numbers.
fn point_columns(line: &str) -> Vec<usize> {
    let mut out = Vec::new();
    let mut start = None;
    for (i, c) in line.char_indices().chain([(line.len(), ' ')]) {
        match (c.is_whitespace(), start) {
            (false, None) => start = Some(i),
            (true, Some(s)) => {
                let cell = &line[s..i];
                out.push(cell.find('.').map_or(i, |p| s + p));
                start = None;
            }
            _ => {}
        }
    }
    out
}

#[test]
fn table_columns_align_on_the_decimal_point() {
    let m = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    // five rows: the middle one is the minimum, where phi, chi and V are exactly 0
    let r = efold(&["inspect", &m, "--table", "5"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    let head = lines
        .iter()
        .position(|l| l.split_whitespace().eq(["phi", "chi", "V"]))
        .unwrap();
    let rows = &lines[head + 1..head + 6];
    let first = point_columns(rows[0]);
    assert_eq!(first.len(), 3, "{}", r.stdout);
    for row in rows {
        assert!(!row.contains('e'), "this table is in the fixed range: {row}");
        assert_eq!(point_columns(row), first, "decimal points move in\n{}", r.stdout);
    }
}

#[test]
fn labels_align_whatever_the_field_name() {
    // V = exp(inflaton^2) - 1 overflows a double beyond |inflaton| = sqrt(ln(f64::MAX)) = 26.64
    // (from the largest double, 1.797e308: ln = 709.78).
    let r = efold(&["inspect", "--potential", "exp(inflaton^2) - 1", "--field", "inflaton"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = &r.stdout;
    let value_column = |label: &str| {
        let l = text
            .lines()
            .find(|l| l.starts_with(label))
            .unwrap_or_else(|| panic!("{label}\n{text}"));
        label.len() + (l[label.len()..].len() - l[label.len()..].trim_start().len())
    };
    let col = value_column("model");
    for label in ["V(inflaton)", "K(inflaton)", "domain", "minimum", "chi = 0 at"] {
        assert_eq!(value_column(label), col, "{label} in\n{text}");
    }
    assert!(
        text.contains("  upper end: V exceeds double precision beyond inflaton = 26.6417"),
        "{text}"
    );
    assert!(text.contains("  lower end: V exceeds double precision beyond inflaton = -26.6417"));
}

#[test]
fn asymptotics_lines_are_columns() {
    // ends of different lengths (-inf, a pole at a finite value) on the two lines
    let r = efold(&[
        "inspect",
        "--potential",
        "x^2",
        "--kinetic",
        "1/(1 - x)^2",
        "--field",
        "x",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r
        .stdout
        .lines()
        .skip_while(|l| !l.starts_with("V(chi) toward each end"))
        .skip(1)
        .take_while(|l| !l.is_empty())
        .collect();
    assert_eq!(lines.len(), 2, "{}", r.stdout);
    // where the kind and the confidence start on a line
    let starts = |l: &str| {
        let a = l.find("->").unwrap() + 2;
        let end_start = a + (l[a..].len() - l[a..].trim_start().len());
        let end_len = l[end_start..].find(' ').unwrap();
        let after = &l[end_start + end_len..];
        (
            end_start + end_len + (after.len() - after.trim_start().len()),
            l.find('[').unwrap(),
        )
    };
    assert_eq!(starts(lines[0]), starts(lines[1]), "{}", r.stdout);
}
