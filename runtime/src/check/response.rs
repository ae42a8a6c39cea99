//! `sensitivity`, `diversity` and `labels`: the model responds to its inputs and its samples
//! differ.

use super::{CheckId, Ctx, Flow, Recorder, Status};
use crate::error::Result;
use crate::latent::Latents;
use crate::probe::ActivationReport;

fn max_abs(a: &[f32], b: &[f32]) -> f32 {
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
}

pub(super) fn sensitivity(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let dim = c.sig.latent.dim;
    let bases = 4usize.min(c.o.samples);
    let base = c.typical.slice(0..bases)?;
    let base_lab = c.typical_labels.as_ref().map(|l| l[..bases].to_vec());
    let base_out = c.big.generate(&base, base_lab.as_deref())?;
    let mut nudged = Vec::with_capacity(bases * dim * dim);
    for d in 0..dim {
        for b in 0..bases {
            let mut row = base.row(b).to_vec();
            row[d] += 1.0;
            nudged.extend(row);
        }
    }
    let nudged = Latents::new(dim, nudged)?;
    let nl: Option<Vec<i64>> = base_lab.as_ref().map(|l| (0..dim * bases).map(|i| l[i % bases]).collect());
    let n_out = c.big.generate(&nudged, nl.as_deref())?;
    let per = c.sig.image.values_per_image();
    let effects: Vec<f64> = (0..dim)
        .map(|d| {
            (0..bases)
                .map(|b| {
                    let x = n_out.image(d * bases + b);
                    let y = base_out.image(b);
                    x.iter().zip(y).map(|(p, q)| f64::from((p - q).abs())).sum::<f64>() / per as f64
                })
                .sum::<f64>()
                / bases as f64
        })
        .collect();
    let mut sorted = effects.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
    let dead: Vec<usize> =
        (0..dim).filter(|&d| effects[d] <= c.o.dead_ratio * median || effects[d] == 0.0).collect();
    let distinct =
        (0..bases).all(|i| (i + 1..bases).all(|j| max_abs(base_out.image(i), base_out.image(j)) > 0.0));
    let status = if !distinct || !dead.is_empty() || median == 0.0 { Status::Fail } else { Status::Pass };
    let detail = if !distinct {
        "different latents gave identical images: the latent is ignored".to_string()
    } else if !dead.is_empty() {
        let list: Vec<String> = dead.iter().take(32).map(|d| d.to_string()).collect();
        format!(
            "{} of {dim} latent dimensions have no effect (dead): {}{}",
            dead.len(),
            list.join(", "),
            if dead.len() > 32 { ", ..." } else { "" }
        )
    } else {
        String::new()
    };
    r.add(
        CheckId::Sensitivity,
        status,
        format!(
            "mean change per value for a 1-sigma nudge: median {:.2e} of range width, weakest {:.2e} (dimension {})",
            median / c.width,
            sorted[0] / c.width,
            effects.iter().position(|&e| e == sorted[0]).unwrap_or(0)
        ),
        format!("every dimension above {:.0e} of the median", c.o.dead_ratio),
        detail,
    );

    Ok(Flow::Continue)
}

pub(super) fn diversity(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let per = c.sig.image.values_per_image();
    // diversity: RMS pair difference in range units, near-duplicates under one 8-bit level.
    let n = c.typical_out.count;
    let (mut sum, mut pairs, mut dups) = (0f64, 0usize, 0usize);
    for i in 0..n {
        for j in i + 1..n {
            let (a, b) = (c.typical_out.image(i), c.typical_out.image(j));
            let ms = a.iter().zip(b).map(|(p, q)| f64::from(p - q).powi(2)).sum::<f64>() / per as f64;
            let rms = ms.sqrt() / c.width;
            sum += rms;
            pairs += 1;
            if rms < 1.0 / 255.0 {
                dups += 1;
            }
        }
    }
    let mean_rms = sum / pairs.max(1) as f64;
    let dup_share = dups as f64 / pairs.max(1) as f64;
    let mean_img: Vec<f64> = (0..per)
        .map(|k| (0..n).map(|i| f64::from(c.typical_out.image(i)[k])).sum::<f64>() / n as f64)
        .collect();
    let spread = ((0..n)
        .map(|i| {
            c.typical_out
                .image(i)
                .iter()
                .zip(&mean_img)
                .map(|(v, m)| (f64::from(*v) - m).powi(2))
                .sum::<f64>()
        })
        .sum::<f64>()
        / (n * per) as f64)
        .sqrt()
        / c.width;
    let status = if mean_rms < c.o.min_diversity || dup_share > c.o.max_duplicates {
        Status::Fail
    } else {
        Status::Pass
    };
    r.add(
        CheckId::Diversity,
        status,
        format!(
            "{n} samples: mean pair RMS difference {mean_rms:.4} of the range (spread {spread:.4}); {:.1}% near-duplicate pairs",
            dup_share * 100.0
        ),
        format!(">= {} RMS; <= {:.0}% near-duplicates (< 1 level apart)", c.o.min_diversity, c.o.max_duplicates * 100.0),
        if status == Status::Fail { "samples are nearly alike: a collapsed generator" } else { "" },
    );

    Ok(Flow::Continue)
}

pub(super) fn labels(c: &Ctx<'_>, r: &mut Recorder, _: &mut Option<ActivationReport>) -> Result<Flow> {
    let Some(l) = &c.sig.label else {
        r.skip(CheckId::Labels, "the model is unconditional");
        return Ok(Flow::Continue);
    };
    // Four latents, each drawn once per class: the classes must differ by at least one 8-bit
    // level (RMS, in range units) on the same latents.
    let k = l.classes;
    let z = c.typical.slice(0..4.min(c.o.samples))?;
    let m = z.count();
    let mut outs = vec![];
    for class in 0..k {
        outs.push(c.big.generate(&z, Some(&vec![class as i64; m]))?);
    }
    let mut same_pairs = vec![];
    let mut closest = (f64::INFINITY, 0, 0);
    for a in 0..k {
        for b in a + 1..k {
            let ms =
                outs[a].data.iter().zip(&outs[b].data).map(|(p, q)| f64::from(p - q).powi(2)).sum::<f64>()
                    / outs[a].data.len().max(1) as f64;
            let rms = ms.sqrt() / c.width;
            if rms < closest.0 {
                closest = (rms, a, b);
            }
            if rms < 1.0 / 255.0 {
                same_pairs.push(format!("{a} and {b}"));
            }
        }
    }
    let status = if same_pairs.is_empty() { Status::Pass } else { Status::Fail };
    let measured = if k > 1 {
        format!(
            "{k} classes on {m} latents: closest pair {} and {} at RMS {:.4} of the range; {} indistinct pairs",
            closest.1,
            closest.2,
            closest.0,
            same_pairs.len()
        )
    } else {
        "1 class: nothing to compare".to_string()
    };
    r.add(
        CheckId::Labels,
        status,
        measured,
        "every pair of classes at least one 8-bit level apart (RMS)",
        if same_pairs.is_empty() {
            String::new()
        } else {
            format!("classes {} give the same images: the label is ignored", same_pairs.join(", "))
        },
    );
    Ok(Flow::Continue)
}
