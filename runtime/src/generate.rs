//! Generation: latents (and labels) in, images out.
//!
//! A [`Generator`] is a loaded [`Model`] with its optimised plans. It is `Send + Sync`: share it
//! (`Arc<Generator>`) between threads and call [`Generator::generate`] from all of them at once;
//! each call runs its own tract state. A request is cut into micro-batches (bounded memory), which
//! may be fanned out over worker threads. Image `i` never depends on the other images of a request.

use crate::error::{Error, Result};
use crate::latent::{Latents, SampleOptions};
use crate::model::{check_limit, Model};
use crate::plan::Plans;
use crate::signature::{Batch, Layout, Signature, ValueRange};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;

/// How a [`Generator`] runs.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[non_exhaustive]
pub struct GeneratorOptions {
    /// Images per inference call. Default 8. Fixed-batch models always use their own batch.
    pub micro_batch: usize,
    /// Worker threads for one request; 1 runs on the calling thread. Default 1.
    pub threads: usize,
    /// Most fixed-batch plans kept (one per micro-batch size seen); beyond it the symbolic plan
    /// serves. Default 4.
    pub max_cached_plans: usize,
    /// Build the plan for `micro_batch` (and for 1) when the generator is created. Default true.
    pub warm_up: bool,
    /// Measure micro-batches 1, 2, 4, 8 and 16 when the generator is created and keep the
    /// fastest per image (replacing `micro_batch`). Costs about 0.1 s for the demo model.
    /// Default false, so that building a generator stays cheap and predictable; the `genloom`
    /// command turns it on unless `--micro-batch N` is given. Ignored on wasm32 (no clock).
    pub tune: bool,
    /// Compute in IEEE 754 binary16 instead of f32 (opt-in). Convolutions stay in f32, because
    /// tract's f16 Conv kernel is about 200x slower on x86-64; everything else (ConvTranspose,
    /// matrix products, activations, normalisation) runs in f16. Saves resident memory, costs
    /// speed on CPUs without native f16 arithmetic, and changes the pictures slightly (measure
    /// with `genloom check --against`). Building the generator first runs the activation probe
    /// ([`crate::probe`]) on 8 typical and 8 truncated latents and refuses, with
    /// [`Error::F16Overflow`] naming the node, a model whose activations pass binary16's largest
    /// finite value. Default false.
    pub f16_compute: bool,
}

impl Default for GeneratorOptions {
    fn default() -> Self {
        GeneratorOptions {
            micro_batch: 8,
            threads: 1,
            max_cached_plans: 4,
            warm_up: true,
            tune: false,
            f16_compute: false,
        }
    }
}

impl GeneratorOptions {
    /// Checks the options once.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] for zero or absurd values.
    pub fn validate(&self) -> Result<()> {
        if self.micro_batch == 0 || self.micro_batch > 4096 {
            return Err(Error::invalid("micro-batch", self.micro_batch, "1 to 4096 images per call"));
        }
        if self.threads == 0 || self.threads > 256 {
            return Err(Error::invalid("threads", self.threads, "1 to 256"));
        }
        Ok(())
    }
}

/// Generated images as floats, in the model's output layout and range.
#[derive(Debug, Clone, PartialEq)]
pub struct Images {
    /// Number of images.
    pub count: usize,
    /// Channels per image.
    pub channels: usize,
    /// Height.
    pub height: usize,
    /// Width.
    pub width: usize,
    /// Memory order of `data`.
    pub layout: Layout,
    /// The value range the model promises.
    pub range: ValueRange,
    /// `count * channels * height * width` values.
    pub data: Vec<f32>,
}

impl Images {
    /// Values per image.
    pub fn values_per_image(&self) -> usize {
        self.channels * self.height * self.width
    }

    /// The values of image `i`, in the model's layout.
    ///
    /// # Panics
    /// When `i >= count`.
    pub fn image(&self, i: usize) -> &[f32] {
        let n = self.values_per_image();
        &self.data[i * n..(i + 1) * n]
    }

    /// Value at image `i`, channel `c`, row `y`, column `x`, whatever the layout.
    pub fn at(&self, i: usize, c: usize, y: usize, x: usize) -> f32 {
        let img = self.image(i);
        match self.layout {
            Layout::Nchw => img[(c * self.height + y) * self.width + x],
            Layout::Nhwc => img[(y * self.width + x) * self.channels + c],
        }
    }
}

