//! `icefield install`: writes the Jupyter kernel spec (`kernel.json` and logos) into a
//! Jupyter data directory where `jupyter kernelspec list` finds it.
//!
//! Kernel-spec layout: `<data dir>/kernels/<name>/kernel.json` (Jupyter client
//! documentation, "Kernel specs"). Data directories: the user's
//! (`$JUPYTER_DATA_DIR`, else `~/.local/share/jupyter`), a prefix's
//! (`<prefix>/share/jupyter`), and the active Python environment's (`sys.prefix`).

use std::fmt;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::json;

pub const DISPLAY_NAME: &str = "icefield (spin ice)";

/// Where to install.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    User,
    SysPrefix,
    Prefix(PathBuf),
}

#[derive(Debug)]
pub struct InstallError(pub String);

impl fmt::Display for InstallError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for InstallError {}

/// Kernel names are used as folder names and in URLs; Jupyter allows ASCII letters,
/// digits, `.`, `_` and `-` (jupyter_client `kernelspec._is_valid_kernel_name`, common
/// practice).
pub fn check_kernel_name(name: &str) -> Result<(), InstallError> {
    let valid = !name.is_empty()
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-'));
    if valid {
        Ok(())
    } else {
        Err(InstallError(format!(
            "invalid kernel name {name:?}: use ASCII letters, digits, '.', '_' or '-'"
        )))
    }
}

/// The Jupyter data directory for a target (`…/share/jupyter` or the user's).
pub fn data_dir(target: &Target) -> Result<PathBuf, InstallError> {
    match target {
        Target::Prefix(prefix) => Ok(prefix.join("share").join("jupyter")),
        Target::User => {
            if let Some(dir) = std::env::var_os("JUPYTER_DATA_DIR").filter(|d| !d.is_empty()) {
                return Ok(PathBuf::from(dir));
            }
            let home = std::env::var_os("HOME")
                .filter(|h| !h.is_empty())
                .ok_or_else(|| InstallError("HOME is not set; use --prefix DIR".into()))?;
            Ok(PathBuf::from(home)
                .join(".local")
                .join("share")
                .join("jupyter"))
        }
        Target::SysPrefix => Ok(python_prefix()?.join("share").join("jupyter")),
    }
}

/// The active Python environment: `$VIRTUAL_ENV` if a virtualenv is activated,
/// otherwise what `python3` reports as `sys.prefix`.
fn python_prefix() -> Result<PathBuf, InstallError> {
    if let Some(venv) = std::env::var_os("VIRTUAL_ENV").filter(|v| !v.is_empty()) {
        return Ok(PathBuf::from(venv));
    }
    let output = Command::new("python3")
        .args(["-c", "import sys; print(sys.prefix)"])
        .output()
        .map_err(|e| {
            InstallError(format!(
                "cannot run python3 to find sys.prefix ({e}); use --prefix DIR"
            ))
        })?;
    if !output.status.success() {
        return Err(InstallError(
            "python3 failed to report sys.prefix; use --prefix DIR".into(),
        ));
    }
    let prefix = String::from_utf8_lossy(&output.stdout).trim().to_owned();
    if prefix.is_empty() {
        return Err(InstallError(
            "python3 reported an empty sys.prefix; use --prefix DIR".into(),
        ));
    }
    Ok(PathBuf::from(prefix))
}

/// The `kernel.json` text for a kernel started as `exe kernel --connection-file F`.
pub fn kernel_json(exe: &Path) -> String {
    let spec = json!({
        "argv": [exe.to_string_lossy(), "kernel", "--connection-file", "{connection_file}"],
        "display_name": DISPLAY_NAME,
        "language": icefield_lang::LANGUAGE_NAME,
        // Interrupts arrive as control messages, so the kernel keeps running and keeps
        // its workspace (no SIGINT handling races).
        "interrupt_mode": "message",
        "env": {},
        "metadata": {
            "debugger": false,
            "icefield_version": env!("CARGO_PKG_VERSION"),
        },
    });
    serde_json::to_string_pretty(&spec).unwrap_or_default() + "\n"
}

/// Installs the kernel spec and returns its folder.
pub fn install(target: &Target, name: &str) -> Result<PathBuf, InstallError> {
    check_kernel_name(name)?;
    let exe = std::env::current_exe()
        .and_then(|p| p.canonicalize())
        .map_err(|e| InstallError(format!("cannot find the icefield executable: {e}")))?;
    let dir = data_dir(target)?.join("kernels").join(name);
    write_spec(&dir, &exe)?;
    Ok(dir)
}

