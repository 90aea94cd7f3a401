//! The Python module `efold`: a thin binding of the library's entry points ([`efold::api`]).
//! Python values become the library's plain options, its JSON values become Python dicts and
//! lists, tables become numpy arrays, and its errors become the module's exceptions with the
//! library's rendered diagnostic as their message. No analysis and no formatting lives here.

use efold::api::{self, ApiError, Column, PredictRequest, Route, Stage};
use efold::config::Config;
use efold::data::DataSet;
use efold::model::{Model, ModelParts, ModelSpec};
use pyo3::create_exception;
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyBytes, PyDict, PyList, PyString};
use serde_json::Value;
use std::path::PathBuf;

create_exception!(
    efold,
    Error,
    PyValueError,
    "An error of efold; the message is its diagnostic."
);
create_exception!(
    efold,
    ExpressionError,
    Error,
    "An expression that does not parse or names what is not in scope."
);
create_exception!(
    efold,
    ModelError,
    Error,
    "A model (or data) file or its parts are invalid."
);
create_exception!(
    efold,
    AnalysisError,
    Error,
    "An analysis failed: no end of inflation, too few e-folds, ..."
);
create_exception!(
    efold,
    InputError,
    Error,
    "An option's value is outside its range or conflicts with another."
);

/// The library's error as the exception of its stage.
fn raise(e: ApiError) -> PyErr {
    let message = e.message.trim_end().to_string();
    match e.stage {
        Stage::Expression => ExpressionError::new_err(message),
        Stage::Model => ModelError::new_err(message),
        Stage::Analysis => AnalysisError::new_err(message),
        Stage::Input => InputError::new_err(message),
    }
}

/// A JSON value as Python objects: objects as dicts (keys in the JSON's order), arrays as lists.
fn to_py<'py>(py: Python<'py>, v: &Value) -> PyResult<Bound<'py, PyAny>> {
    Ok(match v {
        Value::Null => py.None().into_bound(py),
        Value::Bool(b) => PyBool::new(py, *b).to_owned().into_any(),
        Value::Number(n) => match (n.as_i64(), n.as_f64()) {
            (Some(i), _) if n.is_i64() || n.is_u64() => i.into_pyobject(py)?.into_any(),
            (_, Some(f)) => f.into_pyobject(py)?.into_any(),
            _ => py.None().into_bound(py),
        },
        Value::String(s) => PyString::new(py, s).into_any(),
        Value::Array(a) => {
            let list = PyList::empty(py);
            for x in a {
                list.append(to_py(py, x)?)?;
            }
            list.into_any()
        }
        Value::Object(o) => {
            let d = PyDict::new(py);
            for (k, x) in o {
                d.set_item(k, to_py(py, x)?)?;
            }
            d.into_any()
        }
    })
}

/// A column as a numpy array: float64, int64, or object (text, `None` where null).
fn column_array<'py>(py: Python<'py>, np: &Bound<'py, PyModule>, c: &Column) -> PyResult<Bound<'py, PyAny>> {
    let from_bytes = |bytes: Vec<u8>, dtype: &str| -> PyResult<Bound<'py, PyAny>> {
        let b = PyBytes::new(py, &bytes);
        np.call_method1("frombuffer", (b, dtype))?.call_method0("copy")
    };
    match c {
        Column::Numbers(v) => from_bytes(v.iter().flat_map(|x| x.to_le_bytes()).collect(), "<f8"),
        Column::Integers(v) => from_bytes(v.iter().flat_map(|x| x.to_le_bytes()).collect(), "<i8"),
        Column::Texts(v) => {
            let list = PyList::new(py, v)?;
            np.call_method1("array", (list, "object"))
        }
    }
}

/// Columns as a dict of numpy arrays, keys in order.
fn columns_dict<'py>(py: Python<'py>, cols: &[(String, Column)]) -> PyResult<Bound<'py, PyDict>> {
    let np = py.import("numpy")?;
    let d = PyDict::new(py);
    for (k, c) in cols {
        d.set_item(k, column_array(py, &np, c)?)?;
    }
    Ok(d)
}

