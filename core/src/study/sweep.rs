//! Sweeps (one axis: a curve of one output) and maps (two axes: a grid of one output with
//! contour lines) over numeric fields of several designs at once.
//!
//! The work is split into points (design x grid point) that [`GridRun::advance`] evaluates
//! a few at a time, so a Web Worker can report progress between chunks and cancel by
//! dropping the run. [`sweep`] and [`map`] run to the end in one call. Every point is
//! evaluated as [`Output::evaluate`] does (the locked model only, the costly stages kept
//! while the fields they read are unchanged: see [`crate::budget::StageCache`]). A point where
//! the changed design is invalid, or where the output has no value (target not reached),
//! is a [`Hole`] with the reason; its value is `None` (JSON `null`), never NaN.

use super::caps::{MAX_AXIS_POINTS, MAX_GRID_EVALUATIONS, MAX_LEVELS};
use super::contour::{auto_levels, marching_squares, ContourLine, Grid};
use super::path::{with_values, FieldPath, NumberKind};
use super::{check_designs, Output};
use crate::budget::StageCache;
use crate::design::Design;
use crate::error::{show, Checker, InputError};
use serde::{Deserialize, Serialize};
use serde_json::Value;
use std::collections::HashMap;

/// How the points of an axis are spread between `from` and `to`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Spacing {
    /// Equal steps.
    #[default]
    Linear,
    /// Equal ratios (both ends must be positive).
    Log,
}

/// One axis of a sweep or map: the field it changes and the values it takes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Axis {
    /// Field path, as validation errors name fields (`sequence.segments[2].duration_s`).
    pub path: String,
    /// First value, in the field's unit.
    pub from: f64,
    /// Last value, in the field's unit.
    pub to: f64,
    /// Number of values, 2 to [`MAX_AXIS_POINTS`].
    pub points: usize,
    #[serde(default)]
    pub spacing: Spacing,
}

impl Axis {
    fn check(&self, at: &str, c: &mut Checker) {
        c.range(&format!("{at}.from"), self.from, -1e300, 1e300, "");
        c.range(&format!("{at}.to"), self.to, -1e300, 1e300, "");
        if self.points < 2 || self.points > MAX_AXIS_POINTS {
            c.push(format!("{at}.points"), self.points.to_string(), format!("must be a whole number from 2 to {MAX_AXIS_POINTS}"));
        }
        if self.spacing == Spacing::Log {
            for (name, v) in [("from", self.from), ("to", self.to)] {
                if !(v > 0.0) {
                    c.push(format!("{at}.{name}"), show(v), "must be above 0 on a log-spaced axis");
                }
            }
        }
    }

    /// The axis values (as requested; whole-number fields round them when set).
    pub fn values(&self) -> Vec<f64> {
        let n = self.points.max(2);
        (0..n)
            .map(|k| {
                let s = k as f64 / (n - 1) as f64;
                if k + 1 == n {
                    return self.to;
                }
                match self.spacing {
                    // Weighted ends: no overflow even for ends of opposite sign near the largest numbers.
                    Spacing::Linear => self.from * (1.0 - s) + self.to * s,
                    Spacing::Log => libm::exp(libm::log(self.from) + (libm::log(self.to) - libm::log(self.from)) * s),
                }
            })
            .collect()
    }
}

/// A sweep (`y` absent) or a map (`y` given) of one output.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GridRequest {
    pub x: Axis,
    #[serde(default)]
    pub y: Option<Axis>,
    pub output: Output,
    /// Contour levels of a map, in the output's unit; chosen from the values when absent.
    #[serde(default)]
    pub levels: Option<Vec<f64>>,
}

/// A point without a value, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Hole {
    /// Index of the point in `values`.
    pub index: usize,
    /// The reason, in a sentence.
    pub reason: String,
}

/// The values of one design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GridSeries {
    pub design_name: String,
    /// For a sweep, one value per x; for a map, row by row: `values[iy * x.len() + ix]`.
    /// `None` (JSON `null`) marks a hole.
    pub values: Vec<Option<f64>>,
    pub holes: Vec<Hole>,
    /// Contour lines of a map (empty for a sweep).
    pub contours: Vec<ContourLine>,
}

/// The result of a sweep or map.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GridResult {
    pub x_path: String,
    /// Values of the x field (rounded for whole-number fields).
    pub x: Vec<f64>,
    pub y_path: Option<String>,
    /// Values of the y field (empty for a sweep).
    pub y: Vec<f64>,
    pub output: Output,
    /// The output's name with its unit.
    pub output_label: String,
    pub series: Vec<GridSeries>,
}