/// Writes kernel.json and the three logos into `dir`.
pub fn write_spec(dir: &Path, exe: &Path) -> Result<(), InstallError> {
    let fail = |what: &str, e: std::io::Error| InstallError(format!("cannot write {what}: {e}"));
    std::fs::create_dir_all(dir).map_err(|e| fail(&dir.display().to_string(), e))?;
    let write = |file: &str, bytes: &[u8]| {
        let path = dir.join(file);
        std::fs::write(&path, bytes).map_err(|e| fail(&path.display().to_string(), e))
    };
    write("kernel.json", kernel_json(exe).as_bytes())?;
    write("logo-svg.svg", logo::svg().as_bytes())?;
    for size in [32, 64] {
        let png =
            logo::png(size).map_err(|e| InstallError(format!("cannot encode the logo: {e}")))?;
        write(&format!("logo-{size}x{size}.png"), &png)?;
    }
    Ok(())
}

/// The icefield logo: one tetrahedron of the pyrochlore lattice with its four spins in
/// the two-in/two-out arrangement of the ice rule (Bernal and Fowler, J. Chem. Phys. 1,
/// 515, 1933; for spin ice, Harris et al., Phys. Rev. Lett. 79, 2554, 1997).
///
/// The picture is one list of shapes on a 64×64 canvas, written out as SVG and
/// rasterised (4×4 supersampling, "over" compositing) for the PNG sizes, so all three
/// files show the same drawing.
pub mod logo {
    #[derive(Clone, Copy, Debug, PartialEq)]
    pub struct Colour {
        pub red: u8,
        pub green: u8,
        pub blue: u8,
        pub alpha: f64,
    }

    impl Colour {
        const fn rgb(hex: u32, alpha: f64) -> Colour {
            Colour {
                red: (hex >> 16) as u8,
                green: (hex >> 8) as u8,
                blue: hex as u8,
                alpha,
            }
        }
        fn css(&self) -> String {
            format!("#{:02x}{:02x}{:02x}", self.red, self.green, self.blue)
        }
    }

    type Point = [f64; 2];

    #[derive(Clone, Debug, PartialEq)]
    pub enum Shape {
        RoundedSquare {
            size: f64,
            radius: f64,
            fill: Colour,
        },
        Line {
            from: Point,
            to: Point,
            width: f64,
            stroke: Colour,
        },
        Triangle {
            corners: [Point; 3],
            fill: Colour,
        },
    }

    const CANVAS: f64 = 64.0;
    const ICE: Colour = Colour::rgb(0xe7f1f8, 1.0);
    const EDGE: Colour = Colour::rgb(0x23405a, 1.0);
    const HIDDEN_EDGE: Colour = Colour::rgb(0x23405a, 0.4);
    const SPIN_OUT: Colour = Colour::rgb(0xd1495b, 1.0);
    const SPIN_IN: Colour = Colour::rgb(0x1f78b4, 1.0);

    /// Apex, left, right (behind) and front corners of the tetrahedron.
    const APEX: Point = [32.0, 12.0];
    const LEFT: Point = [13.0, 43.0];
    const RIGHT: Point = [51.0, 41.0];
    const FRONT: Point = [30.0, 53.0];

    fn centre() -> Point {
        let xs = APEX[0] + LEFT[0] + RIGHT[0] + FRONT[0];
        let ys = APEX[1] + LEFT[1] + RIGHT[1] + FRONT[1];
        [xs / 4.0, ys / 4.0]
    }

    /// A spin on a corner, pointing along the corner's axis through the centre
    /// (the local ⟨111⟩ easy axis), outwards or inwards.
    fn spin(corner: Point, outwards: bool, colour: Colour) -> [Shape; 2] {
        let c = centre();
        let (dx, dy) = (corner[0] - c[0], corner[1] - c[1]);
        let norm = (dx * dx + dy * dy).sqrt();
        let sign = if outwards { 1.0 } else { -1.0 };
        let (ux, uy) = (sign * dx / norm, sign * dy / norm);
        let half = 7.5;
        let head = 6.0;
        let tail = [corner[0] - ux * half, corner[1] - uy * half];
        let tip = [corner[0] + ux * half, corner[1] + uy * half];
        let base = [tip[0] - ux * head, tip[1] - uy * head];
        let (px, py) = (-uy * 3.6, ux * 3.6);
        [
            Shape::Line {
                from: tail,
                to: base,
                width: 3.0,
                stroke: colour,
            },
            Shape::Triangle {
                corners: [
                    tip,
                    [base[0] + px, base[1] + py],
                    [base[0] - px, base[1] - py],
                ],
                fill: colour,
            },
        ]
    }

