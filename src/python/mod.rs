//! The Python binding: every `#[pyfunction]`/`#[pyclass]` of `toposweep._core`.
//!
//! All numerical work runs through [`detached`], the one place that releases the GIL, installs
//! the requested rayon pool (none for work too small to share), catches panics and maps
//! [`CoreError`] to Python exceptions.
//!
//! Uses: point, topology, zone, linalg, exec.

use crate::error::{CoreError, CoreResult};
use crate::exec::pools::{default_threads, help_until, mark_main_thread, run_with};
use crate::linalg::eigen::eigh_many_into;
use crate::point::cancel::{Watch, Watched};
use crate::point::engine::{evaluate_point, plane_flow, planes, Plane, PointResult};
use crate::sampling::{Method, ProveGap, Sampling};
use crate::zone::bloch::{BlochSource, Hoppings, FILL_CHUNK};
use crate::zone::variation::VariationBound;
use crate::C64;
use numpy::ndarray::{Array2, Array3};
use numpy::{
    IntoPyArray, PyReadonlyArray1, PyReadonlyArray2, PyReadonlyArray3, PyUntypedArrayMethods,
};
use pack::{pack, Targets};
use pyo3::exceptions::{PyArithmeticError, PyKeyboardInterrupt, PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use rayon::prelude::*;
use std::any::Any;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, PoisonError};

mod gaps;
mod pack;

fn to_py(e: CoreError) -> PyErr {
    match e {
        CoreError::InvalidInput(m) => PyValueError::new_err(m),
        CoreError::NoConvergence(m) => PyArithmeticError::new_err(m),
        CoreError::Interrupted => PyKeyboardInterrupt::new_err("interrupted"),
        e @ (CoreError::Callback(_) | CoreError::Internal(_)) => {
            PyRuntimeError::new_err(e.to_string())
        }
    }
}

/// Which threads run a call's work.
#[derive(Clone, Copy)]
enum Workers {
    /// A pool of this many workers (None: [`default_threads`]); which threads they are:
    /// [`crate::exec::pools`].
    Pool(Option<usize>),
    /// The calling thread alone, no pool installed: work too small to share (a pool would make
    /// the caller a worker of a pool of the default size for good — rayon lets a thread be a
    /// worker of one pool — and its later `threads=1` calls would be handed to another thread
    /// while it waits), or a worker helping the pool it is already in ([`help_until`]).
    Caller,
}

/// What a detached call's work gets: the call's Ctrl-C watch (to wrap its sources in
/// [`Watched`] and to check between its tasks) and the exception a signal handler raised.
struct Call<'a> {
    watch: Watch<'a>,
    interrupt: &'a Mutex<Option<PyErr>>,
}

impl Call<'_> {
    /// The exception a signal handler raised during the call, in place of the core's error.
    fn raised<T>(&self, r: PyResult<T>) -> PyResult<T> {
        r.map_err(|e| {
            self.interrupt
                .lock()
                .unwrap_or_else(PoisonError::into_inner)
                .take()
                .unwrap_or(e)
        })
    }
}