/// Progress of a chunked run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Progress {
    /// Points evaluated so far.
    pub done: usize,
    /// Points in all.
    pub total: usize,
    pub finished: bool,
}

struct AxisRun {
    path: FieldPath,
    kinds: Vec<NumberKind>,
    values: Vec<f64>,
    log: bool,
}

impl AxisRun {
    fn new(axis: &Axis, at: &str, bases: &[Value]) -> Result<AxisRun, InputError> {
        let path = FieldPath::parse(&axis.path, &format!("{at}.path"))?;
        let mut kinds = Vec::with_capacity(bases.len());
        for (i, b) in bases.iter().enumerate() {
            kinds.push(path.read(b, &format!("{at}.path"), &format!("designs[{i}]"))?.1);
        }
        let mut values = axis.values();
        if kinds.first() == Some(&NumberKind::Whole) {
            values.iter_mut().for_each(|v| *v = libm::round(*v));
        }
        Ok(AxisRun { path, kinds, values, log: axis.spacing == Spacing::Log })
    }

    /// The value written into design `d` at point `i` (rounded for whole-number fields).
    fn set_value(&self, d: usize, i: usize) -> f64 {
        match self.kinds[d] {
            NumberKind::Whole => libm::round(self.values[i]),
            NumberKind::Real => self.values[i],
        }
    }
}

/// A sweep or map in progress: evaluate it chunk by chunk with [`GridRun::advance`].
pub struct GridRun {
    names: Vec<String>,
    bases: Vec<Value>,
    x: AxisRun,
    y: Option<AxisRun>,
    output: Output,
    levels: Option<Vec<f64>>,
    next: usize,
    values: Vec<Vec<Option<f64>>>,
    holes: Vec<Vec<Hole>>,
    /// The outcome of each (design, x bits, y bits) evaluated so far.
    seen: HashMap<(usize, u64, u64), Result<f64, String>>,
    /// Costly stages of the evaluations (line shape search, g(t), Dick sum), reused while
    /// the fields they read are unchanged.
    stages: StageCache,
}

impl GridRun {
    /// Checks the request against the designs (paths exist and are numbers, caps) and
    /// prepares the run; nothing is evaluated yet.
    pub fn new(designs: &[Design], req: &GridRequest) -> Result<GridRun, InputError> {
        check_designs(designs)?;
        let mut c = Checker::new();
        req.x.check("x", &mut c);
        if let Some(y) = &req.y {
            y.check("y", &mut c);
        }
        if let Some(levels) = &req.levels {
            if levels.len() > MAX_LEVELS {
                c.push("levels", format!("{} levels", levels.len()), format!("at most {MAX_LEVELS} levels"));
            }
            for (i, &l) in levels.iter().enumerate() {
                if req.output.log_scale() {
                    c.above(&format!("levels[{i}]"), l, 0.0, 1e300, "");
                } else {
                    c.range(&format!("levels[{i}]"), l, -1e300, 1e300, "");
                }
            }
        }
        c.finish()?;
        req.output.check("output")?;
        let per_design = req.x.points * req.y.as_ref().map(|y| y.points).unwrap_or(1);
        let total = per_design * designs.len();
        if total > MAX_GRID_EVALUATIONS {
            let at = if req.y.is_some() { "y.points" } else { "x.points" };
            return Err(InputError::single(
                at,
                format!("{} evaluations ({} designs x {per_design} points)", total, designs.len()),
                format!("a sweep or map may ask for at most {MAX_GRID_EVALUATIONS} evaluations; use fewer points or designs"),
            ));
        }
        let bases: Vec<Value> = designs.iter().map(|d| serde_json::to_value(d).unwrap_or(Value::Null)).collect();
        let x = AxisRun::new(&req.x, "x", &bases)?;
        let y = match &req.y {
            Some(a) => Some(AxisRun::new(a, "y", &bases)?),
            None => None,
        };
        if let Some(y) = &y {
            if y.path.text == x.path.text {
                return Err(InputError::single("y.path", format!("\"{}\"", y.path.text), "must differ from x.path"));
            }
        }
        Ok(GridRun {
            names: designs.iter().map(|d| d.name.clone()).collect(),
            bases,
            x,
            y,
            output: req.output,
            levels: req.levels.clone(),
            next: 0,
            values: designs.iter().map(|_| Vec::with_capacity(per_design)).collect(),
            holes: designs.iter().map(|_| Vec::new()).collect(),
            seen: HashMap::new(),
            stages: StageCache::default(),
        })
    }