/// A parameter's value from Python: a number (written in Rust's shortest round-trip form) or
/// an expression string.
fn param_text(v: &Bound<'_, PyAny>) -> PyResult<String> {
    if let Ok(s) = v.extract::<String>() {
        return Ok(s);
    }
    match v.extract::<f64>() {
        Ok(x) => Ok(format!("{x}")),
        Err(_) => Err(PyTypeError::new_err(format!(
            "a value must be a number or an expression string, not {}",
            v.get_type().name()?
        ))),
    }
}

/// A dict of name -> number or expression, in the dict's order.
fn text_pairs(d: Option<&Bound<'_, PyDict>>) -> PyResult<Vec<(String, String)>> {
    let Some(d) = d else { return Ok(Vec::new()) };
    d.iter()
        .map(|(k, v)| Ok((k.extract::<String>()?, param_text(&v)?)))
        .collect()
}

/// The data set of `data` (a path), or the built-in one.
fn data_set(data: Option<PathBuf>, config: &Config) -> PyResult<DataSet> {
    match data {
        Some(p) => DataSet::load_with(&p, &config.limits).map_err(|e| raise(e.into())),
        None => Ok(DataSet::builtin()),
    }
}

/// The reheating history of `reheat`: `None`, `"instant"`, or a dict with `w` and one of
/// `temp` (GeV) and `efolds`, and optionally `g_star`.
fn reheating(reheat: Option<&Bound<'_, PyAny>>) -> PyResult<Option<efold::reheating::Reheating>> {
    let Some(r) = reheat.filter(|r| !r.is_none()) else {
        return Ok(None);
    };
    if let Ok(s) = r.extract::<String>() {
        if s == "instant" {
            return api::reheating(true, None, None, None, None).map(Some).map_err(raise);
        }
        return Err(PyValueError::new_err(format!(
            "reheat = {s:?}: give \"instant\" or a dict with `w` and `temp` or `efolds`"
        )));
    }
    let d = r.cast::<PyDict>()?;
    let known = ["instant", "w", "temp", "efolds", "g_star"];
    for k in d.keys() {
        let k: String = k.extract()?;
        if !known.contains(&k.as_str()) {
            return Err(PyValueError::new_err(format!(
                "reheat has no key `{k}`; the keys are {}",
                known.join(", ")
            )));
        }
    }
    let get = |k: &str| -> PyResult<Option<f64>> { d.get_item(k)?.map(|v| v.extract()).transpose() };
    let instant = d
        .get_item("instant")?
        .map(|v| v.is_truthy())
        .transpose()?
        .unwrap_or(false);
    api::reheating(instant, get("w")?, get("temp")?, get("efolds")?, get("g_star")?)
        .map(Some)
        .map_err(raise)
}

/// A compiled model: V and the kinetic function (or field-space metric) on one tape, with its
/// parameter values. Immutable: `with_params` returns a new model that shares nothing mutable.
#[pyclass(name = "Model", module = "efold", frozen)]
struct PyModel {
    inner: Model,
}

#[pymethods]
impl PyModel {
    /// A model from expression strings: `potential`, and `kinetic` (one field, named `field`,
    /// default `phi`) or `fields` with `metric` and `start` (several fields); `params` a dict of
    /// numbers or expression strings, in order; `range` two expressions or numbers.
    #[new]
    #[pyo3(signature = (potential, kinetic=None, params=None, field=None, fields=None, metric=None, start=None, velocity=None, range=None, efolds=None, name=None))]
    #[allow(clippy::too_many_arguments)]
    fn new(
        py: Python<'_>,
        potential: String,
        kinetic: Option<String>,
        params: Option<&Bound<'_, PyDict>>,
        field: Option<String>,
        fields: Option<Vec<String>>,
        metric: Option<&Bound<'_, PyDict>>,
        start: Option<&Bound<'_, PyDict>>,
        velocity: Option<&Bound<'_, PyDict>>,
        range: Option<(Bound<'_, PyAny>, Bound<'_, PyAny>)>,
        efolds: Option<Vec<f64>>,
        name: Option<String>,
    ) -> PyResult<PyModel> {
        let parts = ModelParts {
            name,
            potential,
            kinetic,
            field,
            fields: fields.unwrap_or_default(),
            metric: text_pairs(metric)?,
            start: text_pairs(start)?,
            velocity: text_pairs(velocity)?,
            params: text_pairs(params)?,
            range: range
                .map(|(lo, hi)| Ok::<_, PyErr>((param_text(&lo)?, param_text(&hi)?)))
                .transpose()?,
            efolds,
        };
        let model = py.detach(|| api::build_model(&parts, &Config::default()));
        Ok(PyModel {
            inner: model.map_err(raise)?,
        })
    }

