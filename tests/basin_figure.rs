//! `efold basin --svg`: the map and the n_s-r panel, and no file from a failed run.

mod common;
use common::efold;

fn plateau() -> String {
    format!("{}/models/exponential-plateau.toml", env!("CARGO_MANIFEST_DIR"))
}

fn tmp(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("efold-basin-figure-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

#[test]
fn the_map_has_a_cell_per_start_boundaries_and_a_colour_bar() {
    let svg = tmp("map.svg");
    let m = plateau();
    let r = efold(&[
        "basin",
        &m,
        "--sample",
        "phi=1:9:6",
        "--kinetic-ratio",
        "1e-2:1e5:5:log",
        "--direction",
        "up",
        "--svg",
        &svg.display().to_string(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = std::fs::read_to_string(&svg).unwrap();
    assert_eq!(text.matches("class=\"panel\"").count(), 2);
    // 30 cells on the map, the data's three regions (two n_s bands, the r limit) beside them
    assert_eq!(text.matches("class=\"region\"").count(), 30 + 3, "{text}");
    assert_eq!(text.matches("class=\"colorbar\"").count(), 1);
    // one line of outcome boundaries, and a label for each outcome that occurs
    assert_eq!(text.matches("class=\"series\"").count(), 1);
    for outcome in ["too few", "enough", "never ends"] {
        assert!(text.contains(&format!(">{outcome}<")), "{outcome}");
    }
    // the X axis is logarithmic, labelled so
    assert!(text.contains("log"), "{text}");
    let structure: Vec<&str> = text
        .lines()
        .filter_map(|l| {
            [
                "class=\"panel\"",
                "class=\"axes\"",
                "class=\"xlabel\"",
                "class=\"ylabel\"",
                "class=\"colorbar\"",
                "class=\"legend\"",
            ]
            .into_iter()
            .find(|c| l.contains(c))
        })
        .collect();
    insta::assert_snapshot!("basin_svg_structure", structure.join("\n"));
    std::fs::remove_file(&svg).ok();
}

#[test]
fn a_failed_run_writes_no_figure() {
    let svg = tmp("none.svg");
    let m = plateau();
    let r = efold(&[
        "basin",
        &m,
        "--sample",
        "phi=14:15:2",
        "--velocity",
        "rest",
        "--svg",
        &svg.display().to_string(),
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stdout.is_empty());
    assert!(!svg.exists());
}
