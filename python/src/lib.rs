//! The `seedline` Python module: conversion between Python and the seedline library, nothing
//! else. Every number comes from the library functions the command line uses
//! (`seedline::replicates`, `theory::predict`, `observed`), so a run gives the values of
//! the command's files, bit for bit. Simulation runs with the GIL released.

use numpy::ndarray::Array2;
use numpy::{PyArray1, PyArray2};
use pyo3::exceptions::{PyIndexError, PyKeyboardInterrupt, PyRuntimeError, PyUserWarning, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyFloat, PyList, PyString};
use seedline::batch::BatchConfig;
use seedline::engine::{EngineChoice, EngineKind};
use seedline::replicates::{self, NodeTable, Replicates};
use seedline::scenario::{self as sc, RawScenario};
use std::ffi::CString;
use std::path::PathBuf;

pyo3::create_exception!(
    seedline,
    InputError,
    PyValueError,
    "Bad input: a scenario, data file or argument that breaks a rule. The message is the one \
     the seedline command prints (it exits with code 2 for these): it names the file, the key \
     or column (and line where known) and what is allowed."
);

/// An error's message with its causes, as the command prints it after `error: `.
fn message<E: std::error::Error + Send + Sync + 'static>(e: E) -> String {
    format!("{:#}", anyhow::Error::new(e))
}

/// Bad input, with the library's message.
fn input_error<E: std::error::Error + Send + Sync + 'static>(e: E) -> PyErr {
    InputError::new_err(message(e))
}

/// Bad input found here (arguments the command's flag parser refuses).
fn input_message(text: String) -> PyErr {
    InputError::new_err(text)
}

/// The engine names of `--engine`, mapped to the library's choice (the one place that knows).
fn engine_choice(name: &str) -> PyResult<EngineChoice> {
    name.parse::<EngineChoice>().map_err(input_error)
}

/// A JSON text as Python objects (dicts, lists, floats, None).
fn json_to_py<'py>(py: Python<'py>, text: &str) -> PyResult<Bound<'py, PyAny>> {
    py.import("json")?.call_method1("loads", (text,))
}

/// A Python value (dicts, lists, numbers, strings, numpy scalars) as JSON.
fn py_to_json(value: &Bound<'_, PyAny>, path: &str) -> PyResult<serde_json::Value> {
    use serde_json::Value;
    if value.is_none() {
        return Ok(Value::Null);
    }
    if let Ok(b) = value.cast::<pyo3::types::PyBool>() {
        return Ok(Value::Bool(b.is_true()));
    }
    if let Ok(d) = value.cast::<PyDict>() {
        let mut map = serde_json::Map::new();
        for (k, v) in d.iter() {
            let key: String = k.extract().map_err(|_| {
                input_message(format!(
                    "<dict>: key {} at `{path}` is not a string",
                    k.repr().map_or_else(|_| "?".into(), |r| r.to_string())
                ))
            })?;
            let child = if path.is_empty() { key.clone() } else { format!("{path}.{key}") };
            map.insert(key, py_to_json(&v, &child)?);
        }
        return Ok(Value::Object(map));
    }
    if let Ok(s) = value.cast::<PyString>() {
        return Ok(Value::String(s.to_str()?.to_string()));
    }
    if !value.is_instance_of::<PyFloat>() && value.hasattr("__index__")? {
        // Python and numpy integers.
        if let Ok(i) = value.extract::<i64>() {
            return Ok(Value::from(i));
        }
        if let Ok(u) = value.extract::<u64>() {
            return Ok(Value::from(u));
        }
    }
    if let Ok(x) = value.extract::<f64>() {
        // Non-finite numbers have no JSON form: spelt as YAML reads them, for the scenario's message.
        return Ok(match serde_json::Number::from_f64(x) {
            Some(n) => Value::Number(n),
            None if x.is_nan() => Value::String(".nan".into()),
            None if x > 0.0 => Value::String(".inf".into()),
            None => Value::String("-.inf".into()),
        });
    }
    if let Ok(items) = value.try_iter() {
        let mut out = Vec::new();
        for (j, item) in items.enumerate() {
            out.push(py_to_json(&item?, &format!("{path}[{j}]"))?);
        }
        return Ok(Value::Array(out));
    }
    Err(input_message(format!(
        "<dict>: `{path}` holds a {}, which a scenario cannot: use numbers, strings, lists and dicts",
        value.get_type().name()?
    )))
}

