//! Data arrays of the VTK XML file formats (VTK User's Guide, "VTK File Formats", XML part):
//! each array is written inline as ascii text, inline base64 (`format="binary"`: the 8-byte
//! UInt64 byte count and the little-endian data encoded as two separate base64 runs, as VTK's
//! own writer does), or into the raw `<AppendedData encoding="raw">` block after the `_`
//! marker, where every array is its UInt64 byte count followed by its bytes and the
//! `offset` attribute counts bytes from just after the `_`.
//!
//! Arrays are either held ([`Array`]) or streamed ([`StreamArray`]: a length, a type and a
//! function writing the little-endian bytes on demand), so big arrays are never copied: the
//! appended offsets follow from the lengths, and the data go straight into the writer.

use rayon::prelude::*;
use std::io::{self, Write};

/// How array data are stored in the file.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Encoding {
    /// Raw little-endian bytes in the appended-data block (smallest, fastest).
    #[default]
    Appended,
    /// Inline base64 (a valid text XML file).
    Base64,
    /// Inline decimal text (f64 written with round-trip precision).
    Ascii,
}

/// Values of one array.
#[derive(Clone, Debug, PartialEq)]
pub enum Values {
    F64(Vec<f64>),
    I64(Vec<i64>),
    I32(Vec<i32>),
    U8(Vec<u8>),
}

/// Borrowed values of one array.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ValuesRef<'a> {
    F64(&'a [f64]),
    I64(&'a [i64]),
    I32(&'a [i32]),
    U8(&'a [u8]),
}

impl ValuesRef<'_> {
    pub fn len(&self) -> usize {
        match self {
            ValuesRef::F64(v) => v.len(),
            ValuesRef::I64(v) => v.len(),
            ValuesRef::I32(v) => v.len(),
            ValuesRef::U8(v) => v.len(),
        }
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    pub fn kind(&self) -> Kind {
        match self {
            ValuesRef::F64(_) => Kind::F64,
            ValuesRef::I64(_) => Kind::I64,
            ValuesRef::I32(_) => Kind::I32,
            ValuesRef::U8(_) => Kind::U8,
        }
    }
    /// Writes the values as little-endian bytes.
    pub fn write_le(&self, w: &mut dyn Write) -> io::Result<()> {
        match *self {
            ValuesRef::F64(v) => put_le(w, v.iter().map(|x| x.to_le_bytes())),
            ValuesRef::I64(v) => put_le(w, v.iter().map(|x| x.to_le_bytes())),
            ValuesRef::I32(v) => put_le(w, v.iter().map(|x| x.to_le_bytes())),
            ValuesRef::U8(v) => w.write_all(v),
        }
    }
}

impl Values {
    /// The values borrowed.
    pub fn as_ref(&self) -> ValuesRef<'_> {
        match self {
            Values::F64(v) => ValuesRef::F64(v),
            Values::I64(v) => ValuesRef::I64(v),
            Values::I32(v) => ValuesRef::I32(v),
            Values::U8(v) => ValuesRef::U8(v),
        }
    }
}

impl<'a> StreamArray<'a> {
    /// A streamed array over borrowed values.
    pub fn borrowed(name: &str, components: usize, v: ValuesRef<'a>) -> Self {
        StreamArray::from_values(name, components, v.kind(), v.len(), move |w| v.write_le(w))
    }
}

/// Element type of an array.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    F64,
    I64,
    I32,
    U8,
}

impl Kind {
    pub fn type_name(self) -> &'static str {
        match self {
            Kind::F64 => "Float64",
            Kind::I64 => "Int64",
            Kind::I32 => "Int32",
            Kind::U8 => "UInt8",
        }
    }
    /// Bytes per value.
    pub fn width(self) -> usize {
        match self {
            Kind::F64 | Kind::I64 => 8,
            Kind::I32 => 4,
            Kind::U8 => 1,
        }
    }
}