/// Release the GIL, run `f` on `workers`, and turn errors and panics into Python exceptions.
/// Every call is watched for Ctrl-C: `f` gets the watch, and the calling thread polls it
/// while it works or waits (`crate::exec::pools::run_with`); the handler's exception is raised.
fn detached<T, F>(py: Python<'_>, workers: Workers, f: F) -> PyResult<T>
where
    T: Send,
    F: FnOnce(&Call<'_>) -> CoreResult<T> + Send,
{
    let interrupt = Mutex::new(None);
    let poll = signal_poll(&interrupt);
    let call = Call {
        watch: Watch::new(&poll),
        interrupt: &interrupt,
    };
    // (a stopped call: the workers end their tasks with it; the caller waits for them)
    let poll = || {
        let _ = call.watch.check();
    };
    let out = py.allow_threads(|| {
        catch_unwind(AssertUnwindSafe(|| match workers {
            Workers::Pool(threads) => {
                run_with(threads.unwrap_or_else(default_threads), &poll, || f(&call))
            }
            Workers::Caller => f(&call),
        }))
    });
    match out {
        Ok(r) => call.raised(r.map_err(to_py)),
        Err(panic) => Err(PyRuntimeError::new_err(format!(
            "internal error in toposweep core: {}",
            panic_text(panic.as_ref())
        ))),
    }
}

/// A call's poll for Ctrl-C ([`Watch`]): runs Python's signal handlers on the calling thread
/// (nothing elsewhere: Python runs them on its main thread only); an exception they raise
/// (KeyboardInterrupt from the default handler) stops the call and is kept to be raised.
fn signal_poll(interrupt: &Mutex<Option<PyErr>>) -> impl Fn() -> bool + Sync + '_ {
    move || {
        Python::with_gil(|py| match py.check_signals() {
            Ok(()) => false,
            Err(e) => {
                interrupt
                    .lock()
                    .unwrap_or_else(PoisonError::into_inner)
                    .get_or_insert(e);
                true
            }
        })
    }
}

/// The message of a panic.
fn panic_text(panic: &(dyn Any + Send)) -> String {
    panic
        .downcast_ref::<String>()
        .cloned()
        .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
        .unwrap_or_else(|| "unknown panic".into())
}

/// H(κ) from a Python function `func(kappa[(N, dim)], point) -> (N, norb, norb)`.
struct PySource {
    func: Py<PyAny>,
    dim: usize,
    norb: usize,
    point: usize,
    /// the first Python exception raised by `func`, re-raised unchanged after the run
    error: Arc<Mutex<Option<PyErr>>>,
    /// the user's Lipschitz constants at this point, if given
    variation: Option<VariationBound>,
}

impl BlochSource for PySource {
    fn dim(&self) -> usize {
        self.dim
    }
    fn norb(&self) -> usize {
        self.norb
    }
    fn variation(&self) -> Option<&VariationBound> {
        self.variation.as_ref()
    }
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
        let npts = kappa.len() / self.dim;
        let n = self.norb;
        Python::with_gil(|py| -> CoreResult<()> {
            let keep = |e: PyErr| {
                let text = e.to_string();
                if let Ok(mut slot) = self.error.lock() {
                    slot.get_or_insert(e);
                }
                CoreError::Callback(text)
            };
            py.check_signals().map_err(|_| CoreError::Interrupted)?;
            let k = Array2::from_shape_vec((npts, self.dim), kappa.to_vec())
                .map_err(|e| CoreError::Internal(e.to_string()))?
                .into_pyarray(py);
            let res = self.func.call1(py, (k, self.point)).map_err(keep)?;
            let arr: PyReadonlyArray3<C64> = res.extract(py).map_err(keep)?;
            if arr.shape() != [npts, n, n] {
                return Err(keep(PyValueError::new_err(format!(
                    "Hamiltonian function returned shape {:?}, expected ({npts}, {n}, {n})",
                    arr.shape()
                ))));
            }
            for (o, x) in out.iter_mut().zip(arr.as_array().iter()) {
                *o = *x;
            }
            Ok(())
        })
    }
}

/// A model as the core sees it: a hopping list, or a Python callable.
#[pyclass(module = "toposweep._core", frozen)]
pub struct CoreModel {
    dim: usize,
    norb: usize,
    kind: Kind,
}

enum Kind {
    Hoppings(Hoppings),
    /// the function, and the user's Lipschitz constants per point (points × dim), if given
    Callable(Py<PyAny>, Option<Vec<f64>>),
}

