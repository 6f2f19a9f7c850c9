//! A reader for the VTK XML files this crate writes (`.vtu` with hexahedra and polyhedra,
//! `.vtp` with polygons), in all three encodings (appended raw, inline base64, ascii), with
//! UInt32 or UInt64 block headers and no compression. Every count read from the file is
//! checked against the bytes actually present before anything is allocated from it.
//!
//! Faces of a hexahedron come out in VTK's vertex order, oriented outward; faces of a
//! polyhedron as its face stream gives them.

use octocut_surface::Vec3;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Why a file could not be read.
#[derive(Debug, thiserror::Error)]
pub enum ReadError {
    #[error("cannot read {path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path}: {msg}")]
    Format { path: PathBuf, msg: String },
}

/// Values of an array read back.
#[derive(Clone, Debug, PartialEq)]
pub enum ReadArray {
    F64(Vec<f64>),
    Int(Vec<i64>),
    Strings(Vec<String>),
}

impl ReadArray {
    /// Numeric values as f64 (`None` for strings).
    pub fn as_f64(&self) -> Option<Vec<f64>> {
        match self {
            ReadArray::F64(v) => Some(v.clone()),
            ReadArray::Int(v) => Some(v.iter().map(|&x| x as f64).collect()),
            ReadArray::Strings(_) => None,
        }
    }
}

/// An unstructured grid read back: points, the faces of every cell as CSR, named arrays.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ReadMesh {
    pub points: Vec<Vec3>,
    /// Cell `c` has faces `cell_offsets[c]..cell_offsets[c + 1]`.
    pub cell_offsets: Vec<u32>,
    /// Face `f` has vertices `face_vertices[face_offsets[f]..face_offsets[f + 1]]`.
    pub face_offsets: Vec<u32>,
    pub face_vertices: Vec<u32>,
    pub cell_types: Vec<u8>,
    pub cell_data: BTreeMap<String, ReadArray>,
    pub field_data: BTreeMap<String, ReadArray>,
}

impl ReadMesh {
    pub fn n_cells(&self) -> usize {
        self.cell_types.len()
    }
    pub fn face(&self, f: usize) -> &[u32] {
        &self.face_vertices[self.face_offsets[f] as usize..self.face_offsets[f + 1] as usize]
    }
    /// The faces of cell `c`.
    pub fn cell_faces(&self, c: usize) -> impl Iterator<Item = &[u32]> {
        (self.cell_offsets[c] as usize..self.cell_offsets[c + 1] as usize).map(|f| self.face(f))
    }
}

/// Poly data read back: points, polygons as CSR, named arrays.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ReadPolyData {
    pub points: Vec<Vec3>,
    pub poly_offsets: Vec<u32>,
    pub poly_vertices: Vec<u32>,
    pub cell_data: BTreeMap<String, ReadArray>,
    pub field_data: BTreeMap<String, ReadArray>,
}

impl ReadPolyData {
    pub fn n_polys(&self) -> usize {
        self.poly_offsets.len().saturating_sub(1)
    }
    pub fn poly(&self, i: usize) -> &[u32] {
        &self.poly_vertices[self.poly_offsets[i] as usize..self.poly_offsets[i + 1] as usize]
    }
}

/// Outward faces of a VTK hexahedron, in its local vertex numbering.
pub const HEX_FACES: [[usize; 4]; 6] = [
    [0, 3, 2, 1],
    [4, 5, 6, 7],
    [0, 1, 5, 4],
    [1, 2, 6, 5],
    [2, 3, 7, 6],
    [3, 0, 4, 7],
];

struct Elem {
    parent: String,
    attrs: Vec<(String, String)>,
    text: (usize, usize),
}

impl Elem {
    fn attr(&self, k: &str) -> Option<&str> {
        self.attrs.iter().find(|a| a.0 == k).map(|a| a.1.as_str())
    }
}

struct Doc<'a> {
    file_type: String,
    header_bytes: usize,
    arrays: Vec<Elem>,
    xml: &'a [u8],
    appended: Option<&'a [u8]>,
}

