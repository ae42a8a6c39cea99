#!/usr/bin/env python3
"""Let Rust tests ask NumPy and Pillow to judge files that Rust wrote.

    python tests/py/verify.py npy FILE EXPECT.json
    python tests/py/verify.py png FILE EXPECT.json
    python tests/py/verify.py gif FILE EXPECT.json

Exit status: 0 when FILE matches EXPECT.json, 1 when it does not (one line on
stdout says what differs: first differing index, actual vs expected), 2 on a
usage error (wrong arguments, unreadable or malformed EXPECT.json).

EXPECT.json formats
  npy: {"dtype": "<f4", "shape": [2, 3], "values": [...]}
       values are row-major; float dtypes as hex IEEE 754 bit patterns
       (8 hex digits for f4, 16 for f8, 4 for f2), integer and bool dtypes
       as decimal strings or JSON integers.  Loaded with
       numpy.load(allow_pickle=False); comparison is exact (bits for floats).
  png: {"mode": "RGB", "width": w, "height": h, "pixels_hex": "..."}
       mode is Pillow's mode ("RGB", "RGBA", "L"); pixels_hex is the hex of
       the raw decoded bytes, row-major, channels interleaved.  Every chunk
       CRC is verified before decoding.
  gif: {"frames": n, "width": w, "height": h, "loop": 0}
       "loop" is the NETSCAPE2.0 loop count (0 = forever) or null for a GIF
       without a loop extension.  Optional "durations_ms": [..] per frame.
       n > 1 also requires Pillow to report the file as animated.
"""

import json
import sys

USAGE = __doc__.split("\n\n")[1]


class Differs(Exception):
    """The file does not match the expectation; the message says how."""


class Usage(Exception):
    """Bad arguments or a malformed expectation file."""


def _need(exp, key, types):
    if key not in exp:
        raise Usage("EXPECT.json lacks %r" % key)
    v = exp[key]
    if not isinstance(v, types) or (isinstance(v, bool) and types is int):
        raise Usage("EXPECT.json field %r has the wrong type" % key)
    return v


def _fmt_index(flat, shape):
    if not shape:
        return "[]"
    idx = []
    for dim in reversed(shape):
        idx.append(flat % dim)
        flat //= dim
    return "[" + ",".join(str(i) for i in reversed(idx)) + "]"


# --------------------------------------------------------------------------
# npy
# --------------------------------------------------------------------------

def check_npy(path, exp):
    import numpy as np

    dtype_s = _need(exp, "dtype", str)
    shape = _need(exp, "shape", list)
    values = _need(exp, "values", list)
    try:
        want_dtype = np.dtype(dtype_s)
    except TypeError as e:
        raise Usage("EXPECT.json dtype %r: %s" % (dtype_s, e))
    if any(not isinstance(s, int) or isinstance(s, bool) or s < 0 for s in shape):
        raise Usage("EXPECT.json shape must be a list of non-negative integers")
    count = 1
    for s in shape:
        count *= s
    if len(values) != count:
        raise Usage("EXPECT.json has %d values for shape %s (needs %d)"
                    % (len(values), shape, count))

    try:
        arr = np.load(path, allow_pickle=False)
    except Exception as e:  # noqa: BLE001 - any load failure is a verdict
        raise Differs("numpy.load failed: %s: %s" % (type(e).__name__, e))
    if not isinstance(arr, np.ndarray):
        raise Differs("file is not a single .npy array")
    if arr.dtype != want_dtype:
        raise Differs("dtype differs: actual %s, expected %s" % (arr.dtype.str, want_dtype.str))
    if list(arr.shape) != shape:
        raise Differs("shape differs: actual %s, expected %s" % (list(arr.shape), shape))

    # logical values in native byte order, so bit patterns mean numbers
    native = want_dtype.newbyteorder("=")
    flat = np.ascontiguousarray(arr).reshape(-1).astype(native)
    kind = want_dtype.kind
    if kind == "f":
        width = want_dtype.itemsize * 2
        utype = "u%d" % want_dtype.itemsize
        ubits = flat.view(utype)
        try:
            want = [int(v, 16) for v in values]
        except (TypeError, ValueError):
            raise Usage("EXPECT.json float values must be hex bit-pattern strings")
        for i, (a, w) in enumerate(zip(ubits.tolist(), want)):
            if a != w:
                wv = float(np.array(w, dtype=utype).view(native))
                raise Differs("value differs at flat index %d %s: actual %0*x (%r), "
                              "expected %0*x (%r)" % (i, _fmt_index(i, shape), width, a,
                                                      float(flat[i]), width, w, wv))
    elif kind in "iub":
        try:
            want = [int(v) for v in values]
        except (TypeError, ValueError):
            raise Usage("EXPECT.json integer values must be decimal strings or integers")
        for i, (a, w) in enumerate(zip(flat.tolist(), want)):
            if int(a) != w:
                raise Differs("value differs at flat index %d %s: actual %d, expected %d"
                              % (i, _fmt_index(i, shape), int(a), w))
    else:
        raise Usage("dtype kind %r is not supported" % kind)
    return "npy ok: %s %s, %d values" % (arr.dtype.str, list(arr.shape), count)


# --------------------------------------------------------------------------
# png
# --------------------------------------------------------------------------

