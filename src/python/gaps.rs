//! Gaps apart from an evaluation, for adaptive phase maps and transitions: `prove_gaps` (a fixed
//! target at many parameter points: what a map asks of the points that are to vouch for
//! others), `auto_proof_below` (where `prove_gap="auto"` would have proven a point's gap) and
//! `probe_gaps` (the smallest gap of many points without Wilson loops: what locating a
//! transition asks along a segment).

use super::{coeff_rows, detached, finish, CoreModel, Workers};
use crate::error::CoreResult;
use crate::point::cancel::Watched;
use crate::point::engine;
use crate::point::gap_probe::{probe_gap, GapProbe};
use crate::point::gap_proof::{prove_gap_above, GapProof};
use crate::topology::wilson::BandStats;
use crate::zone::bloch::BlochSource;
use numpy::ndarray::Array2;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use rayon::prelude::*;
use std::sync::{Arc, Mutex};

/// Outcome codes of [`prove_gaps`], one per point.
const PROVEN: i8 = 0;
const NOT_PROVEN: i8 = 1;
const CLOSING_FOUND: i8 = 2;

/// Prove, at every row of `coeffs` (npoints, nterms), that the direct gap at `filling` is at
/// least `targets[i]` everywhere in the zone, spending at most `budget` Hamiltonians a point
/// (gap floor `floors[i]`). Returns (lower bounds — NaN where not proven —, outcome codes: 0
/// proven, 1 not proven (budget spent, or a κ point's gap under the target), 2 a κ point
/// whose gap is under the floor; Hamiltonians evaluated). A model without a variation bound
/// (a callable without Lipschitz constants) proves nothing: all codes 1.
#[pyfunction]
#[pyo3(signature = (model, coeffs, filling, targets, floors, *, budget, threads=None))]
#[allow(clippy::too_many_arguments, clippy::type_complexity)]
pub(super) fn prove_gaps<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeffs: PyReadonlyArray2<f64>,
    filling: usize,
    targets: PyReadonlyArray1<f64>,
    floors: PyReadonlyArray1<f64>,
    budget: usize,
    threads: Option<usize>,
) -> PyResult<(
    Bound<'py, PyArray1<f64>>,
    Bound<'py, PyArray1<i8>>,
    Bound<'py, PyArray1<i64>>,
)> {
    let rows = coeff_rows(model, &coeffs)?;
    let targets = targets.as_array().to_vec();
    let floors = floors.as_array().to_vec();
    if targets.len() != rows.len() || floors.len() != rows.len() {
        return Err(PyValueError::new_err(format!(
            "{} coefficient rows, {} targets and {} floors: one of each per point",
            rows.len(),
            targets.len(),
            floors.len()
        )));
    }
    if filling == 0 || filling >= model.norb {
        return Err(PyValueError::new_err("filling out of range"));
    }
    if targets
        .iter()
        .chain(&floors)
        .any(|v| !v.is_finite() || *v <= 0.0)
    {
        return Err(PyValueError::new_err(
            "targets and floors must be finite and positive",
        ));
    }
    let proofs = per_point(py, model, &rows, threads, |src, i| {
        let Some(bound) = src.variation() else {
            return Ok(GapProof::Unfinished { evaluations: 0 });
        };
        let mut stats = BandStats::default();
        prove_gap_above(
            src, bound, filling, floors[i], targets[i], budget, &mut stats,
        )
    })?;
    let mut lower = Vec::with_capacity(proofs.len());
    let mut code = Vec::with_capacity(proofs.len());
    let mut used = Vec::with_capacity(proofs.len());
    for p in &proofs {
        let (l, c) = match *p {
            GapProof::Proven { lower, .. } => (lower, PROVEN),
            GapProof::Unfinished { .. } => (f64::NAN, NOT_PROVEN),
            GapProof::BelowFloor { .. } => (f64::NAN, CLOSING_FOUND),
        };
        lower.push(l);
        code.push(c);
        used.push(p.evaluations() as i64);
    }
    Ok((
        lower.into_pyarray(py),
        code.into_pyarray(py),
        used.into_pyarray(py),
    ))
}

