//! Writes the plane figures of the shipped models of several fields (`efold inspect --svg`) to
//! /tmp/efold-plane-figures/ (or the directory given) and renders each SVG to PNG, to look at
//! them as a reader would: `cargo run --example render_plane_figures [DIR]`.

use clap::Parser;

fn main() {
    let dir = std::env::args()
        .nth(1)
        .unwrap_or_else(|| "/tmp/efold-plane-figures".into());
    std::fs::create_dir_all(&dir).expect("output directory");
    let root = env!("CARGO_MANIFEST_DIR");
    let models = [
        ("merging", "two-pole-fields-merging", None),
        ("turning", "two-alphas-turning", None),
        ("mass-ratio", "two-field-quadratic-mass-ratio", None),
        ("seven", "seven-equal-pole-fields", Some("u1,u3")),
    ];
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(include_bytes!("../assets/fonts/DejaVuSans.ttf").to_vec());
    db.load_font_data(include_bytes!("../assets/fonts/DejaVuSans-Oblique.ttf").to_vec());
    let opt = usvg::Options {
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    };
    let only: Vec<String> = std::env::args().skip(2).collect();
    for (name, file, plane) in models {
        if !only.is_empty() && !only.iter().any(|o| o == name) {
            continue;
        }
        let svg = format!("{dir}/{name}.svg");
        let mut args: Vec<String> = vec![
            "efold".into(),
            "inspect".into(),
            format!("{root}/models/several-fields/{file}.toml"),
            "--svg".into(),
            svg.clone(),
        ];
        if let Some(p) = plane {
            args.extend(["--plane".into(), p.into()]);
        }
        let parsed = efold::cli::Args::parse_from(&args);
        if let Err(e) = efold::cli::run(&parsed) {
            eprintln!("{name}: {e:?}");
            continue;
        }
        let text = std::fs::read_to_string(&svg).expect("svg written");
        let tree = usvg::Tree::from_str(&text, &opt).expect("valid svg");
        let scale = 3.0;
        let size = tree.size();
        let mut pixmap = resvg::tiny_skia::Pixmap::new((size.width() * scale) as u32, (size.height() * scale) as u32)
            .expect("pixmap");
        resvg::render(
            &tree,
            resvg::tiny_skia::Transform::from_scale(scale, scale),
            &mut pixmap.as_mut(),
        );
        let png = format!("{dir}/{name}.png");
        pixmap.save_png(&png).expect("png written");
        println!("{png}");
    }
}
