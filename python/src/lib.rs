//! `icefold._native`: the extension module under the `icefold` Python package.
//!
//! It loads configs (`load`, a [`Config`]), runs the jobs behind the commands in memory and
//! returns the bytes of the netCDF-4 file the command would write (`Config.compute`, with the
//! GIL released while it computes), and exposes the model as a function ([`Model`]). Failures
//! raise `Failure(exit_code, message, partial_file_bytes_or_None)`, which the pure-Python layer
//! (python/icefold/__init__.py) turns into its exception classes. All calls into the library go
//! through [`jobs`].

mod jobs;

use jobs::{Job, Source};
use numpy::{PyArray1, PyArray2, PyArrayMethods, PyReadonlyArray1};
use pyo3::create_exception;
use pyo3::exceptions::{PyException, PyTypeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyBytes, PyDict, PyFloat, PyInt, PyList, PyString, PyTuple};
use std::path::PathBuf;

create_exception!(
    _native,
    Failure,
    PyException,
    "A failed job: (exit_code, message, partial file bytes or None)."
);

/// The exception of an icefold error: its command-line exit status and message, and the bytes
/// of the partial file the job kept (numerical failures), if any.
fn failure(py: Python<'_>, e: &icefold::error::Error, image: Option<Vec<u8>>) -> PyErr {
    failure_at(py, e, image, None)
}

/// [`failure`] of a job that wrote at the in-memory `target`, which its message names as
/// "(in memory)" (the partial file is the exception's dataset).
fn failure_at(
    py: Python<'_>,
    e: &icefold::error::Error,
    image: Option<Vec<u8>>,
    target: Option<&std::path::Path>,
) -> PyErr {
    let mut message = e.to_string();
    if let Some(t) = target {
        message = message.replace(&t.display().to_string(), "(in memory: the exception's dataset)");
    }
    let image: Py<PyAny> = match image {
        Some(b) => PyBytes::new(py, &b).into_any().unbind(),
        None => py.None(),
    };
    Failure::new_err((e.exit_code(), message, image))
}

/// A Python value as a TOML value; `key` names it in messages.
fn to_toml(obj: &Bound<'_, PyAny>, key: &str) -> PyResult<toml::Value> {
    use toml::Value;
    if obj.is_instance_of::<PyBool>() {
        return Ok(Value::Boolean(obj.extract()?));
    }
    if obj.is_instance_of::<PyInt>() {
        return Ok(Value::Integer(obj.extract()?));
    }
    if obj.is_instance_of::<PyFloat>() {
        return Ok(Value::Float(obj.extract()?));
    }
    if obj.is_instance_of::<PyString>() {
        return Ok(Value::String(obj.extract()?));
    }
    if let Ok(d) = obj.cast::<PyDict>() {
        let mut table = toml::map::Map::new();
        for (k, v) in d.iter() {
            let name: String = k.extract().map_err(|_| {
                PyTypeError::new_err(format!(
                    "config key `{key}`: table keys must be strings, not {k:?}"
                ))
            })?;
            let dotted = if key.is_empty() {
                name.clone()
            } else {
                format!("{key}.{name}")
            };
            table.insert(name, to_toml(&v, &dotted)?);
        }
        return Ok(Value::Table(table));
    }
    if obj.is_instance_of::<PyList>() || obj.is_instance_of::<PyTuple>() {
        let items = obj
            .try_iter()?
            .enumerate()
            .map(|(i, v)| to_toml(&v?, &format!("{key}[{i}]")))
            .collect::<PyResult<Vec<_>>>()?;
        return Ok(Value::Array(items));
    }
    // NumPy scalars and other numbers: integers by `__index__`, reals by `__float__`.
    if obj.hasattr("__index__")? {
        return Ok(Value::Integer(obj.call_method0("__index__")?.extract()?));
    }
    if obj.hasattr("__float__")? {
        return Ok(Value::Float(obj.call_method0("__float__")?.extract()?));
    }
    Err(PyTypeError::new_err(format!(
        "config key `{key}`: a {} is not a config value (give a number, string, boolean, list or dict)",
        obj.get_type().name()?
    )))
}

