//! The activation probe: latents run through a plan whose outputs are every value the graph
//! computes, so that a NaN or infinity made in the middle of the graph is seen even when a later
//! operator hides it. tract computes Relu, Max and Clip as `max`/`min`, which map NaN to a number
//! (`max(NaN, 0) = 0`), where PyTorch and the ONNX reference evaluator keep NaN (the ONNX
//! operator specification defines these operators element-wise, and IEEE 754 arithmetic on NaN
//! gives NaN). Looking only at the final output would call such a model finite.
//!
//! The same run gives, for each node, the largest magnitude it reaches for ordinary latents and
//! its headroom against the largest finite IEEE 754 binary16 value (65504): the figure that says
//! whether a model can compute in f16 ([`crate::GeneratorOptions::f16_compute`]) or be run in f16
//! by another engine.
//!
//! The probe runs the typed graph without tract's optimiser (nothing is fused away), so it is
//! slower per image than generation; it uses few latents.

use crate::error::{Error, Result};
use crate::latent::{Latents, SampleOptions};
use crate::model::{guard_run, Model};
use crate::plan::{input_values, probe_plan, ProbedValue};
use crate::signature::Batch;
use std::collections::HashMap;

/// The largest finite IEEE 754 binary16 value: (2 - 2^-10) x 2^15 = 65504 (IEEE 754-2008, 3.6).
pub const F16_MAX: f32 = 65504.0;

/// The latent sets the probe runs, in this order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum LatentScale {
    /// Drawn from the prior.
    Typical,
    /// Drawn with truncation 1.0 (components beyond 1 resampled).
    Truncated,
    /// Typical latents multiplied by 3 (3x their norm).
    Norm3x,
    /// Typical latents multiplied by 10.
    Norm10x,
}

impl LatentScale {
    /// Every scale, in the order the probe runs them.
    pub const ALL: [LatentScale; 4] =
        [LatentScale::Typical, LatentScale::Truncated, LatentScale::Norm3x, LatentScale::Norm10x];

    /// Whether latents of this scale are ones an application draws (not stress inputs).
    pub fn ordinary(self) -> bool {
        matches!(self, LatentScale::Typical | LatentScale::Truncated)
    }
}

impl std::fmt::Display for LatentScale {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            LatentScale::Typical => "typical latents",
            LatentScale::Truncated => "truncated latents (1.0)",
            LatentScale::Norm3x => "latents at 3x norm",
            LatentScale::Norm10x => "latents at 10x norm",
        })
    }
}

/// One node's largest activation.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NodeActivation {
    /// The ONNX node (its name, or its operator and first output when it has none).
    pub node: String,
    /// The ONNX operator (tract's operator name when the node is one tract added).
    pub op: String,
    /// Largest finite absolute value over the ordinary latents.
    pub max_abs: f32,
    /// `65504 / max_abs`: how many times larger the activation could grow before binary16
    /// overflows (below 1: it overflows already). Infinite for an all-zero node.
    pub f16_headroom: f64,
}

impl NodeActivation {
    /// The headroom in words: "12.5x under binary16's 65504" or "3.2x over binary16's 65504".
    pub fn headroom_words(&self) -> String {
        if self.f16_headroom >= 1.0 {
            format!("{:.1}x under binary16's largest finite value 65504", self.f16_headroom)
        } else {
            format!("{:.1}x over binary16's largest finite value 65504", 1.0 / self.f16_headroom)
        }
    }
}

/// Where a non-finite value first appears for one latent scale.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NonFinite {
    /// The latent scale.
    pub scale: LatentScale,
    /// The first node, in evaluation order, whose output holds NaN or infinity.
    pub node: String,
    /// Its operator.
    pub op: String,
    /// Non-finite values in that node's output.
    pub values: usize,
    /// Images whose final output holds NaN or infinity (0 when later ops hide it).
    pub images_at_output: usize,
}

