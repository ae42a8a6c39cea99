//! Measuring what a generator costs on this machine: latency percentiles at batch 1, the
//! fastest micro-batch, throughput per thread count, heap use (through a meter the caller
//! supplies, since only the program owns its allocator), and a profile of time per node.
//!
//! Every binding's bench calls this module. Not built for wasm32, which has no clock.

use crate::generate::{Generator, GeneratorOptions};
use crate::latent::SampleOptions;
use crate::model::Model;
use crate::{Error, Result};
use std::collections::HashMap;
use std::time::Instant;
use tract_onnx::tract_core::plan::SimpleState;

/// What to measure.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct BenchOptions {
    /// Micro-batch sizes to time; the fastest per image is reported. Default 1, 2, 4, 8, 16.
    pub micro_batches: Vec<usize>,
    /// Worker thread counts for the throughput figures. Default 1 and every core.
    pub threads: Vec<usize>,
    /// Timed calls per latency figure. Default 40.
    pub iters: usize,
    /// Images per throughput run (three runs per thread count; the fastest counts). Default 512.
    pub count: usize,
    /// Compute in f16 (see [`GeneratorOptions::f16_compute`]).
    pub f16_compute: bool,
}

impl Default for BenchOptions {
    fn default() -> Self {
        let cores = std::thread::available_parallelism().map(|n| n.get()).unwrap_or(1);
        BenchOptions {
            micro_batches: vec![1, 2, 4, 8, 16],
            threads: if cores > 1 { vec![1, cores] } else { vec![1] },
            iters: 40,
            count: 512,
            f16_compute: false,
        }
    }
}

impl BenchOptions {
    /// Refuses empty lists and zero counts, naming the field.
    ///
    /// # Errors
    /// [`Error::InvalidOption`].
    pub fn validate(&self) -> Result<()> {
        if self.micro_batches.is_empty() || self.micro_batches.contains(&0) {
            return Err(Error::invalid(
                "micro-batch sizes",
                format!("{:?}", self.micro_batches),
                "a list of sizes of at least 1",
            ));
        }
        if self.threads.is_empty() || self.threads.contains(&0) {
            return Err(Error::invalid(
                "thread counts",
                format!("{:?}", self.threads),
                "a list of counts of at least 1",
            ));
        }
        if self.iters == 0 {
            return Err(Error::invalid("timed calls", 0, "at least 1"));
        }
        if self.count == 0 {
            return Err(Error::invalid("images per throughput run", 0, "at least 1"));
        }
        Ok(())
    }
}

/// The program's heap: current bytes, peak bytes since the last reset. A binding with a counting
/// allocator passes one; [`NoHeapMeter`] reports zeros.
pub trait HeapMeter {
    /// Bytes allocated now.
    fn current(&self) -> usize;
    /// The most bytes allocated at once since the last [`HeapMeter::reset_peak`].
    fn peak(&self) -> usize;
    /// Starts a new peak.
    fn reset_peak(&self);
}

/// A meter for programs that do not count their allocations.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoHeapMeter;

impl HeapMeter for NoHeapMeter {
    fn current(&self) -> usize {
        0
    }
    fn peak(&self) -> usize {
        0
    }
    fn reset_peak(&self) {}
}

/// What [`measure`] found for one model.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct Measurement {
    /// Building the batch-1 plan (optimisation included), milliseconds.
    pub prepare_ms: f64,
    /// Batch 1, one image: median milliseconds.
    pub batch1_p50_ms: f64,
    /// Batch 1, one image: 90th percentile milliseconds.
    pub batch1_p90_ms: f64,
    /// The micro-batch with the lowest median time per image.
    pub best_micro_batch: usize,
    /// Its median milliseconds per image.
    pub best_p50_ms_per_image: f64,
    /// Its 90th percentile milliseconds per image.
    pub best_p90_ms_per_image: f64,
    /// (threads, images per second) at the best micro-batch.
    pub throughput: Vec<(usize, f64)>,
    /// Peak heap bytes while preparing.
    pub peak_heap_prepare_bytes: usize,
    /// Heap bytes held by the prepared generator.
    pub steady_heap_bytes: usize,
    /// Peak heap bytes above the steady state while generating.
    pub peak_heap_generate_bytes: usize,
}

