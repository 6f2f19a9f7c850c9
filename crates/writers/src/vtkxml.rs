//! Data arrays of the VTK XML file formats (VTK User's Guide, "VTK File Formats", XML part):
//! each array is written inline as ascii text, inline base64 (`format="binary"`: the 8-byte
//! UInt64 byte count and the little-endian data encoded as two separate base64 runs, as VTK's
//! own writer does), or into the raw `<AppendedData encoding="raw">` block after the `_`
//! marker, where every array is its UInt64 byte count followed by its bytes and the
//! `offset` attribute counts bytes from just after the `_`.

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

impl Values {
    pub fn type_name(&self) -> &'static str {
        match self {
            Values::F64(_) => "Float64",
            Values::I64(_) => "Int64",
            Values::I32(_) => "Int32",
            Values::U8(_) => "UInt8",
        }
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

/// Writes arrays in one encoding, collecting appended ones for [`XmlArrays::finish`].
pub struct XmlArrays {
    encoding: Encoding,
    appended: Vec<Array>,
    offset: u64,
}

impl XmlArrays {
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
                self.appended.push(a);
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

    /// Writes the `<AppendedData>` block when arrays were appended.
    pub fn finish(self, w: &mut impl Write) -> io::Result<()> {
        if self.appended.is_empty() {
            return Ok(());
        }
        write!(w, "  <AppendedData encoding=\"raw\">\n   _")?;
        for a in &self.appended {
            w.write_all(&a.values.n_bytes().to_le_bytes())?;
            a.values.write_le(w)?;
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