/// Progress of a request, reported after each micro-batch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Progress {
    /// Images finished.
    pub done: usize,
    /// Images asked for.
    pub total: usize,
}

/// A loaded model with its plans, ready to generate.
#[derive(Debug)]
pub struct Generator {
    model: Model,
    plans: Plans,
    options: GeneratorOptions,
}

/// A request's inputs after checking: latents and one label per image (if conditional).
struct Checked<'a> {
    latents: &'a Latents,
    labels: Option<&'a [i64]>,
}

impl Generator {
    /// Builds the generator and (by default) its plans for the micro-batch size and for 1.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] for bad options; [`Error::Tract`] when a plan cannot be built;
    /// [`Error::Limit`] when one micro-batch would pass `Limits::max_micro_batch_bytes`.
    pub fn new(model: Model, options: GeneratorOptions) -> Result<Generator> {
        options.validate()?;
        let fixed = match model.signature().batch {
            Batch::Fixed(n) => Some(n),
            Batch::Symbolic => None,
        };
        let mut options = options;
        if let Some(n) = fixed {
            options.micro_batch = n;
        }
        let bytes = options.micro_batch as u64 * model.signature().image.values_per_image() as u64 * 4;
        check_limit(
            "one micro-batch's output in bytes",
            bytes,
            model.limits().max_micro_batch_bytes,
            "Limits::max_micro_batch_bytes (or use a smaller micro-batch)",
        )?;
        let typed = if options.f16_compute {
            // Refuse before building: a model whose activations pass binary16's range would
            // give infinities, and tract's Relu and Clip would turn some of them into numbers.
            crate::probe::activations(&model, &crate::probe::ProbeOptions::ordinary(1, 8))?
                .require_f16_safe()?;
            crate::plan::f16_compute(&model.typed)?
        } else {
            model.typed.clone()
        };
        let plans = Plans::new(
            typed,
            model.batch.clone(),
            if options.tune { options.max_cached_plans.max(6) } else { options.max_cached_plans.max(1) },
        );
        let mut generator = Generator { model, plans, options };
        if generator.options.tune && fixed.is_none() {
            generator.options.micro_batch = generator.fastest_micro_batch()?;
        }
        if generator.options.warm_up {
            generator.plans.warm(generator.options.micro_batch)?;
            if fixed.is_none() && generator.options.micro_batch != 1 {
                generator.plans.warm(1)?;
            }
        }
        Ok(generator)
    }

    /// Times micro-batches 1, 2, 4, 8 and 16 (the best of three runs each, after one warm-up)
    /// and returns the fastest per image. On wasm32, where there is no clock, returns the current one.
    fn fastest_micro_batch(&self) -> Result<usize> {
        #[cfg(target_arch = "wasm32")]
        {
            Ok(self.options.micro_batch)
        }
        #[cfg(not(target_arch = "wasm32"))]
        {
            let sig = self.signature();
            let per_image = sig.image.values_per_image() as u64 * 4;
            let mut best = (f64::INFINITY, self.options.micro_batch);
            for mb in [1usize, 2, 4, 8, 16] {
                if mb as u64 * per_image > self.model.limits().max_micro_batch_bytes {
                    break;
                }
                let z = Latents::sample(sig.latent.dim, &SampleOptions::new(0, mb))?;
                let labels = sig.label.as_ref().map(|_| vec![0i64; mb]);
                let req = Checked { latents: &z, labels: labels.as_deref() };
                self.run_chunk(&req, 0, mb)?;
                let mut fastest = f64::INFINITY;
                for _ in 0..3 {
                    let t = std::time::Instant::now();
                    self.run_chunk(&req, 0, mb)?;
                    fastest = fastest.min(t.elapsed().as_secs_f64() / mb as f64);
                }
                if fastest < best.0 {
                    best = (fastest, mb);
                }
            }
            Ok(best.1)
        }
    }

    /// The batch a plan runs for `n` images: `n`, or the export's fixed batch.
    #[cfg(not(target_arch = "wasm32"))]
    pub(crate) fn signature_batch(&self, n: usize) -> usize {
        match self.signature().batch {
            Batch::Fixed(b) => b,
            Batch::Symbolic => n,
        }
    }

    /// The plan for `batch` images (built and cached on first use).
    #[cfg(not(target_arch = "wasm32"))]
    pub(crate) fn plans_for(&self, batch: usize) -> Result<crate::plan::Runnable> {
        self.plans.plan_for(batch)
    }

