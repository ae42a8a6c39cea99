//! Any ONNX graph, not only a generator, through the path a model takes in genloom: the
//! load-time passes, the attribute rules, and tract (typed, optimised, run). Tests use it to
//! judge the passes and tract's operators against the ONNX reference evaluator, and the
//! operator conformance run feeds it the `onnx` package's node test cases. Not built for wasm32.

use crate::error::{Error, Result};
use crate::guard::{guard, guard_run};
use crate::npy::{NpyArray, NpyData};
use crate::passes::{self, PassOptions, PassResult};
use prost::Message;
use tract_onnx::pb;
use tract_onnx::prelude::*;

/// What [`run_graph`] returns: the outputs in graph order, and what the passes changed.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct GraphRun {
    /// One array per graph output.
    pub outputs: Vec<NpyArray>,
    /// The passes that changed something.
    pub passes: Vec<PassResult>,
}

fn tensor_of(a: &NpyArray) -> Result<Tensor> {
    let shape = &a.shape;
    let t = match &a.data {
        NpyData::F32(v) => Tensor::from_shape(shape, v),
        NpyData::F64(v) => Tensor::from_shape(shape, v),
        NpyData::I64(v) => Tensor::from_shape(shape, v),
        NpyData::I32(v) => Tensor::from_shape(shape, v),
        NpyData::U8(v) => Tensor::from_shape(shape, v),
    };
    t.map_err(|e| Error::tract("build an input tensor", e))
}

fn array_of(t: &Tensor) -> Result<NpyArray> {
    let shape = t.shape().to_vec();
    let read = |e| Error::tract_run("read an output", e);
    let view = t.try_as_plain_ram().map_err(read)?;
    let data = match t.datum_type() {
        DatumType::F32 => NpyData::F32(view.as_slice::<f32>().map_err(read)?.to_vec()),
        DatumType::F64 => NpyData::F64(view.as_slice::<f64>().map_err(read)?.to_vec()),
        DatumType::I64 => NpyData::I64(view.as_slice::<i64>().map_err(read)?.to_vec()),
        DatumType::I32 => NpyData::I32(view.as_slice::<i32>().map_err(read)?.to_vec()),
        DatumType::U8 => NpyData::U8(view.as_slice::<u8>().map_err(read)?.to_vec()),
        DatumType::Bool => {
            NpyData::U8(view.as_slice::<bool>().map_err(read)?.iter().map(|&b| u8::from(b)).collect())
        }
        DatumType::F16 => {
            let f = t.cast_to::<f32>().map_err(read)?;
            let v = f.try_as_plain_ram().map_err(read)?;
            NpyData::F32(v.as_slice::<f32>().map_err(read)?.to_vec())
        }
        other => {
            return Err(Error::Output {
                reason: format!("an output is {other:?}, which has no NPY form here"),
            })
        }
    };
    Ok(NpyArray { shape, data })
}

/// Runs an ONNX model on `inputs` (one per graph input that is not an initializer, in graph
/// order, their shapes and types fixing the input facts) after the load-time passes.
///
/// # Errors
/// [`Error::NotOnnx`] for bytes that do not decode; [`Error::Attribute`] and
/// [`Error::UnsupportedOperator`] before tract; [`Error::Tract`] when tract cannot type,
/// optimise or run the graph; [`Error::InvalidOption`] for the wrong number of inputs.
pub fn run_graph(model_bytes: &[u8], inputs: &[NpyArray], options: &PassOptions) -> Result<GraphRun> {
    let mut proto = pb::ModelProto::decode(model_bytes)
        .map_err(|e| Error::NotOnnx { what: "the graph".into(), reason: e.to_string() })?;
    let passes = passes::run(&mut proto, options)?;
    crate::model::check_before_tract(&proto)?;
    let framework = crate::onnx::framework();
    let mut model = guard("parse the graph", || framework.model_for_proto_model(&proto))?;
    let outlets = model.input_outlets().map_err(|e| Error::tract("list the inputs", e))?.to_vec();
    if outlets.len() != inputs.len() {
        return Err(Error::invalid(
            "inputs",
            inputs.len(),
            format!("{} arrays, one per graph input", outlets.len()),
        ));
    }
    let values: Vec<Tensor> = inputs.iter().map(tensor_of).collect::<Result<_>>()?;
    for (ix, t) in values.iter().enumerate() {
        let fact = InferenceFact::dt_shape(t.datum_type(), t.shape());
        model.set_input_fact(ix, fact).map_err(|e| Error::tract("set an input fact", e))?;
    }
    let plan = guard("type, optimise and plan the graph", || model.into_optimized()?.into_runnable())?;
    let outs = guard_run("run the graph", || plan.run(values.into_iter().map(|t| t.into()).collect()))?;
    let outputs = outs.iter().map(|v| array_of(v)).collect::<Result<_>>()?;
    Ok(GraphRun { outputs, passes })
}
