//! A small RGB image as a PNG data URI, so that a dense map is one `<image>`
//! element in an SVG instead of tens of thousands of rectangles.
//!
//! The PNG is written uncompressed (deflate "stored" blocks): a map of a few
//! hundred by a few hundred pixels stays well under a megabyte and the
//! encoder needs no compression library. Format: W3C, Portable Network
//! Graphics (PNG) Specification, 2nd ed. (2003); RFC 1950 (zlib) and
//! RFC 1951 (deflate) for the stored blocks.

fn crc32(bytes: &[u8]) -> u32 {
    let mut table = [0u32; 256];
    for (n, slot) in table.iter_mut().enumerate() {
        let mut c = n as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xedb8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
        *slot = c;
    }
    let mut c = 0xffff_ffffu32;
    for &b in bytes {
        c = table[((c ^ b as u32) & 0xff) as usize] ^ (c >> 8);
    }
    c ^ 0xffff_ffff
}

fn adler32(bytes: &[u8]) -> u32 {
    let (mut a, mut b) = (1u32, 0u32);
    for chunk in bytes.chunks(5552) {
        for &x in chunk {
            a += x as u32;
            b += a;
        }
        a %= 65521;
        b %= 65521;
    }
    (b << 16) | a
}

fn chunk(out: &mut Vec<u8>, kind: &[u8; 4], data: &[u8]) {
    out.extend_from_slice(&(data.len() as u32).to_be_bytes());
    let start = out.len();
    out.extend_from_slice(kind);
    out.extend_from_slice(data);
    let crc = crc32(&out[start..]);
    out.extend_from_slice(&crc.to_be_bytes());
}

/// PNG bytes of an 8-bit RGB image, rows top to bottom, `rgb.len() ==
/// 3 * width * height`.
pub fn png_rgb(width: usize, height: usize, rgb: &[u8]) -> Vec<u8> {
    assert_eq!(rgb.len(), 3 * width * height, "RGB buffer size");
    let mut raw = Vec::with_capacity((3 * width + 1) * height);
    for row in rgb.chunks(3 * width.max(1)).take(height) {
        raw.push(0); // filter: none
        raw.extend_from_slice(row);
    }
    let mut z = vec![0x78, 0x01];
    if raw.is_empty() {
        z.extend_from_slice(&[1, 0, 0, 0xff, 0xff]);
    }
    let blocks = raw.chunks(65535).count();
    for (i, block) in raw.chunks(65535).enumerate() {
        z.push(u8::from(i + 1 == blocks));
        let len = block.len() as u16;
        z.extend_from_slice(&len.to_le_bytes());
        z.extend_from_slice(&(!len).to_le_bytes());
        z.extend_from_slice(block);
    }
    z.extend_from_slice(&adler32(&raw).to_be_bytes());

    let mut out = vec![0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];
    let mut ihdr = Vec::with_capacity(13);
    ihdr.extend_from_slice(&(width as u32).to_be_bytes());
    ihdr.extend_from_slice(&(height as u32).to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]); // 8 bit, RGB, deflate, no filter, no interlace
    chunk(&mut out, b"IHDR", &ihdr);
    chunk(&mut out, b"IDAT", &z);
    chunk(&mut out, b"IEND", &[]);
    out
}

/// The values of a heat map, rows × columns (row r at the r-th y
/// coordinate): an array, or a function that fills one row at a time, so
/// that a map read straight from a solution's energy-major arrays is
/// never stored whole nor transposed.
pub(crate) enum MapValues<'a> {
    /// The values as an array.
    Dense(&'a ndarray::Array2<f64>),
    /// `fill(r, row)` writes the `dim.1` values of row r; rows may be
    /// filled in any order and from several threads.
    Rows {
        /// (rows, columns).
        dim: (usize, usize),
        /// Writes one row.
        fill: &'a (dyn Fn(usize, &mut [f64]) + Sync),
    },
}