    /// Loads a model from a path with default options and builds its generator.
    ///
    /// # Errors
    /// As [`Model::from_path`] and [`Generator::new`].
    pub fn from_path(path: impl AsRef<std::path::Path>) -> Result<Generator> {
        Generator::new(Model::from_path(path, &Default::default())?, GeneratorOptions::default())
    }

    /// The signature.
    pub fn signature(&self) -> &Signature {
        self.model.signature()
    }

    /// The model.
    pub fn model(&self) -> &Model {
        &self.model
    }

    /// The options in force (the micro-batch of a fixed-batch model is its batch).
    pub fn options(&self) -> &GeneratorOptions {
        &self.options
    }

    /// Batch sizes whose fixed plans are built.
    pub fn cached_plans(&self) -> Vec<usize> {
        self.plans.cached()
    }

    /// Draws latents of this model's size.
    ///
    /// # Errors
    /// As [`Latents::sample`].
    pub fn sample_latents(&self, options: &SampleOptions) -> Result<Latents> {
        check_limit(
            "the image count",
            options.count as u64,
            self.model.limits().max_images,
            "Limits::max_images",
        )?;
        Latents::sample(self.signature().latent.dim, options)
    }

    /// Generates one image per latent (labels: one class per latent for conditional models,
    /// `None` otherwise).
    ///
    /// # Errors
    /// As [`Generator::generate_with`].
    pub fn generate(&self, latents: &Latents, labels: Option<&[i64]>) -> Result<Images> {
        self.generate_with(latents, labels, &mut |_| true)
    }

    /// Generates with a progress callback, called on the calling thread after each micro-batch;
    /// return `false` from it to cancel (the request then fails with [`Error::Cancelled`]).
    ///
    /// # Errors
    /// [`Error::LatentDim`] for latents of the wrong size; [`Error::Labels`] or
    /// [`Error::LabelOutOfRange`] for missing, extra or bad labels; [`Error::Limit`] for too many
    /// images; [`Error::Tract`] when inference fails; [`Error::Cancelled`].
    pub fn generate_with(
        &self,
        latents: &Latents,
        labels: Option<&[i64]>,
        progress: &mut dyn FnMut(Progress) -> bool,
    ) -> Result<Images> {
        let req = self.check(latents, labels)?;
        let sig = self.signature();
        let total = latents.count();
        let per = sig.image.values_per_image();
        let mb = self.options.micro_batch;
        let chunks: Vec<(usize, usize)> = (0..total).step_by(mb).map(|s| (s, (s + mb).min(total))).collect();
        let mut data = vec![0f32; total * per];
        let threads = self.options.threads.min(chunks.len()).max(1);
        if threads == 1 {
            for &(s, e) in &chunks {
                let out = self.run_chunk(&req, s, e)?;
                data[s * per..e * per].copy_from_slice(&out);
                if !progress(Progress { done: e, total }) {
                    return Err(Error::Cancelled { done: e, total });
                }
            }
        } else {
            let next = AtomicUsize::new(0);
            let stop = AtomicBool::new(false);
            let (tx, rx) = mpsc::channel::<Result<(usize, Vec<f32>)>>();
            let outcome = std::thread::scope(|scope| -> Result<()> {
                for _ in 0..threads {
                    let tx = tx.clone();
                    let (next, stop, chunks, req) = (&next, &stop, &chunks, &req);
                    scope.spawn(move || loop {
                        if stop.load(Ordering::Relaxed) {
                            break;
                        }
                        let k = next.fetch_add(1, Ordering::Relaxed);
                        let Some(&(s, e)) = chunks.get(k) else { break };
                        let r = self.run_chunk(req, s, e).map(|v| (k, v));
                        let failed = r.is_err();
                        if tx.send(r).is_err() || failed {
                            break;
                        }
                    });
                }
                drop(tx);
                let mut done = 0;
                let mut result = Ok(());
                for msg in rx {
                    if result.is_err() {
                        continue;
                    }
                    match msg {
                        Ok((k, v)) => {
                            let (s, e) = chunks[k];
                            data[s * per..e * per].copy_from_slice(&v);
                            done += e - s;
                            if !progress(Progress { done, total }) {
                                stop.store(true, Ordering::Relaxed);
                                result = Err(Error::Cancelled { done, total });
                            }
                        }
                        Err(err) => {
                            stop.store(true, Ordering::Relaxed);
                            result = Err(err);
                        }
                    }
                }
                result
            });
            outcome?;
        }
        Ok(Images {
            count: total,
            channels: sig.image.channels,
            height: sig.image.height,
            width: sig.image.width,
            layout: sig.image.layout,
            range: sig.image.range,
            data,
        })
    }

