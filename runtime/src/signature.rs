//! The generator's signature: which input is the latent, which (if any) the class label, and
//! what the image output looks like.
//!
//! Discovery needs no configuration for the common exports:
//! - the latent is the float input of shape `[N, Z]` or `[N, Z, 1, 1]`; with two float inputs,
//!   names decide (`z`, `latent`, `noise` for the latent; `label`, `class`, `kind`, `onehot`,
//!   `cond`, `y` for a one-hot label);
//! - a class label is an integer input `[N]` (its class count read from the `Gather` or `OneHot`
//!   that consumes it) or a float one-hot input `[N, K]`;
//! - the image is the float output of rank 4 (or 3 for gray `[N, H, W]`), with 1, 3 or 4
//!   channels, NCHW or NHWC, its shape as tract infers it (declared output shapes are ignored,
//!   since exporters write wrong ones);
//! - the value range comes from the last op before the output, looking through layout ops and
//!   scalar affine maps: `Tanh` gives [-1, 1], `Sigmoid` [0, 1], `Clip(a, b)` [a, b], and
//!   `Tanh * 127.5 + 127.5` gives [0, 255]. Otherwise the caller declares it.
//!
//! [`SignatureOverrides`] settles the rest.

use crate::error::{Error, Result};
use tract_onnx::pb;
use tract_onnx::prelude::{TDim, ToDim};
use tract_onnx::tract_core::internal::DimLike;

/// How the latent input is shaped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum LatentLayout {
    /// `[N, Z]`
    Flat,
    /// `[N, Z, 1, 1]` (a DCGAN generator fed directly into ConvTranspose)
    Spatial,
}

/// The latent input.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct LatentInput {
    /// Input name.
    pub name: String,
    /// Values per sample (Z).
    pub dim: usize,
    /// Shape kind.
    pub layout: LatentLayout,
}

/// How a class label is fed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum LabelKind {
    /// An integer class index per sample, `[N]`.
    Index,
    /// A float one-hot row per sample, `[N, K]`.
    OneHot,
}

/// The class-label input of a conditional generator.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct LabelInput {
    /// Input name.
    pub name: String,
    /// Index or one-hot.
    pub kind: LabelKind,
    /// Number of classes.
    pub classes: usize,
    /// Whether an index label is int32 (otherwise int64).
    #[serde(skip)]
    pub int32: bool,
}

/// Memory order of the image output.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "UPPERCASE")]
pub enum Layout {
    /// `[N, C, H, W]` (PyTorch's order)
    Nchw,
    /// `[N, H, W, C]`
    Nhwc,
}

impl std::fmt::Display for Layout {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Layout::Nchw => "NCHW",
            Layout::Nhwc => "NHWC",
        })
    }
}

impl std::str::FromStr for Layout {
    type Err = Error;
    fn from_str(s: &str) -> Result<Layout> {
        match s.to_ascii_lowercase().as_str() {
            "nchw" => Ok(Layout::Nchw),
            "nhwc" => Ok(Layout::Nhwc),
            _ => Err(Error::invalid("layout", format!("`{s}`"), "`nchw` or `nhwc`")),
        }
    }
}

/// The interval the model's output values are meant to span.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ValueRange {
    /// Value that maps to black (0).
    pub lo: f32,
    /// Value that maps to white (255).
    pub hi: f32,
}

impl ValueRange {
    /// [-1, 1], the range of Tanh.
    pub const TANH: ValueRange = ValueRange { lo: -1.0, hi: 1.0 };
    /// [0, 1], the range of Sigmoid.
    pub const SIGMOID: ValueRange = ValueRange { lo: 0.0, hi: 1.0 };
    /// [0, 255], 8-bit levels.
    pub const BYTE: ValueRange = ValueRange { lo: 0.0, hi: 255.0 };

