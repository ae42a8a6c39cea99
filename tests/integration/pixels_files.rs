//! PNG and GIF files decode in Pillow to exactly the pixels we computed.

use genloom::pixels::{self, GifOptions, GridOptions, PixelFormat, Pixels};
use genloom_tests::verify_with_python;

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn pattern(w: usize, h: usize, format: PixelFormat, salt: usize) -> Pixels {
    let n = w * h * format.bytes_per_pixel();
    Pixels { width: w, height: h, format, data: (0..n).map(|i| ((i * 37 + salt * 11) % 256) as u8).collect() }
}

#[test]
fn png_pixels_survive_pillow() {
    // Judge: Pillow's PNG decoder (tests/py/verify.py checks every chunk CRC, mode and bytes).
    let dir = tempfile::tempdir().unwrap();
    for (format, mode) in
        [(PixelFormat::Gray8, "L"), (PixelFormat::Rgb8, "RGB"), (PixelFormat::Rgba8, "RGBA")]
    {
        let p = pattern(7, 5, format, 1);
        let path = dir.path().join(format!("{mode}.png"));
        p.write_png(&path).unwrap();
        verify_with_python(
            "png",
            &path,
            &serde_json::json!({"mode": mode, "width": 7, "height": 5, "pixels_hex": hex(&p.data)}),
        );
    }
    let tiles: Vec<Pixels> = (0..5).map(|i| pattern(4, 4, PixelFormat::Rgb8, i)).collect();
    let mut o = GridOptions::default();
    o.scale = 2;
    o.margin = 3;
    let g = pixels::grid(&tiles, &o).unwrap();
    assert_eq!((g.width, g.height), (3 * 8 + 4 * 3, 2 * 8 + 3 * 3));
    let path = dir.path().join("grid.png");
    g.write_png(&path).unwrap();
    verify_with_python(
        "png",
        &path,
        &serde_json::json!({"mode": "RGB", "width": g.width, "height": g.height, "pixels_hex": hex(&g.data)}),
    );
}

#[test]
fn gif_is_animated_and_loops() {
    // Judge: Pillow's GIF reader (frame count, size, NETSCAPE2.0 loop count 0 = forever).
    let dir = tempfile::tempdir().unwrap();
    let frames: Vec<Pixels> = (0..6).map(|i| pattern(8, 8, PixelFormat::Rgb8, i)).collect();
    let path = dir.path().join("m.gif");
    let mut o = GifOptions::default();
    o.scale = 2;
    pixels::write_gif(&path, &frames, &o).unwrap();
    verify_with_python("gif", &path, &serde_json::json!({"frames": 6, "width": 16, "height": 16, "loop": 0}));
}

#[test]
fn bad_buffers_are_refused() {
    let bad = Pixels { width: 3, height: 3, format: PixelFormat::Rgb8, data: vec![0; 5] };
    let e = bad.to_png().unwrap_err().to_string();
    assert!(e.contains("5 bytes for 3x3") && e.contains("27 bytes"), "{e}");
    assert!(pixels::grid(&[], &GridOptions::default()).is_err());
    let mixed = [pattern(2, 2, PixelFormat::Rgb8, 0), pattern(3, 2, PixelFormat::Rgb8, 0)];
    let e = pixels::grid(&mixed, &GridOptions::default()).unwrap_err().to_string();
    assert!(e.contains("tile size is 3x2"), "{e}");
}
