//! A still picture behind the map: an equirectangular (2:1) frame of the 360° video the sound
//! belongs to, so a reviewer can check that the sound sits on the thing that makes it.
//!
//! The picture uses the map's own layout (DESIGN.md "Equirectangular display", the layout of a
//! 360 video frame): front in the centre, left (+90°) left of centre, top up; column `c` of a
//! `W`-wide picture is centred on azimuth `180 − (c + ½)·360/W`, row `r` of an `H`-high one on
//! elevation `90 − (r + ½)·180/H`. A yaw offset says which azimuth of the sound field the
//! picture's centre shows (0 = the picture's front is the sound field's front).
//!
//! Loading reads PNG or JPEG, refuses pictures that are not 2:1 (within 1 %), and shrinks
//! them by area averaging so that neither side exceeds a given maximum (the renderer's largest
//! texture, or a report's map size). Loading reads a file and allocates: call it off the audio
//! thread, and in the editor off the GUI thread too. The pixels are never saved with the
//! plugin state, only the path.

use std::fmt;
use std::path::{Path, PathBuf};

/// Largest picture accepted before shrinking, pixels per side (a 16K frame).
pub const MAX_SOURCE_SIDE: usize = 16_384;
/// How far the width may differ from twice the height, as a fraction (1 %).
pub const ASPECT_TOLERANCE: f64 = 0.01;

/// A decoded picture, 8-bit sRGB with straight alpha, rows top to bottom.
#[derive(Clone, PartialEq, Eq)]
pub struct Picture {
    pub width: usize,
    pub height: usize,
    /// `width · height · 4` bytes, RGBA, indexed [(row·width + column)·4 + channel].
    pub rgba: Vec<u8>,
}

impl fmt::Debug for Picture {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Picture({}×{})", self.width, self.height)
    }
}

/// Why a picture could not be used. `Display` is a plain sentence for people.
#[derive(Debug, Clone, PartialEq)]
pub enum PictureError {
    /// The file could not be read (missing, no permission, a folder ...).
    Read { path: PathBuf, reason: String },
    /// Neither PNG nor JPEG.
    NotPngOrJpeg { path: PathBuf },
    /// The file claims to be PNG/JPEG but does not decode.
    Broken { path: PathBuf, reason: String },
    /// Not an equirectangular frame: the width is not twice the height.
    NotTwoToOne {
        path: PathBuf,
        width: usize,
        height: usize,
    },
    /// Larger than [`MAX_SOURCE_SIDE`] on a side, or empty.
    BadSize {
        path: PathBuf,
        width: usize,
        height: usize,
    },
}

impl fmt::Display for PictureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Read { path, reason } => {
                write!(f, "cannot read the picture {}: {reason}", path.display())
            }
            Self::NotPngOrJpeg { path } => {
                write!(f, "{} is not a PNG or JPEG picture", path.display())
            }
            Self::Broken { path, reason } => write!(
                f,
                "the picture {} cannot be decoded: {reason}",
                path.display()
            ),
            Self::NotTwoToOne {
                path,
                width,
                height,
            } => write!(
                f,
                "the picture {} is {width}×{height} pixels; a picture behind the map must be \
                 equirectangular, twice as wide as high (for example 3840×1920)",
                path.display()
            ),
            Self::BadSize {
                path,
                width,
                height,
            } => write!(
                f,
                "the picture {} is {width}×{height} pixels; pictures up to \
                 {MAX_SOURCE_SIDE} pixels wide are supported",
                path.display()
            ),
        }
    }
}

impl std::error::Error for PictureError {}

/// Reads a PNG or JPEG equirectangular picture and shrinks it so that neither side exceeds
/// `max_side` (at least 2 pixels; the 2:1 shape is kept). Allocates and reads a file.
pub fn load_picture(path: &Path, max_side: usize) -> Result<Picture, PictureError> {
    let bytes = std::fs::read(path).map_err(|e| PictureError::Read {
        path: path.to_owned(),
        reason: e.to_string(),
    })?;
    decode_picture(&bytes, path, max_side)
}