/// The `p` quantile (0 to 1) of `v` by the nearest rank; `v` is sorted in place. NaN for none.
pub fn percentile(v: &mut [f64], p: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[((v.len() - 1) as f64 * p.clamp(0.0, 1.0)).round() as usize]
}

/// Milliseconds per image of `runs` timed calls of `batch` images each, after one untimed call.
///
/// # Errors
/// As [`Generator::generate`].
pub fn time_per_image(generator: &Generator, batch: usize, runs: usize, seed: u64) -> Result<Vec<f64>> {
    let z = generator.sample_latents(&SampleOptions::new(seed, batch))?;
    let labels = generator.signature().cycle_labels(batch);
    generator.generate(&z, labels.as_deref())?;
    (0..runs)
        .map(|_| {
            let t = Instant::now();
            generator.generate(&z, labels.as_deref()).map(|_| t.elapsed().as_secs_f64() * 1e3 / batch as f64)
        })
        .collect()
}

/// Measures one model: batch-1 latency, the fastest micro-batch, throughput per thread count and
/// heap use. `progress` hears a line per step.
///
/// # Errors
/// [`Error::InvalidOption`] for bad options; as [`Generator::new`] and [`Generator::generate`].
pub fn measure(
    model: &Model,
    options: &BenchOptions,
    heap: &dyn HeapMeter,
    progress: &mut dyn FnMut(&str),
) -> Result<Measurement> {
    options.validate()?;
    let generator = |micro_batch: usize, threads: usize| {
        let o =
            GeneratorOptions { f16_compute: options.f16_compute, micro_batch, threads, ..Default::default() };
        Generator::new(model.clone(), o)
    };
    progress("prepare the batch-1 plan");
    heap.reset_peak();
    let before = heap.current();
    let t = Instant::now();
    let g1 = generator(1, 1)?;
    let prepare_ms = t.elapsed().as_secs_f64() * 1e3;
    let peak_heap_prepare_bytes = heap.peak().saturating_sub(before);
    let steady_heap_bytes = heap.current().saturating_sub(before);
    progress("batch 1 latency");
    time_per_image(&g1, 1, 4, 3)?;
    let mut times = time_per_image(&g1, 1, options.iters, 3)?;
    let (batch1_p50_ms, batch1_p90_ms) = (percentile(&mut times, 0.5), percentile(&mut times, 0.9));
    let mut best = (f64::INFINITY, f64::INFINITY, 1usize);
    let mut peak_heap_generate_bytes = 0usize;
    for &mb in &options.micro_batches {
        progress(&format!("micro-batch {mb}"));
        let g = generator(mb, 1)?;
        time_per_image(&g, mb, 1, 4)?;
        heap.reset_peak();
        let base = heap.current();
        let mut t = time_per_image(&g, mb, (options.iters / mb).max(5), 4)?;
        peak_heap_generate_bytes = peak_heap_generate_bytes.max(heap.peak().saturating_sub(base));
        let (p50, p90) = (percentile(&mut t, 0.5), percentile(&mut t, 0.9));
        if p50 < best.0 {
            best = (p50, p90, mb);
        }
    }
    let z = g1.sample_latents(&SampleOptions::new(5, options.count))?;
    let labels = model.signature().cycle_labels(options.count);
    let mut throughput = vec![];
    for &threads in &options.threads {
        progress(&format!("{} images with {threads} thread(s)", options.count));
        let g = generator(best.2, threads)?;
        let warm = best.2.min(options.count);
        g.generate(&z.slice(0..warm)?, labels.as_ref().map(|l| &l[..warm]))?;
        // Best of three: one run of a few milliseconds is at the mercy of the scheduler.
        let mut fastest = f64::INFINITY;
        for _ in 0..3 {
            let s = Instant::now();
            g.generate(&z, labels.as_deref())?;
            fastest = fastest.min(s.elapsed().as_secs_f64());
        }
        throughput.push((threads, options.count as f64 / fastest));
    }
    Ok(Measurement {
        prepare_ms,
        batch1_p50_ms,
        batch1_p90_ms,
        best_micro_batch: best.2,
        best_p50_ms_per_image: best.0,
        best_p90_ms_per_image: best.1,
        throughput,
        peak_heap_prepare_bytes,
        steady_heap_bytes,
        peak_heap_generate_bytes,
    })
}

