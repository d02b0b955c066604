//! Python bindings of the ebbwise reduction (`ebbwise._ebbwise`, wrapped by the `ebbwise`
//! package): a project loaded once, pyarrow record batches reduced to pyarrow record batches,
//! the tide at one point. Batches cross the language boundary through Arrow's C Data Interface
//! (the PyCapsule protocol), so their buffers are shared, not copied: the input's columns come
//! back as the same buffers, and only the appended columns are new.
//!
//! Results are for qualified hydrographic review; the responsible authority's specifications,
//! local regulations and licensed practice take precedence.

use std::path::PathBuf;

use arrow_array::RecordBatch;
use arrow_pyarrow::PyArrowType;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// A loaded project and one of its soundings groups, ready to reduce record batches.
///
/// `Reducer(project, group=0)`: `project` is the path of the project file (TOML); `group` the
/// 0-based `[[soundings]]` group whose column mapping and CRS the batches follow.
#[pyclass(frozen, module = "ebbwise._ebbwise")]
struct Reducer {
    inner: ebbwise::pipeline::Reducer,
    project: PathBuf,
    group: usize,
}

fn error(e: ebbwise::pipeline::PipelineError) -> PyErr {
    PyValueError::new_err(e.to_string())
}

#[pymethods]
impl Reducer {
    #[new]
    #[pyo3(signature = (project, group = 0))]
    fn new(py: Python<'_>, project: PathBuf, group: usize) -> PyResult<Self> {
        let p = project.clone();
        let inner = py
            .detach(move || ebbwise::pipeline::Reducer::open(&p, group))
            .map_err(error)?;
        Ok(Reducer {
            inner,
            project,
            group,
        })
    }

    /// Reduces one `pyarrow.RecordBatch` of soundings: its columns, then zone, tide_m,
    /// reduced_depth_m, status, status_detail and (with uncertainty) the budget and verdict.
    /// The GIL is released while it runs, so threads reduce batches in parallel.
    fn reduce(
        &self,
        py: Python<'_>,
        batch: PyArrowType<RecordBatch>,
    ) -> PyResult<PyArrowType<RecordBatch>> {
        let b = batch.0;
        let out = py.detach(|| self.inner.reduce(&b)).map_err(error)?;
        Ok(PyArrowType(out))
    }

    /// The tide at one point (x, y in the group's CRS) and time (UTC seconds since 1970): a
    /// dict with `status`, `zone`, `tide_m` (above chart datum, positive up), `u_tide_m`
    /// (standard uncertainty) and `detail`.
    fn tide_at<'py>(
        &self,
        py: Python<'py>,
        x: f64,
        y: f64,
        t_s: f64,
    ) -> PyResult<Bound<'py, PyDict>> {
        let d = PyDict::new(py);
        match self.inner.tide_at(x, y, t_s) {
            ebbwise::pipeline::PointTide::Tide {
                zone,
                tide_m,
                u_tide_m,
                note,
            } => {
                d.set_item(
                    "status",
                    if note.is_empty() {
                        "reduced"
                    } else {
                        "gap_filled"
                    },
                )?;
                d.set_item("zone", zone)?;
                d.set_item("tide_m", tide_m)?;
                d.set_item("u_tide_m", u_tide_m)?;
                d.set_item("detail", note)?;
            }
            ebbwise::pipeline::PointTide::NoTide { status, zone, why } => {
                d.set_item("status", status)?;
                d.set_item("zone", zone)?;
                d.set_item("tide_m", py.None())?;
                d.set_item("u_tide_m", py.None())?;
                d.set_item("detail", why)?;
            }
            _ => {
                return Err(PyValueError::new_err(
                    "an outcome this version does not know",
                ))
            }
        }
        Ok(d)
    }

    /// The survey order the soundings are judged against, or None without uncertainty.
    #[getter]
    fn order(&self) -> Option<String> {
        self.inner.order().map(str::to_string)
    }

    /// For pickling (Dask sends a Reducer to its workers as its arguments): reloaded there.
    fn __reduce__<'py>(&self, py: Python<'py>) -> PyResult<(Bound<'py, PyAny>, (PathBuf, usize))> {
        let cls = py.get_type::<Reducer>().into_any();
        Ok((cls, (self.project.clone(), self.group)))
    }

    fn __repr__(&self) -> String {
        format!(
            "Reducer(project={:?}, group={})",
            self.project.display().to_string(),
            self.group
        )
    }
}

/// The version of the ebbwise library inside.
#[pyfunction]
fn version() -> &'static str {
    env!("CARGO_PKG_VERSION")
}

#[pymodule]
fn _ebbwise(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<Reducer>()?;
    m.add_function(wrap_pyfunction!(version, m)?)?;
    m.add("CAUTION", ebbwise::CAUTION)?;
    Ok(())
}