/// [`load_picture`] on bytes already in memory; `path` only names the picture in errors.
pub fn decode_picture(bytes: &[u8], path: &Path, max_side: usize) -> Result<Picture, PictureError> {
    const PNG_SIGNATURE: &[u8] = b"\x89PNG\r\n\x1a\n";
    const JPEG_SIGNATURE: &[u8] = &[0xFF, 0xD8, 0xFF];
    let broken = |reason: String| PictureError::Broken {
        path: path.to_owned(),
        reason,
    };
    let full = if bytes.starts_with(PNG_SIGNATURE) {
        decode_png(bytes, path).map_err(broken)?
    } else if bytes.starts_with(JPEG_SIGNATURE) {
        decode_jpeg(bytes, path).map_err(broken)?
    } else {
        return Err(PictureError::NotPngOrJpeg {
            path: path.to_owned(),
        });
    };
    let (width, height) = (full.width, full.height);
    let twice_height = 2.0 * height as f64;
    if (width as f64 - twice_height).abs() > ASPECT_TOLERANCE * twice_height {
        return Err(PictureError::NotTwoToOne {
            path: path.to_owned(),
            width,
            height,
        });
    }
    Ok(full.shrunk_to(max_side.max(2)))
}

/// Checks the declared size before any pixel buffer is allocated.
fn check_size(path: &Path, width: usize, height: usize) -> Result<(), String> {
    if width == 0 || height == 0 || width > MAX_SOURCE_SIDE || height > MAX_SOURCE_SIDE {
        return Err(PictureError::BadSize {
            path: path.to_owned(),
            width,
            height,
        }
        .to_string());
    }
    Ok(())
}

fn decode_png(bytes: &[u8], path: &Path) -> Result<Picture, String> {
    let mut decoder = png::Decoder::new(std::io::Cursor::new(bytes));
    decoder.set_transformations(png::Transformations::normalize_to_color8());
    let mut reader = decoder.read_info().map_err(|e| e.to_string())?;
    let (width, height) = {
        let info = reader.info();
        (info.width as usize, info.height as usize)
    };
    check_size(path, width, height)?;
    let mut buffer = vec![0u8; reader.output_buffer_size()];
    let frame = reader.next_frame(&mut buffer).map_err(|e| e.to_string())?;
    let channels = match frame.color_type {
        png::ColorType::Grayscale => 1,
        png::ColorType::GrayscaleAlpha => 2,
        png::ColorType::Rgb => 3,
        png::ColorType::Rgba => 4,
        png::ColorType::Indexed => return Err("palette was not expanded".to_owned()),
    };
    if frame.bit_depth != png::BitDepth::Eight {
        return Err(format!("unexpected bit depth {:?}", frame.bit_depth));
    }
    let mut rgba = Vec::with_capacity(width * height * 4);
    for row in buffer.chunks(frame.line_size).take(height) {
        append_rgba(&row[..width * channels], channels, &mut rgba);
    }
    Ok(Picture {
        width,
        height,
        rgba,
    })
}

fn decode_jpeg(bytes: &[u8], path: &Path) -> Result<Picture, String> {
    use zune_jpeg::zune_core::bytestream::ZCursor;
    use zune_jpeg::zune_core::colorspace::ColorSpace;
    use zune_jpeg::zune_core::options::DecoderOptions;
    let options = DecoderOptions::default()
        .jpeg_set_out_colorspace(ColorSpace::RGB)
        .set_max_width(MAX_SOURCE_SIDE)
        .set_max_height(MAX_SOURCE_SIDE);
    let mut decoder = zune_jpeg::JpegDecoder::new_with_options(ZCursor::new(bytes), options);
    decoder.decode_headers().map_err(|e| format!("{e:?}"))?;
    let (width, height) = decoder
        .dimensions()
        .ok_or_else(|| "no picture size in the file".to_owned())?;
    check_size(path, width, height)?;
    let rgb = decoder.decode().map_err(|e| format!("{e:?}"))?;
    if rgb.len() < width * height * 3 {
        return Err("the decoded picture is shorter than its size".to_owned());
    }
    let mut rgba = Vec::with_capacity(width * height * 4);
    append_rgba(&rgb[..width * height * 3], 3, &mut rgba);
    Ok(Picture {
        width,
        height,
        rgba,
    })
}

/// Appends 8-bit pixels of 1 (grey), 2 (grey + alpha), 3 (RGB) or 4 (RGBA) channels as RGBA.
fn append_rgba(pixels: &[u8], channels: usize, out: &mut Vec<u8>) {
    for p in pixels.chunks_exact(channels) {
        let px = match *p {
            [g] => [g, g, g, 255],
            [g, a] => [g, g, g, a],
            [r, g, b] => [r, g, b, 255],
            [r, g, b, a] => [r, g, b, a],
            _ => [0, 0, 0, 255],
        };
        out.extend_from_slice(&px);
    }
}