fn unescape(s: &str) -> String {
    s.replace("&quot;", "\"")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&")
}

fn find(h: &[u8], needle: &[u8], from: usize) -> Option<usize> {
    if from > h.len() {
        return None;
    }
    h[from..]
        .windows(needle.len())
        .position(|w| w == needle)
        .map(|p| p + from)
}

fn parse(bytes: &[u8]) -> Result<Doc<'_>, String> {
    let (xml, appended) = match find(bytes, b"<AppendedData", 0) {
        Some(p) => {
            let gt = find(bytes, b">", p).ok_or("unterminated AppendedData tag")?;
            let us = find(bytes, b"_", gt).ok_or("AppendedData without the `_` marker")?;
            if bytes[gt + 1..us].iter().any(|b| !b.is_ascii_whitespace()) {
                return Err("unexpected text before the `_` marker".into());
            }
            let tag = std::str::from_utf8(&bytes[p..gt]).map_err(|_| "non-UTF-8 tag")?;
            if !tag.contains("encoding=\"raw\"") {
                return Err("only raw appended data is supported".into());
            }
            (&bytes[..p], Some(&bytes[us + 1..]))
        }
        None => (bytes, None),
    };
    let mut doc = Doc {
        file_type: String::new(),
        header_bytes: 4,
        arrays: Vec::new(),
        xml,
        appended,
    };
    let mut stack: Vec<String> = Vec::new();
    let mut open: Option<Elem> = None;
    let mut i = 0;
    while let Some(lt) = find(xml, b"<", i) {
        if xml[lt..].starts_with(b"<?") {
            i = find(xml, b"?>", lt).ok_or("unterminated <?")? + 2;
            continue;
        }
        if xml[lt..].starts_with(b"<!--") {
            i = find(xml, b"-->", lt).ok_or("unterminated comment")? + 3;
            continue;
        }
        let gt = find(xml, b">", lt).ok_or("unterminated tag")?;
        let tag = std::str::from_utf8(&xml[lt + 1..gt]).map_err(|_| "non-UTF-8 tag")?;
        i = gt + 1;
        if let Some(name) = tag.strip_prefix('/') {
            let name = name.trim();
            if stack.pop().as_deref() != Some(name) {
                return Err(format!("mismatched closing tag </{name}>"));
            }
            if name == "DataArray" || name == "Array" {
                if let Some(mut e) = open.take() {
                    e.text.1 = lt;
                    doc.arrays.push(e);
                }
            }
            continue;
        }
        let self_closing = tag.ends_with('/');
        let tag = tag.trim_end_matches('/');
        let name_end = tag.find(|c: char| c.is_whitespace()).unwrap_or(tag.len());
        let name = &tag[..name_end];
        let mut attrs = Vec::new();
        let mut rest = &tag[name_end..];
        while let Some(eq) = rest.find('=') {
            let key = rest[..eq].trim().to_string();
            let after = rest[eq + 1..].trim_start();
            let q = after.chars().next().ok_or("attribute without a value")?;
            if q != '"' && q != '\'' {
                return Err(format!("unquoted attribute {key}"));
            }
            let end = after[1..].find(q).ok_or("unterminated attribute value")?;
            attrs.push((key, unescape(&after[1..1 + end])));
            rest = &after[end + 2..];
        }
        if name == "VTKFile" {
            let a = |k: &str| {
                attrs
                    .iter()
                    .find(|x: &&(String, String)| x.0 == k)
                    .map(|x| x.1.clone())
            };
            doc.file_type = a("type").unwrap_or_default();
            if a("byte_order").as_deref() != Some("LittleEndian") {
                return Err("only LittleEndian files are supported".into());
            }
            if a("compressor").is_some() {
                return Err("compressed files are not supported".into());
            }
            doc.header_bytes = match a("header_type").as_deref() {
                None | Some("UInt32") => 4,
                Some("UInt64") => 8,
                Some(t) => return Err(format!("unknown header_type {t}")),
            };
        }
        if name == "DataArray" || name == "Array" {
            let parent = stack.last().cloned().unwrap_or_default();
            let e = Elem {
                parent,
                attrs,
                text: (i, i),
            };
            if self_closing {
                doc.arrays.push(e);
            } else {
                open = Some(e);
            }
        }
        if !self_closing {
            stack.push(name.to_string());
        }
    }
    Ok(doc)
}