#[pymethods]
impl CoreModel {
    /// Hopping-list model: `r` (nhop, dim) int64, `t` (nhop, norb, norb) complex128, `term`
    /// (nhop,) int64 with −1 for the fixed part.
    #[staticmethod]
    fn tight_binding(
        dim: usize,
        norb: usize,
        nterms: usize,
        r: PyReadonlyArray2<i64>,
        t: PyReadonlyArray3<C64>,
        term: PyReadonlyArray1<i64>,
    ) -> PyResult<Self> {
        let h = Hoppings::new(
            dim,
            norb,
            nterms,
            r.as_array().iter().copied().collect(),
            t.as_array().iter().copied().collect(),
            term.as_array().iter().copied().collect(),
        )
        .map_err(to_py)?;
        Ok(Self {
            dim,
            norb,
            kind: Kind::Hoppings(h),
        })
    }

    /// Callable model: `func(kappa[(N, dim)], point) -> (N, norb, norb)` complex128;
    /// `lipschitz` (points, dim): ‖H(κ) − H(κ′)‖₂ ≤ Σ_i L_i |κ_i − κ′_i| at each point.
    #[staticmethod]
    #[pyo3(signature = (dim, norb, func, lipschitz=None))]
    fn callable(
        dim: usize,
        norb: usize,
        func: Py<PyAny>,
        lipschitz: Option<PyReadonlyArray2<f64>>,
    ) -> PyResult<Self> {
        if !(1..=3).contains(&dim) || norb == 0 {
            return Err(PyValueError::new_err("dim must be 1…3 and norb positive"));
        }
        let lipschitz = match lipschitz {
            None => None,
            Some(a) => {
                if a.shape()[1] != dim {
                    return Err(PyValueError::new_err(format!(
                        "lipschitz must have {dim} columns, got shape {:?}",
                        a.shape()
                    )));
                }
                let v: Vec<f64> = a.as_array().iter().copied().collect();
                for row in v.chunks_exact(dim) {
                    VariationBound::lipschitz(row).map_err(to_py)?;
                }
                Some(v)
            }
        };
        Ok(Self {
            dim,
            norb,
            kind: Kind::Callable(func, lipschitz),
        })
    }

    #[getter]
    fn dim(&self) -> usize {
        self.dim
    }
    #[getter]
    fn norb(&self) -> usize {
        self.norb
    }
}

impl CoreModel {
    fn nterms(&self) -> usize {
        match &self.kind {
            Kind::Hoppings(h) => h.nterms,
            Kind::Callable(..) => 0,
        }
    }

    /// Run `f` with the Bloch source of parameter point `point` (coefficient row `coeff`).
    fn with_source<T>(
        &self,
        coeff: &[f64],
        point: usize,
        error: &Arc<Mutex<Option<PyErr>>>,
        f: impl FnOnce(&dyn BlochSource) -> CoreResult<T>,
    ) -> CoreResult<T> {
        match &self.kind {
            Kind::Hoppings(h) => f(&h.at(coeff)?),
            Kind::Callable(func, lipschitz) => {
                let func = Python::with_gil(|py| func.clone_ref(py));
                let variation = match lipschitz {
                    Some(l) => {
                        let row =
                            l.get(point * self.dim..(point + 1) * self.dim)
                                .ok_or_else(|| {
                                    CoreError::InvalidInput(
                                        "no Lipschitz constants for a point".into(),
                                    )
                                })?;
                        Some(VariationBound::lipschitz(row)?)
                    }
                    None => None,
                };
                f(&PySource {
                    func,
                    dim: self.dim,
                    norb: self.norb,
                    point,
                    error: error.clone(),
                    variation,
                })
            }
        }
    }
}

/// Re-raise a stored callback exception in preference to the generic core error.
fn finish<T>(py: Python<'_>, r: PyResult<T>, error: &Arc<Mutex<Option<PyErr>>>) -> PyResult<T> {
    match r {
        Ok(v) => Ok(v),
        Err(e) => match error.lock().ok().and_then(|mut s| s.take()) {
            Some(orig) if !e.is_instance_of::<PyKeyboardInterrupt>(py) => Err(orig),
            _ => Err(e),
        },
    }
}