/// A validated scenario, with the file (or text) it came from.
///
/// Build it with `Scenario.from_yaml(path)`, `Scenario.from_str(text)`,
/// `Scenario.from_dict(d)` or `Scenario.demo()`; the keys are those of the scenario files
/// (docs/scenario-format.md). Every rule is checked at once: a broken scenario raises
/// `InputError` listing every problem with its key path and line.
#[pyclass(frozen, module = "seedline", name = "Scenario")]
struct Scenario {
    raw: RawScenario,
    origin: String,
    scenario: sc::Scenario,
}

impl Scenario {
    fn parse(text: &str, origin: &str) -> PyResult<Self> {
        let raw = sc::parse_raw(text, origin).map_err(input_error)?;
        let scenario = sc::Scenario::from_raw(raw.clone(), origin).map_err(input_error)?;
        Ok(Scenario { raw, origin: origin.to_string(), scenario })
    }

    /// The scenario with the run's overrides merged into the raw form and validated again, as
    /// the command does with `--replicates` and `--seed`.
    fn with_run(&self, replicates: Option<u64>, seed: Option<u64>) -> PyResult<sc::Scenario> {
        if replicates.is_none() && seed.is_none() {
            return Ok(self.scenario.clone());
        }
        let raw = RawScenario {
            replicates: replicates.or(self.raw.replicates),
            seed: seed.or(self.raw.seed),
            ..self.raw.clone()
        };
        sc::Scenario::from_raw(raw, &self.origin).map_err(input_error)
    }
}

#[pymethods]
impl Scenario {
    /// Reads a scenario file (YAML). A `str` holding a line break is taken as YAML text.
    #[staticmethod]
    fn from_yaml(source: &Bound<'_, PyAny>) -> PyResult<Self> {
        if let Ok(s) = source.cast::<PyString>() {
            let s = s.to_str()?;
            if s.contains('\n') {
                return Scenario::parse(s, "<string>");
            }
        }
        let path: PathBuf = source.extract()?;
        let (text, origin) = sc::read_file(&path).map_err(input_error)?;
        Scenario::parse(&text, &origin)
    }

    /// Parses YAML text; `origin` names it in messages.
    #[staticmethod]
    #[pyo3(signature = (text, origin = "<string>"))]
    fn from_str(text: &str, origin: &str) -> PyResult<Self> {
        Scenario::parse(text, origin)
    }

    /// Builds a scenario from a dict with the keys of a scenario file.
    #[staticmethod]
    fn from_dict(d: &Bound<'_, PyDict>) -> PyResult<Self> {
        let value = py_to_json(d.as_any(), "")?;
        let text = serde_json::to_string_pretty(&value).map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
        Scenario::parse(&text, "<dict>")
    }

    /// The demo scenario embedded in seedline (`seedline simulate` without a file).
    #[staticmethod]
    fn demo() -> PyResult<Self> {
        Scenario::parse(sc::DEMO_YAML, "<embedded demo>")
    }

