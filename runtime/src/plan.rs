//! Optimised tract plans: one symbolic-batch plan as a fallback, plus plans with the batch fixed,
//! built on first use and cached (a fixed batch-1 plan ran the demo generator about 3x faster
//! than the symbolic plan on our test machine).
//!
//! A plan is immutable and shared (`Arc`); every call spawns its own tract state, so one
//! [`Plans`] serves any number of threads at once.

use crate::error::{Error, Result};
use crate::model::{guard, BatchAxis, InputRole, Model};
use crate::signature::LabelKind;
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
            .map_err(|e| Error::tract_run(format!("read the type of input {i}"), e))?
            .datum_type;
        if v.datum_type() == want || !want.is_float() || !v.datum_type().is_float() {
            out.push(v);
        } else {
            let t =
                v.cast_to_dt(want).map_err(|e| Error::tract_run(format!("cast input {i} to {want:?}"), e))?;
            out.push(t.into_owned().into_tvalue());
        }
    }
    Ok(out)
}

/// `typed` with its batch symbol replaced by `batch` (unchanged when the batch is fixed).
pub(crate) fn with_batch(typed: &TypedModel, axis: &BatchAxis, batch: usize) -> Result<TypedModel> {
    match axis {
        BatchAxis::Symbolic(sym) => {
            let subs = HashMap::from([(sym.clone(), TDim::from(batch as i64))]);
            let typed = typed.clone();
            guard(format!("fix the batch at {batch}"), move || typed.set_symbols(&subs))
        }
        BatchAxis::Fixed(_) => Ok(typed.clone()),
    }
}

/// One value the probe plan exposes: the tract node that makes it and its operator.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct ProbedValue {
    /// tract's node name (the ONNX node name, or that name and a suffix for the parts of an
    /// operator that tract expands into several).
    pub node: String,
    /// tract's operator name.
    pub op: String,
}

/// A plan whose outputs are every floating-point value the graph computes (not its constants or
/// inputs), in evaluation order, at batch `batch`. Every value being an output, tract's
/// optimiser cannot fuse one away; it made the gate's probe about 30% faster than running the
/// typed graph as it is, with the same findings on every test model (2026-12-03). When the
/// optimiser fails, the typed graph runs unoptimised.
/// Returns the plan, what each output is, and the position of the model's image output among
/// them.
pub(crate) fn probe_plan(model: &Model, batch: usize) -> Result<(Runnable, Vec<ProbedValue>, usize)> {
    use tract_onnx::tract_core::ops::konst::Const;
    use tract_onnx::tract_core::ops::source::TypedSource;
    let mut typed = with_batch(&model.typed, &model.batch, batch)?;
    let image = typed.output_outlets().map_err(|e| Error::tract("list the outputs", e))?[model.output_index];
    let order = typed.eval_order().map_err(|e| Error::tract("order the graph's nodes", e))?;
    let mut outlets = vec![];
    let mut values = vec![];
    for id in order {
        let node = typed.node(id);
        if node.op_is::<Const>() || node.op_is::<TypedSource>() {
            continue;
        }
        for (slot, out) in node.outputs.iter().enumerate() {
            if out.fact.datum_type.is_float() {
                outlets.push(OutletId::new(id, slot));
                values.push(ProbedValue { node: node.name.clone(), op: node.op.name().to_string() });
            }
        }
    }
    let image_pos = match outlets.iter().position(|o| *o == image) {
        Some(p) => p,
        None => {
            // The image is a constant or an input passed through: expose it too.
            outlets.push(image);
            values.push(ProbedValue { node: typed.node(image.node).name.clone(), op: "output".into() });
            outlets.len() - 1
        }
    };
    typed.select_output_outlets(&outlets).map_err(|e| Error::tract("expose every intermediate value", e))?;
    let fallback = typed.clone();
    let plan = guard("build the probe plan", move || typed.into_optimized()?.into_runnable())
        .or_else(|_| guard("build the unoptimised probe plan", move || fallback.into_runnable()))?;
    Ok((plan, values, image_pos))
}

/// The plans of one model.
#[derive(Debug)]
pub(crate) struct Plans {
    typed: TypedModel,
    batch: BatchAxis,
    symbolic: OnceLock<Runnable>,
    cache: Mutex<HashMap<usize, Runnable>>,
    max_cached: usize,
}

impl Plans {
    pub(crate) fn new(typed: TypedModel, batch: BatchAxis, max_cached: usize) -> Plans {
        Plans { typed, batch, symbolic: OnceLock::new(), cache: Mutex::new(HashMap::new()), max_cached }
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
        let model = with_batch(&self.typed, &self.batch, batch)?;
        // tract can panic on shapes it did not expect while it optimises (a fuzz find: its
        // ConvTranspose padding arithmetic overflowed here): guarded like every tract call.
        guard(format!("optimise and build the batch-{batch} plan"), move || {
            model.into_optimized()?.into_runnable()
        })
    }

    /// The plan to run a batch of `batch` images: a cached fixed plan, a newly built one while the
    /// cache has room, or the symbolic plan.
    pub(crate) fn plan_for(&self, batch: usize) -> Result<Runnable> {
        if let Some(fixed) = self.batch.fixed() {
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
        if room || self.batch.fixed().is_some() {
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

/// The tract inputs for `batch` latents (row-major `z`) and their labels, in the model's input
/// order and shapes: `[B, Z]` or `[B, Z, 1, 1]` latents; int64 or int32 `[B]` indices or
/// float `[B, K]` one-hot rows. Labels must already be checked against the class count.
pub(crate) fn input_values(
    model: &Model,
    z: &[f32],
    labels: Option<&[i64]>,
    batch: usize,
) -> Result<TVec<TValue>> {
    let sig = model.signature();
    let dim = sig.latent.dim;
    let mut inputs: TVec<TValue> = tvec![];
    for role in &model.input_order {
        let t = match role {
            InputRole::Latent => {
                let shape: Vec<usize> = match sig.latent.layout {
                    crate::signature::LatentLayout::Flat => vec![batch, dim],
                    crate::signature::LatentLayout::Spatial => vec![batch, dim, 1, 1],
                };
                Tensor::from_shape(&shape, z).map_err(|e| Error::tract("build the latent tensor", e))?
            }
            InputRole::Label => {
                let l = sig
                    .label
                    .as_ref()
                    .ok_or_else(|| Error::Labels { reason: "internal: label role without label".into() })?;
                let ls = labels.ok_or_else(|| Error::Labels { reason: "internal: labels missing".into() })?;
                match l.kind {
                    LabelKind::Index if l.int32 => {
                        let v: Vec<i32> = ls.iter().map(|&c| c as i32).collect();
                        Tensor::from_shape(&[batch], &v)
                    }
                    LabelKind::Index => Tensor::from_shape(&[batch], ls),
                    LabelKind::OneHot => {
                        let mut v = vec![0f32; batch * l.classes];
                        for (i, &c) in ls.iter().enumerate() {
                            v[i * l.classes + c as usize] = 1.0;
                        }
                        Tensor::from_shape(&[batch, l.classes], &v)
                    }
                }
                .map_err(|e| Error::tract("build the label tensor", e))?
            }
        };
        inputs.push(t.into_tvalue());
    }
    Ok(inputs)
}
