//! `batch`, `batch-independence` and `determinism`: the same latents give the same images
//! whatever the batch and however often they run.

use super::{generator, CheckId, Ctx, Flow, Recorder, Status};
use crate::error::Result;
use crate::probe::ActivationReport;
use crate::signature::Batch;

/// The batch sizes tried: 1, 2, 7 and the largest, those up to the largest.
pub(super) fn sizes(max_batch: usize) -> Vec<usize> {
    let mut v: Vec<usize> = [1, 2, 7].into_iter().filter(|&b| b < max_batch).collect();
    v.push(max_batch);
    v
}

pub(super) fn batch(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let per = c.sig.image.values_per_image();
    let sizes = sizes(c.o.max_batch);
    for &b in &sizes[..sizes.len() - 1] {
        let g = generator(c.model, b)?;
        let part = c.batch_latents.slice(0..b)?;
        let out = g.generate(&part, c.batch_labels.as_ref().map(|l| &l[..b]))?;
        if out.data.len() != b * per {
            r.add(
                CheckId::Batch,
                Status::Fail,
                format!("batch {b} gave {} values, expected {}", out.data.len(), b * per),
                "one image per latent",
                "",
            );
            return Ok(Flow::Stop);
        }
    }
    let fixed = match c.sig.batch {
        Batch::Fixed(n) => format!("; the model's batch is fixed at {n} (genloom loops and pads)"),
        Batch::Symbolic => String::new(),
    };
    r.add(
        CheckId::Batch,
        Status::Pass,
        format!("ran at batch {sizes:?}{fixed}"),
        "batch 1, 2, 7 and the largest run",
        "",
    );
    Ok(Flow::Continue)
}

pub(super) fn independence(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let alone = generator(c.model, 1)?.generate(&c.batch_latents, c.batch_labels.as_deref())?;
    let t = c.o.batch_tolerance;
    let close = t.compare(&alone.data, &c.whole.data, c.width);
    let status = if close.ok() { Status::Pass } else { Status::Fail };
    r.add(
        CheckId::BatchIndependence,
        status,
        format!(
            "max abs {:.2e} ({:.1e} of the range width) between alone and in a batch of {}; worst {:.3} of the tolerance",
            close.max_abs,
            close.max_abs / c.width,
            c.o.max_batch,
            close.worst
        ),
        t.to_string(),
        if status == Status::Fail {
            format!(
                "{} values differ past the tolerance: an image depends on the others in its batch (batch statistics at inference: BatchNorm in training mode, or a reduction over the batch axis)",
                close.outside
            )
        } else {
            String::new()
        },
    );
    Ok(Flow::Continue)
}

pub(super) fn determinism(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let again = c.big.generate(&c.batch_latents, c.batch_labels.as_deref())?;
    let differ = c.whole.data.iter().zip(&again.data).filter(|(a, b)| a.to_bits() != b.to_bits()).count();
    let same = differ == 0;
    r.add(
        CheckId::Determinism,
        if same { Status::Pass } else { Status::Fail },
        if same {
            "identical bits on a second run".to_string()
        } else {
            let d = super::Tolerance { atol: 0.0, rtol: 0.0 }.compare(&again.data, &c.whole.data, c.width);
            format!("{differ} values differ between two runs, max abs {:.2e}", d.max_abs)
        },
        "identical",
        if same { "" } else { "the same latents gave different images" },
    );
    Ok(Flow::Continue)
}

#[cfg(test)]
mod tests {
    #[test]
    fn batch_sizes_stay_within_the_largest() {
        assert_eq!(super::sizes(16), vec![1, 2, 7, 16]);
        assert_eq!(super::sizes(7), vec![1, 2, 7]);
        assert_eq!(super::sizes(4), vec![1, 2, 4]);
        assert_eq!(super::sizes(2), vec![1, 2]);
    }
}