    /// Free-text name.
    #[getter]
    fn name(&self) -> &str {
        self.scenario.name()
    }
    /// The file (or `<string>`, `<dict>`) the scenario came from.
    #[getter]
    fn origin(&self) -> &str {
        &self.origin
    }
    /// Master seed.
    #[getter]
    fn seed(&self) -> u64 {
        self.scenario.seed()
    }
    /// Number of replicates.
    #[getter]
    fn replicates(&self) -> u64 {
        self.scenario.replicates()
    }
    /// Independent loci per replicate.
    #[getter]
    fn loci(&self) -> u64 {
        self.scenario.loci()
    }
    /// Deme names, in file order (deme index = position).
    #[getter]
    fn demes(&self) -> Vec<String> {
        self.scenario.demes().iter().map(|d| d.name().to_string()).collect()
    }
    /// Names of the sampled sequences (`deme_index_tTIME`, `_seed` for a seed-bank sample), as
    /// the Newick leaves and VCF columns are named, in sample order (node index of the leaves).
    #[getter]
    fn sample_labels(&self) -> Vec<String> {
        self.scenario.samples().iter().map(|s| s.name()).collect()
    }
    /// Whether the scenario has a mutation model (statistics and SFS need one).
    #[getter]
    fn has_mutation(&self) -> bool {
        self.scenario.mutation().is_some()
    }
    /// The scenario as parsed, with defaults filled in, as a dict (as in `summary.json`).
    fn to_dict<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let text =
            serde_json::to_string(self.scenario.normalized()).map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
        json_to_py(py, &text)
    }
    fn __str__(&self) -> String {
        self.scenario.to_string()
    }
    fn __repr__(&self) -> String {
        format!("Scenario(name={:?}, origin={:?})", self.scenario.name(), self.origin)
    }
}

/// A scenario given as a `Scenario`, or as a path or YAML text for `Scenario.from_yaml`.
fn as_scenario(obj: &Bound<'_, PyAny>) -> PyResult<Py<Scenario>> {
    match obj.cast::<Scenario>() {
        Ok(s) => Ok(s.clone().unbind()),
        Err(_) => Py::new(obj.py(), Scenario::from_yaml(obj)?),
    }
}

/// The replicates of one run: what `seedline simulate` writes to `replicates.tsv`,
/// `sfs.tsv` and `trees.nwk`, as numpy arrays and strings.
#[pyclass(frozen, module = "seedline", name = "Run")]
struct Run {
    scenario: sc::Scenario,
    choice: EngineChoice,
    columns: Vec<String>,
    statistics: Py<PyDict>,
    sfs: Option<Py<PyArray2<i64>>>,
    trees: Vec<Vec<String>>,
    forests: u64,
    engine: String,
    engine_reason: String,
    notes: Vec<String>,
}

impl Run {
    fn index(&self, i: i64) -> PyResult<u64> {
        let n = self.scenario.replicates() as i64;
        let j = if i < 0 { i + n } else { i };
        if j < 0 || j >= n {
            return Err(PyIndexError::new_err(format!("replicate {i} is outside this run of {n} replicates")));
        }
        Ok(j as u64)
    }
}

