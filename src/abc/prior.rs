//! Hypothesis files: scenario YAML in which numeric values may be replaced by prior maps.
//!
//! A hypothesis is a scenario file (`docs/scenario-format.md`) in which any numeric value can
//! be written as a prior map instead of a number:
//!
//! ```text
//! alpha: { prior: uniform, low: 0.2, high: 1.5 }
//! mean:  { prior: log_uniform, low: 1, high: 100 }
//! ```
//!
//! The file is read generically (a `serde_json::Value`), every prior map is collected with
//! its key path (e.g. `demes[0].dormancy.alpha`), and for each simulation a value is drawn
//! for every prior, substituted, and the result is serialised back to YAML and validated by
//! [`Scenario::from_yaml_str`]. The scenario parser itself knows nothing of priors.
//!
//! **Whole numbers.** Keys that the scenario format requires to be whole (`count`, `max`,
//! `founded`, `sites`, `loci`, `generations_ago`, `from`, `to`, `horizon`, `seed`,
//! `replicates`) receive the drawn value rounded to the nearest integer (halves away from
//! zero). Rounding a uniform draw on [low, high] gives the two end integers half the weight
//! of the inner ones; the posterior is reported for the rounded value.
//!
//! **Checks at load time.** The file is validated with every prior at its lower bound and
//! again at its upper bound, so that a prior range the scenario cannot accept (a size prior
//! reaching 0, an `alpha` prior below 0) is refused before any simulation, naming the file
//! and the key path.

use super::Error;
use crate::scenario::Scenario;
use rand::{Rng, RngExt};
use serde_json::Value;

/// Keys whose values the scenario format requires to be whole numbers.
pub const INTEGER_KEYS: [&str; 11] =
    ["count", "max", "founded", "sites", "loci", "generations_ago", "from", "to", "horizon", "seed", "replicates"];

/// The family of a prior.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PriorKind {
    /// Uniform on [low, high]: density 1/(high - low).
    Uniform,
    /// Log-uniform on [low, high], 0 < low: log θ uniform on [log low, log high], density
    /// 1/(θ ln(high/low)).
    LogUniform,
}

/// One step of a key path.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum PathStep {
    /// A map key.
    Key(String),
    /// A list index.
    Index(usize),
}

/// A prior on one value of the scenario.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Prior {
    /// Key path as written in messages and outputs, e.g. `demes[0].dormancy.alpha`.
    pub path: String,
    /// Steps of the path.
    #[serde(skip)]
    pub steps: Vec<PathStep>,
    /// Family.
    pub kind: PriorKind,
    /// Lower bound.
    pub low: f64,
    /// Upper bound (> low).
    pub high: f64,
    /// Whether the drawn value is rounded to a whole number (see the module documentation).
    pub integer: bool,
}

