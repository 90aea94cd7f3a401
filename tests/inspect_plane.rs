//! `efold inspect --svg` on models of several fields: V over a plane of two fields with the
//! trajectory, its end and the pivots; `--plane` chooses the plane.

mod common;
use common::efold;

fn model(name: &str) -> String {
    format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

fn tmp(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("efold-plane-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The SVG parses (usvg, the fonts the figures use), and returns the text of every <text>.
fn parse_svg(text: &str) -> String {
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(include_bytes!("../assets/fonts/DejaVuSans.ttf").to_vec());
    let opt = usvg::Options {
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(text, &opt).expect("a valid SVG");
    assert!(tree.size().width() > 100.0);
    text.split("<text")
        .skip(1)
        .map(|t| {
            let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
            // drop the tspans' markup, keep their text
            let mut plain = String::new();
            let mut inside = false;
            for c in body.chars() {
                match c {
                    '<' => inside = true,
                    '>' => inside = false,
                    _ if !inside => plain.push(c),
                    _ => {}
                }
            }
            plain + "\n"
        })
        .collect()
}

/// The merging demo: the axes named by the fields, the colour bar, the end of inflation and
/// the pivots (N_* = 50, 55, 60 lie together near the start, on one label).
#[test]
fn merging_demo_figure() {
    let d = tmp("merging");
    let svg = d.join("m.svg");
    let r = efold(&[
        "inspect",
        &model("two-pole-fields-merging"),
        "--svg",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = std::fs::read_to_string(&svg).unwrap();
    let labels = parse_svg(&text);
    for want in ["end of inflation", "start", "50, 55, 60", "pivots by N"] {
        assert!(labels.contains(want), "{want} in {labels}");
    }
    assert!(text.contains("class=\"xlabel\"") && text.contains("class=\"colorbar\""));
    let xlabel = &text[text.find("class=\"xlabel\"").unwrap()..];
    assert!(xlabel[..xlabel.find("</text>").unwrap()].contains('x'));
    assert!(text.matches("class=\"shape\"").count() >= 10, "contour lines");
    std::fs::remove_dir_all(&d).ok();
}

/// The turning demo: a pivot label for each N_* of the model (20, 50, 55, 60), apart.
#[test]
fn turning_demo_labels_every_pivot() {
    let d = tmp("turning");
    let svg = d.join("t.svg");
    let r = efold(&[
        "inspect",
        &model("two-alphas-turning"),
        "--svg",
        svg.to_str().unwrap(),
        "--plane",
        "y,x",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let labels = parse_svg(&std::fs::read_to_string(&svg).unwrap());
    for n in ["20", "50", "55", "60"] {
        assert!(labels.lines().any(|l| l == n), "{n} in {labels}");
    }
    std::fs::remove_dir_all(&d).ok();
}

/// A small model (two flat quadratics, a few e-folds): the whole SVG, pinned.
#[test]
fn small_plane_figure_snapshot() {
    let d = tmp("small");
    let file = d.join("small.toml");
    std::fs::write(
        &file,
        "name = \"small-plane\"\nfields = [\"x\", \"y\"]\npotential = \"(x^2 + 4*y^2)/2\"\n\
         [metric]\nx = 1\ny = 1\n[start]\nx = 3\ny = 2\n[settings]\nefolds = [2, 3]\n",
    )
    .unwrap();
    let svg = d.join("small.svg");
    let r = efold(&["inspect", file.to_str().unwrap(), "--svg", svg.to_str().unwrap()]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = std::fs::read_to_string(&svg).unwrap();
    parse_svg(&text);
    insta::assert_snapshot!("inspect_plane_small_svg", text);
    std::fs::remove_dir_all(&d).ok();
}

/// `--plane` with an unknown or a repeated name, or without a figure, is refused (exit 2, no
/// file, nothing on stdout), the unknown name with a caret under it.
#[test]
fn bad_planes_are_refused() {
    let d = tmp("bad");
    let svg = d.join("bad.svg");
    let m = model("two-pole-fields-merging");
    let s = svg.to_str().unwrap();
    let r = efold(&["inspect", &m, "--svg", s, "--plane", "x,q"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty() && !svg.exists());
    insta::assert_snapshot!("inspect_plane_unknown_field", r.stderr);
    let r = efold(&["inspect", &m, "--svg", s, "--plane", "y, y"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains("names `y` twice") && r.stderr.contains('^'),
        "{}",
        r.stderr
    );
    let r = efold(&["inspect", &m, "--svg", s, "--plane", "x"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("it takes two"), "{}", r.stderr);
    let r = efold(&["inspect", &m, "--plane", "x,y"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("no figure is asked for"), "{}", r.stderr);
    assert!(!svg.exists());
    let one = format!("{}/models/quadratic-monomial.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&["inspect", &one, "--svg", s, "--plane", "x,y"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("has one field"), "{}", r.stderr);
    std::fs::remove_dir_all(&d).ok();
}
