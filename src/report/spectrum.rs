//! A spectrum as text, CSV and an SVG figure.

use crate::drivers::spectrum::{Spectrum, SpectrumRow};

/// The spectrum as an aligned table, with the peak.
pub fn text(sp: &Spectrum, name: &str) -> String {
    use crate::report::numfmt::{self, number, typed};
    use std::fmt::Write as _;
    let mut o = String::new();
    let _ = writeln!(o, "model    {name}");
    let _ = writeln!(
        o,
        "pivot    k_* = {} Mpc^-1 exits {} e-folds before the end (eps_H = 1); {} e-folds in all",
        typed(sp.k_star_mpc),
        typed(sp.n_star),
        number(sp.n_total)
    );
    let _ = writeln!(
        o,
        "scale    V multiplied by {} to give the observed A_s at the pivot\n",
        number(sp.potential_scale)
    );
    // One style per column, right-aligned under its title.
    let d = numfmt::DEFAULT_DIGITS;
    let column = |g: &dyn Fn(&SpectrumRow) -> f64| numfmt::row(&sp.rows.iter().map(g).collect::<Vec<_>>(), d);
    let cols = [
        ("k [Mpc^-1]", column(&|r| r.k_mpc)),
        ("P_zeta", column(&|r| r.p_zeta)),
        ("P_t", column(&|r| r.p_t)),
        ("P_zeta (slow roll)", column(&|r| r.p_zeta_slow_roll)),
        ("N to end [e-folds]", column(&|r| r.n_before_end)),
    ];
    o.push_str(&columns(&cols, sp.rows.len()));
    let p = &sp.peak;
    let _ = writeln!(o);
    match grid_end(&sp.rows, p) {
        Some(end) => {
            let _ = writeln!(o, "maximum  {}", at_grid_end("P_zeta", end, p, p.p_zeta));
        }
        None => {
            let _ = writeln!(
                o,
                "peak     P_zeta = {} at k = {} Mpc^-1, {} e-folds before the end; slow roll there: {} (x{})",
                number(p.p_zeta),
                number(p.k_mpc),
                number(p.n_before_end),
                number(p.p_zeta_slow_roll),
                number(p.p_zeta / p.p_zeta_slow_roll)
            );
        }
    }
    let q = &sp.peak_slow_roll;
    match grid_end(&sp.rows, q) {
        Some(end) if grid_end(&sp.rows, p) == Some(end) => {
            let _ = writeln!(
                o,
                "         slow roll: its largest P_zeta ({}) is at the {end} end too",
                number(q.p_zeta_slow_roll)
            );
        }
        Some(end) => {
            let _ = writeln!(
                o,
                "         slow roll: {}",
                at_grid_end("slow-roll P_zeta", end, q, q.p_zeta_slow_roll)
            );
        }
        None => {
            let _ = writeln!(
                o,
                "         slow roll puts its peak at k = {} Mpc^-1 ({} e-folds before the end) with P_zeta = {}; exact there: {}",
                number(q.k_mpc),
                number(q.n_before_end),
                number(q.p_zeta_slow_roll),
                number(q.p_zeta)
            );
        }
    }
    o
}

/// The spectrum as CSV: a header and one row per k.
pub fn csv(sp: &Spectrum) -> String {
    let mut o = String::from("k_mpc,p_zeta,p_t,p_zeta_slow_roll,n_before_end,drift\n");
    for r in &sp.rows {
        o.push_str(&format!(
            "{:e},{:e},{:e},{:e},{:e},{:e}\n",
            r.k_mpc, r.p_zeta, r.p_t, r.p_zeta_slow_roll, r.n_before_end, r.drift
        ));
    }
    o
}

/// Both spectra against log10 k, with the slow-roll estimate dashed.
pub fn figure(sp: &Spectrum, name: &str, width_pt: f64) -> String {
    use crate::report::plot::{Panel, Series};
    let pts = |g: &dyn Fn(&SpectrumRow) -> f64| sp.rows.iter().map(|r| (r.k_mpc.log10(), g(r))).collect::<Vec<_>>();
    let panel = Panel {
        title: "power spectra".into(),
        x_label: "log_{10} $k$ [Mpc^{-1}]".into(),
        y_label: "$P$".into(),
        log_y: true,
        series: vec![
            Series {
                name: "$P$_$\\zeta$".into(),
                points: pts(&|r| r.p_zeta),
                color: "#1f5fa8".into(),
                dashed: false,
            },
            Series {
                name: "$P$_t".into(),
                points: pts(&|r| r.p_t),
                color: "#b03030".into(),
                dashed: false,
            },
            Series {
                name: "$P$_$\\zeta$, slow roll".into(),
                points: pts(&|r| r.p_zeta_slow_roll),
                color: "#555555".into(),
                dashed: true,
            },
        ],
        ..Panel::default()
    };
    crate::report::plot::render(name, &[panel], width_pt)
}

/// An end of the k grid.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum GridEnd {
    Lower,
    Upper,
}

impl std::fmt::Display for GridEnd {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            GridEnd::Lower => "lower",
            GridEnd::Upper => "upper",
        })
    }
}

/// Where a row with the largest value sits in the grid: at its lower or upper end when it is
/// the first or last row (the true maximum may lie outside the grid), `None` inside.
fn grid_end(rows: &[SpectrumRow], at: &SpectrumRow) -> Option<GridEnd> {
    if rows.len() < 2 {
        return None;
    }
    if rows.first().is_some_and(|r| r.k_mpc == at.k_mpc) {
        Some(GridEnd::Lower)
    } else if rows.last().is_some_and(|r| r.k_mpc == at.k_mpc) {
        Some(GridEnd::Upper)
    } else {
        None
    }
}

/// What to say when the largest value is at an end of the k grid.
fn at_grid_end(what: &str, end: GridEnd, row: &SpectrumRow, value: f64) -> String {
    use crate::report::numfmt::number;
    let side = match end {
        GridEnd::Upper => "beyond k_max; raise --k-max",
        GridEnd::Lower => "below k_min; lower --k-min",
    };
    format!(
        "the largest {what} ({}) is at the {end} end of the k grid (k = {} Mpc^-1, {} e-folds before the end): the true peak may lie {side}",
        number(value),
        number(row.k_mpc),
        number(row.n_before_end)
    )
}

/// Columns of cells under their titles, each right-aligned to its widest entry, two spaces
/// apart: the table of a spectrum (one field or several).
pub(crate) fn columns(cols: &[(&str, Vec<String>)], rows: usize) -> String {
    use std::fmt::Write as _;
    let mut o = String::new();
    let widths: Vec<usize> = cols
        .iter()
        .map(|(h, c)| c.iter().map(String::len).chain([h.len()]).max().unwrap_or(0))
        .collect();
    let header: Vec<String> = cols.iter().zip(&widths).map(|((h, _), w)| format!("{h:>w$}")).collect();
    let _ = writeln!(o, "{}", header.join("  "));
    for i in 0..rows {
        let cells: Vec<String> = cols
            .iter()
            .zip(&widths)
            .map(|((_, c), w)| format!("{:>w$}", c[i]))
            .collect();
        let _ = writeln!(o, "{}", cells.join("  "));
    }
    o
}