impl Prior {
    /// Draws a value: `low + u (high - low)` (uniform) or `low (high/low)^u` (log-uniform),
    /// u uniform on [0, 1); rounded when [`Prior::integer`].
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        let u: f64 = rng.random();
        self.finish(self.at(u))
    }

    /// The value at quantile `u` of the prior (rounded when [`Prior::integer`]).
    pub fn quantile(&self, u: f64) -> f64 {
        self.finish(self.at(u.clamp(0.0, 1.0)))
    }

    /// The median of the prior: the midpoint (uniform) or the geometric mean (log-uniform).
    pub fn median(&self) -> f64 {
        self.quantile(0.5)
    }

    /// The value at quantile `u` of the prior, before rounding.
    fn at(&self, u: f64) -> f64 {
        match self.kind {
            PriorKind::Uniform => self.low + u * (self.high - self.low),
            PriorKind::LogUniform => self.low * (self.high / self.low).powf(u),
        }
    }

    fn finish(&self, x: f64) -> f64 {
        if self.integer { x.round() } else { x }
    }

    /// The open interval on which the regression transform works: the prior range; for a
    /// whole-number parameter widened by half a unit on each side (the value k stands for
    /// the draws rounded to it, so the ends low and high are finite on the logit scale). On
    /// the log scale for a log-uniform prior.
    fn transform_bounds(&self) -> (f64, f64) {
        let (lo, hi) = if self.integer {
            // On the log scale the widened low end must stay above 0.
            let below = match self.kind {
                PriorKind::LogUniform => 0.5f64.min(self.low / 2.0),
                PriorKind::Uniform => 0.5,
            };
            (self.low - below, self.high + 0.5)
        } else {
            (self.low, self.high)
        };
        match self.kind {
            PriorKind::Uniform => (lo, hi),
            PriorKind::LogUniform => (lo.ln(), hi.ln()),
        }
    }

    /// The scale on which the regression adjustment works: the logit of the position
    /// inside the prior's bounds, after a log for a log-uniform prior,
    ///
    /// ```text
    /// y = ln((t - a) / (b - t)),   t = x (uniform) or ln x (log-uniform), [a, b] the bounds
    /// ```
    /// (Hamilton, Stoneking & Excoffier 2005, PNAS 102:7476, with the local-linear
    /// adjustment of Beaumont, Zhang & Balding 2002, Genetics 162:2025). Every real y maps
    /// back inside the prior, so adjusted values cannot leave it. A value at a bound of a
    /// continuous prior (a draw of probability 2^-53) is moved 1e-12 of the range inside.
    pub fn to_regression_scale(&self, x: f64) -> f64 {
        let (a, b) = self.transform_bounds();
        let t = match self.kind {
            PriorKind::Uniform => x,
            PriorKind::LogUniform => x.ln(),
        };
        let eps = 1e-12 * (b - a);
        let t = t.clamp(a + eps, b - eps);
        ((t - a) / (b - t)).ln()
    }

    /// Inverse of [`Prior::to_regression_scale`], then clamped to [low, high] (this moves
    /// only rounding errors, or, for a whole-number parameter, values in the outer half
    /// units of the widened bounds).
    pub fn from_regression_scale(&self, y: f64) -> f64 {
        let (a, b) = self.transform_bounds();
        // Each branch divides by a number >= 1, so neither overflows nor cancels.
        let t = if y >= 0.0 { b - (b - a) / (1.0 + y.exp()) } else { a + (b - a) / (1.0 + (-y).exp()) };
        let x = match self.kind {
            PriorKind::Uniform => t,
            PriorKind::LogUniform => t.exp(),
        };
        if x.is_nan() { x } else { x.clamp(self.low, self.high) }
    }

    /// Prior density at x (0 outside [low, high]); used to draw the prior on figures.
    pub fn density(&self, x: f64) -> f64 {
        if !(self.low..=self.high).contains(&x) {
            return 0.0;
        }
        match self.kind {
            PriorKind::Uniform => 1.0 / (self.high - self.low),
            PriorKind::LogUniform => 1.0 / (x * (self.high / self.low).ln()),
        }
    }
}

/// A hypothesis: a scenario template with priors.
#[derive(Debug, Clone)]
pub struct Hypothesis {
    /// Short name (the file stem, made unique by the caller).
    pub name: String,
    /// File name, for messages and outputs.
    pub origin: String,
    /// The file as read, prior maps included (designs are applied to this).
    original: Value,
    /// The file with prior maps replaced by `null`, ready for substitution.
    template: Value,
    /// The priors, in file order.
    pub priors: Vec<Prior>,
    /// The validated scenario when there are no priors (drawn once, reused).
    fixed: Option<Scenario>,
    /// The scenario's seed (default 1), from which the caller derives its streams.
    pub seed: u64,
}

impl Hypothesis {
    /// The file's own `name:` (e.g. "no dormancy"), if it has one.
    pub fn title(&self) -> Option<&str> {
        self.original.get("name").and_then(Value::as_str)
    }

    /// Reads a hypothesis from YAML text; `origin` names the file in messages.
    pub fn from_yaml_str(text: &str, origin: &str, name: &str) -> Result<Self, Error> {
        let value: Value = serde_saphyr::from_str(text)
            .map_err(|e| Error::Yaml { file: origin.to_string(), message: crate::scenario::yaml_message(&e, text) })?;
        if value.as_object().is_none() {
            return Err(Error::Yaml {
                file: origin.to_string(),
                message: "the top level must be a map of scenario keys (name, demes, samples, mutation, ...)".into(),
            });
        }
        let h = Self::from_value(value, origin, name)?;
        if h.priors.is_empty() {
            // Validate the text itself, so that messages carry the file's own line numbers.
            let s = Scenario::from_yaml_str(text, origin)?;
            return Ok(Hypothesis { fixed: Some(s), ..h });
        }
        Ok(h)
    }

