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