def check_png(path, exp):
    from PIL import Image

    mode = _need(exp, "mode", str)
    width = _need(exp, "width", int)
    height = _need(exp, "height", int)
    pixels_hex = _need(exp, "pixels_hex", str)
    try:
        want = bytes.fromhex(pixels_hex)
    except ValueError:
        raise Usage("EXPECT.json pixels_hex is not hex")

    try:
        with Image.open(path) as im:
            fmt = im.format
            if fmt == "PNG":
                im.verify()  # every chunk CRC, through IEND
    except Exception as e:  # noqa: BLE001
        raise Differs("Pillow cannot read the file: %s: %s" % (type(e).__name__, e))
    if fmt != "PNG":
        raise Differs("format differs: actual %s, expected PNG" % fmt)
    try:
        with Image.open(path) as im:
            im.load()
            got_mode, size = im.mode, im.size
            got = im.tobytes()
    except Exception as e:  # noqa: BLE001
        raise Differs("Pillow cannot decode the file: %s: %s" % (type(e).__name__, e))
    if got_mode != mode:
        raise Differs("mode differs: actual %s, expected %s" % (got_mode, mode))
    if size != (width, height):
        raise Differs("size differs: actual %dx%d, expected %dx%d"
                      % (size[0], size[1], width, height))
    if len(want) != len(got):
        raise Usage("EXPECT.json pixels_hex has %d bytes, a %s %dx%d image has %d"
                    % (len(want), mode, width, height, len(got)))
    if got != want:
        i = next(k for k in range(len(got)) if got[k] != want[k])
        ch = len(got) // max(1, width * height)
        px = i // max(1, ch)
        raise Differs("pixel byte differs at index %d (x=%d, y=%d, channel %d): actual %d, "
                      "expected %d" % (i, px % width, px // width, i % max(1, ch), got[i], want[i]))
    return "png ok: %s %dx%d" % (mode, width, height)


# --------------------------------------------------------------------------
# gif
# --------------------------------------------------------------------------

def check_gif(path, exp):
    from PIL import Image

    frames = _need(exp, "frames", int)
    width = _need(exp, "width", int)
    height = _need(exp, "height", int)
    if "loop" not in exp:
        raise Usage("EXPECT.json lacks 'loop' (an integer, or null for no loop extension)")
    loop = exp["loop"]
    if loop is not None and (not isinstance(loop, int) or isinstance(loop, bool)):
        raise Usage("EXPECT.json 'loop' must be an integer or null")
    durations = exp.get("durations_ms")
    if durations is not None and (not isinstance(durations, list) or len(durations) != frames):
        raise Usage("EXPECT.json 'durations_ms' must list one duration per frame")

    try:
        with Image.open(path) as im:
            fmt = im.format
            if fmt != "GIF":
                raise Differs("format differs: actual %s, expected GIF" % fmt)
            n = getattr(im, "n_frames", 1)
            animated = getattr(im, "is_animated", False)
            size = im.size
            got_loop = im.info.get("loop")
            got_durations = []
            for k in range(n):
                im.seek(k)
                im.load()
                got_durations.append(im.info.get("duration"))
    except Differs:
        raise
    except Exception as e:  # noqa: BLE001
        raise Differs("Pillow cannot read the file: %s: %s" % (type(e).__name__, e))
    if n != frames:
        raise Differs("frame count differs: actual %d, expected %d" % (n, frames))
    if frames > 1 and not animated:
        raise Differs("Pillow does not report the GIF as animated")
    if size != (width, height):
        raise Differs("size differs: actual %dx%d, expected %dx%d"
                      % (size[0], size[1], width, height))
    if got_loop != loop:
        raise Differs("loop differs: actual %s, expected %s"
                      % ("none" if got_loop is None else got_loop,
                         "none" if loop is None else loop))
    if durations is not None:
        for k, (a, w) in enumerate(zip(got_durations, durations)):
            if a != w:
                raise Differs("duration differs at frame %d: actual %s ms, expected %s ms"
                              % (k, a, w))
    return "gif ok: %d frames %dx%d loop %s" % (n, width, height, loop)


# --------------------------------------------------------------------------
# png text chunks (provenance)
# --------------------------------------------------------------------------

def check_png_text(path, exp):
    """EXPECT: {"text": {keyword: value, ...}} (every pair present, as Pillow reads tEXt, zTXt and
    iTXt chunks), or {"text": {}} for a PNG that must carry no text at all."""
    from PIL import Image

    want = _need(exp, "text", dict)
    try:
        with Image.open(path) as im:
            fmt = im.format
            im.verify()  # every chunk CRC, through IEND
        with Image.open(path) as im:
            im.load()
            got = dict(im.text)
    except Exception as e:  # noqa: BLE001
        raise Differs("Pillow cannot read the file: %s: %s" % (type(e).__name__, e))
    if fmt != "PNG":
        raise Differs("format differs: actual %s, expected PNG" % fmt)
    if not want and got:
        raise Differs("expected no text chunks, found %s" % sorted(got))
    for k, v in want.items():
        if k not in got:
            raise Differs("text keyword %r missing (found %s)" % (k, sorted(got)))
        if got[k] != v:
            raise Differs("text %r differs: actual %r, expected %r" % (k, got[k], v))
    return "png text ok: %d keywords" % len(got)


CHECKS = {"npy": check_npy, "png": check_png, "gif": check_gif, "png-text": check_png_text}


def main(argv):
    if len(argv) != 3 or argv[0] not in CHECKS:
        print("usage error: expected KIND FILE EXPECT.json with KIND in npy|png|gif|png-text\n" + USAGE,
              file=sys.stderr)
        return 2
    kind, path, exp_path = argv
    try:
        try:
            with open(exp_path, encoding="utf-8") as f:
                exp = json.load(f)
        except (OSError, ValueError) as e:
            raise Usage("cannot read %s: %s" % (exp_path, e))
        if not isinstance(exp, dict):
            raise Usage("EXPECT.json must hold a JSON object")
        msg = CHECKS[kind](path, exp)
    except Usage as e:
        print("usage error: %s" % e, file=sys.stderr)
        return 2
    except Differs as e:
        print("%s %s: %s" % (kind, path, e))
        return 1
    print(msg)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
