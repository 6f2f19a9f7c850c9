//! STL reading, binary and ASCII, into a tagged triangle soup.
//!
//! Follows the STL format as commonly specified (3D Systems, 1989): binary files are an 80-byte
//! header, a little-endian `u32` triangle count and 50 bytes a facet (normal, three vertices as
//! `f32`, a 2-byte attribute); ASCII files are `solid NAME` blocks of `facet ... endfacet`
//! records closed by `endsolid`.
//!
//! Invariants: the reader never panics and never allocates from the count in the file before
//! checking it against the file size; facet normals are ignored (orientation comes from vertex
//! order); every triangle gets three fresh vertices (welding is [`crate::repair`]'s job).
//! Detection: a file is binary when `84 + 50 * count` equals its length, otherwise ASCII when it
//! starts with `solid` and looks like text, otherwise a binary file with a bad count.

use crate::error::{Position, SurfaceError};
use crate::geom::Vec3;
use crate::surface::{Surface, TagId};
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Reads one STL file (binary or ASCII).
///
/// Binary files get one tag named after the file stem; ASCII files one tag per `solid` block,
/// named after the block (the file stem when unnamed; repeated names become `name`, `name.2`, ...).
pub fn load_stl(path: &Path) -> Result<Surface, SurfaceError> {
    let bytes = std::fs::read(path).map_err(|error| SurfaceError::Io {
        path: path.to_path_buf(),
        error,
    })?;
    parse_stl(&bytes, &path.display().to_string())
}

/// Reads several STL files into one surface with distinct tags.
///
/// A tag name already taken by an earlier file is disambiguated by a suffix: the second `wall`
/// becomes `wall.2`, the third `wall.3`.
pub fn load_stl_files(paths: &[PathBuf]) -> Result<Surface, SurfaceError> {
    let mut out = Surface::default();
    if paths.is_empty() {
        return Err(SurfaceError::NoTriangles {
            file: "(no files given)".into(),
        });
    }
    for p in paths {
        let mut s = load_stl(p)?;
        for name in &mut s.tag_names {
            *name = unique_name(&out.tag_names, name);
        }
        out.append(s);
    }
    Ok(out)
}

/// Parses STL data held in memory; `file_label` names the data in errors and gives the default
/// tag name (its file stem).
///
/// ```
/// use octocut_surface::parse_stl;
/// let text = "solid wing\n facet normal 0 0 1\n  outer loop\n   vertex 0 0 0\n   vertex 1 0 0\n   vertex 0 1 0\n  endloop\n endfacet\nendsolid wing\n";
/// let s = parse_stl(text.as_bytes(), "plane.stl").unwrap();
/// assert_eq!(s.triangles.len(), 1);
/// assert_eq!(s.tag_names, vec!["wing".to_string()]);
/// ```
pub fn parse_stl(bytes: &[u8], file_label: &str) -> Result<Surface, SurfaceError> {
    let file = file_label.to_string();
    if bytes.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(SurfaceError::Empty { file });
    }
    let len = bytes.len() as u64;
    let count = (bytes.len() >= 84).then(|| u32::from_le_bytes(bytes[80..84].try_into().unwrap()));
    if let Some(n) = count {
        if 84 + 50 * n as u64 == len {
            return parse_binary(bytes, n as usize, file_label);
        }
    }
    if looks_ascii(bytes) {
        return AsciiParser::new(bytes, file_label).parse();
    }
    match count {
        None => Err(SurfaceError::Truncated {
            file,
            at: Position::Byte(len),
            expected: "an 84-byte binary header with the triangle count".into(),
        }),
        Some(n) => Err(SurfaceError::CountMismatch {
            file,
            count: n,
            expected: 84 + 50 * n as u64,
            actual: len,
        }),
    }
}

/// Most triangles a surface can hold: three fresh `u32` vertex ids each.
pub const MAX_TRIANGLES: u64 = (u32::MAX / 3) as u64;

/// The file stem of `label` (the label itself when it has none).
fn stem(label: &str) -> String {
    Path::new(label)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "surface".to_string())
}

/// `base` if not yet in `names`, else the first free `base.k`, `k = 2, 3, ...`.
fn unique_name(names: &[String], base: &str) -> String {
    if !names.iter().any(|n| n == base) {
        return base.to_string();
    }
    (2..)
        .map(|k| format!("{base}.{k}"))
        .find(|c| !names.iter().any(|n| n == c))
        .unwrap()
}