/// Time spent in one kind of operator (tract's optimised operator names, e.g. `Conv`, `Deconv`,
/// `EinSum`, `Add`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct OperatorTime {
    /// The operator.
    pub op: String,
    /// Nodes of it in the optimised plan.
    pub nodes: usize,
    /// Milliseconds per run, summed over its nodes.
    pub ms: f64,
    /// Its share of the total (0 to 1).
    pub share: f64,
}

/// Time spent in one node of the optimised plan.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NodeTime {
    /// The node's name in the plan (tract keeps the ONNX node's name, with a suffix for what it
    /// split the node into).
    pub node: String,
    /// Its operator.
    pub op: String,
    /// Milliseconds per run.
    pub ms: f64,
    /// Its share of the total (0 to 1).
    pub share: f64,
}

/// Where the time goes in one generator: per operator type, and the costliest nodes.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct Profile {
    /// Images per run.
    pub batch: usize,
    /// Timed runs (after one untimed).
    pub runs: usize,
    /// Milliseconds per run, all nodes.
    pub total_ms: f64,
    /// Per operator type, costliest first.
    pub by_op: Vec<OperatorTime>,
    /// The ten costliest nodes, costliest first.
    pub costliest: Vec<NodeTime>,
}

impl Generator {
    /// Runs the plan for `batch` images `runs` times, timing every node (tract's evaluation
    /// hook, `SimpleState::run_plan_with_eval`), and adds the times up per operator type and per
    /// node. Times are per run; nodes that only hold inputs or constants take no time.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] for a batch or run count of 0; as [`Generator::generate`].
    pub fn profile(&self, batch: usize, runs: usize) -> Result<Profile> {
        if batch == 0 || runs == 0 {
            return Err(Error::invalid(
                "profile batch and runs",
                format!("{batch} and {runs}"),
                "at least 1 each",
            ));
        }
        let batch = self.signature_batch(batch);
        let z = self.sample_latents(&SampleOptions::new(crate::DEFAULT_SEED, batch))?;
        let labels = self.signature().cycle_labels(batch);
        let inputs = crate::plan::input_values(self.model(), z.as_slice(), labels.as_deref(), batch)?;
        let plan = self.plans_for(batch)?;
        let inputs = crate::plan::cast_inputs(&plan, inputs)?;
        let mut per_node: HashMap<usize, f64> = HashMap::new();
        for run in 0..=runs {
            let mut state = crate::guard::guard_run("start a profiling run", || SimpleState::new(&plan))?;
            let inputs = inputs.clone();
            crate::guard::guard_run("run the profiled plan", || {
                state.run_plan_with_eval(inputs, |ctx, op_state, node, input| {
                    let t = Instant::now();
                    let out = tract_onnx::tract_core::plan::eval(ctx, op_state, node, input);
                    if run > 0 {
                        *per_node.entry(node.id).or_default() += t.elapsed().as_secs_f64() * 1e3;
                    }
                    out
                })
            })?;
        }
        let model = plan.model();
        let total: f64 = per_node.values().sum::<f64>() / runs as f64;
        let share = |ms: f64| if total > 0.0 { ms / total } else { 0.0 };
        let mut nodes: Vec<NodeTime> = per_node
            .iter()
            .map(|(&id, &ms)| {
                let n = model.node(id);
                NodeTime {
                    node: n.name.clone(),
                    op: n.op().name().to_string(),
                    ms: ms / runs as f64,
                    share: 0.0,
                }
            })
            .collect();
        for n in &mut nodes {
            n.share = share(n.ms);
        }
        nodes.sort_by(|a, b| b.ms.total_cmp(&a.ms).then_with(|| a.node.cmp(&b.node)));
        let mut ops: HashMap<String, (usize, f64)> = HashMap::new();
        for n in &nodes {
            let e = ops.entry(n.op.clone()).or_default();
            e.0 += 1;
            e.1 += n.ms;
        }
        let mut by_op: Vec<OperatorTime> = ops
            .into_iter()
            .map(|(op, (count, ms))| OperatorTime { op, nodes: count, ms, share: share(ms) })
            .collect();
        by_op.sort_by(|a, b| b.ms.total_cmp(&a.ms).then_with(|| a.op.cmp(&b.op)));
        nodes.truncate(10);
        Ok(Profile { batch, runs, total_ms: total, by_op, costliest: nodes })
    }
}
