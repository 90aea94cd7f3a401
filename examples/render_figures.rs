//! Writes the figures of the shipped models (inspect, predict, scan, spectrum) as SVG and PDF to
//! /tmp/efold-figures/ (or the directory given) and renders each SVG to PNG, to look at them as a
//! reader would: `cargo run --example render_figures [DIR]`.

use clap::Parser;

fn main() {
    let dir = std::env::args().nth(1).unwrap_or_else(|| "/tmp/efold-figures".into());
    std::fs::create_dir_all(&dir).expect("output directory");
    let root = env!("CARGO_MANIFEST_DIR");
    let pole = format!("{root}/models/pole-order-2-quadratic.toml");
    let shelf = format!("{root}/models/plateau-with-inflection-shelf.toml");
    let jobs: Vec<(&str, Vec<String>)> = vec![
        ("inspect", vec!["inspect".into(), pole.clone()]),
        ("predict", vec!["predict".into(), pole.clone()]),
        (
            "scan",
            vec![
                "scan".into(),
                pole.clone(),
                "--vary".into(),
                "alpha=0.1:100:15:log".into(),
            ],
        ),
        (
            "spectrum",
            vec![
                "spectrum".into(),
                shelf,
                "--k-min".into(),
                "1e9".into(),
                "--k-max".into(),
                "1e11".into(),
            ],
        ),
        (
            "basin-random",
            [
                "basin",
                &format!("{root}/models/exponential-plateau.toml"),
                "--sample",
                "phi=0.5:9",
                "--kinetic-ratio",
                "1e-3:1e8:2:log",
                "--direction",
                "up",
                "--random",
                "2500",
                "--seed",
                "3",
                "--format",
                "text",
            ]
            .map(String::from)
            .to_vec(),
        ),
        (
            "basin-random-fields",
            [
                "basin",
                &format!("{root}/models/several-fields/two-alphas-turning.toml"),
                "--sample",
                "x=0.3:0.99",
                "--sample",
                "y=0.5:3.5",
                "--random",
                "1500",
                "--format",
                "text",
            ]
            .map(String::from)
            .to_vec(),
        ),
    ];
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(include_bytes!("../assets/fonts/DejaVuSans.ttf").to_vec());
    db.load_font_data(include_bytes!("../assets/fonts/DejaVuSans-Oblique.ttf").to_vec());
    let opt = usvg::Options {
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    };
    for (name, mut args) in jobs {
        let svg = format!("{dir}/{name}.svg");
        let pdf = format!("{dir}/{name}.pdf");
        args.splice(0..0, ["efold".to_string()]);
        args.extend(["--svg".into(), svg.clone(), "--pdf".into(), pdf]);
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