fn decode(doc: &Doc, e: &Elem) -> Result<ReadArray, String> {
    let name = e.attr("Name").unwrap_or("?");
    let ty = e
        .attr("type")
        .ok_or_else(|| format!("array {name} without a type"))?;
    let width = match ty {
        "Float64" | "Int64" | "UInt64" => 8,
        "Float32" | "Int32" | "UInt32" => 4,
        "Int16" | "UInt16" => 2,
        "Int8" | "UInt8" | "String" => 1,
        t => return Err(format!("array {name}: unsupported type {t}")),
    };
    let format = e.attr("format").unwrap_or("ascii");
    let text = || std::str::from_utf8(&doc.xml[e.text.0..e.text.1]).map_err(|_| "non-UTF-8 text");
    let raw: Vec<u8> = match format {
        "ascii" => {
            let t = text()?;
            if ty == "String" {
                let codes: Result<Vec<u8>, _> =
                    t.split_whitespace().map(|s| s.parse::<u8>()).collect();
                return strings(&codes.map_err(|_| format!("array {name}: bad character code"))?);
            }
            let float = ty.starts_with("Float");
            let mut fv = Vec::new();
            let mut iv = Vec::new();
            for tok in t.split_whitespace() {
                if float {
                    fv.push(
                        tok.parse::<f64>()
                            .map_err(|_| format!("array {name}: bad number {tok}"))?,
                    );
                } else {
                    iv.push(
                        tok.parse::<i64>()
                            .map_err(|_| format!("array {name}: bad integer {tok}"))?,
                    );
                }
            }
            return Ok(if float {
                ReadArray::F64(fv)
            } else {
                ReadArray::Int(iv)
            });
        }
        "binary" => {
            use base64::Engine;
            let eng = &base64::engine::general_purpose::STANDARD;
            let t: String = text()?.chars().filter(|c| !c.is_whitespace()).collect();
            let hlen = doc.header_bytes.div_ceil(3) * 4;
            if t.len() < hlen {
                return Err(format!("array {name}: base64 data shorter than its header"));
            }
            let h = eng
                .decode(&t[..hlen])
                .map_err(|err| format!("array {name}: {err}"))?;
            let n = header_value(&h[..doc.header_bytes]);
            let body = eng
                .decode(&t[hlen..])
                .map_err(|err| format!("array {name}: {err}"))?;
            if (body.len() as u64) < n {
                return Err(format!(
                    "array {name}: header says {n} bytes, {} present",
                    body.len()
                ));
            }
            body[..n as usize].to_vec()
        }
        "appended" => {
            let app = doc
                .appended
                .ok_or_else(|| format!("array {name}: no appended data"))?;
            let off: usize = e
                .attr("offset")
                .and_then(|o| o.parse().ok())
                .ok_or_else(|| format!("array {name}: missing or bad offset"))?;
            let hb = doc.header_bytes;
            if off.checked_add(hb).is_none_or(|end| end > app.len()) {
                return Err(format!(
                    "array {name}: offset {off} beyond the appended data"
                ));
            }
            let n = header_value(&app[off..off + hb]);
            let start = off + hb;
            if n > (app.len() - start) as u64 {
                return Err(format!("array {name}: {n} bytes announced, fewer present"));
            }
            app[start..start + n as usize].to_vec()
        }
        f => return Err(format!("array {name}: unknown format {f}")),
    };
    // not `is_multiple_of`: it is newer than the workspace's rust-version (1.85)
    #[allow(clippy::manual_is_multiple_of)]
    if raw.len() % width != 0 {
        return Err(format!(
            "array {name}: {} bytes is not a whole number of values",
            raw.len()
        ));
    }
    let ch = raw.chunks_exact(width);
    Ok(match ty {
        "String" => return strings(&raw),
        "Float64" => ReadArray::F64(
            ch.map(|c| f64::from_le_bytes(c.try_into().unwrap()))
                .collect(),
        ),
        "Float32" => ReadArray::F64(
            ch.map(|c| f32::from_le_bytes(c.try_into().unwrap()) as f64)
                .collect(),
        ),
        "Int64" => ReadArray::Int(
            ch.map(|c| i64::from_le_bytes(c.try_into().unwrap()))
                .collect(),
        ),
        "UInt64" => ReadArray::Int(
            ch.map(|c| u64::from_le_bytes(c.try_into().unwrap()).min(i64::MAX as u64) as i64)
                .collect(),
        ),
        "Int32" => ReadArray::Int(
            ch.map(|c| i32::from_le_bytes(c.try_into().unwrap()) as i64)
                .collect(),
        ),
        "UInt32" => ReadArray::Int(
            ch.map(|c| u32::from_le_bytes(c.try_into().unwrap()) as i64)
                .collect(),
        ),
        "Int16" => ReadArray::Int(
            ch.map(|c| i16::from_le_bytes(c.try_into().unwrap()) as i64)
                .collect(),
        ),
        "UInt16" => ReadArray::Int(
            ch.map(|c| u16::from_le_bytes(c.try_into().unwrap()) as i64)
                .collect(),
        ),
        "Int8" => ReadArray::Int(ch.map(|c| c[0] as i8 as i64).collect()),
        _ => ReadArray::Int(ch.map(|c| c[0] as i64).collect()),
    })
}

