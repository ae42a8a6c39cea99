#!/usr/bin/env python3
"""Outside judges for genloom's exports and metrics, called by the Rust tests.

    python tests/py/onnx_judge.py export EXPORT.onnx SOURCE_F32.onnx LATENTS.npy LABELS.npy|- OUTPUT.npy
        onnx.checker.check_model(full_check=True) on EXPORT; onnx.reference.ReferenceEvaluator
        on EXPORT agrees with OUTPUT (genloom's output for it) within 1e-4; every
        DequantizeLinear follows the ONNX operator spec, y = (x - zero_point) * scale per tensor
        or along `axis`, evaluated with NumPy; the int8 values are NumPy's symmetric
        quantization of SOURCE_F32's weights (scale = max|w| / 127, numpy.rint: ties to even);
        every float16 weight is numpy.float16 of the source weight.
    python tests/py/onnx_judge.py f16 VALUES.npy BITS.npy
        BITS (uint16) equals numpy.float16(VALUES).view(uint16), bit for bit (IEEE 754).
    python tests/py/onnx_judge.py metrics A.npy B.npy OURS.json
        A and B are uint8 (N, H, W, C) image stacks; OURS holds {"psnr": [...], "ssim": [...]}.
        Compared with skimage.metrics.peak_signal_noise_ratio(data_range=255) and
        structural_similarity(gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
        data_range=255, channel_axis=-1) within 1e-4.

Exit 0 when everything agrees, 1 with a one-line reason when not, 2 on usage errors.
"""
import json
import sys

import numpy as np


def fail(msg):
    print(msg)
    sys.exit(1)


def initializers(model):
    from onnx import numpy_helper
    return {t.name: numpy_helper.to_array(t) for t in model.graph.initializer}


def dequantize_op():
    """DequantizeLinear per the ONNX operator spec, y = (x - x_zero_point) * x_scale, per tensor
    or along `axis`, in NumPy. The reference evaluator of the onnx package implements the op only
    from opset 19, while exports keep their source's opset (13 or later), so it is given here."""
    from onnx.reference.op_run import OpRun

    class DequantizeLinear(OpRun):
        op_domain = ""

        def _run(self, x, x_scale, x_zero_point=None, axis=None, block_size=None, output_dtype=None):
            axis = 1 if axis is None else axis
            shape = [1] * x.ndim
            if x_scale.ndim == 1 and x_scale.size > 1:
                shape[axis] = x_scale.size
            zp = np.zeros((), dtype=np.int32) if x_zero_point is None else x_zero_point.astype(np.int32).reshape(shape)
            return ((x.astype(np.int32) - zp).astype(np.float32) * x_scale.astype(np.float32).reshape(shape),)

    return DequantizeLinear