    /// Builds a hypothesis from an already parsed file, collecting and checking its priors.
    pub fn from_value(value: Value, origin: &str, name: &str) -> Result<Self, Error> {
        let mut priors = Vec::new();
        let mut template = value.clone();
        collect(&mut template, &mut Vec::new(), origin, &mut priors)?;
        let seed = match value.get("seed") {
            None | Some(Value::Null) => crate::scenario::DEFAULT_SEED,
            Some(v) => v.as_u64().ok_or_else(|| Error::Prior {
                file: origin.to_string(),
                path: "seed".into(),
                message: format!("{v} is not allowed: the seed is a whole number >= 0 and cannot have a prior"),
            })?,
        };
        let mut h = Hypothesis {
            name: name.to_string(),
            origin: origin.to_string(),
            original: value,
            template,
            priors,
            fixed: None,
            seed,
        };
        if h.priors.is_empty() {
            h.fixed = Some(h.scenario_with(&[])?);
        } else {
            // Both ends of every prior must give a valid scenario.
            for u in [0.0, 1.0] {
                let values: Vec<f64> = h.priors.iter().map(|p| p.finish(p.at(u))).collect();
                h.scenario_with(&values)?;
            }
        }
        Ok(h)
    }

    /// The file as read (prior maps included).
    pub fn original(&self) -> &Value {
        &self.original
    }

    /// The scenario with `values[j]` substituted for prior j (values in prior order).
    pub fn scenario_with(&self, values: &[f64]) -> Result<Scenario, Error> {
        if let (Some(s), true) = (&self.fixed, values.is_empty()) {
            return Ok(s.clone());
        }
        let mut v = self.template.clone();
        for (p, &x) in self.priors.iter().zip(values) {
            let number = if p.integer && (0.0..9e15).contains(&x) {
                Value::from(x as u64)
            } else {
                serde_json::Number::from_f64(x).map(Value::Number).unwrap_or(Value::Null)
            };
            *slot(&mut v, &p.steps) = number;
        }
        let yaml = serde_saphyr::to_string(&v)
            .map_err(|e| Error::Yaml { file: self.origin.clone(), message: format!("cannot re-serialise: {e}") })?;
        Scenario::from_yaml_str(&yaml, &self.origin).map_err(|source| Error::Draw {
            file: self.origin.clone(),
            values: self
                .priors
                .iter()
                .zip(values)
                .map(|(p, x)| format!("{} = {x}", p.path))
                .collect::<Vec<_>>()
                .join(", "),
            source,
        })
    }

    /// Draws one value per prior (in prior order) and builds the scenario.
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> Result<(Vec<f64>, Scenario), Error> {
        let values: Vec<f64> = self.priors.iter().map(|p| p.draw(rng)).collect();
        let s = self.scenario_with(&values)?;
        Ok((values, s))
    }

    /// A scenario of the hypothesis (priors at their lower bounds), to learn the column
    /// names, sample size and deme names, which priors do not change.
    pub fn example(&self) -> Result<Scenario, Error> {
        let values: Vec<f64> = self.priors.iter().map(|p| p.finish(p.low)).collect();
        self.scenario_with(&values)
    }

    /// The same hypothesis with another sampling design: `samples` replaced, and optionally
    /// `mutation.sites` and `loci`. Priors inside the replaced `samples` are dropped.
    pub fn with_design(&self, samples: &Value, sites: Option<u64>, loci: Option<u64>) -> Result<Self, Error> {
        let mut v = self.original.clone();
        let map = v.as_object_mut().expect("checked at load time");
        map.insert("samples".into(), samples.clone());
        if let Some(sites) = sites {
            match map.get_mut("mutation").and_then(Value::as_object_mut) {
                Some(m) => {
                    m.insert("sites".into(), Value::from(sites));
                }
                None => {
                    return Err(Error::Prior {
                        file: self.origin.clone(),
                        path: "mutation".into(),
                        message: "a design gives `sites`, but the hypothesis has no `mutation:` section".into(),
                    });
                }
            }
        }
        if let Some(loci) = loci {
            map.insert("loci".into(), Value::from(loci));
        }
        Self::from_value(v, &self.origin, &self.name)
    }
}