fn header_value(h: &[u8]) -> u64 {
    let mut b = [0u8; 8];
    b[..h.len()].copy_from_slice(h);
    u64::from_le_bytes(b)
}

fn strings(bytes: &[u8]) -> Result<ReadArray, String> {
    let mut out = Vec::new();
    if bytes.is_empty() {
        return Ok(ReadArray::Strings(out));
    }
    for s in bytes.split(|&b| b == 0) {
        out.push(String::from_utf8(s.to_vec()).map_err(|_| "string array is not UTF-8")?);
    }
    // the last terminator leaves an empty tail
    if bytes.last() == Some(&0) {
        out.pop();
    }
    Ok(ReadArray::Strings(out))
}

struct Arrays {
    by_section: BTreeMap<(String, String), ReadArray>,
}

impl Arrays {
    fn take(&mut self, section: &str, name: &str) -> Option<ReadArray> {
        self.by_section
            .remove(&(section.to_string(), name.to_string()))
    }
    fn section(&mut self, section: &str) -> BTreeMap<String, ReadArray> {
        let keys: Vec<_> = self
            .by_section
            .keys()
            .filter(|k| k.0 == section)
            .cloned()
            .collect();
        keys.into_iter()
            .map(|k| (k.1.clone(), self.by_section.remove(&k).unwrap()))
            .collect()
    }
    fn points(&mut self) -> Result<Vec<Vec3>, String> {
        let key = self.by_section.keys().find(|k| k.0 == "Points").cloned();
        let Some(key) = key else {
            return Ok(Vec::new());
        };
        let v = self
            .by_section
            .remove(&key)
            .unwrap()
            .as_f64()
            .ok_or("string points")?;
        if v.len() % 3 != 0 {
            return Err("point array length is not a multiple of 3".into());
        }
        Ok(v.chunks_exact(3)
            .map(|c| Vec3::new(c[0], c[1], c[2]))
            .collect())
    }
}

fn ints(a: Option<ReadArray>, what: &str) -> Result<Vec<i64>, String> {
    match a {
        Some(ReadArray::Int(v)) => Ok(v),
        Some(_) => Err(format!("{what} is not an integer array")),
        None => Err(format!("missing {what}")),
    }
}