impl Values {
    pub fn kind(&self) -> Kind {
        match self {
            Values::F64(_) => Kind::F64,
            Values::I64(_) => Kind::I64,
            Values::I32(_) => Kind::I32,
            Values::U8(_) => Kind::U8,
        }
    }
    pub fn type_name(&self) -> &'static str {
        self.kind().type_name()
    }
    pub fn len(&self) -> usize {
        match self {
            Values::F64(v) => v.len(),
            Values::I64(v) => v.len(),
            Values::I32(v) => v.len(),
            Values::U8(v) => v.len(),
        }
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    fn n_bytes(&self) -> u64 {
        let w = match self {
            Values::F64(_) | Values::I64(_) => 8,
            Values::I32(_) => 4,
            Values::U8(_) => 1,
        };
        (self.len() * w) as u64
    }
    fn write_le(&self, w: &mut impl Write) -> io::Result<()> {
        match self {
            Values::F64(v) => v.iter().try_for_each(|x| w.write_all(&x.to_le_bytes())),
            Values::I64(v) => v.iter().try_for_each(|x| w.write_all(&x.to_le_bytes())),
            Values::I32(v) => v.iter().try_for_each(|x| w.write_all(&x.to_le_bytes())),
            Values::U8(v) => w.write_all(v),
        }
    }
    fn le_bytes(&self) -> Vec<u8> {
        let mut b = Vec::with_capacity(self.n_bytes() as usize);
        self.write_le(&mut b).expect("writing to a Vec cannot fail");
        b
    }
    fn write_ascii(&self, w: &mut impl Write) -> io::Result<()> {
        fn lines<T>(w: &mut impl Write, v: &[T], f: impl Fn(&T) -> String) -> io::Result<()> {
            for chunk in v.chunks(12) {
                let s: Vec<String> = chunk.iter().map(&f).collect();
                writeln!(w, "{}", s.join(" "))?;
            }
            Ok(())
        }
        match self {
            // `{:e}` is Rust's shortest round-trip form with an exponent
            Values::F64(v) => lines(w, v, |x| format!("{x:e}")),
            Values::I64(v) => lines(w, v, |x| x.to_string()),
            Values::I32(v) => lines(w, v, |x| x.to_string()),
            Values::U8(v) => lines(w, v, |x| x.to_string()),
        }
    }
}

/// A named data array.
#[derive(Clone, Debug, PartialEq)]
pub struct Array {
    pub name: String,
    pub components: usize,
    pub values: Values,
}

/// Escapes `&`, `<`, `>` and `"` for an XML attribute value.
pub fn xml_escape(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            _ => o.push(c),
        }
    }
    o
}

/// Writes the little-endian bytes of its values, in order.
pub type Producer<'a> = Box<dyn Fn(&mut dyn Write) -> io::Result<()> + Sync + 'a>;

/// A data array whose values are written on demand by `produce` (exactly `len` values of
/// `kind`, all components, as little-endian bytes).
///
/// ```
/// use octocut_writers::vtkxml::{Encoding, Kind, StreamArray, XmlArrays};
/// let v = [1i32, 2, 3];
/// let a = StreamArray::from_values("n", 1, Kind::I32, v.len(), move |w| {
///     octocut_writers::vtkxml::put_le(w, v.iter().map(|x| x.to_le_bytes()))
/// });
/// let mut out = Vec::new();
/// let mut xa = XmlArrays::new(Encoding::Ascii);
/// xa.write_stream(&mut out, "", a).unwrap();
/// assert!(String::from_utf8(out).unwrap().contains("\n1 2 3\n"));
/// ```
pub struct StreamArray<'a> {
    pub name: String,
    pub components: usize,
    pub kind: Kind,
    pub len: usize,
    pub produce: Producer<'a>,
}

impl<'a> StreamArray<'a> {
    pub fn from_values(
        name: &str,
        components: usize,
        kind: Kind,
        len: usize,
        produce: impl Fn(&mut dyn Write) -> io::Result<()> + Sync + 'a,
    ) -> Self {
        StreamArray {
            name: name.into(),
            components,
            kind,
            len,
            produce: Box::new(produce),
        }
    }

    fn n_bytes(&self) -> u64 {
        (self.len * self.kind.width()) as u64
    }
}

/// Writes fixed-size little-endian values through a 64 KiB staging buffer.
pub fn put_le<const N: usize>(
    w: &mut dyn Write,
    values: impl Iterator<Item = [u8; N]>,
) -> io::Result<()> {
    let mut buf = [0u8; 1 << 16];
    let mut n = 0;
    for v in values {
        if n + N > buf.len() {
            w.write_all(&buf[..n])?;
            n = 0;
        }
        buf[n..n + N].copy_from_slice(&v);
        n += N;
    }
    w.write_all(&buf[..n])
}

/// Writes integer ids as Int32 (`wide` false) or Int64 little-endian bytes.
pub fn put_ids(w: &mut dyn Write, wide: bool, values: impl Iterator<Item = i64>) -> io::Result<()> {
    if wide {
        put_le(w, values.map(i64::to_le_bytes))
    } else {
        put_le(w, values.map(|v| (v as i32).to_le_bytes()))
    }
}

/// Appends one id to `b` as Int32 (`wide` false) or Int64 little-endian bytes.
#[inline]
pub fn push_id(b: &mut Vec<u8>, wide: bool, v: i64) {
    if wide {
        b.extend_from_slice(&v.to_le_bytes());
    } else {
        b.extend_from_slice(&(v as i32).to_le_bytes());
    }
}