    /// A range `[lo, hi]`.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] unless both are finite and `lo < hi`.
    pub fn new(lo: f32, hi: f32) -> Result<ValueRange> {
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(Error::invalid("range", format!("[{lo}, {hi}]"), "finite bounds with lo < hi"));
        }
        Ok(ValueRange { lo, hi })
    }
}

impl std::fmt::Display for ValueRange {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "[{}, {}]", self.lo, self.hi)
    }
}

impl std::str::FromStr for ValueRange {
    type Err = Error;
    fn from_str(s: &str) -> Result<ValueRange> {
        match s {
            "tanh" | "-1,1" => Ok(ValueRange::TANH),
            "sigmoid" | "0,1" => Ok(ValueRange::SIGMOID),
            "byte" | "0,255" => Ok(ValueRange::BYTE),
            _ => {
                let parts: Vec<&str> = s.split(',').collect();
                let parse = |p: &str| p.trim().parse::<f32>().ok();
                match parts.as_slice() {
                    [a, b] => match (parse(a), parse(b)) {
                        (Some(lo), Some(hi)) => ValueRange::new(lo, hi),
                        _ => Err(bad_range(s)),
                    },
                    _ => Err(bad_range(s)),
                }
            }
        }
    }
}

fn bad_range(s: &str) -> Error {
    Error::invalid("range", format!("`{s}`"), "`tanh`, `sigmoid`, `byte` or `LO,HI`")
}

/// Where the value range came from.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RangeSource {
    /// Read from the graph: the op (with any affine map after it) that bounds the output.
    Discovered(String),
    /// Declared by the caller.
    Declared,
}

/// The image output.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ImageOutput {
    /// Output name.
    pub name: String,
    /// 1 (gray), 3 (RGB) or 4 (RGBA).
    pub channels: usize,
    /// Height in pixels.
    pub height: usize,
    /// Width in pixels.
    pub width: usize,
    /// NCHW or NHWC.
    pub layout: Layout,
    /// The value range mapped to 0..=255.
    pub range: ValueRange,
    /// Where the range came from.
    pub range_source: RangeSource,
}

impl ImageOutput {
    /// Float values per image.
    pub fn values_per_image(&self) -> usize {
        self.channels * self.height * self.width
    }
}

/// Whether the batch dimension is free.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Batch {
    /// Any batch size (a symbolic dimension).
    Symbolic,
    /// The model runs only at this batch size; genloom loops (and pads) to serve any count.
    Fixed(usize),
}

/// A generator's inputs and output.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Signature {
    /// The latent input.
    pub latent: LatentInput,
    /// The class-label input, for conditional generators.
    pub label: Option<LabelInput>,
    /// The image output.
    pub image: ImageOutput,
    /// The batch dimension.
    pub batch: Batch,
}

impl Signature {
    /// Labels `0, 1, ..., classes - 1, 0, 1, ...` for `count` images of a conditional model
    /// (`None` for an unconditional one): how genloom fills the labels of a request that gives
    /// none, so that a batch shows every class.
    pub fn cycle_labels(&self, count: usize) -> Option<Vec<i64>> {
        self.label.as_ref().map(|l| (0..count).map(|i| (i % l.classes.max(1)) as i64).collect())
    }
}

/// Choices for models whose signature cannot be discovered unaided.
#[derive(Debug, Clone, Default, PartialEq)]
#[non_exhaustive]
pub struct SignatureOverrides {
    /// Name of the latent input.
    pub latent_input: Option<String>,
    /// Name of the label input.
    pub label_input: Option<String>,
    /// Number of classes of an index label.
    pub label_classes: Option<usize>,
    /// Name of the image output.
    pub image_output: Option<String>,
    /// Memory order of the image output.
    pub layout: Option<Layout>,
    /// Value range of the image output.
    pub range: Option<ValueRange>,
}

/// What input discovery found (before tract types the graph).
#[derive(Debug, Clone)]
pub(crate) struct FoundInputs {
    pub latent: LatentInput,
    pub label: Option<LabelInput>,
    pub batch: Batch,
    pub output: String,
}

