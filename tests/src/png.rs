//! Reading the PNG previews the render tests check: size, pixels, colour closeness.

use std::path::Path;

/// Width and height from the PNG signature and IHDR chunk (ISO/IEC 15948, § 11.2.2).
pub fn png_size(path: &Path) -> (u32, u32) {
    let bytes = std::fs::read(path).expect("read png");
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "PNG signature");
    assert_eq!(&bytes[12..16], b"IHDR");
    let be = |i: usize| u32::from_be_bytes([bytes[i], bytes[i + 1], bytes[i + 2], bytes[i + 3]]);
    (be(16), be(20))
}

/// All pixels of a PNG as RGB with the image width, decoded by GDAL's PNG driver.
pub fn pixels(path: &Path) -> (usize, Vec<[u8; 3]>) {
    let dataset = gdal::Dataset::open(path).expect("GDAL opens the PNG");
    let (w, h) = dataset.raster_size();
    let bands: Vec<Vec<u8>> = (1..=3)
        .map(|b| {
            dataset
                .rasterband(b)
                .expect("band")
                .read_as::<u8>((0, 0), (w, h), (w, h), None)
                .expect("read")
                .into_shape_and_vec()
                .1
        })
        .collect();
    let rgb = (0..w * h)
        .map(|i| [bands[0][i], bands[1][i], bands[2][i]])
        .collect();
    (w, rgb)
}

/// Whether two colours differ by at most `tolerance` in every channel.
pub fn close(a: [u8; 3], b: [u8; 3], tolerance: u8) -> bool {
    a.iter().zip(&b).all(|(x, y)| x.abs_diff(*y) <= tolerance)
}