/// What the probe saw.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ActivationReport {
    /// Seed of the typical latents (truncated ones use seed + 1).
    pub seed: u64,
    /// Latents per scale.
    pub latents_per_scale: usize,
    /// The scales run.
    pub scales: Vec<LatentScale>,
    /// Per scale that made one, where a NaN or infinity first appears.
    pub non_finite: Vec<NonFinite>,
    /// Every node with a floating-point output, in evaluation order, with its largest magnitude
    /// over the ordinary scales.
    pub nodes: Vec<NodeActivation>,
}

impl ActivationReport {
    /// The node with the least binary16 headroom, if any node computes floats.
    pub fn tightest(&self) -> Option<&NodeActivation> {
        self.nodes.iter().min_by(|a, b| a.f16_headroom.total_cmp(&b.f16_headroom))
    }

    /// The first non-finite finding for ordinary latents.
    pub fn non_finite_ordinary(&self) -> Option<&NonFinite> {
        self.non_finite.iter().find(|n| n.scale.ordinary())
    }

    /// Refuses a model some of whose activations, for ordinary latents, pass binary16's largest
    /// finite value: computing it in f16 would make infinities.
    ///
    /// # Errors
    /// [`Error::F16Overflow`] naming the first such node.
    pub fn require_f16_safe(&self) -> Result<()> {
        match self.nodes.iter().find(|n| n.max_abs > F16_MAX) {
            Some(n) => Err(Error::F16Overflow { node: n.node.clone(), op: n.op.clone(), max_abs: n.max_abs }),
            None => Ok(()),
        }
    }
}

/// How the probe runs.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct ProbeOptions {
    /// Seed of the typical latents. Default 1.
    pub seed: u64,
    /// Latents per scale. Default 16.
    pub count: usize,
    /// The scales to run. Default: all four.
    pub scales: Vec<LatentScale>,
}

impl Default for ProbeOptions {
    fn default() -> Self {
        ProbeOptions { seed: 1, count: 16, scales: LatentScale::ALL.to_vec() }
    }
}

impl ProbeOptions {
    /// The ordinary scales only (typical and truncated), for the f16 headroom.
    pub fn ordinary(seed: u64, count: usize) -> ProbeOptions {
        ProbeOptions { seed, count, scales: vec![LatentScale::Typical, LatentScale::Truncated] }
    }
}

/// The latents of one scale: typical ones from `seed`, truncated ones from `seed + 1`, scaled
/// ones are the typical ones times 3 or 10.
pub(crate) fn scale_latents(dim: usize, seed: u64, count: usize, scale: LatentScale) -> Result<Latents> {
    let typical = || Latents::sample(dim, &SampleOptions::new(seed, count));
    match scale {
        LatentScale::Typical => typical(),
        LatentScale::Truncated => {
            let mut o = SampleOptions::new(seed.wrapping_add(1), count);
            o.truncation = Some(1.0);
            Latents::sample(dim, &o)
        }
        LatentScale::Norm3x | LatentScale::Norm10x => {
            let k = if scale == LatentScale::Norm3x { 3.0 } else { 10.0 };
            Latents::new(dim, typical()?.as_slice().iter().map(|v| v * k).collect())
        }
    }
}

/// ONNX node names by tract node name: tract names the parts of an expanded operator
/// `NAME.suffix`, so the longest ONNX name that prefixes a tract name (at a dot) is its node.
fn onnx_names(model: &Model, values: &[ProbedValue]) -> Vec<(String, String)> {
    let mut by_name: HashMap<&str, &str> = HashMap::new();
    if let Some(g) = model.proto.graph.as_ref() {
        for n in &g.node {
            if !n.name.is_empty() {
                by_name.insert(n.name.as_str(), n.op_type.as_str());
            }
        }
    }
    values
        .iter()
        .map(|v| {
            let mut name = v.node.as_str();
            loop {
                if let Some(op) = by_name.get(name) {
                    return (name.to_string(), op.to_string());
                }
                match name.rfind('.') {
                    Some(i) => name = &name[..i],
                    None => return (v.node.clone(), v.op.clone()),
                }
            }
        })
        .collect()
}