#[derive(Debug, Clone)]
struct InputDesc {
    name: String,
    elem: i32,
    dims: Vec<Option<i64>>,
    has_shape: bool,
}

const FLOAT: i32 = 1;
const INT32: i32 = 6;
const INT64: i32 = 7;
const FLOAT16: i32 = 10;
const DOUBLE: i32 = 11;

fn describe(v: &pb::ValueInfoProto) -> InputDesc {
    use pb::tensor_shape_proto::dimension::Value;
    let mut desc = InputDesc { name: v.name.clone(), elem: 0, dims: vec![], has_shape: false };
    if let Some(pb::type_proto::Value::TensorType(t)) = v.r#type.as_ref().and_then(|t| t.value.as_ref()) {
        desc.elem = t.elem_type;
        if let Some(shape) = &t.shape {
            desc.has_shape = true;
            desc.dims = shape
                .dim
                .iter()
                .map(|d| match &d.value {
                    Some(Value::DimValue(v)) if *v > 0 => Some(*v),
                    _ => None,
                })
                .collect();
        }
    }
    desc
}

fn shape_text(d: &InputDesc) -> String {
    let dims: Vec<String> =
        d.dims.iter().map(|x| x.map(|v| v.to_string()).unwrap_or_else(|| "?".into())).collect();
    format!("[{}]", dims.join(", "))
}

fn is_float(elem: i32) -> bool {
    matches!(elem, FLOAT | FLOAT16 | DOUBLE)
}

fn latent_like(name: &str) -> bool {
    let n = name.to_ascii_lowercase();
    ["z", "latent", "latents", "noise", "input_z", "z_in", "code"].contains(&n.as_str())
        || n.contains("latent")
        || n.contains("noise")
}

fn label_like(name: &str) -> bool {
    let n = name.to_ascii_lowercase();
    [
        "y",
        "c",
        "label",
        "labels",
        "class",
        "classes",
        "kind",
        "kinds",
        "onehot",
        "one_hot",
        "cond",
        "condition",
    ]
    .contains(&n.as_str())
        || ["label", "class", "onehot", "one_hot", "cond"].iter().any(|k| n.contains(k))
}

