//! The figure of a model of several fields: V over the plane of two fields (the others held
//! at their start values) on a grid, and the background's trajectory projected on that plane
//! with its start, its end (eps_H = 1) and the pivot of each N_*.

use crate::analysis::error::AnalysisError;
use crate::analysis::multi::background::{run, start_state, state_at, Flow};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::config::MultiLimits;
use crate::model::Model;
use crate::report::contour::Grid;

/// Grid points along each axis of the plane.
pub const PLANE_GRID: usize = 101;
/// The window around the trajectory's projection, as a fraction of its extent on each side.
pub const PLANE_MARGIN: f64 = 0.2;

/// What the figure of V over a plane draws.
#[derive(Debug, Clone, PartialEq)]
pub struct PlaneFigure {
    /// The model's name.
    pub name: String,
    /// The two fields of the plane (x axis, y axis).
    pub axes: [String; 2],
    /// The other fields and the values they are held at.
    pub held: Vec<(String, f64)>,
    /// V on the grid (not finite where V is not).
    pub grid: Grid,
    /// The trajectory projected on the plane, from the start to the end of inflation.
    pub path: Vec<(f64, f64)>,
    /// The start.
    pub start: (f64, f64),
    /// The end of inflation.
    pub end: (f64, f64),
    /// (N_*, the pivot) for each N_* the trajectory reaches.
    pub pivots: Vec<(f64, (f64, f64))>,
}

/// The figure's data: the plane of the fields `plane` (indices), the pivots at `n_stars`.
pub fn plane_figure(model: &Model, plane: [usize; 2], n_stars: &[f64]) -> Result<PlaneFigure, AnalysisError> {
    let limits = MultiLimits::default();
    let names = model.field_names().to_vec();
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let (phi0, velocity) = space.start()?;
    let mut flow = Flow::new(&mut space);
    let y0 = start_state(&mut flow, &phi0, Some(&velocity))?;
    let bg = run(&mut flow, &y0, &limits)?;
    let [i, j] = plane;
    let project = |y: &[f64]| (y[i], y[j]);
    let path: Vec<(f64, f64)> = std::iter::once(project(&bg.start))
        .chain(bg.checkpoints.iter().map(|(_, y)| project(y)))
        .collect();
    let mut pivots = Vec::new();
    for &n_star in n_stars.iter().filter(|n| **n < bg.n_end) {
        let y = state_at(&mut flow, &bg, bg.n_end - n_star, &limits)?;
        pivots.push((n_star, project(&y)));
    }
    let grid = grid(model, plane, &phi0, &path);
    Ok(PlaneFigure {
        name: model.spec.name.clone(),
        axes: [names[i].clone(), names[j].clone()],
        held: (0..names.len())
            .filter(|&a| a != i && a != j)
            .map(|a| (names[a].clone(), phi0[a]))
            .collect(),
        grid,
        start: project(&bg.start),
        end: project(&bg.end),
        path,
        pivots,
    })
}

/// V on a [`PLANE_GRID`]-square grid over the path's bounding box widened by [`PLANE_MARGIN`]
/// on each side (at least 1e-3 of the larger extent, so a path along one axis still has a
/// plane), the other fields at `phi0`.
fn grid(model: &Model, [i, j]: [usize; 2], phi0: &[f64], path: &[(f64, f64)]) -> Grid {
    let range = |f: fn(&(f64, f64)) -> f64| {
        let lo = path.iter().map(f).fold(f64::INFINITY, f64::min);
        let hi = path.iter().map(f).fold(f64::NEG_INFINITY, f64::max);
        (lo, hi)
    };
    let (x, y) = (range(|p| p.0), range(|p| p.1));
    let extent = (x.1 - x.0).max(y.1 - y.0).max(1e-300);
    let widen = |(lo, hi): (f64, f64)| {
        let m = (PLANE_MARGIN * (hi - lo)).max(1e-3 * extent);
        (lo - m, hi + m)
    };
    let axis = |(lo, hi): (f64, f64)| -> Vec<f64> {
        (0..PLANE_GRID)
            .map(|k| lo + (hi - lo) * k as f64 / (PLANE_GRID - 1) as f64)
            .collect()
    };
    let (xs, ys) = (axis(widen(x)), axis(widen(y)));
    let mut ev = model.evaluator();
    let v = model.layout().v();
    let mut p = phi0.to_vec();
    let mut z = Vec::with_capacity(xs.len() * ys.len());
    for &b in &ys {
        for &a in &xs {
            p[i] = a;
            p[j] = b;
            ev.eval_at(&p);
            z.push(ev.output(v));
        }
    }
    Grid { xs, ys, z }
}