    /// A model file (TOML), with `params` overriding its parameters as `--param` does.
    #[staticmethod]
    #[pyo3(signature = (path, params=None))]
    fn from_file(path: PathBuf, params: Option<&Bound<'_, PyDict>>) -> PyResult<PyModel> {
        let config = Config::default();
        let mut spec = ModelSpec::load_with(&path, &config.limits).map_err(|e| raise(e.into()))?;
        for (n, v) in text_pairs(params)? {
            spec.set_param(&n, &v);
        }
        let model = Model::build(&spec, &config).map_err(|e| raise(e.into()))?;
        Ok(PyModel { inner: model })
    }

    /// The same model with new parameter values, without compiling V again.
    #[pyo3(signature = (**values))]
    fn with_params(&self, values: Option<&Bound<'_, PyDict>>) -> PyResult<PyModel> {
        let mut pairs: Vec<(String, f64)> = Vec::new();
        if let Some(d) = values {
            for (k, v) in d.iter() {
                pairs.push((k.extract()?, v.extract()?));
            }
        }
        let refs: Vec<(&str, f64)> = pairs.iter().map(|(n, v)| (n.as_str(), *v)).collect();
        let mut model = self.inner.clone();
        model.rebind(&refs, &Config::default()).map_err(|e| raise(e.into()))?;
        Ok(PyModel { inner: model })
    }

    /// The model's name.
    #[getter]
    fn name(&self) -> String {
        self.inner.spec.name.clone()
    }

    /// The fields, in order.
    #[getter]
    fn fields(&self) -> Vec<String> {
        self.inner.field_names().to_vec()
    }

