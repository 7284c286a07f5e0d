//! The per-point results handed to Python: one NumPy array per quantity ([`columns`]), or the
//! quantity written straight into an array Python planned for it.
//!
//! Writing into a planned array is split in two so that almost none of it is serial: the
//! arrays are looked up, checked and borrowed for writing ([`Targets::borrow`]) while the
//! points are still being computed, and after them only the values are copied ([`pack`]).
//! Looked up, checked and borrowed after the core, as before, the same ~28 arrays of a
//! one-point call took 20–60 µs of a ~1.5 ms two-thread call in which the other core stood
//! idle (a scratch build; benches/RESULTS.md, measurement history).

use crate::point::columns::{columns, Column, Values};
use crate::point::engine::PointResult;
use crate::sampling::Method;
use numpy::ndarray::{ArrayD, IxDyn};
use numpy::{
    IntoPyArray, PyArrayDyn, PyArrayMethods, PyReadwriteArrayDyn, PyUntypedArray,
    PyUntypedArrayMethods,
};
use pyo3::exceptions::PyRuntimeError;
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// A planned array borrowed for writing, by element type (any integer type may take integer
/// values that fit; reals go to float64 only).
enum Slots<'py> {
    I8(PyReadwriteArrayDyn<'py, i8>),
    I16(PyReadwriteArrayDyn<'py, i16>),
    I32(PyReadwriteArrayDyn<'py, i32>),
    I64(PyReadwriteArrayDyn<'py, i64>),
    U8(PyReadwriteArrayDyn<'py, u8>),
    F64(PyReadwriteArrayDyn<'py, f64>),
}

/// One planned array: its key (as Python gave it), the array, and the borrow to write it.
struct Target<'py> {
    name: String,
    key: Bound<'py, PyAny>,
    array: Bound<'py, PyAny>,
    slots: Slots<'py>,
}

/// The arrays of a dict `{key: array}` that the results may be written into: C-contiguous,
/// writable, of an integer type or float64, and not borrowed elsewhere. Anything else in the
/// dict is left alone (its quantity gets a new array).
pub(super) struct Targets<'py> {
    list: Vec<Target<'py>>,
}

impl<'py> Targets<'py> {
    /// No planned arrays: every quantity gets a new array.
    pub(super) fn none() -> Self {
        Self { list: Vec::new() }
    }

    /// The suitable arrays of `out` when it is a dict, borrowed for writing until `pack` has
    /// run (the borrows are released when the `Targets` is dropped).
    pub(super) fn borrow(out: &Bound<'py, PyAny>) -> Self {
        let Ok(d) = out.downcast::<PyDict>() else {
            return Self::none();
        };
        let list = d
            .iter()
            .filter_map(|(key, array)| {
                let name = key.extract::<String>().ok()?;
                let slots = slots_of(&array)?;
                Some(Target {
                    name,
                    key,
                    array,
                    slots,
                })
            })
            .collect();
        Self { list }
    }

    /// The target of `key`, taken out of the list.
    fn take(&mut self, key: &str) -> Option<Target<'py>> {
        let i = self.list.iter().position(|t| t.name == key)?;
        Some(self.list.swap_remove(i))
    }
}

/// The writable borrow of `array` if it is a C-contiguous array of a type a result may go to.
fn slots_of<'py>(array: &Bound<'py, PyAny>) -> Option<Slots<'py>> {
    if !array.downcast::<PyUntypedArray>().ok()?.is_c_contiguous() {
        return None;
    }
    fn rw<'py, T: numpy::Element>(a: &Bound<'py, PyAny>) -> Option<PyReadwriteArrayDyn<'py, T>> {
        a.downcast::<PyArrayDyn<T>>().ok()?.try_readwrite().ok()
    }
    // (at most one of these downcasts succeeds: each checks the element type)
    rw(array)
        .map(Slots::F64)
        .or_else(|| rw(array).map(Slots::I8))
        .or_else(|| rw(array).map(Slots::I16))
        .or_else(|| rw(array).map(Slots::I32))
        .or_else(|| rw(array).map(Slots::I64))
        .or_else(|| rw(array).map(Slots::U8))
}

impl Slots<'_> {
    /// Write `values` if there are as many slots and each value fits exactly; whether it did
    /// (nothing is written otherwise).
    fn write(&mut self, values: &Values) -> bool {
        match (self, values) {
            (Slots::F64(a), Values::F64(v)) => put(a, v.iter().map(|&x| Some(x))),
            (Slots::F64(_), _) | (_, Values::F64(_)) => false,
            (slots, values) => {
                let Some(ints) = values.integers() else {
                    return false;
                };
                let conv = ints.iter().copied();
                match slots {
                    Slots::I8(a) => put(a, conv.map(|x| x.try_into().ok())),
                    Slots::I16(a) => put(a, conv.map(|x| x.try_into().ok())),
                    Slots::I32(a) => put(a, conv.map(|x| x.try_into().ok())),
                    Slots::I64(a) => put(a, conv.map(Some)),
                    Slots::U8(a) => put(a, conv.map(|x| x.try_into().ok())),
                    Slots::F64(_) => false,
                }
            }
        }
    }
}

/// Copy `values` into the borrowed array if their number matches and every one converts.
fn put<T: numpy::Element + Copy>(
    a: &mut PyReadwriteArrayDyn<'_, T>,
    values: impl ExactSizeIterator<Item = Option<T>> + Clone,
) -> bool {
    let Ok(s) = a.as_slice_mut() else {
        return false;
    };
    if s.len() != values.len() || values.clone().any(|x| x.is_none()) {
        return false;
    }
    for (slot, x) in s.iter_mut().zip(values.flatten()) {
        *slot = x;
    }
    true
}

/// The per-point results as a dict of one NumPy array per quantity ([`columns`]). A quantity
/// with a target is written into it when the target has the quantity's size and holds its
/// values exactly, and that very array is returned for it: the result Dataset planned beside
/// the core gets its values without a copy. Anything else gets a new array.
pub(super) fn pack<'py>(
    py: Python<'py>,
    res: &[PointResult],
    dim: usize,
    method: Method,
    mut targets: Targets<'py>,
) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    for c in columns(res, dim, method) {
        let written = match targets.take(c.key) {
            Some(mut t) => t.slots.write(&c.values).then_some(t),
            None => None,
        };
        match written {
            Some(t) => d.set_item(t.key, t.array)?,
            None => d.set_item(c.key, new_array(py, c, res.len())?)?,
        }
    }
    Ok(d)
}

/// A new array of a column, shape (points, tail…).
fn new_array(py: Python<'_>, c: Column, points: usize) -> PyResult<Bound<'_, PyAny>> {
    let shape = c.shape(points);
    match c.values {
        Values::I8(v) => array_of(py, &shape, v, c.key),
        Values::U8(v) => array_of(py, &shape, v, c.key),
        Values::I32(v) => array_of(py, &shape, v, c.key),
        Values::F64(v) => array_of(py, &shape, v, c.key),
        Values::Bool(v) => array_of(py, &shape, v, c.key),
    }
}

fn array_of<'py, T: numpy::Element>(
    py: Python<'py>,
    shape: &[usize],
    v: Vec<T>,
    key: &str,
) -> PyResult<Bound<'py, PyAny>> {
    let a = ArrayD::from_shape_vec(IxDyn(shape), v)
        .map_err(|e| PyRuntimeError::new_err(format!("internal error: column {key}: {e}")))?;
    Ok(a.into_pyarray(py).into_any())
}
