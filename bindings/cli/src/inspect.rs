//! `genloom inspect`: what a model is and what it expects.

use crate::common::{out, out_json, CliResult, ModelArgs};
use clap::Args;
use genloom::signature::{LabelKind, LatentLayout, RangeSource};
use genloom::Batch;

/// Arguments of `inspect`.
#[derive(Debug, Args)]
pub struct InspectArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Print a JSON report instead of text.
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct Report<'a> {
    model: String,
    load_ms: f64,
    signature: &'a genloom::Signature,
    info: &'a genloom::ModelInfo,
}

fn human_bytes(b: u64) -> String {
    if b >= 1 << 20 {
        format!("{:.2} MiB", b as f64 / f64::from(1 << 20))
    } else if b >= 1 << 10 {
        format!("{:.1} KiB", b as f64 / 1024.0)
    } else {
        format!("{b} B")
    }
}

fn grouped(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

pub fn run(args: &InspectArgs) -> CliResult {
    let (model, load_ms) = args.model.load()?;
    let sig = model.signature();
    let info = model.info();
    if args.json {
        return out_json(&Report { model: args.model.display_name(), load_ms, signature: sig, info });
    }
    let mut s = String::new();
    let mut line = |k: &str, v: String| s.push_str(&format!("  {k:<14} {v}\n"));
    let batch = match sig.batch {
        Batch::Symbolic => "any (symbolic)".to_string(),
        Batch::Fixed(n) => format!("fixed at {n} (genloom loops and pads to serve any count)"),
    };
    let latent_shape = match sig.latent.layout {
        LatentLayout::Flat => format!("[N, {}]", sig.latent.dim),
        LatentLayout::Spatial => format!("[N, {}, 1, 1]", sig.latent.dim),
    };
    line("latent", format!("`{}` float32 {latent_shape}", sig.latent.name));
    match &sig.label {
        None => line("label", "none (unconditional)".into()),
        Some(l) => line(
            "label",
            match l.kind {
                LabelKind::Index => format!(
                    "`{}` {} [N], {} classes (0..{})",
                    l.name,
                    if l.int32 { "int32" } else { "int64" },
                    l.classes,
                    l.classes - 1
                ),
                LabelKind::OneHot => {
                    format!("`{}` float32 one-hot [N, {}], {} classes", l.name, l.classes, l.classes)
                }
            },
        ),
    }
    let img = &sig.image;
    let kind = match img.channels {
        1 => "gray",
        3 => "RGB",
        _ => "RGBA",
    };
    line("image", format!("`{}` {} x {} {kind}, {} layout", img.name, img.width, img.height, img.layout));
    let source = match &img.range_source {
        RangeSource::Discovered(ops) => format!("from the graph: {ops}"),
        RangeSource::Declared => "declared".into(),
    };
    line("range", format!("{} ({source})", img.range));
    line("batch", batch);
    line(
        "parameters",
        format!("{} ({} of weights)", grouped(info.parameters), human_bytes(info.weight_bytes)),
    );
    line(
        "compute",
        match info.macs_per_sample {
            Some(m) => format!("{} multiply-accumulates per image", grouped(m)),
            None => "unknown (some shapes could not be inferred)".into(),
        },
    );
    line(
        "file",
        format!(
            "{} ({}), sha256 {}",
            human_bytes(info.file_bytes),
            if info.external_data.is_empty() {
                "single file".to_string()
            } else {
                format!("external data: {}", info.external_data.join(", "))
            },
            &info.sha256[..16]
        ),
    );
    line(
        "format",
        format!(
            "ONNX IR {}, opset {}, made by {}",
            info.ir_version,
            info.opset,
            if info.producer.is_empty() { "an unnamed producer" } else { &info.producer }
        ),
    );
    let ops: Vec<String> = info.ops.iter().map(|(k, v)| format!("{k} x{v}")).collect();
    line("ops", ops.join(", "));
    if !info.metadata.is_empty() {
        let md: Vec<String> = info.metadata.iter().map(|(k, v)| format!("{k}={v}")).collect();
        line("metadata", md.join("; "));
    }
    if info.passes.is_empty() {
        line("passes", "none applied (nothing to fold)".into());
    } else {
        line(
            "passes",
            format!(
                "{} nodes as stored, {} after the load-time passes:",
                info.nodes, info.nodes_after_passes
            ),
        );
        for p in &info.passes {
            line(
                "",
                format!(
                    "{} ({} -> {} nodes): {}",
                    p.pass,
                    p.nodes_before,
                    p.nodes_after,
                    p.changes.join("; ")
                ),
            );
        }
    }
    line("load", format!("{load_ms:.1} ms"));
    out(&format!("{}\n{s}", args.model.display_name()));
    Ok(())
}