impl MapValues<'_> {
    /// (rows, columns).
    pub fn dim(&self) -> (usize, usize) {
        match self {
            MapValues::Dense(v) => v.dim(),
            MapValues::Rows { dim, .. } => *dim,
        }
    }

    /// Write row `r` into `out` (`dim().1` values).
    pub fn fill_row(&self, r: usize, out: &mut [f64]) {
        match self {
            MapValues::Dense(v) => out.copy_from_slice(
                v.row(r)
                    .as_slice()
                    .expect("a heat map's values are in standard (row-major) order"),
            ),
            MapValues::Rows { fill, .. } => fill(r, out),
        }
    }

    /// Every value as an array (rows filled in parallel).
    pub fn to_array(&self) -> ndarray::Array2<f64> {
        use rayon::prelude::*;
        if let MapValues::Dense(v) = self {
            return (*v).clone();
        }
        let (ny, nx) = self.dim();
        let mut out = ndarray::Array2::zeros((ny, nx));
        if let Some(flat) = out.as_slice_mut().filter(|_| nx > 0) {
            flat.par_chunks_mut(nx)
                .enumerate()
                .for_each(|(r, row)| self.fill_row(r, row));
        }
        out
    }
}

/// A map of at most `max_pixels` values for a raster image of `values`:
/// the map itself when it is small enough, otherwise each pixel the mean
/// of the finite values of the block of rows × columns it covers (NaN
/// when none is finite). Both axes are reduced by about the same factor;
/// the blocks of an axis differ in length by at most one value, so every
/// pixel stands for nearly the same width and height and the image keeps
/// its geometry to within one value of the map.
pub fn pixel_means(values: &ndarray::Array2<f64>, max_pixels: usize) -> ndarray::Array2<f64> {
    pixel_means_of(&MapValues::Dense(values), max_pixels)
}

/// [`pixel_means`] of rows given by [`MapValues`]: the rows of pixels in
/// parallel, each pixel summed over its rows in order and over each row's
/// columns in order, so every pixel is the same sum (the same bits) as a
/// serial pass over the map in row-major order gives.
pub(crate) fn pixel_means_of(values: &MapValues<'_>, max_pixels: usize) -> ndarray::Array2<f64> {
    use rayon::prelude::*;
    let (ny, nx) = values.dim();
    if ny * nx <= max_pixels.max(1) {
        return values.to_array();
    }
    let [ky, kx] = crate::output::sizes::block_sizes([ny, nx], max_pixels);
    let (py, px) = (ny.div_ceil(ky), nx.div_ceil(kx));
    // Pixel p covers values [p·n/m, (p+1)·n/m).
    let owner = |n: usize, m: usize| -> Vec<usize> { (0..n).map(|i| i * m / n).collect() };
    let (row_of, col_of) = (owner(ny, py), owner(nx, px));
    let mut sum = ndarray::Array2::<f64>::zeros((py, px));
    let flat = sum.as_slice_mut().expect("a new array is contiguous");
    flat.par_chunks_mut(px).enumerate().for_each(|(p, out)| {
        let mut count = vec![0u32; px];
        let mut row = vec![0.0; nx];
        // The value rows this pixel row covers (row_of is non-decreasing).
        let first = row_of.partition_point(|&o| o < p);
        let end = row_of.partition_point(|&o| o <= p);
        for r in first..end {
            values.fill_row(r, &mut row);
            for (&v, &c) in row.iter().zip(&col_of) {
                if v.is_finite() {
                    out[c] += v;
                    count[c] += 1;
                }
            }
        }
        for (s, &n) in out.iter_mut().zip(&count) {
            *s = if n > 0 { *s / f64::from(n) } else { f64::NAN };
        }
    });
    sum
}