    pub fn shapes() -> Vec<Shape> {
        let edge = |from, to, stroke, width| Shape::Line {
            from,
            to,
            width,
            stroke,
        };
        let mut shapes = vec![
            Shape::RoundedSquare {
                size: CANVAS,
                radius: 12.0,
                fill: ICE,
            },
            edge(LEFT, RIGHT, HIDDEN_EDGE, 2.0),
            edge(APEX, RIGHT, EDGE, 2.6),
            edge(APEX, LEFT, EDGE, 2.6),
            edge(APEX, FRONT, EDGE, 2.6),
            edge(LEFT, FRONT, EDGE, 2.6),
            edge(FRONT, RIGHT, EDGE, 2.6),
        ];
        // Two in, two out: the ice rule.
        shapes.extend(spin(APEX, true, SPIN_OUT));
        shapes.extend(spin(FRONT, true, SPIN_OUT));
        shapes.extend(spin(LEFT, false, SPIN_IN));
        shapes.extend(spin(RIGHT, false, SPIN_IN));
        shapes
    }

    fn opacity(colour: &Colour) -> String {
        if colour.alpha < 1.0 {
            format!(" opacity=\"{}\"", colour.alpha)
        } else {
            String::new()
        }
    }

    pub fn svg() -> String {
        let mut out = String::from(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"64\" height=\"64\" viewBox=\"0 0 64 64\">\n\
             <title>icefield</title>\n",
        );
        for shape in shapes() {
            let element = match &shape {
                Shape::RoundedSquare { size, radius, fill } => format!(
                    "<rect x=\"0\" y=\"0\" width=\"{size}\" height=\"{size}\" rx=\"{radius}\" fill=\"{}\"{}/>",
                    fill.css(),
                    opacity(fill)
                ),
                Shape::Line { from, to, width, stroke } => format!(
                    "<line x1=\"{:.2}\" y1=\"{:.2}\" x2=\"{:.2}\" y2=\"{:.2}\" stroke=\"{}\" stroke-width=\"{width}\" stroke-linecap=\"round\"{}/>",
                    from[0], from[1], to[0], to[1], stroke.css(), opacity(stroke)
                ),
                Shape::Triangle { corners, fill } => format!(
                    "<polygon points=\"{:.2},{:.2} {:.2},{:.2} {:.2},{:.2}\" fill=\"{}\"{}/>",
                    corners[0][0], corners[0][1], corners[1][0], corners[1][1],
                    corners[2][0], corners[2][1], fill.css(), opacity(fill)
                ),
            };
            out.push_str(&element);
            out.push('\n');
        }
        out.push_str("</svg>\n");
        out
    }