    fn check<'a>(&self, latents: &'a Latents, labels: Option<&'a [i64]>) -> Result<Checked<'a>> {
        let sig = self.signature();
        if latents.dim() != sig.latent.dim {
            return Err(Error::LatentDim {
                name: sig.latent.name.clone(),
                actual: latents.dim(),
                expected: sig.latent.dim,
            });
        }
        check_limit(
            "the image count",
            latents.count() as u64,
            self.model.limits().max_images,
            "Limits::max_images",
        )?;
        crate::latent::check_finite(latents.as_slice(), latents.dim())?;
        match (&sig.label, labels) {
            (None, None) => {}
            (None, Some(_)) => {
                return Err(Error::Labels {
                    reason: "this model is unconditional (it has no label input); give no labels".into(),
                })
            }
            (Some(l), None) => {
                return Err(Error::Labels {
                    reason: format!(
                        "this model is conditional: input `{}` needs one class (0..{}) per image",
                        l.name, l.classes
                    ),
                })
            }
            (Some(l), Some(ls)) => {
                if ls.len() != latents.count() {
                    return Err(Error::Labels {
                        reason: format!(
                            "{} labels for {} latents, expected one label per latent",
                            ls.len(),
                            latents.count()
                        ),
                    });
                }
                if let Some((i, &v)) =
                    ls.iter().enumerate().find(|(_, &v)| v < 0 || v as u64 >= l.classes as u64)
                {
                    return Err(Error::LabelOutOfRange { index: i, label: v, classes: l.classes });
                }
            }
        }
        Ok(Checked { latents, labels })
    }

    /// Runs images `s..e` (padding to the fixed batch of a fixed-batch model).
    fn run_chunk(&self, req: &Checked<'_>, s: usize, e: usize) -> Result<Vec<f32>> {
        let sig = self.signature();
        let n = e - s;
        let batch = match sig.batch {
            Batch::Fixed(b) => b,
            Batch::Symbolic => n,
        };
        let dim = sig.latent.dim;
        // Rows s..e, then copies of the last row as padding (their outputs are dropped).
        let mut z = Vec::with_capacity(batch * dim);
        for i in 0..batch {
            z.extend_from_slice(req.latents.row(s + i.min(n - 1)));
        }
        let labels: Option<Vec<i64>> =
            req.labels.map(|ls| (0..batch).map(|i| ls[s + i.min(n - 1)]).collect());
        let inputs = crate::plan::input_values(&self.model, &z, labels.as_deref(), batch)?;
        let plan = self.plans.plan_for(batch)?;
        let inputs = crate::plan::cast_inputs(&plan, inputs)?;
        let outputs = crate::model::guard_run(format!("run a batch of {batch}"), || plan.run(inputs))?;
        let out = outputs.get(self.model.output_index).ok_or_else(|| Error::Output {
            reason: format!("the model returned {} outputs", outputs.len()),
        })?;
        let out = out.cast_to::<f32>().map_err(|e| Error::tract_run("read the output as f32", e))?;
        let per = sig.image.values_per_image();
        let view = out.try_as_plain_ram().map_err(|e| Error::tract_run("read the output", e))?;
        let values = view.as_slice::<f32>().map_err(|e| Error::tract_run("read the output", e))?;
        if values.len() != batch * per {
            return Err(Error::Output {
                reason: format!(
                    "output `{}` has shape {:?} ({} values) for a batch of {batch}, expected {} values per image",
                    sig.image.name,
                    out.shape(),
                    values.len(),
                    per
                ),
            });
        }
        Ok(values[..n * per].to_vec())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn assert_send_sync<T: Send + Sync>() {}

    #[test]
    fn generator_is_send_and_sync() {
        assert_send_sync::<Generator>();
    }

    #[test]
    fn options_are_validated() {
        let e = GeneratorOptions { micro_batch: 0, ..Default::default() }.validate().unwrap_err().to_string();
        assert!(e.contains("micro-batch is 0"), "{e}");
        let e = GeneratorOptions { threads: 0, ..Default::default() }.validate().unwrap_err().to_string();
        assert!(e.contains("threads is 0"), "{e}");
    }
}