/// Held id values as [`id_kind`]`(max)` stores them (the writers' reference tests build whole
/// arrays this way).
#[cfg(test)]
pub(crate) fn id_values(v: Vec<i64>, max: usize) -> Values {
    match id_kind(max) {
        Kind::I64 => Values::I64(v),
        _ => Values::I32(v.into_iter().map(|x| x as i32).collect()),
    }
}

/// The kind of id arrays whose largest value is `max`: Int32 when it fits (half the bytes of
/// Int64; VTK's XML readers convert either to their id type), Int64 otherwise.
pub fn id_kind(max: usize) -> Kind {
    if max <= i32::MAX as usize {
        Kind::I32
    } else {
        Kind::I64
    }
}

/// Writes the bytes `fill(range, buf)` makes for consecutive ranges of `0..n` (`chunk` items
/// each: range `k` is `k * chunk .. min((k + 1) * chunk, n)`, which callers may rely on to
/// index per-chunk data), made in parallel a few chunks at a time and written in order: the
/// output does not depend on the thread count.
pub fn put_par(
    w: &mut dyn Write,
    n: usize,
    chunk: usize,
    fill: impl Fn(std::ops::Range<usize>, &mut Vec<u8>) + Sync,
) -> io::Result<()> {
    let chunk = chunk.max(1);
    let group = chunk * 4 * rayon::current_num_threads().max(1);
    let mut g = 0;
    while g < n {
        let end = (g + group).min(n);
        let bufs: Vec<Vec<u8>> = (g..end)
            .step_by(chunk)
            .collect::<Vec<_>>()
            .into_par_iter()
            .map(|s| {
                let mut b = Vec::new();
                fill(s..(s + chunk).min(end), &mut b);
                b
            })
            .collect();
        for b in &bufs {
            w.write_all(b)?;
        }
        g = end;
    }
    Ok(())
}

/// Turns little-endian bytes of `kind` values back into ascii lines of 12 values (the layout
/// of [`Values`]' ascii form).
struct AsciiLines<'w> {
    w: &'w mut dyn Write,
    kind: Kind,
    pending: [u8; 8],
    have: usize,
    count: usize,
}

impl AsciiLines<'_> {
    fn value(&mut self) -> io::Result<()> {
        let b = self.pending;
        if !self.count.is_multiple_of(12) {
            self.w.write_all(b" ")?;
        }
        match self.kind {
            Kind::F64 => write!(self.w, "{:e}", f64::from_le_bytes(b)),
            Kind::I64 => write!(self.w, "{}", i64::from_le_bytes(b)),
            Kind::I32 => write!(self.w, "{}", i32::from_le_bytes([b[0], b[1], b[2], b[3]])),
            Kind::U8 => write!(self.w, "{}", b[0]),
        }?;
        self.count += 1;
        if self.count.is_multiple_of(12) {
            self.w.write_all(b"\n")?;
        }
        Ok(())
    }

    fn finish(self) -> io::Result<()> {
        if !self.count.is_multiple_of(12) {
            self.w.write_all(b"\n")?;
        }
        Ok(())
    }
}

impl Write for AsciiLines<'_> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let width = self.kind.width();
        for &byte in buf {
            self.pending[self.have] = byte;
            self.have += 1;
            if self.have == width {
                self.value()?;
                self.have = 0;
            }
        }
        Ok(buf.len())
    }
    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

/// Counts the bytes written through it (to check a producer's length).
struct Counted<'w> {
    w: &'w mut dyn Write,
    n: u64,
}

impl Write for Counted<'_> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let k = self.w.write(buf)?;
        self.n += k as u64;
        Ok(k)
    }
    fn flush(&mut self) -> io::Result<()> {
        self.w.flush()
    }
}

/// Runs `a`'s producer into `w`, failing when it wrote another number of bytes than declared.
fn produce_checked(w: &mut dyn Write, a: &StreamArray) -> io::Result<()> {
    let mut c = Counted { w, n: 0 };
    (a.produce)(&mut c)?;
    if c.n != a.n_bytes() {
        return Err(io::Error::other(format!(
            "array `{}`: {} bytes written, {} declared",
            a.name,
            c.n,
            a.n_bytes()
        )));
    }
    Ok(())
}

enum Pending<'a> {
    Held(Array),
    Stream(StreamArray<'a>),
}

/// Writes arrays in one encoding, collecting appended ones for [`XmlArrays::finish`].
pub struct XmlArrays<'a> {
    encoding: Encoding,
    appended: Vec<Pending<'a>>,
    offset: u64,
}

impl<'a> XmlArrays<'a> {
    pub fn new(encoding: Encoding) -> Self {
        XmlArrays {
            encoding,
            appended: Vec::new(),
            offset: 0,
        }
    }

