//! Contact sheets: the pictures of many runs (the points of a sweep) tiled into one PNG, each
//! under a label saying which run it is. A missing picture (a failed point) is a grey tile
//! with its label.

use super::canvas::{Canvas, Rgb};
use super::text::{self, Align, Label};
use super::{write_canvas, NAN_GREY};
use crate::output::OutputError;
use std::path::{Path, PathBuf};

/// One tile of a contact sheet.
#[derive(Clone, Debug)]
pub struct SheetTile {
    /// The picture (an 8-bit RGB or RGBA PNG); `None` or an unreadable file gives a grey tile.
    pub picture: Option<PathBuf>,
    /// Text under the tile.
    pub label: String,
}

/// An RGB image decoded from a PNG.
struct Image {
    width: usize,
    height: usize,
    rgb: Vec<u8>,
}

fn read_png(path: &Path) -> Option<Image> {
    let file = std::fs::File::open(path).ok()?;
    let mut decoder = png::Decoder::new(std::io::BufReader::new(file));
    decoder.set_transformations(png::Transformations::EXPAND | png::Transformations::STRIP_16);
    let mut reader = decoder.read_info().ok()?;
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).ok()?;
    let (w, h) = (info.width as usize, info.height as usize);
    let channels = match info.color_type {
        png::ColorType::Rgb => 3,
        png::ColorType::Rgba => 4,
        png::ColorType::Grayscale => 1,
        png::ColorType::GrayscaleAlpha => 2,
        png::ColorType::Indexed => return None,
    };
    let mut rgb = Vec::with_capacity(w * h * 3);
    for px in buf[..w * h * channels].chunks(channels) {
        match channels {
            1 | 2 => rgb.extend_from_slice(&[px[0], px[0], px[0]]),
            _ => rgb.extend_from_slice(&px[..3]),
        }
    }
    Some(Image {
        width: w,
        height: h,
        rgb,
    })
}

/// Tiles the pictures of `tiles` in rows of `columns`, each scaled (nearest pixel, aspect
/// kept) into a cell of `tile_width` pixels, with `title` on top; writes a PNG atomically.
pub fn write_contact_sheet_png(
    path: &Path,
    tiles: &[SheetTile],
    columns: usize,
    tile_width: u32,
    title: &str,
) -> Result<(), OutputError> {
    let canvas =
        render_sheet(tiles, columns, tile_width, title).map_err(|reason| OutputError::Encode {
            path: path.to_path_buf(),
            reason,
        })?;
    write_canvas(path, &canvas)
}

fn render_sheet(
    tiles: &[SheetTile],
    columns: usize,
    tile_width: u32,
    title: &str,
) -> Result<Canvas, String> {
    text::ensure_font()?;
    if tiles.is_empty() {
        return Err("a contact sheet needs at least one tile".into());
    }
    let columns = columns.clamp(1, tiles.len());
    let rows = tiles.len().div_ceil(columns);
    let images: Vec<Option<Image>> = tiles
        .iter()
        .map(|t| t.picture.as_deref().and_then(read_png))
        .collect();
    let tw = tile_width.clamp(64, 2048) as f64;
    // Cell height from the tallest picture's aspect (all tiles of a sweep usually share it).
    let aspect = images
        .iter()
        .flatten()
        .map(|i| i.height as f64 / i.width.max(1) as f64)
        .fold(0.0f64, f64::max);
    let th = (tw * if aspect > 0.0 { aspect } else { 0.75 }).round();
    let em = (tw / 320.0).clamp(0.7, 2.0);
    let label_h = (26.0 * em).round();
    let gap = (10.0 * em).round();
    let title_h = if title.is_empty() {
        gap
    } else {
        (44.0 * em).round()
    };
    let width = columns as f64 * (tw + gap) + gap;
    let height = title_h + rows as f64 * (th + label_h + gap) + gap;
    if width * height > 2.0e8 {
        return Err(format!(
            "the sheet would be {width} × {height} pixels; draw fewer or smaller tiles"
        ));
    }
    let mut canvas = Canvas::new(width as usize, height as usize);
    let mut labels = Vec::new();
    for (k, (tile, image)) in tiles.iter().zip(&images).enumerate() {
        let (r, c) = (k / columns, k % columns);
        let x0 = gap + c as f64 * (tw + gap);
        let y0 = title_h + r as f64 * (th + label_h + gap);
        match image {
            Some(img) => {
                let s = (tw / img.width as f64).min(th / img.height as f64);
                let (w, h) = (
                    (img.width as f64 * s).floor(),
                    (img.height as f64 * s).floor(),
                );
                let (ox, oy) = (x0 + (tw - w) / 2.0, y0 + (th - h) / 2.0);
                for py in 0..h as usize {
                    let sy = ((py as f64 + 0.5) / s) as usize;
                    for px in 0..w as usize {
                        let sx = ((px as f64 + 0.5) / s) as usize;
                        let i = 3 * (sy.min(img.height - 1) * img.width + sx.min(img.width - 1));
                        let colour: Rgb = [img.rgb[i], img.rgb[i + 1], img.rgb[i + 2]];
                        let (x, y) = (ox + px as f64, oy + py as f64);
                        canvas.fill_rect(x, y, x + 1.0, y + 1.0, colour);
                    }
                }
            }
            None => canvas.fill_rect(x0, y0, x0 + tw, y0 + th, NAN_GREY),
        }
        labels.push(Label::new(
            tile.label.clone(),
            x0 + tw / 2.0,
            y0 + th + label_h / 2.0,
            14.0 * em,
            Align::Centre,
        ));
    }
    if !title.is_empty() {
        labels.push(Label::new(
            title,
            gap,
            title_h / 2.0,
            20.0 * em,
            Align::Left,
        ));
    }
    text::draw_labels(&mut canvas, &labels)?;
    Ok(canvas)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tiles_keep_their_pictures_and_missing_ones_are_grey() {
        let dir = tempfile::tempdir().unwrap();
        // A 40 × 30 picture, red on the left half and blue on the right.
        let mut c = Canvas::new(40, 30);
        c.fill_rect(0.0, 0.0, 20.0, 30.0, [200, 0, 0]);
        c.fill_rect(20.0, 0.0, 40.0, 30.0, [0, 0, 200]);
        let pic = dir.path().join("p.png");
        write_canvas(&pic, &c).unwrap();
        let tiles = vec![
            SheetTile {
                picture: Some(pic),
                label: "a=1".into(),
            },
            SheetTile {
                picture: None,
                label: "a=2 failed".into(),
            },
        ];
        let s = render_sheet(&tiles, 2, 320, "sheet").unwrap();
        let (tw, th) = (320.0, 240.0);
        let em = 1.0;
        let (gap, title_h) = (10.0 * em, 44.0 * em);
        let at = |x: f64, y: f64| s.get(x as usize, y as usize);
        assert_eq!(at(gap + tw * 0.25, title_h + th / 2.0), [200, 0, 0]);
        assert_eq!(at(gap + tw * 0.75, title_h + th / 2.0), [0, 0, 200]);
        assert_eq!(at(2.0 * gap + tw + tw / 2.0, title_h + th / 2.0), NAN_GREY);
        assert!(render_sheet(&[], 1, 320, "").is_err());
    }
}