impl Hypothesis {
    /// The same hypothesis on the loci of observed data: `loci` becomes the list of their
    /// callable lengths (per-locus site counts) and `mutation.sites` is dropped; priors on
    /// either are dropped with them.
    pub fn with_layout(&self, lengths: &[u64]) -> Result<Self, Error> {
        let mut v = self.original.clone();
        let map = v.as_object_mut().expect("checked at load time");
        map.insert("loci".into(), Value::from(lengths.to_vec()));
        if let Some(m) = map.get_mut("mutation").and_then(Value::as_object_mut) {
            m.remove("sites");
        }
        Self::from_value(v, &self.origin, &self.name)
    }

    /// The same hypothesis with the sampling design of observed data: one sample group per
    /// (deme, generations ago) with its number of sequences.
    pub fn with_observed_design(&self, design: &[(String, u64, u32)]) -> Result<Self, Error> {
        let samples: Vec<Value> = design
            .iter()
            .filter(|(_, _, n)| *n > 0)
            .map(|(deme, t, n)| serde_json::json!({"deme": deme, "count": n, "generations_ago": t}))
            .collect();
        let mut v = self.original.clone();
        v.as_object_mut().expect("checked at load time").insert("samples".into(), Value::Array(samples));
        Self::from_value(v, &self.origin, &self.name)
    }
}

fn render(steps: &[PathStep]) -> String {
    let mut s = String::new();
    for st in steps {
        match st {
            PathStep::Key(k) if s.is_empty() => s.push_str(k),
            PathStep::Key(k) => {
                s.push('.');
                s.push_str(k);
            }
            PathStep::Index(i) => s.push_str(&format!("[{i}]")),
        }
    }
    s
}

fn slot<'a>(v: &'a mut Value, steps: &[PathStep]) -> &'a mut Value {
    let mut cur = v;
    for st in steps {
        cur = match st {
            PathStep::Key(k) => cur.get_mut(k.as_str()).expect("path collected from this value"),
            PathStep::Index(i) => cur.get_mut(*i).expect("path collected from this value"),
        };
    }
    cur
}

/// Whether a parsed file holds any prior map (a map with a `prior` key), i.e. is a
/// hypothesis rather than a plain scenario.
pub fn has_priors(v: &Value) -> bool {
    match v {
        Value::Object(map) => map.contains_key("prior") || map.values().any(has_priors),
        Value::Array(xs) => xs.iter().any(has_priors),
        _ => false,
    }
}