#[pymethods]
impl Run {
    /// One float64 array per column of `replicates.tsv` (same names, same order), one value per
    /// replicate; NaN where the file has an empty cell (e.g. `tmrca` of a forest).
    #[getter]
    fn statistics(&self, py: Python<'_>) -> Py<PyDict> {
        self.statistics.clone_ref(py)
    }
    /// The unfolded SFS of each replicate summed over loci, int64, replicates × (n−1) (the
    /// columns `xi_1`..`xi_{n-1}` of `sfs.tsv`); None without a mutation model.
    #[getter]
    fn sfs(&self, py: Python<'_>) -> Option<Py<PyArray2<i64>>> {
        self.sfs.as_ref().map(|a| a.clone_ref(py))
    }
    /// Column names of `replicates.tsv`, in order.
    #[getter]
    fn columns(&self) -> Vec<String> {
        self.columns.clone()
    }
    /// Number of replicates.
    #[getter]
    fn replicates(&self) -> u64 {
        self.scenario.replicates()
    }
    /// Master seed.
    #[getter]
    fn seed(&self) -> u64 {
        self.scenario.seed()
    }
    /// The engine that ran: "exact" or "approx".
    #[getter]
    fn engine(&self) -> &str {
        &self.engine
    }
    /// Why that engine ran, in words (as `simulate` prints it).
    #[getter]
    fn engine_reason(&self) -> &str {
        &self.engine_reason
    }
    /// Replicates in which some locus ended as a forest (no common ancestor).
    #[getter]
    fn forests(&self) -> u64 {
        self.forests
    }
    /// Notes on the run (cost, forests), also given as warnings before it.
    #[getter]
    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
    /// The Newick trees of replicate `i`: the lines of `trees.nwk` for it, one per tree (per
    /// locus, per local tree with recombination, per root of a forest), each led by its
    /// `[replicate i ...]` comment. Branch lengths in generations; leaves named `deme_index_tTIME` as in `sample_labels`.
    fn trees(&self, i: i64) -> PyResult<Vec<String>> {
        Ok(self.trees[self.index(i)? as usize].clone())
    }
    /// The genealogy of replicate `i` as arrays over its nodes (the sampled sequences first:
    /// node k < n is sample k): `parent` (−1 for a root), `time` (generations ago), `deme`,
    /// `sample` (−1 for an ancestor), `length` and `jumps` of the edge to the parent. With
    /// several loci choose `locus`; with recombination choose the local `tree` along the
    /// locus (`left`, `right`: the sites it holds for, right exclusive; `trees`: how many).
    /// Drawn again from the replicate's own random stream: the genealogy of this run.
    #[pyo3(signature = (i, locus = 0, tree = 0))]
    fn genealogy<'py>(&self, py: Python<'py>, i: i64, locus: u64, tree: usize) -> PyResult<Bound<'py, PyDict>> {
        let rep = self.index(i)?;
        if locus >= self.scenario.loci() {
            return Err(PyIndexError::new_err(format!(
                "locus {locus} is outside the {} loci of the scenario (counted from 0)",
                self.scenario.loci()
            )));
        }
        let (scenario, choice) = (&self.scenario, self.choice);
        let trees =
            py.detach(|| replicates::genealogy(scenario, choice, rep, locus)).map_err(|e| simulation_error(py, e))?;
        let Some((left, right, g)) = trees.get(tree) else {
            return Err(PyIndexError::new_err(format!(
                "tree {tree} is outside the {} local trees of replicate {rep} locus {locus}",
                trees.len()
            )));
        };
        let t = NodeTable::of(g);
        let d = PyDict::new(py);
        let opt = |v: &[Option<u32>]| v.iter().map(|x| x.map_or(-1, i64::from)).collect::<Vec<i64>>();
        let int = |v: &[u64]| v.iter().map(|&x| x as i64).collect::<Vec<i64>>();
        d.set_item("parent", PyArray1::from_vec(py, opt(&t.parent)))?;
        d.set_item("time", PyArray1::from_vec(py, int(&t.time)))?;
        d.set_item("deme", PyArray1::from_vec(py, t.deme.iter().map(|&x| i64::from(x)).collect::<Vec<i64>>()))?;
        d.set_item("sample", PyArray1::from_vec(py, opt(&t.sample)))?;
        d.set_item("length", PyArray1::from_vec(py, int(&t.length)))?;
        d.set_item("jumps", PyArray1::from_vec(py, int(&t.jumps)))?;
        d.set_item("left", *left)?;
        d.set_item("right", *right)?;
        d.set_item("trees", trees.len())?;
        Ok(d)
    }
    fn __len__(&self) -> usize {
        self.scenario.replicates() as usize
    }
    fn __repr__(&self) -> String {
        format!(
            "Run(scenario={:?}, replicates={}, seed={}, engine={:?})",
            self.scenario.name(),
            self.scenario.replicates(),
            self.scenario.seed(),
            self.engine
        )
    }
}

/// A failed run as a Python exception: bad input as `InputError`, Ctrl-C as
/// `KeyboardInterrupt`, anything else as `RuntimeError`, each with the library's message.
fn simulation_error(py: Python<'_>, e: replicates::Error) -> PyErr {
    if let replicates::Error::Interrupted { .. } = e {
        // The signal handler's own exception, when Python raised one.
        return PyErr::take(py).unwrap_or_else(|| PyKeyboardInterrupt::new_err(e.to_string()));
    }
    if e.is_bad_input() { input_error(e) } else { PyRuntimeError::new_err(message(e)) }
}