    /// The parameters' values, in order.
    #[getter]
    fn params<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let d = PyDict::new(py);
        for (n, v) in self.inner.param_pairs() {
            d.set_item(n, v)?;
        }
        Ok(d)
    }

    fn __repr__(&self) -> String {
        let params: Vec<String> = self.inner.param_pairs().map(|(n, v)| format!("{n}={v}")).collect();
        format!("efold.Model({:?}, {})", self.inner.spec.name, params.join(", "))
    }

    /// The predictions at each N_*: a list of dicts, one per N_*, with the keys and values of
    /// `efold predict --format json`'s `predictions`.
    #[pyo3(signature = (efolds=None, method="slow-roll", second_order=false, reheat=None, data=None))]
    fn predict<'py>(
        &self,
        py: Python<'py>,
        efolds: Option<Vec<f64>>,
        method: &str,
        second_order: bool,
        reheat: Option<&Bound<'py, PyAny>>,
        data: Option<PathBuf>,
    ) -> PyResult<Bound<'py, PyAny>> {
        let mut rep = self.report_value(py, efolds, method, second_order, reheat, data)?;
        let predictions = match &mut rep {
            Value::Object(o) => o.remove("predictions").unwrap_or(Value::Array(Vec::new())),
            _ => Value::Array(Vec::new()),
        };
        to_py(py, &predictions)
    }

    /// The whole report of `efold predict --format json` (the model, the branch, the data,
    /// the warnings and the predictions) as a dict.
    #[pyo3(signature = (efolds=None, method="slow-roll", second_order=false, reheat=None, data=None))]
    fn predict_report<'py>(
        &self,
        py: Python<'py>,
        efolds: Option<Vec<f64>>,
        method: &str,
        second_order: bool,
        reheat: Option<&Bound<'py, PyAny>>,
        data: Option<PathBuf>,
    ) -> PyResult<Bound<'py, PyAny>> {
        let rep = self.report_value(py, efolds, method, second_order, reheat, data)?;
        to_py(py, &rep)
    }

    /// `predict` as a pandas DataFrame, one row per N_* (pandas must be installed).
    #[pyo3(signature = (efolds=None, method="slow-roll", second_order=false, reheat=None, data=None))]
    fn predict_frame<'py>(
        &self,
        py: Python<'py>,
        efolds: Option<Vec<f64>>,
        method: &str,
        second_order: bool,
        reheat: Option<&Bound<'py, PyAny>>,
        data: Option<PathBuf>,
    ) -> PyResult<Bound<'py, PyAny>> {
        let rows = self.predict(py, efolds, method, second_order, reheat, data)?;
        py.import("pandas")?.getattr("DataFrame")?.call1((rows,))
    }

    /// `efold inspect --format json` as a dict.
    fn inspect<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let v = py
            .detach(|| api::inspect(&self.inner, &Config::default()))
            .map_err(raise)?;
        to_py(py, &v)
    }

    /// The exact spectra on the grid `k` (Mpc^-1, ascending), the pivot `efolds` e-folds before
    /// the end: the columns of `efold spectrum --format json`'s rows as numpy arrays (`k_mpc`,
    /// `p_zeta`, `p_t`, ...), beside its other keys.
    #[pyo3(signature = (k, efolds=55.0, data=None))]
    fn spectrum<'py>(
        &self,
        py: Python<'py>,
        k: Vec<f64>,
        efolds: f64,
        data: Option<PathBuf>,
    ) -> PyResult<Bound<'py, PyDict>> {
        let config = Config::default();
        let data = data_set(data, &config)?;
        let v = py
            .detach(|| api::spectrum(&self.inner, &k, efolds, &data, &config))
            .map_err(raise)?;
        let mut sp = match v {
            Value::Object(mut o) => {
                let model = o.remove("model").unwrap_or(Value::Null);
                let mut sp = match o.remove("spectrum") {
                    Some(Value::Object(sp)) => sp,
                    _ => serde_json::Map::new(),
                };
                sp.insert("model".to_string(), model);
                sp
            }
            _ => serde_json::Map::new(),
        };
        let rows: Vec<Vec<(String, Value)>> = match sp.remove("rows") {
            Some(Value::Array(rows)) => rows
                .into_iter()
                .map(|r| match r {
                    Value::Object(o) => o.into_iter().collect(),
                    _ => Vec::new(),
                })
                .collect(),
            _ => Vec::new(),
        };
        let cols = api::columns(rows.iter().map(Vec::as_slice));
        let out = columns_dict(py, &cols)?;
        for (key, value) in &sp {
            out.set_item(key, to_py(py, value)?)?;
        }
        Ok(out)
    }
}

impl PyModel {
    /// The report of `predict`, computed with the GIL released.
    fn report_value(
        &self,
        py: Python<'_>,
        efolds: Option<Vec<f64>>,
        method: &str,
        second_order: bool,
        reheat: Option<&Bound<'_, PyAny>>,
        data: Option<PathBuf>,
    ) -> PyResult<Value> {
        let config = Config::default();
        let req = PredictRequest {
            efolds,
            route: Route::from_name(method).map_err(raise)?,
            second_order,
            reheating: reheating(reheat)?,
            data: data.map(|d| data_set(Some(d), &config)).transpose()?,
        };
        py.detach(|| api::predict(&self.inner, &req, &config)).map_err(raise)
    }
}