fn all_names(inputs: &[InputDesc]) -> String {
    inputs
        .iter()
        .map(|i| format!("`{}` {} {}", i.name, crate::onnx::dtype_name(i.elem), shape_text(i)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Finds the latent, label and output names and the batch kind from the ONNX graph.
pub(crate) fn discover_inputs(graph: &pb::GraphProto, ov: &SignatureOverrides) -> Result<FoundInputs> {
    let init: std::collections::HashSet<&str> = graph.initializer.iter().map(|t| t.name.as_str()).collect();
    let inputs: Vec<InputDesc> =
        graph.input.iter().filter(|i| !init.contains(i.name.as_str())).map(describe).collect();
    if inputs.is_empty() {
        return Err(Error::Signature {
            reason: "the model has no inputs; a generator needs a latent input".into(),
        });
    }
    let by_name = |n: &str| inputs.iter().find(|i| i.name == n).cloned();
    let unknown = |what: &str, n: &str| Error::Signature {
        reason: format!("{what} `{n}` is not an input of the model; its inputs are {}", all_names(&inputs)),
    };

    // The latent.
    let latent_desc = if let Some(n) = &ov.latent_input {
        by_name(n).ok_or_else(|| unknown("the latent input", n))?
    } else {
        let floats: Vec<&InputDesc> = inputs
            .iter()
            .filter(|i| {
                is_float(i.elem)
                    && (i.dims.len() == 2 || i.dims.len() == 4)
                    && ov.label_input.as_deref() != Some(&i.name)
            })
            .collect();
        match floats.as_slice() {
            [one] => (*one).clone(),
            [] => {
                let hint = inputs
                    .iter()
                    .find(|i| i.dims.len() == 2 || i.dims.len() == 4)
                    .map(|i| {
                        format!(
                            "; input `{}` has the shape of a latent but is {}, expected float32",
                            i.name,
                            crate::onnx::dtype_name(i.elem)
                        )
                    })
                    .unwrap_or_default();
                return Err(Error::Signature {
                    reason: format!(
                        "no latent input found: expected a float32 input of shape [N, Z] or [N, Z, 1, 1], the inputs are {}{hint}",
                        all_names(&inputs)
                    ),
                });
            }
            many => {
                let named: Vec<&&InputDesc> =
                    many.iter().filter(|i| latent_like(&i.name) && !label_like(&i.name)).collect();
                if named.len() == 1 {
                    (**named[0]).clone()
                } else {
                    let not_label: Vec<&&InputDesc> = many.iter().filter(|i| !label_like(&i.name)).collect();
                    if not_label.len() == 1 {
                        (**not_label[0]).clone()
                    } else {
                        return Err(Error::Signature {
                            reason: format!(
                                "several float inputs could be the latent ({}); name it in the signature overrides (latent input; `--latent-input NAME` on the command line)",
                                many.iter().map(|i| format!("`{}`", i.name)).collect::<Vec<_>>().join(", ")
                            ),
                        });
                    }
                }
            }
        }
    };
    if !is_float(latent_desc.elem) {
        return Err(Error::Signature {
            reason: format!(
                "latent input `{}` is {}, expected float32",
                latent_desc.name,
                crate::onnx::dtype_name(latent_desc.elem)
            ),
        });
    }
    let (dim, layout) = match latent_desc.dims.as_slice() {
        [_, Some(z)] => (*z as usize, LatentLayout::Flat),
        [_, Some(z), Some(1), Some(1)] => (*z as usize, LatentLayout::Spatial),
        _ => {
            return Err(Error::Signature {
                reason: format!(
                    "latent input `{}` has shape {}, expected [N, Z] or [N, Z, 1, 1] with Z known",
                    latent_desc.name,
                    shape_text(&latent_desc)
                ),
            })
        }
    };
    let batch = match latent_desc.dims.first() {
        Some(Some(n)) => Batch::Fixed(*n as usize),
        _ => Batch::Symbolic,
    };

    // The label.
    let rest: Vec<&InputDesc> = inputs.iter().filter(|i| i.name != latent_desc.name).collect();
    let label_desc = if let Some(n) = &ov.label_input {
        Some(by_name(n).ok_or_else(|| unknown("the label input", n))?)
    } else {
        match rest.as_slice() {
            [] => None,
            [one] => Some((*one).clone()),
            many => {
                return Err(Error::Signature {
                    reason: format!(
                        "the model has inputs besides the latent `{}`: {}; a generator takes a latent and at most one label",
                        latent_desc.name,
                        many.iter().map(|i| format!("`{}`", i.name)).collect::<Vec<_>>().join(", ")
                    ),
                })
            }
        }
    };
    if let Some(extra) = rest.iter().find(|i| label_desc.as_ref().is_none_or(|l| l.name != i.name)) {
        return Err(Error::Signature {
            reason: format!(
                "input `{}` is neither the latent nor the label; the inputs are {}",
                extra.name,
                all_names(&inputs)
            ),
        });
    }
    let label = match label_desc {
        None => None,
        Some(d) => Some(label_input(graph, &d, ov)?),
    };

    // The output.
    let output = match &ov.image_output {
        Some(n) => {
            if !graph.output.iter().any(|o| &o.name == n) {
                return Err(Error::Signature {
                    reason: format!(
                        "the image output `{n}` is not an output of the model; its outputs are {}",
                        graph.output.iter().map(|o| format!("`{}`", o.name)).collect::<Vec<_>>().join(", ")
                    ),
                });
            }
            n.clone()
        }
        None => match graph.output.as_slice() {
            [one] => one.name.clone(),
            [] => return Err(Error::Signature { reason: "the model has no outputs".into() }),
            many => {
                let rank4: Vec<&pb::ValueInfoProto> = many
                    .iter()
                    .filter(|o| {
                        let d = describe(o);
                        is_float(d.elem) && d.dims.len() == 4
                    })
                    .collect();
                if rank4.len() == 1 {
                    rank4[0].name.clone()
                } else {
                    return Err(Error::Signature {
                        reason: format!(
                            "the model has several outputs ({}); name the image in the signature overrides (image output; `--image-output NAME` on the command line)",
                            many.iter().map(|o| format!("`{}`", o.name)).collect::<Vec<_>>().join(", ")
                        ),
                    });
                }
            }
        },
    };
    Ok(FoundInputs { latent: LatentInput { name: latent_desc.name, dim, layout }, label, batch, output })
}

fn label_input(graph: &pb::GraphProto, d: &InputDesc, ov: &SignatureOverrides) -> Result<LabelInput> {
    if matches!(d.elem, INT64 | INT32) {
        if d.dims.len() != 1 {
            return Err(Error::Signature {
                reason: format!(
                    "label input `{}` has shape {}, expected [N] of class indices",
                    d.name,
                    shape_text(d)
                ),
            });
        }
        let classes = match ov.label_classes {
            Some(k) => k,
            None => classes_from_graph(graph, &d.name).ok_or_else(|| Error::Signature {
                reason: format!(
                    "cannot tell how many classes label input `{}` has (no Gather or OneHot reads it directly); give the class count in the signature overrides (label classes; `--label-classes K` on the command line)",
                    d.name
                ),
            })?,
        };
        if classes == 0 {
            return Err(Error::Signature { reason: format!("label input `{}` has 0 classes", d.name) });
        }
        Ok(LabelInput { name: d.name.clone(), kind: LabelKind::Index, classes, int32: d.elem == INT32 })
    } else if is_float(d.elem) {
        match d.dims.as_slice() {
            [_, Some(k)] => Ok(LabelInput {
                name: d.name.clone(),
                kind: LabelKind::OneHot,
                classes: *k as usize,
                int32: false,
            }),
            _ => Err(Error::Signature {
                reason: format!(
                    "label input `{}` has shape {}, expected [N, K] one-hot rows",
                    d.name,
                    shape_text(d)
                ),
            }),
        }
    } else {
        Err(Error::Signature {
            reason: format!(
                "label input `{}` is {}, expected int64 class indices or float32 one-hot rows",
                d.name,
                crate::onnx::dtype_name(d.elem)
            ),
        })
    }
}

fn classes_from_graph(graph: &pb::GraphProto, label: &str) -> Option<usize> {
    let consts = crate::onnx::constants(graph);
    for n in &graph.node {
        match n.op_type.as_str() {
            "Gather" if n.input.get(1).map(String::as_str) == Some(label) => {
                let axis = n.attribute.iter().find(|a| a.name == "axis").map(|a| a.i).unwrap_or(0);
                let data = consts.get(n.input.first()?.as_str())?;
                let ax = if axis < 0 { data.dims.len() as i64 + axis } else { axis };
                return data.dims.get(ax as usize).map(|&d| d as usize);
            }
            "OneHot" if n.input.first().map(String::as_str) == Some(label) => {
                return consts
                    .get(n.input.get(1)?.as_str())
                    .and_then(|t| crate::onnx::scalar(t))
                    .map(|v| v as usize);
            }
            "Cast" | "Identity" if n.input.first().map(String::as_str) == Some(label) => {
                if let Some(k) = classes_from_graph(graph, n.output.first()?) {
                    return Some(k);
                }
            }
            _ => {}
        }
    }
    None
}

/// Completes the signature with the typed output shape and the value range.
pub(crate) fn finish(
    graph: &pb::GraphProto,
    found: &FoundInputs,
    shape: &[TDim],
    ov: &SignatureOverrides,
) -> Result<Signature> {
    let name = found.output.clone();
    let concrete: Vec<Option<usize>> = shape.iter().map(|d| d.to_usize().ok()).collect();
    let shown = format!("[{}]", shape.iter().map(|d| d.to_string()).collect::<Vec<_>>().join(", "));
    let bad = |why: &str| Error::Signature { reason: format!("output `{name}` has shape {shown}: {why}") };
    let batch_ok = match (found.batch, shape.first()) {
        (Batch::Fixed(n), Some(d)) => d.to_usize().ok() == Some(n),
        (Batch::Symbolic, Some(d)) => d.to_usize().is_err() || d == &1.to_dim(),
        _ => false,
    };
    if !batch_ok {
        return Err(bad("its first dimension should be the batch, the same as the latent's"));
    }
    let transpose_last = producer_chain_has_nhwc_transpose(graph, &name);
    let (channels, height, width, layout) = match concrete.as_slice() {
        [_, Some(h), Some(w)] => (1, *h, *w, Layout::Nchw),
        [_, Some(a), Some(b), Some(c)] => {
            let ch = |v: usize| matches!(v, 1 | 3 | 4);
            let layout = match ov.layout {
                Some(l) => l,
                None if ch(*a) && !ch(*c) => Layout::Nchw,
                None if ch(*c) && !ch(*a) => Layout::Nhwc,
                None if ch(*a) && ch(*c) => {
                    if transpose_last {
                        Layout::Nhwc
                    } else {
                        Layout::Nchw
                    }
                }
                None => return Err(bad("neither its second nor its last dimension is 1, 3 or 4 channels")),
            };
            match layout {
                Layout::Nchw => (*a, *b, *c, layout),
                Layout::Nhwc => (*c, *a, *b, layout),
            }
        }
        _ => return Err(bad("expected [N, C, H, W], [N, H, W, C] or [N, H, W] with known sizes")),
    };
    if !matches!(channels, 1 | 3 | 4) {
        return Err(bad(&format!("{channels} channels, expected 1 (gray), 3 (RGB) or 4 (RGBA)")));
    }
    if height == 0 || width == 0 {
        return Err(bad("an image needs a non-zero height and width"));
    }
    let (range, range_source) = match ov.range {
        Some(r) => (r, RangeSource::Declared),
        None => match discover_range(graph, &name) {
            Ok((r, why)) => (r, RangeSource::Discovered(why)),
            Err(last_op) => return Err(Error::RangeUnknown { output: name, last_op }),
        },
    };
    Ok(Signature {
        latent: found.latent.clone(),
        label: found.label.clone(),
        image: ImageOutput { name, channels, height, width, layout, range, range_source },
        batch: found.batch,
    })
}

const LAYOUT_OPS: &[&str] = &[
    "Transpose",
    "Reshape",
    "Identity",
    "Flatten",
    "Squeeze",
    "Unsqueeze",
    "DepthToSpace",
    "Dropout",
    "Cast",
];

fn producer_chain_has_nhwc_transpose(graph: &pb::GraphProto, output: &str) -> bool {
    let prod = crate::onnx::producers(graph);
    let mut cur = output;
    for _ in 0..16 {
        let Some(n) = prod.get(cur).map(|&i| &graph.node[i]) else { return false };
        if n.op_type == "Transpose" {
            let perm: Vec<i64> =
                n.attribute.iter().find(|a| a.name == "perm").map(|a| a.ints.clone()).unwrap_or_default();
            return perm == [0, 2, 3, 1];
        }
        if !LAYOUT_OPS.contains(&n.op_type.as_str())
            && !["Mul", "Add", "Sub", "Div"].contains(&n.op_type.as_str())
        {
            return false;
        }
        let Some(first) = n.input.first() else { return false };
        cur = first;
    }
    false
}

/// Walks back from the output through layout ops and scalar affine maps to a bounding op.
/// Returns the range and a description, or the name of the op that stopped the walk.
fn discover_range(graph: &pb::GraphProto, output: &str) -> std::result::Result<(ValueRange, String), String> {
    let prod = crate::onnx::producers(graph);
    let consts = crate::onnx::constants(graph);
    // y = scale * x + offset, accumulated from the output backwards.
    let mut scale = 1.0f64;
    let mut offset = 0.0f64;
    let mut steps: Vec<String> = vec![];
    let mut cur = output.to_string();
    for _ in 0..32 {
        let Some(n) = prod.get(cur.as_str()).map(|&i| &graph.node[i]) else {
            return Err("a graph input".into());
        };
        let op = n.op_type.as_str();
        let bound = match op {
            "Tanh" => Some((-1.0, 1.0)),
            "Sigmoid" | "HardSigmoid" => Some((0.0, 1.0)),
            "Clip" => {
                let get = |i: usize| {
                    n.input
                        .get(i)
                        .filter(|s| !s.is_empty())
                        .and_then(|s| consts.get(s.as_str()))
                        .and_then(|t| crate::onnx::scalar(t))
                };
                match (get(1), get(2)) {
                    (Some(lo), Some(hi)) if lo < hi => Some((lo, hi)),
                    _ => return Err("Clip without constant bounds".into()),
                }
            }
            _ => None,
        };
        if let Some((lo, hi)) = bound {
            let a = scale * lo + offset;
            let b = scale * hi + offset;
            let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
            steps.push(op.to_string());
            steps.reverse();
            let r = ValueRange::new(lo as f32, hi as f32)
                .map_err(|_| format!("{op} mapped to an empty range"))?;
            return Ok((r, steps.join(" -> ")));
        }
        if LAYOUT_OPS.contains(&op) {
            cur = n.input.first().cloned().unwrap_or_default();
            continue;
        }
        if matches!(op, "Mul" | "Add" | "Sub" | "Div") && n.input.len() == 2 {
            let c0 = consts.get(n.input[0].as_str()).and_then(|t| crate::onnx::scalar(t));
            let c1 = consts.get(n.input[1].as_str()).and_then(|t| crate::onnx::scalar(t));
            let (k, var, const_first) = match (c0, c1) {
                (None, Some(k)) => (k, &n.input[0], false),
                (Some(k), None) => (k, &n.input[1], true),
                _ => return Err(format!("{op} of two tensors")),
            };
            // y = f(x): fold it into the accumulated map y_out = scale * y + offset.
            match (op, const_first) {
                ("Mul", _) => scale *= k,
                ("Add", _) => offset += scale * k,
                ("Sub", false) => offset -= scale * k,
                ("Sub", true) => {
                    offset += scale * k;
                    scale = -scale;
                }
                ("Div", false) if k != 0.0 => scale /= k,
                _ => return Err(format!("{op} by a tensor")),
            }
            steps.push(format!("{op} {k}"));
            cur = var.clone();
            continue;
        }
        return Err(op.to_string());
    }
    Err("a chain longer than 32 ops".into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_parse() {
        assert_eq!("tanh".parse::<ValueRange>().unwrap(), ValueRange::TANH);
        assert_eq!("0,255".parse::<ValueRange>().unwrap(), ValueRange::BYTE);
        assert_eq!("-2,2".parse::<ValueRange>().unwrap(), ValueRange { lo: -2.0, hi: 2.0 });
        let e = "wide".parse::<ValueRange>().unwrap_err().to_string();
        assert!(e.contains("`tanh`, `sigmoid`, `byte` or `LO,HI`"), "{e}");
        assert!("2,1".parse::<ValueRange>().is_err());
    }

    #[test]
    fn half_decoding() {
        // IEEE 754 binary16: 0x3c00 = 1.0, 0xc000 = -2.0, 0x7bff = 65504 (largest finite).
        assert_eq!(crate::onnx::f16_to_f32(0x3c00), 1.0);
        assert_eq!(crate::onnx::f16_to_f32(0xc000), -2.0);
        assert_eq!(crate::onnx::f16_to_f32(0x7bff), 65504.0);
        assert_eq!(crate::onnx::f16_to_f32(0x0001), 2f32.powi(-24));
    }
}
