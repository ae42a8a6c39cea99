//! Optimised tract plans: one symbolic-batch plan as a fallback, plus plans with the batch fixed,
//! built on first use and cached (a fixed batch-1 plan ran the demo generator about 3x faster
//! than the symbolic plan on our test machine).
//!
//! A plan is immutable and shared (`Arc`); every call spawns its own tract state, so one
//! [`Plans`] serves any number of threads at once.

use crate::error::{Error, Result};
use crate::model::guard;
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock};
use tract_onnx::prelude::*;

/// A runnable tract plan.
pub(crate) type Runnable = Arc<TypedRunnableModel>;

/// Rewrites `typed` to compute in IEEE 754 binary16: every f32 constant, input and operator
/// becomes f16, except Conv, which gets Casts around it and runs in f32 (tract's f16 Conv falls
/// to a generic kernel, about 200x slower here). ConvTranspose runs in f16: keeping it in f32
/// too was 1.7x faster on the demo model but kept all its weights in f32, which is the memory
/// this mode exists to save.
/// The model's inputs and outputs become f16 too; [`cast_inputs`] and the output read
/// (`cast_to::<f32>`) bridge that. Constants cast here are folded by tract's optimiser.
pub(crate) fn f16_compute(typed: &TypedModel) -> Result<TypedModel> {
    use tract_onnx::tract_core::floats::FloatPrecisionTranslator;
    use tract_onnx::tract_core::ops::cnn::Conv;
    use tract_onnx::tract_core::transform::ModelTransform;
    let translator = FloatPrecisionTranslator::with_filter(DatumType::F32, DatumType::F16, |node| {
        node.op_as::<Conv>().is_none()
    });
    let model = typed.clone();
    guard("rewrite the graph for f16 compute", move || translator.transform_into(model))
}

/// Casts each input to the datum type the plan declares for it (f16 for an f16-compute plan);
/// inputs that already match, and non-float inputs, pass through.
pub(crate) fn cast_inputs(plan: &Runnable, inputs: TVec<TValue>) -> Result<TVec<TValue>> {
    let model = plan.model();
    let mut out: TVec<TValue> = tvec![];
    for (i, v) in inputs.into_iter().enumerate() {
        let want = model
            .input_fact(i)
            .map_err(|e| Error::tract(format!("read the type of input {i}"), e))?
            .datum_type;
        if v.datum_type() == want || !want.is_float() || !v.datum_type().is_float() {
            out.push(v);
        } else {
            let t = v.cast_to_dt(want).map_err(|e| Error::tract(format!("cast input {i} to {want:?}"), e))?;
            out.push(t.into_owned().into_tvalue());
        }
    }
    Ok(out)
}

/// The plans of one model.
#[derive(Debug)]
pub(crate) struct Plans {
    typed: TypedModel,
    batch_symbol: Option<Symbol>,
    fixed_batch: Option<usize>,
    symbolic: OnceLock<Runnable>,
    cache: Mutex<HashMap<usize, Runnable>>,
    max_cached: usize,
}

impl Plans {
    pub(crate) fn new(
        typed: TypedModel,
        batch_symbol: Option<Symbol>,
        fixed_batch: Option<usize>,
        max_cached: usize,
    ) -> Plans {
        Plans {
            typed,
            batch_symbol,
            fixed_batch,
            symbolic: OnceLock::new(),
            cache: Mutex::new(HashMap::new()),
            max_cached,
        }
    }

    /// Builds the plan for `batch` now (so the first generation does not pay for it).
    pub(crate) fn warm(&self, batch: usize) -> Result<()> {
        self.plan_for(batch).map(|_| ())
    }

    /// Number of fixed-batch plans built so far.
    pub(crate) fn cached(&self) -> Vec<usize> {
        let mut v: Vec<usize> = self.cache.lock().map(|c| c.keys().copied().collect()).unwrap_or_default();
        v.sort_unstable();
        v
    }

    fn build_fixed(&self, batch: usize) -> Result<Runnable> {
        let model = match &self.batch_symbol {
            Some(sym) => {
                let subs = HashMap::from([(sym.clone(), TDim::from(batch as i64))]);
                self.typed
                    .set_symbols(&subs)
                    .map_err(|e| Error::tract(format!("fix the batch at {batch}"), e))?
            }
            None => self.typed.clone(),
        };
        let optimised = model
            .into_optimized()
            .map_err(|e| Error::tract(format!("optimise the batch-{batch} plan"), e))?;
        optimised.into_runnable().map_err(|e| Error::tract(format!("build the batch-{batch} plan"), e))
    }

    /// The plan to run a batch of `batch` images: a cached fixed plan, a newly built one while the
    /// cache has room, or the symbolic plan.
    pub(crate) fn plan_for(&self, batch: usize) -> Result<Runnable> {
        if let Some(fixed) = self.fixed_batch {
            if fixed != batch {
                return Err(Error::Output {
                    reason: format!("internal: batch {batch} asked of a fixed batch-{fixed} model"),
                });
            }
        }
        if let Some(p) = self.cache.lock().ok().and_then(|c| c.get(&batch).cloned()) {
            return Ok(p);
        }
        let room = self.cache.lock().map(|c| c.len() < self.max_cached).unwrap_or(false);
        if room || self.batch_symbol.is_none() {
            let p = self.build_fixed(batch)?;
            if let Ok(mut c) = self.cache.lock() {
                return Ok(c.entry(batch).or_insert(p).clone());
            }
            return Ok(p);
        }
        self.symbolic_plan()
    }

    /// The symbolic-batch plan, built once.
    pub(crate) fn symbolic_plan(&self) -> Result<Runnable> {
        if let Some(p) = self.symbolic.get() {
            return Ok(p.clone());
        }
        let p = guard("optimise the symbolic-batch plan", || {
            self.typed.clone().into_optimized()?.into_runnable()
        })?;
        Ok(self.symbolic.get_or_init(|| p).clone())
    }
}