fn coeff_rows(model: &CoreModel, coeffs: &PyReadonlyArray2<f64>) -> PyResult<Vec<Vec<f64>>> {
    let a = coeffs.as_array();
    if a.ncols() != model.nterms() {
        return Err(PyValueError::new_err(format!(
            "coefficient array has {} columns, the model has {} terms",
            a.ncols(),
            model.nterms()
        )));
    }
    Ok(a.rows().into_iter().map(|r| r.to_vec()).collect())
}

fn matrix(a: &PyReadonlyArray2<C64>, n: usize, what: &str) -> PyResult<Vec<C64>> {
    if a.shape() != [n, n] {
        return Err(PyValueError::new_err(format!(
            "{what} must be {n}×{n}, got {:?}",
            a.shape()
        )));
    }
    Ok(a.as_array().iter().copied().collect())
}

/// Indices, gaps and diagnostics at every row of `coeffs` (npoints, nterms). Returns a dict
/// of arrays whose first axis is the point. `alongside`: a Python callable (no arguments) run
/// while the points are evaluated when there is more than one worker — Python work that does
/// not need the results (symmetry checks, the result's layout) then shares the cores with the
/// points instead of adding to their time — and before them otherwise; its exception is
/// raised, whatever the points gave.
#[pyfunction]
#[pyo3(signature = (model, coeffs, filling, *, inversion=None, time_reversal=None, loop_points,
                    lines, max_lines, step_limit, gap_floor, gap_points, gap_starts=3,
                    method="wilson", certify=true, prove_gap="auto", threads=None,
                    alongside=None))]
#[allow(clippy::too_many_arguments)]
fn evaluate<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeffs: PyReadonlyArray2<f64>,
    filling: usize,
    inversion: Option<PyReadonlyArray2<C64>>,
    time_reversal: Option<PyReadonlyArray2<C64>>,
    loop_points: usize,
    lines: usize,
    max_lines: usize,
    step_limit: f64,
    gap_floor: f64,
    gap_points: usize,
    gap_starts: usize,
    method: &str,
    certify: bool,
    prove_gap: &str,
    threads: Option<usize>,
    alongside: Option<Py<PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let rows = coeff_rows(model, &coeffs)?;
    let inv = inversion
        .map(|p| matrix(&p, model.norb, "inversion"))
        .transpose()?;
    let u_t = time_reversal
        .map(|p| matrix(&p, model.norb, "time_reversal"))
        .transpose()?;
    let method = Method::parse(method).map_err(to_py)?;
    let s = Sampling {
        loop_points,
        lines,
        max_lines,
        step_limit,
        gap_floor,
        gap_points,
        gap_starts,
        method,
        certify,
        prove_gap: ProveGap::parse(prove_gap).map_err(to_py)?,
    };
    s.validate().map_err(to_py)?;
    let error = Arc::new(Mutex::new(None));
    // Ctrl-C: the watch of the call (src/cancel.rs), checked before every Hamiltonian
    let points = |watch: &Watch<'_>| {
        rows.par_iter()
            .enumerate()
            .map(|(i, c)| {
                model.with_source(c, i, &error, |src| {
                    let src = Watched { inner: src, watch };
                    evaluate_point(&src, filling, inv.as_deref(), u_t.as_deref(), &s)
                })
            })
            .collect::<CoreResult<Vec<PointResult>>>()
    };
    let f = match alongside {
        None => {
            let run = detached(py, Workers::Pool(threads), |call| points(&call.watch));
            return results(py, run, &error, model.dim, method, Targets::none());
        }
        Some(f) => f,
    };
    if threads.unwrap_or_else(default_threads) == 1 {
        // one worker: the Python job first, on this thread, then the points
        let out = f.call0(py)?.into_bound(py);
        let targets = Targets::borrow(&out);
        let run = detached(py, Workers::Pool(threads), |call| points(&call.watch));
        return results(py, run, &error, model.dim, method, targets);
    }
    // The points are spawned first: another worker steals them at once. The Python job runs
    // on the worker that takes the call (from the main thread: this thread, whose caches and
    // thread state Python last used — on another worker the same job took ~1.7× as long), and
    // then, still holding the GIL, borrows the arrays it returned for the results. Without
    // the GIL the worker helps with the points until they are done ([`help_until`]: it does
    // not fall asleep, so no wake-up is waited for at their end, and it runs them itself
    // should no other worker come), and then only copies the values in. The job's exception
    // wins over the core's: it says why the run was not valid in the first place.
    let run = Mutex::new(None);
    let done = AtomicBool::new(false);
    let packed = detached(py, Workers::Pool(threads), |call| {
        Ok(rayon::scope(|sc| {
            sc.spawn(|_| {
                let r = catch_unwind(AssertUnwindSafe(|| points(&call.watch)))
                    .unwrap_or_else(|p| Err(CoreError::Internal(panic_text(p.as_ref()))));
                *run.lock().unwrap_or_else(PoisonError::into_inner) = Some(r);
                done.store(true, Ordering::Release);
            });
            Python::with_gil(|py| {
                let out = f.call0(py);
                let targets = out.map(|o| Targets::borrow(&o.into_bound(py)));
                // (without the GIL, on this thread: still inside this pool's scope)
                // (polling this call's watch while it waits for another worker's task)
                detached(py, Workers::Caller, |_| {
                    help_until(&done, &|| {
                        let _ = call.watch.check();
                    });
                    Ok(())
                })?;
                let targets = targets?;
                let r = run.lock().unwrap_or_else(PoisonError::into_inner).take();
                let r =
                    r.unwrap_or_else(|| Err(CoreError::Internal("the points did not run".into())));
                let r = call.raised(r.map_err(to_py));
                results(py, r, &error, model.dim, method, targets).map(Bound::unbind)
            })
        }))
    })?;
    packed.map(|d| d.into_bound(py))
}