/// Standard base64 (RFC 4648, with padding).
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut s = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for c in bytes.chunks(3) {
        let n = (c[0] as u32) << 16
            | (c.get(1).copied().unwrap_or(0) as u32) << 8
            | c.get(2).copied().unwrap_or(0) as u32;
        for k in 0..4 {
            if k <= c.len() {
                s.push(ALPHABET[((n >> (18 - 6 * k)) & 63) as usize] as char);
            } else {
                s.push('=');
            }
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn checksums_match_published_values() {
        // Check values from common practice: CRC-32 of "123456789" is
        // 0xCBF43926; Adler-32 of "Wikipedia" is 0x11E60398 (RFC 1950 algorithm).
        assert_eq!(crc32(b"123456789"), 0xcbf4_3926);
        assert_eq!(adler32(b"Wikipedia"), 0x11e6_0398);
    }

    #[test]
    fn base64_pads() {
        // RFC 4648 section 10 test vectors.
        assert_eq!(base64(b"f"), "Zg==");
        assert_eq!(base64(b"fo"), "Zm8=");
        assert_eq!(base64(b"foo"), "Zm9v");
        assert_eq!(base64(b"foobar"), "Zm9vYmFy");
    }

    #[test]
    fn pixel_means_average_what_each_pixel_covers() {
        let v = ndarray::Array2::from_shape_fn((6, 9), |(r, c)| (r * 9 + c) as f64);
        assert_eq!(pixel_means(&v, 54), v);
        let p = pixel_means(&v, 6);
        assert_eq!(p.dim(), (2, 3));
        // Pixel (0, 0) covers rows 0..3 and columns 0..3.
        let want: f64 = v.slice(ndarray::s![0..3, 0..3]).iter().sum::<f64>() / 9.0;
        assert_eq!(p[(0, 0)], want);
        // NaN values (no states) are left out of a mean; a block of NaN only is NaN.
        let mut w = v.clone();
        w[(0, 0)] = f64::NAN;
        let q = pixel_means(&w, 6);
        assert_eq!(q[(0, 0)], (want * 9.0) / 8.0);
        let nan = ndarray::Array2::from_elem((4, 4), f64::NAN);
        assert!(pixel_means(&nan, 4).iter().all(|x| x.is_nan()));
    }

    /// The serial pass the parallel [`pixel_means_of`] replaced: every
    /// value added to its pixel in row-major order.
    fn serial_pixel_means(
        values: &ndarray::Array2<f64>,
        max_pixels: usize,
    ) -> ndarray::Array2<f64> {
        let (ny, nx) = values.dim();
        let [ky, kx] = crate::output::sizes::block_sizes([ny, nx], max_pixels);
        let (py, px) = (ny.div_ceil(ky), nx.div_ceil(kx));
        let mut sum = ndarray::Array2::<f64>::zeros((py, px));
        let mut count = ndarray::Array2::<u32>::zeros((py, px));
        for ((r, c), v) in values.indexed_iter() {
            if v.is_finite() {
                sum[(r * py / ny, c * px / nx)] += v;
                count[(r * py / ny, c * px / nx)] += 1;
            }
        }
        ndarray::Zip::from(&mut sum).and(&count).for_each(|s, &n| {
            *s = if n > 0 { *s / f64::from(n) } else { f64::NAN };
        });
        sum
    }

    #[test]
    fn pixel_means_of_rows_give_the_bits_of_a_serial_pass() {
        // Values of many magnitudes, so that a different order of the sums
        // would change the last bits; some NaN.
        let v = ndarray::Array2::from_shape_fn((203, 517), |(r, c)| {
            let x = ((r * 517 + c) as f64 * 0.618_033_988_7).fract();
            if (r + 3 * c) % 97 == 0 {
                f64::NAN
            } else {
                (x - 0.3) * 10f64.powi((c % 13) as i32 - 6)
            }
        });
        let fill = |r: usize, row: &mut [f64]| row.copy_from_slice(v.row(r).as_slice().unwrap());
        let rows = MapValues::Rows {
            dim: v.dim(),
            fill: &fill,
        };
        for max_pixels in [1000, 4321, 20_000] {
            let want = serial_pixel_means(&v, max_pixels);
            for got in [
                pixel_means(&v, max_pixels),
                pixel_means_of(&rows, max_pixels),
            ] {
                assert_eq!(got.dim(), want.dim());
                for (a, b) in got.iter().zip(&want) {
                    assert!(
                        a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
                        "{a} {b}"
                    );
                }
            }
        }
        // Small enough: the values themselves.
        let small = pixel_means_of(&rows, v.len());
        assert!(
            small
                .iter()
                .zip(&v)
                .all(|(a, b)| a.to_bits() == b.to_bits())
        );
    }

    #[test]
    fn png_has_signature_and_sizes() {
        let png = png_rgb(2, 1, &[255, 0, 0, 0, 0, 255]);
        assert_eq!(&png[..8], &[0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a]);
        assert_eq!(&png[12..16], b"IHDR");
        assert_eq!(u32::from_be_bytes(png[16..20].try_into().unwrap()), 2);
        assert_eq!(u32::from_be_bytes(png[20..24].try_into().unwrap()), 1);
    }
}