fn load(path: &Path, kind: &str) -> Result<Arrays, ReadError> {
    let bytes = std::fs::read(path).map_err(|source| ReadError::Io {
        path: path.into(),
        source,
    })?;
    let fmt = |msg: String| ReadError::Format {
        path: path.into(),
        msg,
    };
    let doc = parse(&bytes).map_err(fmt)?;
    if doc.file_type != kind {
        return Err(fmt(format!(
            "expected a {kind} file, found `{}`",
            doc.file_type
        )));
    }
    let mut by_section = BTreeMap::new();
    for e in &doc.arrays {
        let name = e.attr("Name").unwrap_or_default().to_string();
        let a = decode(&doc, e).map_err(fmt)?;
        by_section.insert((e.parent.clone(), name), a);
    }
    Ok(Arrays { by_section })
}

fn index(v: i64, n: usize, what: &str) -> Result<u32, String> {
    if v < 0 || v as u64 >= n as u64 {
        return Err(format!("{what} {v} out of range 0..{n}"));
    }
    Ok(v as u32)
}

/// Reads an UnstructuredGrid file written by [`crate::write_vtu`].
pub fn read_vtu(path: &Path) -> Result<ReadMesh, ReadError> {
    let fmt = |msg: String| ReadError::Format {
        path: path.into(),
        msg,
    };
    let mut a = load(path, "UnstructuredGrid")?;
    let points = a.points().map_err(fmt)?;
    let conn = ints(a.take("Cells", "connectivity"), "connectivity").map_err(fmt)?;
    let offs = ints(a.take("Cells", "offsets"), "offsets").map_err(fmt)?;
    let types = ints(a.take("Cells", "types"), "types").map_err(fmt)?;
    let faces = ints(a.take("Cells", "faces"), "faces").unwrap_or_default();
    let faceoffs = ints(a.take("Cells", "faceoffsets"), "faceoffsets").unwrap_or_default();
    if offs.len() != types.len() {
        return Err(fmt(format!(
            "{} offsets for {} cell types",
            offs.len(),
            types.len()
        )));
    }
    let np = points.len();
    let mut m = ReadMesh {
        points,
        cell_offsets: vec![0],
        face_offsets: vec![0],
        ..Default::default()
    };
    let (mut start, mut fpos) = (0usize, 0usize);
    for (c, (&t, &end)) in types.iter().zip(&offs).enumerate() {
        if end < start as i64 || end as u64 > conn.len() as u64 {
            return Err(fmt(format!("cell {c}: offset {end} out of order or range")));
        }
        let ids = &conn[start..end as usize];
        match t {
            12 => {
                if ids.len() != 8 {
                    return Err(fmt(format!("hexahedron {c} with {} points", ids.len())));
                }
                for f in HEX_FACES {
                    for k in f {
                        m.face_vertices
                            .push(index(ids[k], np, "point id").map_err(fmt)?);
                    }
                    m.face_offsets.push(m.face_vertices.len() as u32);
                }
            }
            42 => {
                let fend = *faceoffs
                    .get(c)
                    .ok_or_else(|| fmt(format!("cell {c}: no faceoffset")))?;
                if fend < fpos as i64 || fend as u64 > faces.len() as u64 {
                    return Err(fmt(format!(
                        "cell {c}: faceoffset {fend} out of order or range"
                    )));
                }
                let s = &faces[fpos..fend as usize];
                let nfaces = *s
                    .first()
                    .ok_or_else(|| fmt(format!("cell {c}: empty face stream")))?;
                let mut k = 1usize;
                for _ in 0..nfaces.max(0) {
                    let n = *s
                        .get(k)
                        .ok_or_else(|| fmt(format!("cell {c}: face stream too short")))?;
                    if n < 0 || (k + 1) as u64 + n as u64 > s.len() as u64 {
                        return Err(fmt(format!("cell {c}: face stream too short")));
                    }
                    for &v in &s[k + 1..k + 1 + n as usize] {
                        m.face_vertices.push(index(v, np, "point id").map_err(fmt)?);
                    }
                    m.face_offsets.push(m.face_vertices.len() as u32);
                    k += 1 + n as usize;
                }
                if k != s.len() {
                    return Err(fmt(format!("cell {c}: face stream longer than its faces")));
                }
                fpos = fend as usize;
            }
            t => return Err(fmt(format!("cell {c}: unsupported cell type {t}"))),
        }
        m.cell_offsets.push(m.face_offsets.len() as u32 - 1);
        m.cell_types.push(t as u8);
        start = end as usize;
    }
    m.cell_data = a.section("CellData");
    m.field_data = a.section("FieldData");
    for (name, v) in &m.cell_data {
        let len = match v {
            ReadArray::F64(x) => x.len(),
            ReadArray::Int(x) => x.len(),
            ReadArray::Strings(x) => x.len(),
        };
        if len != m.n_cells() {
            return Err(fmt(format!(
                "cell array {name} has {len} values for {} cells",
                m.n_cells()
            )));
        }
    }
    Ok(m)
}