impl Picture {
    /// The picture shrunk by area averaging so that neither side exceeds `max_side`
    /// (unchanged if it already fits). Both sides shrink by the same factor, rounded.
    pub fn shrunk_to(self, max_side: usize) -> Picture {
        let longest = self.width.max(self.height);
        if longest <= max_side {
            return self;
        }
        let scale = max_side as f64 / longest as f64;
        let new_w = ((self.width as f64 * scale).round() as usize).clamp(1, max_side);
        let new_h = ((self.height as f64 * scale).round() as usize).clamp(1, max_side);
        self.resampled(new_w, new_h)
    }

    /// Area-average resampling to a smaller `new_w × new_h` (each output pixel is the mean of
    /// the source pixels whose centres fall inside it).
    fn resampled(&self, new_w: usize, new_h: usize) -> Picture {
        let span = |i: usize, new: usize, old: usize| {
            let start = i * old / new;
            let end = ((i + 1) * old / new).max(start + 1).min(old);
            start..end
        };
        let columns: Vec<std::ops::Range<usize>> =
            (0..new_w).map(|x| span(x, new_w, self.width)).collect();
        let mut rgba = Vec::with_capacity(new_w * new_h * 4);
        let mut sums = vec![0u64; new_w * 4];
        for y in 0..new_h {
            sums.fill(0);
            let rows = span(y, new_h, self.height);
            let row_count = rows.len() as u64;
            for row in rows {
                let line = &self.rgba[row * self.width * 4..(row + 1) * self.width * 4];
                for (x, cols) in columns.iter().enumerate() {
                    for col in cols.clone() {
                        for ch in 0..4 {
                            sums[x * 4 + ch] += u64::from(line[col * 4 + ch]);
                        }
                    }
                }
            }
            for (x, cols) in columns.iter().enumerate() {
                let count = row_count * cols.len() as u64;
                for ch in 0..4 {
                    rgba.push(((sums[x * 4 + ch] + count / 2) / count) as u8);
                }
            }
        }
        Picture {
            width: new_w,
            height: new_h,
            rgba,
        }
    }

    /// The picture's colour in direction (azimuth, elevation) of the picture's own frame
    /// (its centre is azimuth 0), degrees; bilinear between pixel centres, wrapping around in
    /// azimuth and held at the poles. Non-finite angles give transparent black.
    pub fn sample(&self, azimuth_deg: f64, elevation_deg: f64) -> [u8; 4] {
        if self.width == 0
            || self.height == 0
            || !azimuth_deg.is_finite()
            || !elevation_deg.is_finite()
        {
            return [0; 4];
        }
        let (w, h) = (self.width as f64, self.height as f64);
        // Continuous pixel coordinates with pixel centres at integers.
        let x = (180.0 - azimuth_deg) / 360.0 * w - 0.5;
        let y = ((90.0 - elevation_deg.clamp(-90.0, 90.0)) / 180.0 * h - 0.5).clamp(0.0, h - 1.0);
        let (x0, y0) = (x.floor(), y.floor());
        let (fx, fy) = (x - x0, y - y0);
        let column = |i: f64| (i.rem_euclid(w) as usize).min(self.width - 1);
        let row = |i: f64| (i.max(0.0) as usize).min(self.height - 1);
        let (c0, c1, r0, r1) = (column(x0), column(x0 + 1.0), row(y0), row(y0 + 1.0));
        let px =
            |c: usize, r: usize, ch: usize| f64::from(self.rgba[(r * self.width + c) * 4 + ch]);
        std::array::from_fn(|ch| {
            let top = px(c0, r0, ch) * (1.0 - fx) + px(c1, r0, ch) * fx;
            let bottom = px(c0, r1, ch) * (1.0 - fx) + px(c1, r1, ch) * fx;
            (top * (1.0 - fy) + bottom * fy).round().clamp(0.0, 255.0) as u8
        })
    }

    /// The colour the picture shows in sound-field direction (azimuth, elevation) when its
    /// centre is turned to azimuth `yaw_offset_deg`.
    pub fn sample_at(&self, azimuth_deg: f64, elevation_deg: f64, yaw_offset_deg: f64) -> [u8; 4] {
        self.sample(azimuth_deg - yaw_offset_deg, elevation_deg)
    }
}

