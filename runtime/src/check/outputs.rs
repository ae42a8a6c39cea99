//! `finiteness` and `range`: what the values are, inside the graph and at its output.

use super::{CheckId, Ctx, Flow, Recorder, Status};
use crate::error::Result;
use crate::generate::Images;
use crate::probe::{ActivationReport, LatentScale, ProbeOptions};

fn non_finite_images(images: &Images) -> usize {
    (0..images.count).filter(|&i| images.image(i).iter().any(|v| !v.is_finite())).count()
}

pub(super) fn finiteness(c: &Ctx<'_>, r: &mut Recorder, act: &mut Option<ActivationReport>) -> Result<Flow> {
    // The probe's typical latents are the gate's typical ones (seed + 1), its truncated ones
    // seed + 2; 3x and 10x scale the typical ones.
    let po = ProbeOptions {
        seed: c.o.seed.wrapping_add(1),
        count: c.o.probe_count.min(c.o.samples),
        scales: LatentScale::ALL.to_vec(),
    };
    let report = crate::probe::activations(c.model, &po)?;
    let at_output = non_finite_images(&c.typical_out);
    let nodes = report.nodes.len();
    let headroom = match report.tightest() {
        Some(n) if n.max_abs > 0.0 => {
            format!(
                "; largest activation {:.3e} at `{}` ({}), {}",
                n.max_abs,
                n.node,
                n.op,
                n.headroom_words()
            )
        }
        _ => String::new(),
    };
    let measured = format!(
        "{} node outputs probed with {} latents at each of {} scales; {} of {} typical images non-finite{headroom}",
        nodes,
        po.count,
        po.scales.len(),
        at_output,
        c.typical_out.count,
    );
    let threshold =
        "no NaN or infinity in any node's output, for typical, truncated, 3x and 10x-norm latents";
    let status;
    let detail;
    if let Some(first) = report.non_finite.first() {
        status = Status::Fail;
        let shown = if first.images_at_output == 0 {
            "the final images look finite: a later operator hides it (tract's Relu, Max and Clip turn NaN into a number, where the ONNX specification keeps NaN)".to_string()
        } else {
            format!("{} of {} images are non-finite at the output", first.images_at_output, po.count)
        };
        let others: Vec<String> =
            report.non_finite.iter().skip(1).map(|n| format!("{} at `{}`", n.scale, n.node)).collect();
        detail = format!(
            "NaN or infinity first appears at node `{}` ({}) for {}: {} non-finite values there; {shown}{}",
            first.node,
            first.op,
            first.scale,
            first.values,
            if others.is_empty() { String::new() } else { format!("; also {}", others.join(", ")) }
        );
    } else if at_output > 0 {
        status = Status::Fail;
        detail =
            format!("{at_output} of the typical images hold NaN or infinity (beyond the probed latents)");
    } else {
        status = Status::Pass;
        detail = String::new();
    }
    r.add(CheckId::Finiteness, status, measured, threshold, detail);
    *act = Some(report);
    // The remaining measures need finite images.
    Ok(if status == Status::Fail { Flow::Stop } else { Flow::Continue })
}

pub(super) fn range(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let range = c.sig.image.range;
    let data = &c.typical_out.data;
    let tol = (c.o.range_tolerance * c.width) as f32;
    let outside = data.iter().filter(|&&v| v < range.lo - tol || v > range.hi + tol).count();
    let (lo_v, hi_v) =
        data.iter().fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    let saturated = data.iter().filter(|&&v| matches!(crate::pixels::to_byte(v, range), 0 | 255)).count()
        as f64
        / data.len().max(1) as f64;
    let status = if outside > 0 {
        Status::Fail
    } else if saturated > c.o.max_saturated {
        Status::Warn
    } else {
        Status::Pass
    };
    r.add(
        CheckId::Range,
        status,
        format!("values in [{lo_v:.4}, {hi_v:.4}]; {:.2}% saturated 8-bit values", saturated * 100.0),
        format!("inside {range} (+/- {tol:.1e}); saturated <= {:.0}% (warn)", c.o.max_saturated * 100.0),
        match status {
            Status::Fail => format!("{outside} values outside the declared range: is the range right?"),
            Status::Warn => "many pixels at black or white: a range declared too narrow, or a generator pushed to its limits".into(),
            _ => String::new(),
        },
    );
    Ok(Flow::Continue)
}