/// Runs the probe.
///
/// # Errors
/// [`Error::Tract`] when tract cannot build or run the probe plan; latent errors for a bad count.
pub fn activations(model: &Model, options: &ProbeOptions) -> Result<ActivationReport> {
    if options.count == 0 || options.count > 4096 {
        return Err(Error::invalid("probe count", options.count.to_string(), "1 to 4096"));
    }
    let sig = model.signature();
    let batch = match sig.batch {
        Batch::Fixed(n) => n,
        Batch::Symbolic => options.count.min(8),
    };
    let (plan, values, image_pos) = probe_plan(model, batch)?;
    let names = onnx_names(model, &values);
    // Per ONNX node: its first position and largest magnitude.
    let mut order: Vec<String> = vec![];
    let mut peak: HashMap<String, (String, f32)> = HashMap::new();
    for (name, op) in &names {
        if !peak.contains_key(name) {
            order.push(name.clone());
            peak.insert(name.clone(), (op.clone(), 0.0));
        }
    }
    let labels = sig.cycle_labels(options.count);
    let mut non_finite = vec![];
    for &scale in &options.scales {
        let latents = scale_latents(sig.latent.dim, options.seed, options.count, scale)?;
        let mut first: Option<(usize, usize)> = None; // (value index, count)
        let mut images_at_output = 0usize;
        let mut start = 0;
        while start < options.count {
            let n = batch.min(options.count - start);
            // Pad a short last chunk with copies of its first latent (fixed-batch plans).
            let mut z = latents.as_slice()[start * sig.latent.dim..(start + n) * sig.latent.dim].to_vec();
            let mut l = labels.as_ref().map(|l| l[start..start + n].to_vec());
            for _ in n..batch {
                z.extend_from_slice(latents.row(start));
                if let Some(l) = l.as_mut() {
                    l.push(l[0]);
                }
            }
            let inputs = input_values(model, &z, l.as_deref(), batch)?;
            let plan = plan.clone();
            let outs = guard_run("run the activation probe", move || plan.run(inputs))?;
            for (ix, t) in outs.iter().enumerate() {
                let t = t.cast_to::<f32>().map_err(|e| Error::tract_run("read a probed value", e))?;
                let view = t.try_as_plain_ram().map_err(|e| Error::tract_run("read a probed value", e))?;
                let v = view.as_slice::<f32>().map_err(|e| Error::tract_run("read a probed value", e))?;
                // Only the first n images of a padded chunk count.
                let used = if batch > 0 && v.len() % batch == 0 { v.len() / batch * n } else { v.len() };
                let v = &v[..used];
                let bad = v.iter().filter(|x| !x.is_finite()).count();
                if bad > 0 && first.is_none_or(|(f, _)| ix < f) {
                    first = Some((ix, bad));
                } else if let Some((f, c)) = first.as_mut() {
                    if *f == ix {
                        *c += bad;
                    }
                }
                if ix == image_pos && bad > 0 {
                    let per = v.len() / n.max(1);
                    if per > 0 {
                        images_at_output +=
                            v.chunks(per).filter(|c| c.iter().any(|x| !x.is_finite())).count();
                    }
                }
                if scale.ordinary() {
                    let m = v.iter().filter(|x| x.is_finite()).fold(0f32, |m, x| m.max(x.abs()));
                    let entry = peak.get_mut(&names[ix].0).expect("every name has an entry");
                    entry.1 = entry.1.max(m);
                }
            }
            start += n;
        }
        if let Some((ix, count)) = first {
            non_finite.push(NonFinite {
                scale,
                node: names[ix].0.clone(),
                op: names[ix].1.clone(),
                values: count,
                images_at_output,
            });
        }
    }
    let nodes = order
        .into_iter()
        .map(|name| {
            let (op, max_abs) = peak.remove(&name).unwrap_or_default();
            let f16_headroom =
                if max_abs > 0.0 { f64::from(F16_MAX) / f64::from(max_abs) } else { f64::INFINITY };
            NodeActivation { node: name, op, max_abs, f16_headroom }
        })
        .collect();
    Ok(ActivationReport {
        seed: options.seed,
        latents_per_scale: options.count,
        scales: options.scales.clone(),
        non_finite,
        nodes,
    })
}