/// The dict of result arrays of a run ([`pack`]), or its error (a callback's exception first).
fn results<'py>(
    py: Python<'py>,
    run: PyResult<Vec<PointResult>>,
    error: &Arc<Mutex<Option<PyErr>>>,
    dim: usize,
    method: Method,
    targets: Targets<'py>,
) -> PyResult<Bound<'py, PyDict>> {
    let res = finish(py, run, error)?;
    pack(py, &res, dim, method, targets)
}

/// H(κ) for every row of `kappa` (N, dim) at one coefficient vector, with `threads` workers
/// (None: all cores) for batches larger than [`FILL_CHUNK`]; smaller ones run on the calling
/// thread.
#[pyfunction]
#[pyo3(signature = (model, coeff, kappa, *, threads=None))]
fn hamiltonian<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeff: PyReadonlyArray1<f64>,
    kappa: PyReadonlyArray2<f64>,
    threads: Option<usize>,
) -> PyResult<Bound<'py, numpy::PyArray3<C64>>> {
    let (n, dim) = (model.norb, model.dim);
    if kappa.shape()[1] != dim {
        return Err(PyValueError::new_err(format!(
            "kappa must have {dim} columns"
        )));
    }
    let c: Vec<f64> = coeff.as_array().to_vec();
    let k: Vec<f64> = kappa.as_array().iter().copied().collect();
    let npts = kappa.shape()[0];
    let error = Arc::new(Mutex::new(None));
    // (a few κ points — the symmetry checks of every new model — are filled on this thread)
    let workers = if npts <= FILL_CHUNK {
        Workers::Caller
    } else {
        Workers::Pool(threads)
    };
    let run = detached(py, workers, |call| {
        let mut out = vec![C64::new(0.0, 0.0); npts * n * n];
        model.with_source(&c, 0, &error, |src| {
            let src = Watched {
                inner: src,
                watch: &call.watch,
            };
            src.fill(&k, &mut out)
        })?;
        Ok(out)
    });
    let out = finish(py, run, &error)?;
    let arr = Array3::from_shape_vec((npts, n, n), out)
        .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    Ok(arr.into_pyarray(py))
}