/// Starts with `solid` (after white space) and its first kilobyte has no binary control bytes.
fn looks_ascii(bytes: &[u8]) -> bool {
    let start = bytes
        .iter()
        .position(|b| !b.is_ascii_whitespace())
        .unwrap_or(bytes.len());
    let rest = &bytes[start..];
    rest.len() >= 5
        && rest[..5].eq_ignore_ascii_case(b"solid")
        && rest
            .iter()
            .take(1024)
            .all(|&b| b >= 0x20 || matches!(b, b'\t' | b'\n' | b'\r' | 0x0b | 0x0c))
}

fn parse_binary(bytes: &[u8], n: usize, file_label: &str) -> Result<Surface, SurfaceError> {
    if n == 0 {
        return Err(SurfaceError::NoTriangles {
            file: file_label.to_string(),
        });
    }
    // n is checked against the file length, so this allocation is bounded by the input size.
    let mut vertices = vec![Vec3::ZERO; 3 * n];
    let f = |c: &[u8], o: usize| f32::from_le_bytes([c[o], c[o + 1], c[o + 2], c[o + 3]]) as f64;
    vertices
        .par_chunks_mut(3)
        .zip(bytes[84..].par_chunks_exact(50))
        .for_each(|(v, c)| {
            for (k, vk) in v.iter_mut().enumerate() {
                let o = 12 + 12 * k;
                *vk = Vec3::new(f(c, o), f(c, o + 4), f(c, o + 8));
            }
        });
    if let Some(i) = vertices.par_iter().position_first(|v| !v.is_finite()) {
        let v = vertices[i];
        let comp = (0..3).find(|&a| !v[a].is_finite()).unwrap_or(0);
        let offset = 84 + 50 * (i / 3) + 12 + 12 * (i % 3) + 4 * comp;
        return Err(SurfaceError::NonFinite {
            file: file_label.to_string(),
            at: Position::Byte(offset as u64),
            value: v[comp].to_string(),
        });
    }
    let triangles = (0..n as u32)
        .map(|t| [3 * t, 3 * t + 1, 3 * t + 2])
        .collect();
    Ok(Surface {
        vertices,
        triangles,
        tags: vec![TagId(0); n],
        tag_names: vec![stem(file_label)],
    })
}

/// A token: byte range and its one-based line and column.
#[derive(Clone, Copy)]
struct Token {
    start: usize,
    end: usize,
    line: u32,
    column: u32,
}

/// Hand-written lenient reader of ASCII STL: case-insensitive keywords, any white space
/// (CRLF, tabs), `facet normal` values optional and ignored, every `solid` block kept.
struct AsciiParser<'a> {
    bytes: &'a [u8],
    file: &'a str,
    pos: usize,
    line: u32,
    line_start: usize,
    surface: Surface,
}

impl<'a> AsciiParser<'a> {
    fn new(bytes: &'a [u8], file: &'a str) -> Self {
        AsciiParser {
            bytes,
            file,
            pos: 0,
            line: 1,
            line_start: 0,
            surface: Surface::default(),
        }
    }

    fn next(&mut self) -> Option<Token> {
        while self.pos < self.bytes.len() && self.bytes[self.pos].is_ascii_whitespace() {
            if self.bytes[self.pos] == b'\n' {
                self.line += 1;
                self.line_start = self.pos + 1;
            }
            self.pos += 1;
        }
        if self.pos == self.bytes.len() {
            return None;
        }
        let start = self.pos;
        while self.pos < self.bytes.len() && !self.bytes[self.pos].is_ascii_whitespace() {
            self.pos += 1;
        }
        let column = (start - self.line_start + 1) as u32;
        Some(Token {
            start,
            end: self.pos,
            line: self.line,
            column,
        })
    }

    fn peek(&mut self) -> Option<Token> {
        let saved = (self.pos, self.line, self.line_start);
        let t = self.next();
        (self.pos, self.line, self.line_start) = saved;
        t
    }

    /// The rest of the current line, trimmed (the solid's name).
    fn rest_of_line(&mut self) -> String {
        let start = self.pos;
        while self.pos < self.bytes.len() && self.bytes[self.pos] != b'\n' {
            self.pos += 1;
        }
        String::from_utf8_lossy(&self.bytes[start..self.pos])
            .trim()
            .to_string()
    }