/// Puts `picture` behind an equirectangular map image (RGBA, `map_w × map_h`, the map's pixel
/// layout): every pixel becomes `(1 − opacity)·map + opacity·picture`, the picture turned so
/// that its centre shows azimuth `yaw_offset_deg`. `opacity` is clamped to 0 … 1 (0 leaves the
/// map untouched); the map's alpha is kept. The editor draws the same blend on screen (the
/// picture, then the map at `1 − opacity`).
pub fn composite_under(
    map_rgba: &mut [u8],
    map_w: usize,
    map_h: usize,
    picture: &Picture,
    yaw_offset_deg: f64,
    opacity: f64,
) {
    let opacity = if opacity.is_finite() {
        opacity.clamp(0.0, 1.0)
    } else {
        0.0
    };
    if opacity == 0.0 || map_w == 0 || map_h == 0 {
        return;
    }
    for (row, line) in map_rgba.chunks_exact_mut(map_w * 4).take(map_h).enumerate() {
        let elevation_deg = 90.0 - (row as f64 + 0.5) * 180.0 / map_h as f64;
        for (column, px) in line.chunks_exact_mut(4).enumerate() {
            let azimuth_deg = 180.0 - (column as f64 + 0.5) * 360.0 / map_w as f64;
            let under = picture.sample_at(azimuth_deg, elevation_deg, yaw_offset_deg);
            for ch in 0..3 {
                let mixed = (1.0 - opacity) * f64::from(px[ch]) + opacity * f64::from(under[ch]);
                px[ch] = mixed.round().clamp(0.0, 255.0) as u8;
            }
        }
    }
}