    fn per_design(&self) -> usize {
        self.x.values.len() * self.y.as_ref().map(|y| y.values.len()).unwrap_or(1)
    }

    /// Points in all (designs x grid points).
    pub fn total(&self) -> usize {
        self.per_design() * self.bases.len()
    }

    /// Points evaluated so far.
    pub fn done(&self) -> usize {
        self.next
    }

    pub fn is_finished(&self) -> bool {
        self.next >= self.total()
    }

    fn progress(&self) -> Progress {
        Progress { done: self.next, total: self.total(), finished: self.is_finished() }
    }

    /// Evaluates up to `max_points` more points (at least one while any is left).
    pub fn advance(&mut self, max_points: usize) -> Progress {
        let per = self.per_design();
        let nx = self.x.values.len();
        let end = (self.next + max_points.max(1)).min(self.total());
        while self.next < end {
            let (d, k) = (self.next / per, self.next % per);
            let (ix, iy) = (k % nx, k / nx);
            let mut changes = vec![(&self.x.path, self.x.kinds[d], self.x.values[ix])];
            if let Some(y) = &self.y {
                changes.push((&y.path, y.kinds[d], y.values[iy]));
            }
            // Whole-number fields repeat values along an axis; identical designs give
            // identical outputs, so a repeated point reuses the earlier one.
            let key = (d, self.x.set_value(d, ix).to_bits(), self.y.as_ref().map(|y| y.set_value(d, iy).to_bits()).unwrap_or(0));
            let value = match self.seen.get(&key) {
                Some(v) => v.clone(),
                None => {
                    let v = with_values(&mut self.bases[d], &changes).and_then(|design| self.output.evaluate(&design, &mut self.stages));
                    self.seen.insert(key, v.clone());
                    v
                }
            };
            match value {
                Ok(v) => self.values[d].push(Some(v)),
                Err(reason) => {
                    self.values[d].push(None);
                    self.holes[d].push(Hole { index: k, reason });
                }
            }
            self.next += 1;
        }
        self.progress()
    }

    /// The result; an error while points are left to evaluate.
    pub fn result(&self) -> Result<GridResult, InputError> {
        if !self.is_finished() {
            return Err(InputError::single("run", format!("{} of {} points done", self.next, self.total()), "the result is ready once every point is evaluated"));
        }
        let log = self.output.log_scale();
        let ys = self.y.as_ref().map(|y| y.values.clone()).unwrap_or_default();
        let series = (0..self.bases.len())
            .map(|d| {
                let contours = match &self.y {
                    Some(y) => {
                        let grid = Grid { xs: &self.x.values, ys: &y.values, values: &self.values[d], log_values: log, log_x: self.x.log, log_y: y.log };
                        let levels = self.levels.clone().unwrap_or_else(|| auto_levels(&self.values[d], log));
                        marching_squares(&grid, &levels)
                    }
                    None => Vec::new(),
                };
                GridSeries { design_name: self.names[d].clone(), values: self.values[d].clone(), holes: self.holes[d].clone(), contours }
            })
            .collect();
        Ok(GridResult {
            x_path: self.x.path.text.clone(),
            x: self.x.values.clone(),
            y_path: self.y.as_ref().map(|y| y.path.text.clone()),
            y: ys,
            output: self.output,
            output_label: self.output.label(),
            series,
        })
    }
}

/// A one-dimensional sweep of `req.output` over `req.x` for every design (`req.y` must be absent).
pub fn sweep(designs: &[Design], req: &GridRequest) -> Result<GridResult, InputError> {
    if req.y.is_some() {
        return Err(InputError::single("y", "an axis", "a sweep has one axis; use map for two"));
    }
    run_all(designs, req)
}

/// A two-dimensional map of `req.output` over `req.x` and `req.y` for every design, with contours.
pub fn map(designs: &[Design], req: &GridRequest) -> Result<GridResult, InputError> {
    if req.y.is_none() {
        return Err(InputError::single("y", "missing", "a map needs a second axis y"));
    }
    run_all(designs, req)
}

fn run_all(designs: &[Design], req: &GridRequest) -> Result<GridResult, InputError> {
    let mut run = GridRun::new(designs, req)?;
    while !run.is_finished() {
        run.advance(usize::MAX);
    }
    run.result()
}