/// Runs the replicates of `scenario` and returns them as a `Run`.
///
/// `replicates` and `seed` override the scenario's (as `--replicates`, `--seed`); `engine`
/// is "exact", "approx" or "auto" (as `--engine`); `threads` worker threads (0: one per core).
/// The same seed gives the values of `seedline simulate`, bit for bit, for any `threads`.
/// The GIL is released while the replicates run; Ctrl-C stops the run between chunks.
#[pyfunction]
#[pyo3(signature = (scenario, replicates = None, seed = None, engine = "auto", threads = 0))]
fn simulate(
    py: Python<'_>,
    scenario: &Bound<'_, PyAny>,
    replicates: Option<u64>,
    seed: Option<u64>,
    engine: &str,
    threads: usize,
) -> PyResult<Run> {
    let holder = as_scenario(scenario)?;
    let holder = holder.get();
    let scenario = holder.with_run(replicates, seed)?;
    let choice = engine_choice(engine)?;
    let decision = seedline::engine::resolve(choice, &scenario).map_err(input_error)?;
    let workers = if threads > 0 { threads } else { std::thread::available_parallelism().map_or(1, |n| n.get()) };
    let notes = seedline::cost::preflight(
        &scenario,
        &holder.origin,
        decision.kind == EngineKind::Exact,
        workers,
        seedline::cost::available_memory(),
    )
    .map_err(input_error)?;
    let category = py.get_type::<PyUserWarning>();
    for n in &notes {
        PyErr::warn(py, category.as_any(), &CString::new(n.as_str()).unwrap_or_default(), 1)?;
    }
    let config = BatchConfig { threads, ..BatchConfig::default() };
    let origin = holder.origin.as_str();
    let run: Result<Replicates, replicates::Error> = py.detach(|| {
        let interrupted = || Python::attach(|py| py.check_signals().is_err());
        replicates::simulate(&scenario, origin, choice, config, &|| {}, &interrupted)
    });
    let run = run.map_err(|e| simulation_error(py, e))?;
    let statistics = PyDict::new(py);
    for (name, values) in run.columns.iter().zip(&run.values) {
        let xs: Vec<f64> = values.iter().map(|v| v.unwrap_or(f64::NAN)).collect();
        statistics.set_item(name, PyArray1::from_vec(py, xs))?;
    }
    let sfs = match &run.sfs {
        Some(rows) => {
            let width = scenario.samples().len().saturating_sub(1);
            let flat: Vec<i64> = rows.iter().flatten().map(|&x| x as i64).collect();
            let a = Array2::from_shape_vec((rows.len(), width), flat)
                .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
            Some(PyArray2::from_owned_array(py, a).unbind())
        }
        None => None,
    };
    Ok(Run {
        choice,
        columns: run.columns,
        statistics: statistics.unbind(),
        sfs,
        trees: run.trees,
        forests: run.forests,
        engine: run.engine.kind.to_string(),
        engine_reason: run.engine.reason,
        notes,
        scenario,
    })
}

/// What published theory predicts for the scenario: the dict of `seedline predict --json`
/// (every value labelled exact, limit or approximate, with its source and condition).
#[pyfunction]
fn predict<'py>(py: Python<'py>, scenario: &Bound<'py, PyAny>) -> PyResult<Bound<'py, PyAny>> {
    let holder = as_scenario(scenario)?;
    let sc = &holder.get().scenario;
    let p = py.detach(|| seedline::theory::predict::predict(sc));
    let text = serde_json::to_string(&p.to_json()).map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    json_to_py(py, &text)
}