/// Walks the value, replacing every prior map by `null` and recording it.
fn collect(v: &mut Value, steps: &mut Vec<PathStep>, origin: &str, out: &mut Vec<Prior>) -> Result<(), Error> {
    match v {
        Value::Object(map) if map.contains_key("prior") => {
            let path = render(steps);
            let err = |message: String| Error::Prior { file: origin.to_string(), path: path.clone(), message };
            for k in map.keys() {
                if !["prior", "low", "high"].contains(&k.as_str()) {
                    return Err(err(format!("unknown key `{k}` in a prior map: allowed are prior, low, high")));
                }
            }
            let kind = match map.get("prior").and_then(Value::as_str) {
                Some("uniform") => PriorKind::Uniform,
                Some("log_uniform") => PriorKind::LogUniform,
                other => {
                    return Err(err(format!(
                        "prior {} is not known: allowed are uniform and log_uniform",
                        other.map_or_else(|| map["prior"].to_string(), |s| format!("`{s}`"))
                    )));
                }
            };
            let bound = |key: &str| -> Result<f64, Error> {
                match map.get(key).and_then(Value::as_f64) {
                    Some(x) if x.is_finite() => Ok(x),
                    _ => Err(err(format!("`{key}` must be a finite number"))),
                }
            };
            let (low, high) = (bound("low")?, bound("high")?);
            if low >= high {
                return Err(err(format!("low = {low} must be smaller than high = {high}")));
            }
            if kind == PriorKind::LogUniform && low <= 0.0 {
                return Err(err(format!("a log_uniform prior needs 0 < low, got low = {low}")));
            }
            let integer = matches!(steps.last(), Some(PathStep::Key(k)) if INTEGER_KEYS.contains(&k.as_str()));
            if integer && high.round() < low.round() + 1.0 {
                return Err(err(format!(
                    "`{}` takes whole numbers, and [{low}, {high}] rounds to a single value: widen the range or give a number",
                    path
                )));
            }
            out.push(Prior { path, steps: steps.clone(), kind, low, high, integer });
            *v = Value::Null;
            Ok(())
        }
        Value::Object(map) => {
            for (k, x) in map.iter_mut() {
                steps.push(PathStep::Key(k.clone()));
                collect(x, steps, origin, out)?;
                steps.pop();
            }
            Ok(())
        }
        Value::Array(xs) => {
            for (i, x) in xs.iter_mut().enumerate() {
                steps.push(PathStep::Index(i));
                collect(x, steps, origin, out)?;
                steps.pop();
            }
            Ok(())
        }
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    const H: &str = "demes:\n  - name: pond\n    size: { prior: uniform, low: 50, high: 150 }\n    dormancy: { law: geometric, mean: { prior: log_uniform, low: 1, high: 10 } }\nsamples:\n  - { deme: pond, count: 6 }\nmutation: { rate: 1.0e-3, sites: 100 }\n";

    #[test]
    fn priors_are_collected_with_paths_and_substituted() {
        let h = Hypothesis::from_yaml_str(H, "h.yaml", "h").unwrap();
        let paths: Vec<&str> = h.priors.iter().map(|p| p.path.as_str()).collect();
        assert_eq!(paths, ["demes[0].dormancy.mean", "demes[0].size"]);
        let s = h.scenario_with(&[4.0, 80.0]).unwrap();
        assert_eq!(s.demes()[0].size().at(0), 80);
        assert!((crate::dormancy::LookBack::mean(s.demes()[0].dormancy()).unwrap() - 4.0).abs() < 1e-12);
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(3);
        for _ in 0..50 {
            let (v, _) = h.draw(&mut rng).unwrap();
            assert!((1.0..=10.0).contains(&v[0]) && (50.0..=150.0).contains(&v[1]));
        }
    }

    #[test]
    fn whole_number_keys_are_rounded() {
        let t = H.replace("count: 6", "count: { prior: uniform, low: 3, high: 8 }");
        let h = Hypothesis::from_yaml_str(&t, "h.yaml", "h").unwrap();
        let p = h.priors.iter().find(|p| p.path == "samples[0].count").unwrap();
        assert!(p.integer);
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(1);
        let (v, s) = h.draw(&mut rng).unwrap();
        let j = h.priors.iter().position(|p| p.path == "samples[0].count").unwrap();
        assert_eq!(v[j].fract(), 0.0);
        assert_eq!(s.samples().len() as f64, v[j]);
    }

    #[test]
    fn bad_priors_name_file_and_path() {
        let cases = [
            ("low: 50, high: 150", "low: 150, high: 50", "smaller than high"),
            ("prior: uniform, low: 50", "prior: normal, low: 50", "allowed are uniform and log_uniform"),
            ("low: 50, high: 150", "low: 0, high: 150", "demes[0].size"),
            ("low: 1, high: 10", "low: 0, high: 10", "needs 0 < low"),
            ("low: 50, high: 150", "low: 50, high: 150, sd: 2", "unknown key `sd`"),
        ];
        for (from, to, needle) in cases {
            let t = H.replacen(from, to, 1);
            let e = Hypothesis::from_yaml_str(&t, "h.yaml", "h").unwrap_err().to_string();
            assert!(e.contains("h.yaml") && e.contains(needle), "{to}: {e}");
            assert!(e.contains("demes[0]"), "{e}");
        }
    }

    #[test]
    fn designs_replace_samples_sites_and_loci() {
        let h = Hypothesis::from_yaml_str(H, "h.yaml", "h").unwrap();
        let samples: Value =
            serde_json::json!([{"deme": "pond", "count": 3}, {"deme": "pond", "count": 2, "generations_ago": 10}]);
        let d = h.with_design(&samples, Some(500), Some(3)).unwrap();
        let s = d.example().unwrap();
        assert_eq!(s.samples().len(), 5);
        assert_eq!(s.loci(), 3);
        assert_eq!(s.mutation().unwrap().sites(), 500);
    }
}