    fn text(&self, t: Token) -> &'a [u8] {
        &self.bytes[t.start..t.end]
    }

    fn at(t: Token) -> Position {
        Position::Line {
            line: t.line,
            column: t.column,
        }
    }

    fn eof_position(&self) -> Position {
        Position::Line {
            line: self.line,
            column: (self.pos - self.line_start + 1) as u32,
        }
    }

    fn syntax(&self, t: Token, expected: &str) -> SurfaceError {
        let s = String::from_utf8_lossy(self.text(t));
        let found = if s.chars().count() > 40 {
            format!("\"{}...\"", s.chars().take(40).collect::<String>())
        } else {
            format!("\"{s}\"")
        };
        SurfaceError::Syntax {
            file: self.file.to_string(),
            at: Self::at(t),
            expected: expected.to_string(),
            found,
        }
    }

    fn truncated(&self, expected: &str) -> SurfaceError {
        SurfaceError::Truncated {
            file: self.file.to_string(),
            at: self.eof_position(),
            expected: expected.to_string(),
        }
    }

    fn token(&mut self, expected: &str) -> Result<Token, SurfaceError> {
        self.next().ok_or_else(|| self.truncated(expected))
    }

    fn keyword(&mut self, kw: &str) -> Result<Token, SurfaceError> {
        let expected = format!("\"{kw}\"");
        let t = self.token(&expected)?;
        if self.text(t).eq_ignore_ascii_case(kw.as_bytes()) {
            Ok(t)
        } else {
            Err(self.syntax(t, &expected))
        }
    }

    fn is(&self, t: Token, kw: &str) -> bool {
        self.text(t).eq_ignore_ascii_case(kw.as_bytes())
    }

    fn number(&mut self) -> Result<f64, SurfaceError> {
        let t = self.token("a coordinate")?;
        let v: f64 = std::str::from_utf8(self.text(t))
            .ok()
            .and_then(|s| s.parse().ok())
            .ok_or_else(|| self.syntax(t, "a coordinate"))?;
        if !v.is_finite() {
            return Err(SurfaceError::NonFinite {
                file: self.file.to_string(),
                at: Self::at(t),
                value: String::from_utf8_lossy(self.text(t)).into_owned(),
            });
        }
        Ok(v)
    }

    fn parse(mut self) -> Result<Surface, SurfaceError> {
        let stem = stem(self.file);
        while let Some(t) = self.next() {
            if !self.is(t, "solid") {
                return Err(self.syntax(t, "\"solid\""));
            }
            let name = self.rest_of_line();
            let base = if name.is_empty() {
                stem.as_str()
            } else {
                name.as_str()
            };
            let tag = TagId(self.surface.tag_names.len() as u32);
            let unique = unique_name(&self.surface.tag_names, base);
            self.surface.tag_names.push(unique);
            loop {
                let t = self.token("\"facet\" or \"endsolid\"")?;
                if self.is(t, "endsolid") {
                    self.rest_of_line();
                    break;
                }
                if !self.is(t, "facet") {
                    return Err(self.syntax(t, "\"facet\" or \"endsolid\""));
                }
                self.facet(tag)?;
            }
        }
        if self.surface.triangles.is_empty() {
            return Err(SurfaceError::NoTriangles {
                file: self.file.to_string(),
            });
        }
        Ok(self.surface)
    }

    /// After `facet`: an optional `normal` with ignored values, then the loop of three vertices.
    fn facet(&mut self, tag: TagId) -> Result<(), SurfaceError> {
        if let Some(t) = self.peek() {
            if self.is(t, "normal") {
                self.next();
                // Lenient: zero to three values, anything number-like (even nan) is skipped.
                for _ in 0..3 {
                    match self.peek() {
                        Some(t) if self.is(t, "outer") => break,
                        Some(t) => {
                            let ok = std::str::from_utf8(self.text(t))
                                .is_ok_and(|s| s.parse::<f64>().is_ok());
                            if !ok {
                                return Err(self.syntax(t, "a normal component or \"outer\""));
                            }
                            self.next();
                        }
                        None => return Err(self.truncated("\"outer\"")),
                    }
                }
            }
        }
        if self.surface.triangles.len() as u64 >= MAX_TRIANGLES {
            return Err(SurfaceError::TooLarge {
                file: self.file.to_string(),
                triangles: MAX_TRIANGLES + 1,
                max: MAX_TRIANGLES,
            });
        }
        self.keyword("outer")?;
        self.keyword("loop")?;
        let v0 = self.surface.vertices.len() as u32;
        for _ in 0..3 {
            self.keyword("vertex")?;
            let (x, y, z) = (self.number()?, self.number()?, self.number()?);
            self.surface.vertices.push(Vec3::new(x, y, z));
        }
        self.keyword("endloop")?;
        self.keyword("endfacet")?;
        self.surface.triangles.push([v0, v0 + 1, v0 + 2]);
        self.surface.tags.push(tag);
        Ok(())
    }
}

