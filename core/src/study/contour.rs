//! Contour lines of a map by marching squares (the two-dimensional case of the cell-by-cell
//! method of Computer Graphics 21, 163 (1987)), with the saddle cells decided by the mean
//! of the four corners (common practice).
//!
//! Each cell of the grid is cut along its edges where the value, interpolated linearly
//! between the two corners of the edge, equals the level. Values are interpolated in
//! log10 for outputs shown on a logarithmic scale, and positions in the logarithm of an
//! axis that is log-spaced, so the lines are straight between grid lines on the plot.
//! Cells with a hole at any corner are left out.

use serde::{Deserialize, Serialize};

/// The line pieces of one contour level.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ContourLine {
    /// The level, in the output's unit.
    pub level: f64,
    /// Segments `[x0, y0, x1, y1]` in the axes' units.
    pub segments: Vec<[f64; 4]>,
}

/// How the grid is read: `values[iy * xs.len() + ix]`, `None` for a hole.
#[derive(Debug, Clone, Copy)]
pub struct Grid<'a> {
    pub xs: &'a [f64],
    pub ys: &'a [f64],
    pub values: &'a [Option<f64>],
    /// Interpolate values in log10 (positive outputs shown on a log scale).
    pub log_values: bool,
    /// Interpolate positions in the logarithm of the axis (log-spaced axes).
    pub log_x: bool,
    pub log_y: bool,
}

impl Grid<'_> {
    fn t(&self, ix: usize, iy: usize) -> Option<f64> {
        let v = self.values.get(iy * self.xs.len() + ix).copied().flatten()?;
        if self.log_values {
            if v > 0.0 { Some(libm::log10(v)) } else { None }
        } else {
            Some(v)
        }
    }
}

fn fwd(v: f64, log: bool) -> f64 {
    if log { libm::log(v) } else { v }
}
fn back(v: f64, log: bool) -> f64 {
    if log { libm::exp(v) } else { v }
}

/// Where along an edge from a (value ta) to b (value tb) the linear interpolant equals `l`.
fn cut(a: f64, b: f64, ta: f64, tb: f64, l: f64, log: bool) -> f64 {
    let s = if tb != ta { ((l - ta) / (tb - ta)).clamp(0.0, 1.0) } else { 0.5 };
    let (fa, fb) = (fwd(a, log), fwd(b, log));
    back(fa + (fb - fa) * s, log)
}

/// The contour lines of `grid` at `levels` (in the output's unit; levels that cannot be
/// drawn, such as non-positive levels of a log-scaled output, give no segments).
pub fn marching_squares(grid: &Grid, levels: &[f64]) -> Vec<ContourLine> {
    let (nx, ny) = (grid.xs.len(), grid.ys.len());
    levels
        .iter()
        .map(|&level| {
            let mut segments = Vec::new();
            let l = if grid.log_values { if level > 0.0 { libm::log10(level) } else { f64::NAN } } else { level };
            if l.is_finite() && nx >= 2 && ny >= 2 {
                for iy in 0..ny - 1 {
                    for ix in 0..nx - 1 {
                        cell(grid, ix, iy, l, &mut segments);
                    }
                }
            }
            ContourLine { level, segments }
        })
        .collect()
}

fn cell(g: &Grid, ix: usize, iy: usize, l: f64, out: &mut Vec<[f64; 4]>) {
    let (Some(t00), Some(t10), Some(t11), Some(t01)) = (g.t(ix, iy), g.t(ix + 1, iy), g.t(ix + 1, iy + 1), g.t(ix, iy + 1)) else {
        return;
    };
    let (x0, x1, y0, y1) = (g.xs[ix], g.xs[ix + 1], g.ys[iy], g.ys[iy + 1]);
    let above = [t00 >= l, t10 >= l, t11 >= l, t01 >= l];
    // Edges: 0 bottom (00-10), 1 right (10-11), 2 top (01-11), 3 left (00-01).
    let point = |edge: usize| -> [f64; 2] {
        match edge {
            0 => [cut(x0, x1, t00, t10, l, g.log_x), y0],
            1 => [x1, cut(y0, y1, t10, t11, l, g.log_y)],
            2 => [cut(x0, x1, t01, t11, l, g.log_x), y1],
            _ => [x0, cut(y0, y1, t00, t01, l, g.log_y)],
        }
    };
    let crossed = [above[0] != above[1], above[1] != above[2], above[3] != above[2], above[0] != above[3]];
    let edges: Vec<usize> = (0..4).filter(|&e| crossed[e]).collect();
    let mut seg = |a: usize, b: usize| {
        let (p, q) = (point(a), point(b));
        out.push([p[0], p[1], q[0], q[1]]);
    };
    match edges.len() {
        2 => seg(edges[0], edges[1]),
        4 => {
            // Saddle: the corners 00 and 11 lie on one side, 10 and 01 on the other. If the
            // centre lies on the side of 00 and 11, those two connect through the middle and
            // the lines cut off the corners 10 and 01; otherwise they cut off 00 and 11.
            let centre = (t00 + t10 + t11 + t01) / 4.0 >= l;
            if centre == above[0] {
                seg(0, 1);
                seg(2, 3);
            } else {
                seg(3, 0);
                seg(1, 2);
            }
        }
        _ => {}
    }
}

/// Contour levels chosen from the values: for log-scaled outputs the 1-2-5 steps of each
/// decade (decades only, then every few decades, when that gives more than 12 levels); for
/// linear outputs about eight round steps (1, 2 or 5 times a power of ten). Only levels
/// strictly between the smallest and largest value are kept.
pub fn auto_levels(values: &[Option<f64>], log: bool) -> Vec<f64> {
    let finite = values.iter().flatten().copied().filter(|v| v.is_finite() && (!log || *v > 0.0));
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in finite {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !(lo < hi) {
        return Vec::new();
    }
    let inside = |v: &f64| *v > lo && *v < hi;
    if log {
        let (a, b) = (libm::floor(libm::log10(lo)) as i32, libm::ceil(libm::log10(hi)) as i32);
        let make = |mantissas: &[f64], every: i32| -> Vec<f64> {
            let mut out = Vec::new();
            for k in a..=b {
                if (k - a) % every != 0 {
                    continue;
                }
                for &m in mantissas {
                    out.push(m * libm::pow(10.0, k as f64));
                }
            }
            out.into_iter().filter(inside).collect()
        };
        let l = make(&[1.0, 2.0, 5.0], 1);
        if l.len() <= 12 {
            return l;
        }
        let decades = make(&[1.0], 1);
        if decades.len() <= 12 {
            return decades;
        }
        let every = decades.len().div_ceil(12) as i32;
        make(&[1.0], every)
    } else {
        let raw = (hi - lo) / 8.0;
        let p = libm::pow(10.0, libm::floor(libm::log10(raw)));
        let step = [1.0, 2.0, 5.0, 10.0].iter().map(|m| m * p).find(|s| *s >= raw).unwrap_or(10.0 * p);
        let (k0, k1) = (libm::ceil(lo / step) as i64, libm::floor(hi / step) as i64);
        (k0..=k1).map(|k| k as f64 * step).filter(inside).collect()
    }
}