/// The axes of `vary`: a dict of name -> `"LO:HI:COUNT[:log]"`, `(lo, hi, count)` or
/// `(lo, hi, count, "log")`, written as `--vary` writes them.
fn axes(vary: &Bound<'_, PyDict>) -> PyResult<Vec<String>> {
    vary.iter()
        .map(|(k, v)| {
            let name: String = k.extract()?;
            if let Ok(s) = v.extract::<String>() {
                return Ok(format!("{name}={s}"));
            }
            let items: Vec<Bound<'_, PyAny>> = v.extract().map_err(|_| {
                PyTypeError::new_err(format!(
                    "vary[{name:?}] must be \"LO:HI:COUNT[:log]\" or a tuple (lo, hi, count[, \"log\"])"
                ))
            })?;
            let mut cells = Vec::new();
            for (i, x) in items.iter().enumerate() {
                cells.push(match i {
                    2 => x.extract::<usize>()?.to_string(),
                    3 => x.extract::<String>()?,
                    _ => format!("{:e}", x.extract::<f64>()?),
                });
            }
            Ok(format!("{name}={}", cells.join(":")))
        })
        .collect()
}

/// Predictions over a grid of one or two parameters (or start coordinates `start.FIELD` of a
/// model of several fields) and N_*, in parallel with the GIL released: the columns of
/// `efold scan --format json`'s rows as numpy arrays (a failed point has NaN in its numbers
/// and its message in `error`), or a pandas DataFrame with `frame=True`.
#[pyfunction]
#[pyo3(signature = (model, vary, efolds=None, data=None, frame=false))]
fn scan<'py>(
    py: Python<'py>,
    model: &PyModel,
    vary: &Bound<'py, PyDict>,
    efolds: Option<Vec<f64>>,
    data: Option<PathBuf>,
    frame: bool,
) -> PyResult<Bound<'py, PyAny>> {
    let config = Config::default();
    let data = data_set(data, &config)?;
    let vary = axes(vary)?;
    let rows = py
        .detach(|| api::scan(&model.inner, &vary, efolds.as_deref(), &data, &config))
        .map_err(raise)?;
    let cols = api::columns(rows.iter().map(|r| r.0.as_slice()));
    let d = columns_dict(py, &cols)?;
    if frame {
        return py.import("pandas")?.getattr("DataFrame")?.call1((d,));
    }
    Ok(d.into_any())
}

/// An expression and its derivatives in the field at one point: `at` is a number (the field
/// `field`, default `phi`) or a dict `{name: value}` of one entry; `params` a dict of numbers.
/// The dict of `efold eval --format json`.
#[pyfunction(name = "eval")]
#[pyo3(signature = (expr, at, order=0, params=None, field=None))]
fn eval_expr<'py>(
    py: Python<'py>,
    expr: &str,
    at: &Bound<'py, PyAny>,
    order: usize,
    params: Option<&Bound<'py, PyDict>>,
    field: Option<String>,
) -> PyResult<Bound<'py, PyAny>> {
    let (field, x) = match at.cast::<PyDict>() {
        Ok(d) if d.len() == 1 => {
            let (k, v) = d.iter().next().expect("one entry");
            let name: String = k.extract()?;
            if let Some(f) = field.as_ref().filter(|f| **f != name) {
                return Err(PyValueError::new_err(format!(
                    "at names `{name}`, but the field is `{f}`"
                )));
            }
            (name, v.extract::<f64>()?)
        }
        Ok(_) => return Err(PyValueError::new_err("at must name one field: {\"phi\": 0.7}")),
        Err(_) => (field.unwrap_or_else(|| "phi".to_string()), at.extract::<f64>()?),
    };
    let mut values: Vec<(String, f64)> = Vec::new();
    if let Some(d) = params {
        for (k, v) in d.iter() {
            values.push((k.extract()?, v.extract()?));
        }
    }
    let e = api::eval(expr, &field, x, &values, order, &Config::default()).map_err(raise)?;
    to_py(py, &e.json())
}

/// The module.
#[pymodule]
#[pyo3(name = "efold")]
fn efold_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add("Error", py.get_type::<Error>())?;
    m.add("ExpressionError", py.get_type::<ExpressionError>())?;
    m.add("ModelError", py.get_type::<ModelError>())?;
    m.add("AnalysisError", py.get_type::<AnalysisError>())?;
    m.add("InputError", py.get_type::<InputError>())?;
    m.add_class::<PyModel>()?;
    m.add_function(wrap_pyfunction!(scan, m)?)?;
    m.add_function(wrap_pyfunction!(eval_expr, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