    /// Writes the `<DataArray>` element of `a` (appended data are written later).
    pub fn write(&mut self, w: &mut impl Write, indent: &str, a: Array) -> io::Result<()> {
        let head = format!(
            "{indent}<DataArray type=\"{}\" Name=\"{}\" NumberOfComponents=\"{}\"",
            a.values.type_name(),
            xml_escape(&a.name),
            a.components
        );
        match self.encoding {
            Encoding::Appended => {
                writeln!(w, "{head} format=\"appended\" offset=\"{}\"/>", self.offset)?;
                self.offset += 8 + a.values.n_bytes();
                self.appended.push(Pending::Held(a));
            }
            Encoding::Base64 => {
                use base64::Engine;
                let e = &base64::engine::general_purpose::STANDARD;
                writeln!(w, "{head} format=\"binary\">")?;
                let n = a.values.n_bytes().to_le_bytes();
                writeln!(
                    w,
                    "{indent}  {}{}",
                    e.encode(n),
                    e.encode(a.values.le_bytes())
                )?;
                writeln!(w, "{indent}</DataArray>")?;
            }
            Encoding::Ascii => {
                writeln!(w, "{head} format=\"ascii\">")?;
                a.values.write_ascii(w)?;
                writeln!(w, "{indent}</DataArray>")?;
            }
        }
        Ok(())
    }

    /// Writes the `<DataArray>` element of a streamed array (appended data are written by
    /// [`XmlArrays::finish`]); the bytes are the same as for the held array of the same values.
    pub fn write_stream(
        &mut self,
        w: &mut impl Write,
        indent: &str,
        a: StreamArray<'a>,
    ) -> io::Result<()> {
        let head = format!(
            "{indent}<DataArray type=\"{}\" Name=\"{}\" NumberOfComponents=\"{}\"",
            a.kind.type_name(),
            xml_escape(&a.name),
            a.components
        );
        match self.encoding {
            Encoding::Appended => {
                writeln!(w, "{head} format=\"appended\" offset=\"{}\"/>", self.offset)?;
                self.offset += 8 + a.n_bytes();
                self.appended.push(Pending::Stream(a));
            }
            Encoding::Base64 => {
                use base64::Engine;
                let e = &base64::engine::general_purpose::STANDARD;
                writeln!(w, "{head} format=\"binary\">")?;
                write!(w, "{indent}  {}", e.encode(a.n_bytes().to_le_bytes()))?;
                {
                    let mut enc = base64::write::EncoderWriter::new(&mut *w, e);
                    produce_checked(&mut enc, &a)?;
                    enc.finish()?;
                }
                writeln!(w)?;
                writeln!(w, "{indent}</DataArray>")?;
            }
            Encoding::Ascii => {
                writeln!(w, "{head} format=\"ascii\">")?;
                let mut lines = AsciiLines {
                    w,
                    kind: a.kind,
                    pending: [0; 8],
                    have: 0,
                    count: 0,
                };
                produce_checked(&mut lines, &a)?;
                lines.finish()?;
                writeln!(w, "{indent}</DataArray>")?;
            }
        }
        Ok(())
    }

    /// Writes the `<AppendedData>` block when arrays were appended.
    pub fn finish(self, w: &mut impl Write) -> io::Result<()> {
        if self.appended.is_empty() {
            return Ok(());
        }
        write!(w, "  <AppendedData encoding=\"raw\">\n   _")?;
        for p in &self.appended {
            match p {
                Pending::Held(a) => {
                    w.write_all(&a.values.n_bytes().to_le_bytes())?;
                    a.values.write_le(w)?;
                }
                Pending::Stream(a) => {
                    w.write_all(&a.n_bytes().to_le_bytes())?;
                    produce_checked(w, a)?;
                }
            }
        }
        writeln!(w, "\n  </AppendedData>")
    }
}

/// Writes a FieldData string array (always ascii: the UTF-8 bytes of each string followed by
/// a 0 byte, as decimal numbers, the form VTK's own writer uses).
pub fn write_string_array(
    w: &mut impl Write,
    indent: &str,
    name: &str,
    strings: &[String],
) -> io::Result<()> {
    writeln!(
        w,
        "{indent}<Array type=\"String\" Name=\"{}\" NumberOfTuples=\"{}\" format=\"ascii\">",
        xml_escape(name),
        strings.len()
    )?;
    for s in strings {
        let codes: Vec<String> = s
            .bytes()
            .filter(|&b| b != 0)
            .chain([0])
            .map(|b| b.to_string())
            .collect();
        writeln!(w, "{indent}  {}", codes.join(" "))?;
    }
    writeln!(w, "{indent}</Array>")
}