/// The `--set KEY=VALUE` argument of a value: a string bare when the command line would read it
/// back as that string (as a user types `--set albedo.kind=smooth`, so that messages naming the
/// argument read the same), otherwise the value as TOML.
fn set_arg(key: &str, value: toml::Value) -> String {
    if let toml::Value::String(s) = &value {
        let reads_as_text = toml::from_str::<toml::Table>(&format!("v = {s}")).is_err();
        if reads_as_text && s.trim() == s && !s.is_empty() {
            return format!("{key}={s}");
        }
    }
    format!("{key}={value}")
}

/// A loaded, validated configuration (`icefold.load` in the Python layer).
#[pyclass(frozen, module = "icefold._native")]
struct Config {
    loaded: icefold::config::Loaded,
}

/// Loads a config like the command line does: `kind` is "path" (a TOML file), "text" (TOML
/// text) or "dict" (a nested dict); `sets` maps dotted keys to values (`--set KEY=VALUE`).
#[pyfunction]
#[pyo3(signature = (kind, config, sets=None))]
fn load(
    py: Python<'_>,
    kind: &str,
    config: &Bound<'_, PyAny>,
    sets: Option<&Bound<'_, PyDict>>,
) -> PyResult<Config> {
    let mut set_args = Vec::new();
    if let Some(sets) = sets {
        for (k, v) in sets.iter() {
            let key: String = k.extract().map_err(|_| {
                PyTypeError::new_err(format!("set: keys must be dotted key strings, not {k:?}"))
            })?;
            set_args.push(set_arg(&key, to_toml(&v, &key)?));
        }
    }
    let text;
    let path;
    let source = match kind {
        "path" => {
            path = config.extract::<PathBuf>()?;
            Source::Path(&path)
        }
        "text" => {
            text = config.extract::<String>()?;
            Source::Text {
                text: &text,
                name: "<config text>",
            }
        }
        "dict" => {
            let table = to_toml(config, "")?;
            text = toml::to_string(&table)
                .map_err(|e| PyValueError::new_err(format!("config dict cannot be written as TOML: {e}")))?;
            Source::Text {
                text: &text,
                name: "<config dict>",
            }
        }
        other => return Err(PyValueError::new_err(format!("unknown config kind {other:?}"))),
    };
    let loaded = jobs::load(&source, &set_args).map_err(|e| failure(py, &e.into(), None))?;
    Ok(Config { loaded })
}

#[pymethods]
impl Config {
    /// Warnings about likely mistakes in valid input (the command line prints them).
    #[getter]
    fn warnings(&self) -> Vec<String> {
        self.loaded.warnings.clone()
    }

    /// The resolved configuration (every default filled in) as TOML text.
    #[getter]
    fn resolved_toml(&self) -> String {
        self.loaded.resolved_text()
    }

    /// Runs the job `command` ("run", "equilibrium", ...) and returns the bytes of the file
    /// the command would write. The GIL is released while it computes.
    #[pyo3(signature = (command, command_line, start="config", threads=None, shard=None))]
    fn compute<'py>(
        &self,
        py: Python<'py>,
        command: &str,
        command_line: &str,
        start: &str,
        threads: Option<usize>,
        shard: Option<String>,
    ) -> PyResult<Bound<'py, PyBytes>> {
        let job = match command {
            "run" => Job::Run,
            "equilibrium" => Job::Equilibrium { start: start.into() },
            "sweep" => Job::Sweep,
            "branches" => Job::Branches,
            "regimes" => Job::Regimes { threads },
            "ensemble" => Job::Ensemble { threads, shard },
            other => return Err(PyValueError::new_err(format!("unknown job {other:?}"))),
        };
        let loaded = &self.loaded;
        let outcome = py.detach(|| jobs::compute(loaded, &job, command_line));
        match (outcome.error, outcome.image) {
            (None, Some(image)) => Ok(PyBytes::new(py, &image)),
            (Some(e), image) => Err(failure_at(py, &e, image, Some(&outcome.target))),
            (None, None) => Err(PyException::new_err(format!(
                "icefold {command} finished without a file"
            ))),
        }
    }
}

/// The model of a config as a function of the temperatures (K), for notebook work.
#[pyclass(frozen, module = "icefold._native")]
struct Model {
    model: icefold::model::Model,
    initial: Vec<f64>,
}