/// Binary STL bytes of `surface` (header text `header`, normals from vertex order, f32
/// coordinates); used by tests and benchmarks to generate input.
pub fn to_binary_stl(surface: &Surface, header: &str) -> Vec<u8> {
    let n = surface.triangles.len();
    let mut out = Vec::with_capacity(84 + 50 * n);
    let mut h = [b' '; 80];
    for (d, s) in h.iter_mut().zip(header.bytes()) {
        *d = s;
    }
    out.extend_from_slice(&h);
    out.extend_from_slice(&(n as u32).to_le_bytes());
    for t in 0..n {
        let nrm = surface.area_normal(t).normalize_or_zero();
        for v in std::iter::once(nrm).chain(surface.corners(t)) {
            for a in 0..3 {
                out.extend_from_slice(&(v[a] as f32).to_le_bytes());
            }
        }
        out.extend_from_slice(&[0, 0]);
    }
    out
}

/// ASCII STL text of `surface`, one `solid` block per tag, coordinates written with full f64
/// precision (`{:e}` round-trips).
pub fn to_ascii_stl(surface: &Surface) -> String {
    use std::fmt::Write;
    let mut out = String::new();
    for (g, name) in surface.tag_names.iter().enumerate() {
        writeln!(out, "solid {name}").unwrap();
        for t in (0..surface.triangles.len()).filter(|&t| surface.tags[t].0 as usize == g) {
            let n = surface.area_normal(t).normalize_or_zero();
            writeln!(
                out,
                "  facet normal {:e} {:e} {:e}\n    outer loop",
                n.x, n.y, n.z
            )
            .unwrap();
            for v in surface.corners(t) {
                writeln!(out, "      vertex {:e} {:e} {:e}", v.x, v.y, v.z).unwrap();
            }
            writeln!(out, "    endloop\n  endfacet").unwrap();
        }
        writeln!(out, "endsolid {name}").unwrap();
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    const ONE_FACET: &str = "solid a\nfacet normal 0 0 1\nouter loop\nvertex 0 0 0\nvertex 1 0 0\nvertex 0 1 0\nendloop\nendfacet\nendsolid a\n";

    #[test]
    fn binary_round_trip_and_solid_header() {
        let cube = Surface::unit_cube();
        // a binary file whose header starts with "solid" is still binary (size check first)
        let bytes = to_binary_stl(&cube, "solid cube exported as binary");
        let s = parse_stl(&bytes, "dir/box.stl").unwrap();
        assert_eq!(s.triangles.len(), 12);
        assert_eq!(s.tag_names, vec!["box".to_string()]);
        for t in 0..12 {
            assert_eq!(s.corners(t), cube.corners(t));
        }
    }

    #[test]
    fn ascii_blocks_names_and_leniency() {
        let three = format!(
            "{}{}{}",
            ONE_FACET,
            ONE_FACET.replace(" a\n", " b\n"),
            ONE_FACET.replace(" a\n", "\n")
        );
        let s = parse_stl(three.as_bytes(), "part.stl").unwrap();
        assert_eq!(s.tag_names, vec!["a", "b", "part"]);
        assert_eq!(s.tags, vec![TagId(0), TagId(1), TagId(2)]);
        // CRLF, tabs, upper case, a normal without values, f64 precision kept
        let loose = "SOLID\r\n\tFACET NORMAL\r\n OUTER LOOP\r\n\tVERTEX 0.1000000000000001 0 0\r\n VERTEX 1 0 0\r\n vertex 0 1 0\r\n ENDLOOP\r\nENDFACET\r\nENDSOLID\r\n";
        let s = parse_stl(loose.as_bytes(), "x.stl").unwrap();
        assert_eq!(s.vertices[0].x, 0.1000000000000001);
        assert_eq!(s.tag_names, vec!["x"]);
        // two unnamed and a repeated name
        let twice = format!(
            "{}{}",
            ONE_FACET.replace(" a\n", "\n"),
            ONE_FACET.replace(" a\n", "\n")
        );
        assert_eq!(
            parse_stl(twice.as_bytes(), "w.stl").unwrap().tag_names,
            vec!["w", "w.2"]
        );
        // ascii round trip
        let t = Surface::torus(2.0, 0.5, 6, 4);
        let back = parse_stl(to_ascii_stl(&t).as_bytes(), "t.stl").unwrap();
        assert_eq!(back.vertices, t.to_soup().vertices);
    }

    #[test]
    fn error_positions() {
        let bad = ONE_FACET.replace("vertex 1 0 0", "vertex 1 zero 0");
        let e = parse_stl(bad.as_bytes(), "f.stl").unwrap_err();
        assert!(
            matches!(
                e,
                SurfaceError::Syntax {
                    at: Position::Line {
                        line: 5,
                        column: 10
                    },
                    ..
                }
            ),
            "{e}"
        );
        let nan = ONE_FACET.replace("vertex 1 0 0", "vertex 1 nan 0");
        let e = parse_stl(nan.as_bytes(), "f.stl").unwrap_err();
        assert!(
            matches!(
                e,
                SurfaceError::NonFinite {
                    at: Position::Line { line: 5, .. },
                    ..
                }
            ),
            "{e}"
        );
        let cut = &ONE_FACET[..ONE_FACET.find("endloop").unwrap()];
        let e = parse_stl(cut.as_bytes(), "f.stl").unwrap_err();
        assert!(matches!(e, SurfaceError::Truncated { .. }), "{e}");
        let mut bin = to_binary_stl(&Surface::unit_cube(), "x");
        bin.pop();
        let e = parse_stl(&bin, "f.stl").unwrap_err();
        assert!(
            matches!(
                e,
                SurfaceError::CountMismatch {
                    count: 12,
                    expected: 684,
                    actual: 683,
                    ..
                }
            ),
            "{e}"
        );
        let mut bin = to_binary_stl(&Surface::unit_cube(), "x");
        bin[84 + 50 + 12 + 4..84 + 50 + 12 + 8].copy_from_slice(&f32::INFINITY.to_le_bytes());
        let e = parse_stl(&bin, "f.stl").unwrap_err();
        assert!(
            matches!(
                e,
                SurfaceError::NonFinite {
                    at: Position::Byte(150),
                    ..
                }
            ),
            "{e}"
        );
        assert!(matches!(
            parse_stl(b"  \n", "f.stl"),
            Err(SurfaceError::Empty { .. })
        ));
        assert!(matches!(
            parse_stl(b"solid x\nendsolid x\n", "f.stl"),
            Err(SurfaceError::NoTriangles { .. })
        ));
        assert!(matches!(
            parse_stl(&[1u8; 40], "f.stl"),
            Err(SurfaceError::Truncated { .. })
        ));
    }

    #[test]
    fn garbage_and_truncations_never_panic() {
        // robustness: every prefix of valid files and random bytes give Ok or Err, no panic
        let ascii = to_ascii_stl(&Surface::unit_cube());
        let bin = to_binary_stl(&Surface::unit_cube(), "solid but binary");
        for n in 0..ascii.len() {
            let _ = parse_stl(&ascii.as_bytes()[..n], "a.stl");
        }
        for n in 0..bin.len() {
            let _ = parse_stl(&bin[..n], "b.stl");
        }
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for _ in 0..500 {
            let len = rng.random_range(0..400);
            let mut bytes: Vec<u8> = (0..len).map(|_| rng.random()).collect();
            if rng.random_bool(0.5) && bytes.len() > 5 {
                bytes[..5].copy_from_slice(b"solid");
            }
            let _ = parse_stl(&bytes, "r.stl");
            // mutate one byte of the valid files
            let mut a = ascii.clone().into_bytes();
            let i = rng.random_range(0..a.len());
            a[i] = rng.random();
            let _ = parse_stl(&a, "a.stl");
            let mut b = bin.clone();
            let i = rng.random_range(0..b.len());
            b[i] = rng.random();
            let _ = parse_stl(&b, "b.stl");
        }
        // a huge count in a tiny file is refused before any allocation
        let mut tiny = vec![0u8; 84];
        tiny[80..84].copy_from_slice(&u32::MAX.to_le_bytes());
        assert!(matches!(
            parse_stl(&tiny, "t.stl"),
            Err(SurfaceError::CountMismatch { .. })
        ));
    }
}