/// Summary statistics of observed data, as `seedline observe`: the dict of `observed.json`
/// (genome-wide `statistics`, `loci`, spectra, design, notes), plus `locus_arrays`: one numpy
/// array per column of `observed.tsv` (one entry per locus; `contig` a list of str).
///
/// `vcf`: VCF (plain, gzip, bgzip) or BCF of biallelic SNPs; `samples`: the sample map (TSV:
/// sample, deme, optional generations_ago, ploidy). `windows` (bases) or `regions` (BED) cut
/// the loci, `mask` (BED) gives the callable sites; missing calls are refused unless
/// `project=M` or `drop_missing=True`.
#[pyfunction]
#[pyo3(signature = (vcf, samples, windows = None, regions = None, mask = None, project = None, drop_missing = false))]
#[allow(clippy::too_many_arguments)]
fn observe<'py>(
    py: Python<'py>,
    vcf: PathBuf,
    samples: PathBuf,
    windows: Option<u64>,
    regions: Option<PathBuf>,
    mask: Option<PathBuf>,
    project: Option<u32>,
    drop_missing: bool,
) -> PyResult<Bound<'py, PyAny>> {
    use seedline::observed::{self, Missing};
    if windows.is_some() && regions.is_some() {
        return Err(input_message("windows and regions cannot be used together: give one way to cut the loci".into()));
    }
    let missing = match (project, drop_missing) {
        (Some(_), true) => {
            return Err(input_message(
                "project and drop_missing cannot be used together: give one treatment of missing calls".into(),
            ));
        }
        (Some(m), false) => Missing::Project(m),
        (None, true) => Missing::Drop,
        (None, false) => Missing::Refuse,
    };
    let obs = py
        .detach(|| {
            let options = observed::Options::from_files(missing, windows, regions.as_deref(), mask.as_deref())?;
            observed::observe_files_with(&vcf, &samples, &options)
        })
        .map_err(input_error)?;
    let text = serde_json::to_string(&obs).map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    let out = json_to_py(py, &text)?;
    let arrays = PyDict::new(py);
    let contigs: Vec<&str> = obs.loci.iter().map(|r| r.contig.as_str()).collect();
    arrays.set_item("contig", PyList::new(py, contigs)?)?;
    let int = |f: &dyn Fn(&observed::LocusRow) -> u64| -> Vec<i64> { obs.loci.iter().map(|r| f(r) as i64).collect() };
    let key = observed::LOCUS_KEY_COLUMNS;
    arrays.set_item(key[1], PyArray1::from_vec(py, int(&|r| r.start)))?;
    arrays.set_item(key[2], PyArray1::from_vec(py, int(&|r| r.end)))?;
    arrays.set_item(key[3], PyArray1::from_vec(py, int(&|r| r.callable_sites)))?;
    arrays.set_item(key[4], PyArray1::from_vec(py, int(&|r| r.used_sites)))?;
    let float = |f: &dyn Fn(&observed::LocusRow) -> Option<f64>| -> Vec<f64> {
        obs.loci.iter().map(|r| f(r).unwrap_or(f64::NAN)).collect()
    };
    for (j, name) in obs.locus_columns.iter().enumerate() {
        arrays.set_item(name, PyArray1::from_vec(py, float(&|r| r.values[j])))?;
    }
    let per_site = observed::PER_SITE_COLUMNS;
    arrays.set_item(per_site[0], PyArray1::from_vec(py, float(&|r| r.per_site.segregating_sites)))?;
    arrays.set_item(per_site[1], PyArray1::from_vec(py, float(&|r| r.per_site.pi)))?;
    arrays.set_item(per_site[2], PyArray1::from_vec(py, float(&|r| r.per_site.theta_w)))?;
    out.set_item("locus_arrays", arrays)?;
    Ok(out)
}

/// Exact genealogies, diversity and sampling design under dormancy (seed banks, spores,
/// resting eggs): the seedline library from Python. See docs/python.md.
#[pymodule]
#[pyo3(name = "seedline")]
fn seedline_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("InputError", m.py().get_type::<InputError>())?;
    m.add_class::<Scenario>()?;
    m.add_class::<Run>()?;
    m.add_function(wrap_pyfunction!(simulate, m)?)?;
    m.add_function(wrap_pyfunction!(predict, m)?)?;
    m.add_function(wrap_pyfunction!(observe, m)?)?;
    Ok(())
}