impl Model {
    fn check(&self, temps: &[f64]) -> PyResult<()> {
        if temps.len() != self.model.len() {
            return Err(PyValueError::new_err(format!(
                "temperatures: {} values given, the grid has {} bands",
                temps.len(),
                self.model.len()
            )));
        }
        Ok(())
    }
}

#[pymethods]
impl Model {
    #[new]
    fn new(py: Python<'_>, config: &Config) -> PyResult<Model> {
        let model = jobs::model(&config.loaded).map_err(|e| failure(py, &e, None))?;
        let initial = jobs::initial_state(&model, &config.loaded);
        Ok(Model { model, initial })
    }

    /// Number of latitude bands.
    fn __len__(&self) -> usize {
        self.model.len()
    }

    /// Net heating `G(t, T)` in W m-2 per band at model time `t` (years).
    #[pyo3(signature = (temps, t=0.0))]
    fn heating<'py>(
        &self,
        py: Python<'py>,
        temps: PyReadonlyArray1<'py, f64>,
        t: f64,
    ) -> PyResult<Bound<'py, PyArray1<f64>>> {
        let temps = temps.as_slice()?;
        self.check(temps)?;
        Ok(PyArray1::from_vec(py, jobs::heating(&self.model, t, temps)))
    }

    /// Jacobian `dG_i/dT_j` in W m-2 K-1 (dense `n x n`) at model time `t` (years).
    #[pyo3(signature = (temps, t=0.0))]
    fn jacobian<'py>(
        &self,
        py: Python<'py>,
        temps: PyReadonlyArray1<'py, f64>,
        t: f64,
    ) -> PyResult<Bound<'py, PyArray2<f64>>> {
        let temps = temps.as_slice()?;
        self.check(temps)?;
        let n = temps.len();
        PyArray1::from_vec(py, jobs::jacobian(&self.model, t, temps)).reshape([n, n])
    }

    /// The config's initial temperatures, K.
    fn initial_state<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_slice(py, &self.initial)
    }

    /// Area-weighted global mean of `temps`, K.
    fn global_mean(&self, temps: PyReadonlyArray1<'_, f64>) -> PyResult<f64> {
        let temps = temps.as_slice()?;
        self.check(temps)?;
        Ok(self.model.global_mean(temps))
    }

    /// Ice-edge latitudes `(north, south)` in degrees north at model time `t`; south is None
    /// on a hemisphere.
    #[pyo3(signature = (temps, t=0.0))]
    fn ice_edges(&self, temps: PyReadonlyArray1<'_, f64>, t: f64) -> PyResult<(f64, Option<f64>)> {
        let temps = temps.as_slice()?;
        self.check(temps)?;
        Ok(self.model.ice_edges_at(t, temps))
    }

    /// The grid: dict of `lat` (band centres, degrees north), `lat_bnds` (`n x 2`), `area_weight`
    /// (fractions of the domain's area), `x` (sine of the centre latitudes) and `domain`.
    #[getter]
    fn grid<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let g = &self.model.grid;
        let faces = g.lat_faces_deg();
        let n = g.len();
        let bnds: Vec<f64> = (0..n).flat_map(|i| [faces[i], faces[i + 1]]).collect();
        let d = PyDict::new(py);
        d.set_item("lat", PyArray1::from_vec(py, g.lat_centres_deg()))?;
        d.set_item("lat_bnds", PyArray1::from_vec(py, bnds).reshape([n, 2])?)?;
        d.set_item("area_weight", PyArray1::from_slice(py, &g.weights))?;
        d.set_item("x", PyArray1::from_slice(py, &g.x_centres))?;
        let domain = match g.domain {
            icefold::grid::Domain::Hemisphere => "hemisphere",
            icefold::grid::Domain::Globe => "globe",
        };
        d.set_item("domain", domain)?;
        Ok(d)
    }
}

/// Ask every running job to stop at its next step boundary as on Ctrl-C (`stop=True`), or
/// forget the request (`stop=False`).
#[pyfunction]
fn request_stop(stop: bool) {
    jobs::request_stop(stop);
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("Failure", m.py().get_type::<Failure>())?;
    m.add("version", icefold::output::common::VERSION)?;
    m.add_function(wrap_pyfunction!(load, m)?)?;
    m.add_function(wrap_pyfunction!(request_stop, m)?)?;
    m.add_class::<Config>()?;
    m.add_class::<Model>()?;
    Ok(())
}