/// Eigenvalues and eigenvectors of a batch, as returned to Python.
type EighOut<'py> = (
    Bound<'py, numpy::PyArray2<f64>>,
    Bound<'py, numpy::PyArray3<C64>>,
);

/// Eigenvalues (N, n) and eigenvectors (N, n, n; column k ↔ eigenvalue k) of a batch of
/// Hermitian matrices, in parallel.
#[pyfunction]
#[pyo3(signature = (h, *, threads=None))]
fn eigh<'py>(
    py: Python<'py>,
    h: PyReadonlyArray3<C64>,
    threads: Option<usize>,
) -> PyResult<EighOut<'py>> {
    let sh = h.shape().to_vec();
    if sh[1] != sh[2] {
        return Err(PyValueError::new_err("matrices must be square"));
    }
    let (m, n) = (sh[0], sh[1]);
    let data: Vec<C64> = h.as_array().iter().copied().collect();
    let (e, v) = detached(py, Workers::Pool(threads), |call| {
        let mut e = vec![0.0; m * n];
        let mut v = vec![C64::new(0.0, 0.0); m * n * n];
        // four matrices per task: n ≤ 8 are solved together in the lanes (eigh_many_into)
        e.par_chunks_mut(4 * n.max(1))
            .zip(v.par_chunks_mut(4 * (n * n).max(1)))
            .zip(data.par_chunks(4 * (n * n).max(1)))
            .try_for_each(|((e, v), h)| {
                // (a large batch of large matrices takes long: Ctrl-C between tasks)
                call.watch.check()?;
                eigh_many_into(h, n, e, v)
            })?;
        Ok((e, v))
    })?;
    let e =
        Array2::from_shape_vec((m, n), e).map_err(|x| PyRuntimeError::new_err(x.to_string()))?;
    let v =
        Array3::from_shape_vec((m, n, n), v).map_err(|x| PyRuntimeError::new_err(x.to_string()))?;
    Ok((e.into_pyarray(py), v.into_pyarray(py)))
}

/// Hybrid Wannier centres (npump, filling) of one plane at fixed pump coordinates. `plane` is
/// the index into the planes of the model (3D: 2·axis + (cut == 1/2); 2D: 0).
#[pyfunction]
#[pyo3(signature = (model, coeff, filling, plane, loop_points, pump, *, positions=None, threads=None))]
#[allow(clippy::too_many_arguments)]
fn flow<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeff: PyReadonlyArray1<f64>,
    filling: usize,
    plane: usize,
    loop_points: usize,
    pump: PyReadonlyArray1<f64>,
    positions: Option<PyReadonlyArray2<f64>>,
    threads: Option<usize>,
) -> PyResult<Bound<'py, numpy::PyArray2<f64>>> {
    let all: Vec<Plane> = planes(model.dim);
    let pl = *all
        .get(plane)
        .ok_or_else(|| PyValueError::new_err(format!("plane must be < {}", all.len())))?;
    if filling == 0 || filling >= model.norb {
        return Err(PyValueError::new_err("filling out of range"));
    }
    let c: Vec<f64> = coeff.as_array().to_vec();
    let t: Vec<f64> = pump.as_array().to_vec();
    let pos: Option<Vec<f64>> = positions.map(|p| p.as_array().iter().copied().collect());
    let error = Arc::new(Mutex::new(None));
    let run = detached(py, Workers::Pool(threads), |call| {
        model.with_source(&c, 0, &error, |src| {
            let src = Watched {
                inner: src,
                watch: &call.watch,
            };
            plane_flow(&src, filling, pl, loop_points, &t, pos.as_deref())
        })
    });
    let lines = finish(py, run, &error)?;
    let arr = Array2::from_shape_fn((lines.len(), filling), |(i, j)| lines[i].centres[j]);
    Ok(arr.into_pyarray(py))
}