/// Writes `picture` as an 8-bit RGBA PNG (for tests and the synthesised demo picture).
pub fn write_png(path: &Path, picture: &Picture) -> std::io::Result<()> {
    let file = std::io::BufWriter::new(std::fs::File::create(path)?);
    let mut encoder = png::Encoder::new(file, picture.width as u32, picture.height as u32);
    encoder.set_color(png::ColorType::Rgba);
    encoder.set_depth(png::BitDepth::Eight);
    let mut writer = encoder.write_header().map_err(std::io::Error::other)?;
    writer
        .write_image_data(&picture.rgba)
        .map_err(std::io::Error::other)?;
    writer.finish().map_err(std::io::Error::other)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A `w × h` picture whose red channel encodes the column and green the row.
    fn gradient(w: usize, h: usize) -> Picture {
        let mut rgba = Vec::with_capacity(w * h * 4);
        for r in 0..h {
            for c in 0..w {
                rgba.extend_from_slice(&[
                    (c * 255 / (w - 1)) as u8,
                    (r * 255 / (h - 1)) as u8,
                    0,
                    255,
                ]);
            }
        }
        Picture {
            width: w,
            height: h,
            rgba,
        }
    }

    fn solid(w: usize, h: usize, px: [u8; 4]) -> Picture {
        Picture {
            width: w,
            height: h,
            rgba: px.repeat(w * h),
        }
    }

    #[test]
    fn sampling_follows_the_map_layout() {
        // DESIGN.md "Equirectangular display": front at the centre, left (+90°) left of it,
        // top up. An 8×4 picture: column c is centred on azimuth 180 − (c + ½)·45°.
        let mut p = solid(8, 4, [0, 0, 0, 255]);
        let mark = |p: &mut Picture, c: usize, r: usize, v: u8| p.rgba[(r * 8 + c) * 4] = v;
        mark(&mut p, 2, 1, 200); // azimuth 67.5° (left of front), elevation 22.5°
        mark(&mut p, 6, 3, 100); // azimuth −112.5° (right, behind), elevation −67.5°
        assert_eq!(p.sample(67.5, 22.5)[0], 200);
        assert_eq!(p.sample(-112.5, -67.5)[0], 100);
        assert_eq!(
            p.sample(-67.5, 22.5)[0],
            0,
            "the mirror direction is not marked"
        );
        // Half way between two centres: the mean.
        assert_eq!(p.sample(67.5 - 22.5, 22.5)[0], 100);
        // Wrap-around across the seam behind: columns 7 and 0 are neighbours.
        mark(&mut p, 0, 0, 40);
        mark(&mut p, 7, 0, 80);
        assert_eq!(p.sample(180.0, 67.5)[0], 60);
        assert_eq!(p.sample(-180.0, 67.5)[0], 60);
        // Poles hold the edge row; NaN gives nothing.
        assert_eq!(p.sample(157.5, 90.0)[0], 40);
        assert_eq!(p.sample(f64::NAN, 0.0), [0; 4]);
    }

    #[test]
    fn yaw_offset_turns_the_picture() {
        let p = gradient(360, 180);
        // With the picture's centre turned to +30°, the sound field's +30° shows what the
        // picture has at its own front.
        assert_eq!(p.sample_at(30.0, 10.0, 30.0), p.sample(0.0, 10.0));
        assert_eq!(p.sample_at(-170.0, 0.0, 30.0), p.sample(160.0, 0.0));
    }

    #[test]
    fn shrinking_keeps_two_to_one_and_averages() {
        let p = gradient(4000, 2000).shrunk_to(1024);
        assert_eq!((p.width, p.height), (1024, 512));
        assert_eq!(p.rgba.len(), 1024 * 512 * 4);
        // A 2×2 checkerboard of 0 and 200 shrunk to 1×... averages to 100.
        let mut c = solid(4, 2, [0, 0, 0, 255]);
        for (i, px) in c.rgba.chunks_exact_mut(4).enumerate() {
            if (i % 4 + i / 4) % 2 == 0 {
                px[0] = 200;
            }
        }
        let small = c.shrunk_to(2);
        assert_eq!((small.width, small.height), (2, 1));
        assert_eq!(&small.rgba, &[100, 0, 0, 255, 100, 0, 0, 255]);
        // Already small enough: untouched.
        let same = gradient(64, 32);
        assert_eq!(same.clone().shrunk_to(64), same);
    }

    #[test]
    fn composite_blends_by_opacity() {
        let picture = solid(16, 8, [200, 100, 0, 255]);
        let mut map = [0u8, 0, 100, 255].repeat(4 * 2);
        composite_under(&mut map, 4, 2, &picture, 0.0, 0.25);
        assert_eq!(&map[..4], &[50, 25, 75, 255]);
        let before = map.clone();
        composite_under(&mut map, 4, 2, &picture, 0.0, 0.0);
        assert_eq!(map, before, "opacity 0 leaves the map alone");
        composite_under(&mut map, 4, 2, &picture, 0.0, f64::NAN);
        assert_eq!(map, before);
    }

    #[test]
    fn files_round_trip_and_bad_files_say_why() {
        let dir = tempfile::tempdir().unwrap();
        let good = dir.path().join("frame.png");
        write_png(&good, &gradient(64, 32)).unwrap();
        let loaded = load_picture(&good, 4096).unwrap();
        assert_eq!(loaded, gradient(64, 32));
        let smaller = load_picture(&good, 16).unwrap();
        assert_eq!((smaller.width, smaller.height), (16, 8));

        let square = dir.path().join("square.png");
        write_png(&square, &gradient(32, 32)).unwrap();
        let e = load_picture(&square, 4096).unwrap_err();
        assert!(matches!(
            e,
            PictureError::NotTwoToOne {
                width: 32,
                height: 32,
                ..
            }
        ));
        assert!(e.to_string().contains("twice as wide as high"), "{e}");

        let missing = load_picture(&dir.path().join("nothing.png"), 4096).unwrap_err();
        assert!(matches!(missing, PictureError::Read { .. }));
        assert!(
            missing.to_string().starts_with("cannot read the picture"),
            "{missing}"
        );

        let text = dir.path().join("notes.png");
        std::fs::write(&text, "not a picture").unwrap();
        assert!(matches!(
            load_picture(&text, 4096).unwrap_err(),
            PictureError::NotPngOrJpeg { .. }
        ));

        // A PNG cut short after its header.
        let bytes = std::fs::read(&good).unwrap();
        let cut = dir.path().join("cut.png");
        std::fs::write(&cut, &bytes[..bytes.len() / 3]).unwrap();
        assert!(matches!(
            load_picture(&cut, 4096).unwrap_err(),
            PictureError::Broken { .. }
        ));
        let jpeg_start = dir.path().join("start.jpg");
        std::fs::write(&jpeg_start, [0xFF, 0xD8, 0xFF, 0xE0, 0, 16]).unwrap();
        assert!(matches!(
            load_picture(&jpeg_start, 4096).unwrap_err(),
            PictureError::Broken { .. }
        ));
    }

    #[test]
    fn jpeg_from_an_independent_encoder_decodes() {
        // Encoded by the `jpeg-encoder` crate (a registry library, not ours): a solid colour
        // survives JPEG within a few code values at quality 95.
        let (w, h) = (128usize, 64usize);
        let rgb = [200u8, 100, 50].repeat(w * h);
        let mut bytes = Vec::new();
        jpeg_encoder::Encoder::new(&mut bytes, 95)
            .encode(&rgb, w as u16, h as u16, jpeg_encoder::ColorType::Rgb)
            .unwrap();
        let p = decode_picture(&bytes, Path::new("solid.jpg"), 64).unwrap();
        assert_eq!((p.width, p.height), (64, 32));
        for (got, want) in p.sample(10.0, 10.0).iter().zip([200u8, 100, 50, 255]) {
            assert!(got.abs_diff(want) <= 3, "{:?}", p.sample(10.0, 10.0));
        }
    }
}
