//! `parity-framework` and `parity-export`: the export reproduces what it was made from.

use super::{CheckId, Ctx, Flow, Recorder, Status};
use crate::error::Result;
use crate::generate::Images;
use crate::probe::ActivationReport;

pub(super) fn framework(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let Some(reference) = &c.o.reference else {
        r.skip(
            CheckId::ParityFramework,
            "no framework outputs given (LATENTS.npy and OUTPUTS.npy saved from the training framework)",
        );
        return Ok(Flow::Continue);
    };
    let out = c.big.generate(&reference.latents, reference.labels.as_deref())?;
    if out.data.len() != reference.outputs.len() {
        r.add(
            CheckId::ParityFramework,
            Status::Fail,
            format!("{} values vs {} saved", out.data.len(), reference.outputs.len()),
            "same shape",
            format!(
                "the saved outputs hold {} values, the model gives {} for {} latents ({} per image): saved from another model, or another layout?",
                reference.outputs.len(),
                out.data.len(),
                out.count,
                out.values_per_image()
            ),
        );
        return Ok(Flow::Continue);
    }
    let t = c.o.reference_tolerance;
    let close = t.compare(&out.data, &reference.outputs, c.width);
    let saved = Images { data: reference.outputs.clone(), ..out.clone() };
    let f = crate::metrics::fidelity(&saved, &out)?;
    let status = if close.ok() { Status::Pass } else { Status::Fail };
    r.add(
        CheckId::ParityFramework,
        status,
        format!(
            "max abs {:.2e} ({:.1e} of the range width), worst {:.3} of the tolerance, PSNR {:.1} dB, {} over {} images",
            close.max_abs,
            close.max_abs / c.width,
            close.worst,
            f.psnr_db,
            ssim_words(f.ssim),
            out.count
        ),
        t.to_string(),
        if status == Status::Fail {
            format!("{} values past the tolerance: the export does not reproduce the training framework's outputs", close.outside)
        } else {
            String::new()
        },
    );
    Ok(Flow::Continue)
}

/// SSIM for the report: "n/a" for pictures smaller than its 11x11 window (the metric is NaN then).
fn ssim_words(ssim: f64) -> String {
    if ssim.is_nan() {
        "SSIM n/a (pictures smaller than its 11x11 window)".into()
    } else {
        format!("SSIM {ssim:.5}")
    }
}

pub(super) fn export(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let Some(source) = &c.o.against else {
        r.skip(CheckId::ParityExport, "no source model given to compare the export with");
        return Ok(Flow::Continue);
    };
    let threshold = format!("PSNR >= {} dB and SSIM >= {}", c.o.min_psnr, c.o.min_ssim);
    let differences = crate::convert::signature_differences(source.signature(), &c.sig);
    if !differences.is_empty() {
        r.add(
            CheckId::ParityExport,
            Status::Fail,
            "the signatures differ",
            threshold,
            format!("not an export of that source: {}", differences.join("; ")),
        );
        return Ok(Flow::Continue);
    }
    let f = crate::convert::compare(source, c.model, c.o.seed, c.o.samples)?;
    let status = if f.psnr_db >= c.o.min_psnr && (f.ssim.is_nan() || f.ssim >= c.o.min_ssim) {
        Status::Pass
    } else {
        Status::Fail
    };
    r.add(
        CheckId::ParityExport,
        status,
        format!(
            "PSNR {:.2} dB, SSIM {:.5}, max abs {:.2e} over {} images",
            f.psnr_db, f.ssim, f.max_abs, f.images
        ),
        threshold,
        if status == Status::Fail { "the export drifted from its source" } else { "" },
    );
    Ok(Flow::Continue)
}
