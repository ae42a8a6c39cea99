"""Self-test of verify.py: files made by NumPy and Pillow must be judged right.

    python -m unittest discover -s tests/py        (or: pytest tests/py)
"""

import json
import subprocess
import sys
import tempfile
import unittest
from pathlib import Path

import numpy as np
from PIL import Image

HERE = Path(__file__).resolve().parent
VERIFY = HERE / "verify.py"
GOLDEN_NPY = HERE.parent / "golden" / "npy"


def run(*args):
    p = subprocess.run([sys.executable, str(VERIFY), *map(str, args)],
                       capture_output=True, text=True)
    return p.returncode, (p.stdout + p.stderr).strip()


class VerifyTest(unittest.TestCase):
    def setUp(self):
        self._tmp = tempfile.TemporaryDirectory()
        self.tmp = Path(self._tmp.name)

    def tearDown(self):
        self._tmp.cleanup()

    def expect(self, obj, name="expect.json"):
        p = self.tmp / name
        p.write_text(json.dumps(obj))
        return p

    # ---- npy
    def test_npy_equal_and_differs(self):
        a = np.array([[0.5, -1.0, 3.25]], dtype=np.float32)
        f = self.tmp / "a.npy"
        np.save(f, a)
        vals = ["%08x" % v for v in a.reshape(-1).view(np.uint32)]
        ok = self.expect({"dtype": "<f4", "shape": [1, 3], "values": vals})
        self.assertEqual(run("npy", f, ok)[0], 0)
        bad = self.expect({"dtype": "<f4", "shape": [1, 3],
                           "values": vals[:2] + ["40500001"]}, "bad.json")
        code, msg = run("npy", f, bad)
        self.assertEqual(code, 1)
        self.assertIn("flat index 2", msg)
        self.assertEqual(len(msg.splitlines()), 1)
        self.assertEqual(run("npy", f, self.expect(
            {"dtype": "<f8", "shape": [1, 3], "values": vals}, "dt.json"))[0], 1)
        self.assertEqual(run("npy", f, self.expect(
            {"dtype": "<f4", "shape": [3], "values": vals}, "sh.json"))[0], 1)

    def test_npy_ints_and_refusals(self):
        f = self.tmp / "i.npy"
        np.save(f, np.array([-2, 2 ** 40], dtype=np.int64))
        e = self.expect({"dtype": "<i8", "shape": [2], "values": ["-2", "1099511627776"]})
        self.assertEqual(run("npy", f, e)[0], 0)
        o = self.tmp / "o.npy"
        np.save(o, np.array([1, None], dtype=object), allow_pickle=True)
        self.assertEqual(run("npy", o, self.expect(
            {"dtype": "|O", "shape": [2], "values": ["1", "0"]}, "o.json"))[0] in (1, 2), True)

    def test_golden_npy_manifest(self):
        man = json.loads((GOLDEN_NPY / "manifest.json").read_text())
        for e in man["files"]:
            if "values" not in e:
                continue
            exp = self.expect({"dtype": e["descr"], "shape": e["shape"],
                               "values": e["values"]}, e["file"] + ".json")
            code, msg = run("npy", GOLDEN_NPY / e["file"], exp)
            self.assertEqual(code, 0, (e["file"], msg))

    # ---- png
    def test_png(self):
        px = bytes(range(2 * 3 * 3))
        im = Image.frombytes("RGB", (3, 2), px)
        f = self.tmp / "a.png"
        im.save(f)
        ok = self.expect({"mode": "RGB", "width": 3, "height": 2, "pixels_hex": px.hex()})
        self.assertEqual(run("png", f, ok)[0], 0)
        wrong = bytearray(px)
        wrong[7] ^= 1
        code, msg = run("png", f, self.expect(
            {"mode": "RGB", "width": 3, "height": 2, "pixels_hex": bytes(wrong).hex()}, "w.json"))
        self.assertEqual(code, 1)
        self.assertIn("index 7", msg)
        code, _ = run("png", f, self.expect(
            {"mode": "RGBA", "width": 3, "height": 2, "pixels_hex": px.hex()}, "m.json"))
        self.assertEqual(code, 1)
        data = bytearray(f.read_bytes())
        data[-20] ^= 0xFF  # inside the last IDAT or its CRC
        broken = self.tmp / "broken.png"
        broken.write_bytes(bytes(data))
        self.assertEqual(run("png", broken, ok)[0], 1)

    # ---- png text
    def test_png_text(self):
        from PIL import PngImagePlugin
        im = Image.new("RGB", (2, 2))
        info = PngImagePlugin.PngInfo()
        info.add_itxt("genloom:synthetic", "true")
        f = self.tmp / "t.png"
        im.save(f, pnginfo=info)
        self.assertEqual(run("png-text", f, self.expect({"text": {"genloom:synthetic": "true"}}, "t.json"))[0], 0)
        code, msg = run("png-text", f, self.expect({"text": {"genloom:synthetic": "false"}}, "t2.json"))
        self.assertEqual(code, 1)
        self.assertIn("differs", msg)
        self.assertEqual(run("png-text", f, self.expect({"text": {}}, "t3.json"))[0], 1)
        plain = self.tmp / "p.png"
        im.save(plain)
        self.assertEqual(run("png-text", plain, self.expect({"text": {}}, "t4.json"))[0], 0)
        self.assertEqual(run("png-text", plain, self.expect({"text": {"x": "y"}}, "t5.json"))[0], 1)

    # ---- gif
    def test_gif(self):
        frames = [Image.new("RGB", (4, 3), (80 * c, 0, 0)) for c in (0, 1, 2)]
        f = self.tmp / "a.gif"
        frames[0].save(f, save_all=True, append_images=frames[1:], loop=0, duration=100)
        self.assertEqual(run("gif", f, self.expect(
            {"frames": 3, "width": 4, "height": 3, "loop": 0}))[0], 0)
        self.assertEqual(run("gif", f, self.expect(
            {"frames": 2, "width": 4, "height": 3, "loop": 0}, "n.json"))[0], 1)
        self.assertEqual(run("gif", f, self.expect(
            {"frames": 3, "width": 4, "height": 3, "loop": None}, "l.json"))[0], 1)

    # ---- usage
    def test_usage(self):
        self.assertEqual(run("tiff", "x", "y")[0], 2)
        self.assertEqual(run("npy")[0], 2)
        self.assertEqual(run("npy", "x.npy", self.tmp / "absent.json")[0], 2)


if __name__ == "__main__":
    unittest.main()