/// Reads a PolyData file written by [`crate::write_vtp`] (polygons only).
pub fn read_vtp(path: &Path) -> Result<ReadPolyData, ReadError> {
    let fmt = |msg: String| ReadError::Format {
        path: path.into(),
        msg,
    };
    let mut a = load(path, "PolyData")?;
    let points = a.points().map_err(fmt)?;
    let conn = ints(a.take("Polys", "connectivity"), "connectivity").map_err(fmt)?;
    let offs = ints(a.take("Polys", "offsets"), "offsets").map_err(fmt)?;
    let mut p = ReadPolyData {
        points,
        poly_offsets: vec![0],
        ..Default::default()
    };
    let mut start = 0usize;
    for (i, &end) in offs.iter().enumerate() {
        if end < start as i64 || end as u64 > conn.len() as u64 {
            return Err(fmt(format!(
                "polygon {i}: offset {end} out of order or range"
            )));
        }
        for &v in &conn[start..end as usize] {
            p.poly_vertices
                .push(index(v, p.points.len(), "point id").map_err(fmt)?);
        }
        p.poly_offsets.push(p.poly_vertices.len() as u32);
        start = end as usize;
    }
    p.cell_data = a.section("CellData");
    p.field_data = a.section("FieldData");
    Ok(p)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{write_vtp, write_vtu, CellArray, Encoding};
    use octocut_volmesh::geometry::{polygon_area_centroid, CellFaces, MeshGeometry};
    use octocut_volmesh::{quality, testmesh, VolumeMesh};

    fn meshes() -> Vec<VolumeMesh> {
        let mut r = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
        r.region_names = vec!["box & <core>".into()];
        r.cell_region[3] = 0;
        vec![r, testmesh::clipped_cube(), testmesh::block(2, 0.1)]
    }

    /// Volume of a read cell by the divergence theorem over its faces.
    fn read_volume(m: &ReadMesh, c: usize) -> f64 {
        let mut v = 0.0;
        for f in m.cell_faces(c) {
            let (a, x) = polygon_area_centroid(&m.points, f);
            v += a.dot(x) / 3.0;
        }
        v
    }

    #[test]
    fn vtu_round_trip_all_encodings() {
        let dir = tempfile::tempdir().unwrap();
        for (i, m) in meshes().iter().enumerate() {
            let q = quality(m, |l| 1.0 / (1u32 << l) as f64);
            let extra = CellArray::from_quality(&q.per_cell);
            let g = MeshGeometry::new(m);
            let cf = CellFaces::new(m);
            for enc in [Encoding::Appended, Encoding::Base64, Encoding::Ascii] {
                let p = dir.path().join(format!("m{i}-{enc:?}.vtu"));
                write_vtu(m, &extra, &p, enc).unwrap();
                let r = read_vtu(&p).unwrap();
                assert_eq!(
                    r.points, m.points,
                    "{enc:?}: points must round-trip exactly"
                );
                assert_eq!(r.n_cells(), m.n_cells());
                for c in 0..m.n_cells() {
                    // exact up to round-off: the same polyhedron
                    assert!((read_volume(&r, c) - g.cell_volume[c]).abs() < 1e-12);
                    let n_in = r.cell_offsets[c + 1] - r.cell_offsets[c];
                    if r.cell_types[c] == 42 {
                        assert_eq!(n_in as usize, cf.of(c).len());
                    }
                }
                let lv: Vec<i64> = m.cell_level.iter().map(|&l| l as i64).collect();
                assert_eq!(r.cell_data["level"], ReadArray::Int(lv));
                assert_eq!(r.cell_data["volume"], ReadArray::F64(g.cell_volume.clone()));
                assert_eq!(
                    r.cell_data["skewness"],
                    ReadArray::F64(q.per_cell.skewness.clone())
                );
                let reg = r.cell_data["region"].as_f64().unwrap();
                assert_eq!(
                    reg.iter().filter(|&&x| x == -1.0).count(),
                    m.cell_region.iter().filter(|&&x| x == u16::MAX).count()
                );
                let names = ReadArray::Strings(m.region_names.clone());
                assert_eq!(r.field_data["region_names"], names);
            }
        }
    }

    #[test]
    fn vtp_round_trip_all_encodings() {
        let dir = tempfile::tempdir().unwrap();
        for (i, m) in meshes().iter().enumerate() {
            let ni = m.n_interior_faces();
            for enc in [Encoding::Appended, Encoding::Base64, Encoding::Ascii] {
                let p = dir.path().join(format!("b{i}-{enc:?}.vtp"));
                write_vtp(m, &p, enc).unwrap();
                let b = read_vtp(&p).unwrap();
                assert_eq!(b.n_polys(), m.n_faces() - ni);
                let ReadArray::Int(tags) = &b.cell_data["tag"] else {
                    panic!()
                };
                assert_eq!(tags.len(), b.n_polys());
                for (k, &tag) in tags.iter().enumerate() {
                    let f = m.face(ni + k);
                    let pts: Vec<_> = b.poly(k).iter().map(|&v| b.points[v as usize]).collect();
                    let want: Vec<_> = f.iter().map(|&v| m.points[v as usize]).collect();
                    assert_eq!(pts, want, "exact coordinates, same order");
                    let patch = m.patches.iter().position(|p| {
                        (p.start as usize..(p.start + p.count) as usize).contains(&(ni + k))
                    });
                    assert_eq!(tag, patch.unwrap() as i64);
                }
                let names: Vec<String> = m.patches.iter().map(|p| p.name.clone()).collect();
                assert_eq!(b.field_data["tag_names"], ReadArray::Strings(names));
                // every point written is used
                let mut used = vec![false; b.points.len()];
                b.poly_vertices
                    .iter()
                    .for_each(|&v| used[v as usize] = true);
                assert!(used.iter().all(|&u| u));
            }
        }
    }

    #[test]
    fn damaged_files_give_errors() {
        let dir = tempfile::tempdir().unwrap();
        let m = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
        let p = dir.path().join("m.vtu");
        write_vtu(&m, &[], &p, Encoding::Appended).unwrap();
        let bytes = std::fs::read(&p).unwrap();
        let q = dir.path().join("cut.vtu");
        std::fs::write(&q, &bytes[..bytes.len() - 2000]).unwrap();
        assert!(matches!(read_vtu(&q), Err(ReadError::Format { .. })));
        assert!(matches!(
            read_vtu(&dir.path().join("none.vtu")),
            Err(ReadError::Io { .. })
        ));
        let b = dir.path().join("b.vtp");
        write_vtp(&m, &b, Encoding::Ascii).unwrap();
        let e = read_vtu(&b).unwrap_err().to_string();
        assert!(e.contains("expected a UnstructuredGrid"), "{e}");
        let text = std::fs::read_to_string(&b)
            .unwrap()
            .replace("format=\"ascii\">\n", "format=\"ascii\">\n 1e999x ");
        std::fs::write(&b, text).unwrap();
        assert!(read_vtp(&b).is_err());
    }
}