    fn covers(shape: &Shape, x: f64, y: f64) -> bool {
        match shape {
            Shape::RoundedSquare { size, radius, .. } => {
                // Distance from the inner square of corner-circle centres.
                let cx = x.clamp(*radius, size - radius);
                let cy = y.clamp(*radius, size - radius);
                (0.0..=*size).contains(&x)
                    && (0.0..=*size).contains(&y)
                    && (x - cx).powi(2) + (y - cy).powi(2) <= radius * radius
            }
            Shape::Line {
                from, to, width, ..
            } => {
                // A round-capped stroke: points within width/2 of the segment.
                let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
                let length2 = dx * dx + dy * dy;
                let t = if length2 > 0.0 {
                    (((x - from[0]) * dx + (y - from[1]) * dy) / length2).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let (nx, ny) = (from[0] + t * dx - x, from[1] + t * dy - y);
                nx * nx + ny * ny <= (width / 2.0).powi(2)
            }
            Shape::Triangle { corners, .. } => {
                let side =
                    |a: Point, b: Point| (b[0] - a[0]) * (y - a[1]) - (b[1] - a[1]) * (x - a[0]);
                let d1 = side(corners[0], corners[1]);
                let d2 = side(corners[1], corners[2]);
                let d3 = side(corners[2], corners[0]);
                let negative = d1 < 0.0 || d2 < 0.0 || d3 < 0.0;
                let positive = d1 > 0.0 || d2 > 0.0 || d3 > 0.0;
                !(negative && positive)
            }
        }
    }

    fn colour_of(shape: &Shape) -> Colour {
        match shape {
            Shape::RoundedSquare { fill, .. } | Shape::Triangle { fill, .. } => *fill,
            Shape::Line { stroke, .. } => *stroke,
        }
    }

    /// RGBA pixels (straight alpha), `size`×`size`.
    pub fn raster(size: u32) -> Vec<u8> {
        const SUB: u32 = 4;
        let shapes = shapes();
        let scale = CANVAS / size as f64;
        let mut pixels = Vec::with_capacity((size * size * 4) as usize);
        for row in 0..size {
            for col in 0..size {
                // Premultiplied accumulation over the sub-samples.
                let mut sum = [0.0f64; 4];
                for sy in 0..SUB {
                    for sx in 0..SUB {
                        let x = (col as f64 + (sx as f64 + 0.5) / SUB as f64) * scale;
                        let y = (row as f64 + (sy as f64 + 0.5) / SUB as f64) * scale;
                        let mut px = [0.0f64; 4];
                        for shape in shapes.iter().filter(|s| covers(s, x, y)) {
                            let c = colour_of(shape);
                            let a = c.alpha;
                            let src = [
                                c.red as f64 / 255.0 * a,
                                c.green as f64 / 255.0 * a,
                                c.blue as f64 / 255.0 * a,
                                a,
                            ];
                            // Porter-Duff "over" (Porter and Duff, SIGGRAPH 1984).
                            for (dst, s) in px.iter_mut().zip(src) {
                                *dst = s + *dst * (1.0 - a);
                            }
                        }
                        for (total, p) in sum.iter_mut().zip(px) {
                            *total += p;
                        }
                    }
                }
                let n = (SUB * SUB) as f64;
                let alpha = sum[3] / n;
                for channel in &sum[..3] {
                    let straight = if alpha > 0.0 {
                        channel / n / alpha
                    } else {
                        0.0
                    };
                    pixels.push((straight * 255.0).round().clamp(0.0, 255.0) as u8);
                }
                pixels.push((alpha * 255.0).round().clamp(0.0, 255.0) as u8);
            }
        }
        pixels
    }

    /// A PNG file of the logo at `size`×`size` pixels.
    pub fn png(size: u32) -> Result<Vec<u8>, ::png::EncodingError> {
        let mut bytes = Vec::new();
        {
            let mut encoder = ::png::Encoder::new(&mut bytes, size, size);
            encoder.set_color(::png::ColorType::Rgba);
            encoder.set_depth(::png::BitDepth::Eight);
            let mut writer = encoder.write_header()?;
            writer.write_image_data(&raster(size))?;
            writer.finish()?;
        }
        Ok(bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernel_json_has_the_required_fields() {
        let text = kernel_json(Path::new("/opt/icefield/bin/icefield"));
        let spec: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(
            spec["argv"],
            json!([
                "/opt/icefield/bin/icefield",
                "kernel",
                "--connection-file",
                "{connection_file}"
            ])
        );
        assert_eq!(spec["display_name"], DISPLAY_NAME);
        assert_eq!(spec["language"], "icefield");
        assert_eq!(spec["interrupt_mode"], "message");
        assert!(spec["metadata"].is_object());
    }

    #[test]
    fn kernel_names_are_checked() {
        assert!(check_kernel_name("icefield").is_ok());
        assert!(check_kernel_name("icefield-dev_2.1").is_ok());
        assert!(check_kernel_name("").is_err());
        assert!(check_kernel_name("../x").is_err());
        assert!(check_kernel_name("ice field").is_err());
    }

    #[test]
    fn prefix_layout() {
        let dir = data_dir(&Target::Prefix(PathBuf::from("/p"))).unwrap();
        assert_eq!(dir, PathBuf::from("/p/share/jupyter"));
    }

    #[test]
    fn png_logo_decodes_to_the_drawn_picture() {
        for size in [32u32, 64] {
            let bytes = logo::png(size).unwrap();
            // PNG signature, ISO/IEC 15948:2003 section 5.2.
            assert_eq!(
                &bytes[..8],
                &[0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a]
            );
            let decoder = ::png::Decoder::new(std::io::Cursor::new(bytes));
            let mut reader = decoder.read_info().unwrap();
            let mut buf = vec![0; reader.output_buffer_size().unwrap()];
            let info = reader.next_frame(&mut buf).unwrap();
            assert_eq!((info.width, info.height), (size, size));
            assert_eq!(buf, logo::raster(size));
        }
        let pixels = logo::raster(64);
        let at = |x: usize, y: usize| &pixels[(y * 64 + x) * 4..(y * 64 + x) * 4 + 4];
        // The rounded corner is transparent, the middle of the background opaque ice.
        assert_eq!(at(0, 0)[3], 0);
        assert_eq!(at(40, 30), &[0xe7, 0xf1, 0xf8, 255]);
        // The apex spin points out (upwards): its arrow tip region is drawn in red.
        assert_eq!(&at(32, 6)[..3], &[0xd1, 0x49, 0x5b]);
    }

    #[test]
    fn svg_logo_is_one_element_per_shape() {
        let svg = logo::svg();
        assert!(svg.starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\""));
        let elements = svg.matches("<line").count()
            + svg.matches("<polygon").count()
            + svg.matches("<rect").count();
        assert_eq!(elements, logo::shapes().len());
        assert_eq!(svg.matches("<polygon").count(), 4, "four spins");
    }

    #[test]
    fn write_spec_creates_all_files() {
        let dir = std::env::temp_dir().join(format!("icefield-spec-test-{}", std::process::id()));
        write_spec(&dir, Path::new("/x/icefield")).unwrap();
        for file in [
            "kernel.json",
            "logo-svg.svg",
            "logo-32x32.png",
            "logo-64x64.png",
        ] {
            assert!(dir.join(file).is_file(), "{file}");
        }
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