def judge_export(export_path, source_path, latents_path, labels_path, output_path):
    import onnx
    from onnx.reference import ReferenceEvaluator

    model = onnx.load(export_path)
    onnx.checker.check_model(model, full_check=True)
    feeds = {}
    inputs = [i.name for i in model.graph.input if i.name not in {t.name for t in model.graph.initializer}]
    latents = np.load(latents_path)
    feeds[inputs[0]] = latents.astype(np.float32)
    if labels_path != "-":
        feeds[inputs[1]] = np.load(labels_path).astype(np.int64)
    ref = ReferenceEvaluator(model, new_ops=[dequantize_op()]).run(None, feeds)[0]
    ours = np.load(output_path)
    if ref.shape != ours.shape:
        fail("reference evaluator shape %s, genloom %s" % (ref.shape, ours.shape))
    err = float(np.max(np.abs(ref.astype(np.float64) - ours)))
    if not err <= 1e-4:
        fail("reference evaluator and genloom differ by %g (> 1e-4)" % err)
    inits = initializers(model)
    source = initializers(onnx.load(source_path))
    checked = 0
    for node in model.graph.node:
        if node.op_type == "DequantizeLinear":
            x = inits[node.input[0]]
            scale = inits[node.input[1]].astype(np.float32)
            zp = inits[node.input[2]] if len(node.input) > 2 else np.zeros_like(scale, dtype=np.int8)
            axis = next((a.i for a in node.attribute if a.name == "axis"), 1)
            shape = [1] * x.ndim
            if scale.ndim == 1 and scale.size > 1:
                shape[axis] = scale.size
            # ONNX DequantizeLinear: y = (x - x_zero_point) * x_scale.
            y = ((x.astype(np.int32) - zp.astype(np.int32).reshape(shape)).astype(np.float32) * scale.reshape(shape))
            w = source.get(node.output[0])
            if w is None:
                fail("no source weight named %s" % node.output[0])
            w = w.astype(np.float32)
            red = tuple(i for i in range(w.ndim) if i != axis) if scale.size > 1 else None
            m = np.max(np.abs(w), axis=red, keepdims=True) if red is not None else np.max(np.abs(w))
            want_scale = np.where(m > 0, m / np.float32(127), np.float32(1)).astype(np.float32)
            want_q = np.clip(np.rint(w / want_scale), -127, 127).astype(np.int8)
            if not np.array_equal(want_scale.reshape(-1), scale.reshape(-1)):
                fail("%s: scales differ from NumPy's max|w|/127" % node.name)
            if not np.array_equal(want_q, x):
                i = int(np.argmax(want_q.reshape(-1) != x.reshape(-1)))
                fail("%s: int8 value %d is %d, NumPy's rint gives %d" % (node.name, i, x.reshape(-1)[i], want_q.reshape(-1)[i]))
            err = float(np.max(np.abs(y - w)))
            if not err <= float(np.max(want_scale)) / 2 * 1.0001:
                fail("%s: dequantized weights are %g from the source, over half a step" % (node.name, err))
            checked += 1
        if node.op_type == "Cast" and node.input[0] in inits and inits[node.input[0]].dtype == np.float16:
            w = source[node.output[0]].astype(np.float32)
            if not np.array_equal(w.astype(np.float16).view(np.uint16), inits[node.input[0]].view(np.uint16)):
                fail("%s: float16 weights differ from numpy.float16 of the source" % node.name)
            checked += 1
    stored_small = [n for n, v in inits.items() if v.dtype in (np.int8, np.float16)]
    if stored_small and checked == 0:
        fail("%d int8 or float16 tensors (%s ...) but none reached through DequantizeLinear or Cast"
             % (len(stored_small), stored_small[0]))
    print("ok: checker, reference evaluator (max err %.3g), %d rewritten tensors" % (err, checked))


def judge_f16(values_path, bits_path):
    v = np.load(values_path).astype(np.float32)
    bits = np.load(bits_path).astype(np.uint16)
    with np.errstate(over="ignore"):
        want = v.astype(np.float16).view(np.uint16)
    bad = np.nonzero(want != bits)[0]
    if bad.size:
        i = int(bad[0])
        fail("value %r: genloom bits %04x, numpy.float16 %04x" % (float(v[i]), int(bits[i]), int(want[i])))
    print("ok: %d values" % v.size)


def judge_metrics(a_path, b_path, ours_path):
    from skimage.metrics import peak_signal_noise_ratio, structural_similarity

    a, b = np.load(a_path), np.load(b_path)
    ours = json.load(open(ours_path))
    for i in range(a.shape[0]):
        p = peak_signal_noise_ratio(a[i], b[i], data_range=255)
        s = structural_similarity(a[i], b[i], gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
                                  data_range=255, channel_axis=-1)
        if abs(p - ours["psnr"][i]) > 1e-4 and not (np.isinf(p) and ours["psnr"][i] is None):
            fail("pair %d: PSNR %r, skimage %r" % (i, ours["psnr"][i], p))
        if abs(s - ours["ssim"][i]) > 1e-4:
            fail("pair %d: SSIM %r, skimage %r" % (i, ours["ssim"][i], s))
    print("ok: %d pairs" % a.shape[0])


def main(argv):
    if len(argv) >= 2 and argv[1] == "export" and len(argv) == 7:
        judge_export(*argv[2:])
    elif len(argv) == 4 and argv[1] == "f16":
        judge_f16(*argv[2:])
    elif len(argv) == 5 and argv[1] == "metrics":
        judge_metrics(*argv[2:])
    else:
        print(__doc__)
        sys.exit(2)


if __name__ == "__main__":
    main(sys.argv)