/// The gap under which `prove_gap="auto"` proves a point's gap, at every row of `coeffs`
/// (`engine::auto_proof_below`, the rule `ProveGap::Auto` itself uses); NaN
/// where the model has no bound (no proof is attempted there). Where a point's smallest gap
/// found is at or above it, its evaluation under "auto" is the same as under "never".
#[pyfunction]
pub(super) fn auto_proof_below<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeffs: PyReadonlyArray2<f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let rows = coeff_rows(model, &coeffs)?;
    let error = Arc::new(Mutex::new(None));
    let run = detached(py, Workers::Caller, |_| {
        rows.iter()
            .enumerate()
            .map(|(i, c)| {
                model.with_source(c, i, &error, |src| {
                    Ok(src.variation().map_or(f64::NAN, engine::auto_proof_below))
                })
            })
            .collect::<CoreResult<Vec<f64>>>()
    });
    Ok(finish(py, run, &error)?.into_pyarray(py))
}

/// The smallest direct gap at every row of `coeffs` without Wilson loops
/// ([`crate::point::gap_probe`]): the TRIMs and `grid` κ points per axis start `starts`
/// minimiser walks. Returns a dict of `gap_direct`, `gap_kappa` (npoints, dim), `gap_floor`
/// and `gap_indirect`, as `evaluate` names them.
#[pyfunction]
#[pyo3(signature = (model, coeffs, filling, *, grid, starts, gap_floor, threads=None))]
#[allow(clippy::too_many_arguments)]
pub(super) fn probe_gaps<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeffs: PyReadonlyArray2<f64>,
    filling: usize,
    grid: usize,
    starts: usize,
    gap_floor: f64,
    threads: Option<usize>,
) -> PyResult<Bound<'py, PyDict>> {
    let rows = coeff_rows(model, &coeffs)?;
    if filling == 0 || filling >= model.norb {
        return Err(PyValueError::new_err("filling out of range"));
    }
    if !(2..=4096).contains(&grid) || starts == 0 {
        return Err(PyValueError::new_err(
            "grid must be 2 … 4096 κ points per axis and starts at least 1",
        ));
    }
    let probes = per_point(py, model, &rows, threads, |src, _| {
        probe_gap(src, filling, grid, starts, gap_floor)
    })?;
    let dim = model.dim;
    let out = PyDict::new(py);
    let col = |f: fn(&GapProbe) -> f64| probes.iter().map(f).collect::<Vec<f64>>();
    out.set_item("gap_direct", col(|p| p.gap).into_pyarray(py))?;
    out.set_item("gap_floor", col(|p| p.floor).into_pyarray(py))?;
    out.set_item("gap_indirect", col(|p| p.indirect).into_pyarray(py))?;
    let kappa = Array2::from_shape_fn((probes.len(), dim), |(i, j)| probes[i].kappa[j]);
    out.set_item("gap_kappa", kappa.into_pyarray(py))?;
    Ok(out)
}

/// `f(source, i)` at every coefficient row, in parallel on `threads` workers, each source
/// watched for Ctrl-C; a callback's exception is raised before the core's error.
fn per_point<T: Send>(
    py: Python<'_>,
    model: &CoreModel,
    rows: &[Vec<f64>],
    threads: Option<usize>,
    f: impl Fn(&dyn BlochSource, usize) -> CoreResult<T> + Sync,
) -> PyResult<Vec<T>> {
    let error = Arc::new(Mutex::new(None));
    let run = detached(py, Workers::Pool(threads), |call| {
        rows.par_iter()
            .enumerate()
            .map(|(i, c)| {
                model.with_source(c, i, &error, |src| {
                    let src = Watched {
                        inner: src,
                        watch: &call.watch,
                    };
                    f(&src, i)
                })
            })
            .collect::<CoreResult<Vec<T>>>()
    });
    finish(py, run, &error)
}