/// The flow that decided one plane's Z2 (see [`crate::point::decided_flow`]): pump coordinates
/// (nlines,), centres (nlines, filling), the plane's Z2 from these lines (−1: undefined) and
/// the loop points they used. `plane` as for [`flow`].
#[pyfunction]
#[pyo3(signature = (model, coeff, filling, plane, *, loop_points, lines, max_lines, step_limit,
                    certify=true, threads=None))]
#[allow(clippy::too_many_arguments)]
fn decided_flow<'py>(
    py: Python<'py>,
    model: &CoreModel,
    coeff: PyReadonlyArray1<f64>,
    filling: usize,
    plane: usize,
    loop_points: usize,
    lines: usize,
    max_lines: usize,
    step_limit: f64,
    certify: bool,
    threads: Option<usize>,
) -> PyResult<DecidedOut<'py>> {
    let all: Vec<Plane> = planes(model.dim);
    let pl = *all
        .get(plane)
        .ok_or_else(|| PyValueError::new_err(format!("plane must be < {}", all.len())))?;
    if filling == 0 || filling >= model.norb {
        return Err(PyValueError::new_err("filling out of range"));
    }
    let s = Sampling {
        loop_points,
        lines,
        max_lines,
        step_limit,
        gap_floor: 0.0,
        gap_points: 0,
        gap_starts: 0,
        method: Method::Wilson,
        certify,
        prove_gap: ProveGap::Never,
    };
    s.validate().map_err(to_py)?;
    let c: Vec<f64> = coeff.as_array().to_vec();
    let error = Arc::new(Mutex::new(None));
    let run = detached(py, Workers::Pool(threads), |call| {
        model.with_source(&c, 0, &error, |src| {
            let src = Watched {
                inner: src,
                watch: &call.watch,
            };
            crate::point::decided_flow::decided_flow(&src, filling, pl, &s)
        })
    });
    let f = finish(py, run, &error)?;
    let n = f.pump.len();
    let centres = Array2::from_shape_vec((n, filling), f.centres)
        .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    Ok((
        f.pump.into_pyarray(py),
        centres.into_pyarray(py),
        f.z2,
        f.loop_points,
    ))
}

/// What [`decided_flow`] returns to Python.
type DecidedOut<'py> = (
    Bound<'py, numpy::PyArray1<f64>>,
    Bound<'py, numpy::PyArray2<f64>>,
    i8,
    usize,
);

/// The instruction-set level the kernels were compiled for (`RUSTFLAGS` of the build; the
/// Makefile picks x86-64-v3 where the building machine has it).
fn instruction_set() -> &'static str {
    if cfg!(all(
        target_arch = "x86_64",
        target_feature = "avx2",
        target_feature = "fma"
    )) {
        "x86-64-v3 (AVX2, FMA)"
    } else if cfg!(target_arch = "x86_64") {
        "x86-64 baseline (SSE2)"
    } else {
        std::env::consts::ARCH
    }
}

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    // the main thread may be one of the workers of its calls (see `pools`)
    let threading = m.py().import("threading")?;
    if threading
        .call_method0("current_thread")?
        .is(&threading.call_method0("main_thread")?)
    {
        mark_main_thread();
    }
    m.add_class::<CoreModel>()?;
    m.add_function(wrap_pyfunction!(evaluate, m)?)?;
    m.add_function(wrap_pyfunction!(hamiltonian, m)?)?;
    m.add_function(wrap_pyfunction!(eigh, m)?)?;
    m.add_function(wrap_pyfunction!(flow, m)?)?;
    m.add_function(wrap_pyfunction!(decided_flow, m)?)?;
    m.add_function(wrap_pyfunction!(gaps::prove_gaps, m)?)?;
    m.add_function(wrap_pyfunction!(gaps::auto_proof_below, m)?)?;
    m.add_function(wrap_pyfunction!(gaps::probe_gaps, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("INSTRUCTION_SET", instruction_set())?;
    Ok(())
}
