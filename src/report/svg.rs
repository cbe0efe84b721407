//! A small SVG writer: elements with attributes, text escaped, numbers
//! printed with fixed decimals so output is byte-identical across runs.

use std::fmt::Write as _;

/// Escapes text for XML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A coordinate or length with two decimals.
pub fn num(v: f64) -> String {
    let v = if v.abs() < 0.005 { 0.0 } else { v };
    format!("{v:.2}")
}

/// An SVG document under construction.
#[derive(Debug, Clone)]
pub struct Svg {
    body: String,
    width: f64,
    height: f64,
}

impl Svg {
    /// An empty document of the given size in pixels.
    pub fn new(width: f64, height: f64) -> Self {
        Svg {
            body: String::new(),
            width,
            height,
        }
    }

    /// Appends a raw element (already well-formed).
    pub fn raw(&mut self, element: &str) {
        self.body.push_str(element);
        self.body.push('\n');
    }

    /// Appends `<name attrs.../>`.
    pub fn element(&mut self, name: &str, attrs: &[(&str, String)]) {
        let _ = write!(self.body, "<{name}");
        for (k, v) in attrs {
            let _ = write!(self.body, " {k}=\"{}\"", escape(v));
        }
        self.body.push_str("/>\n");
    }

    /// Appends a line.
    pub fn line(&mut self, a: (f64, f64), b: (f64, f64), style: &[(&str, String)]) {
        let mut attrs = vec![
            ("x1", num(a.0)),
            ("y1", num(a.1)),
            ("x2", num(b.0)),
            ("y2", num(b.1)),
        ];
        attrs.extend(style.iter().cloned());
        self.element("line", &attrs);
    }

    /// Appends a circle.
    pub fn circle(&mut self, c: (f64, f64), r: f64, style: &[(&str, String)]) {
        let mut attrs = vec![("cx", num(c.0)), ("cy", num(c.1)), ("r", num(r))];
        attrs.extend(style.iter().cloned());
        self.element("circle", &attrs);
    }

    /// Appends a closed polygon.
    pub fn polygon(&mut self, points: &[(f64, f64)], style: &[(&str, String)]) {
        let pts: Vec<String> = points
            .iter()
            .map(|p| format!("{},{}", num(p.0), num(p.1)))
            .collect();
        let mut attrs = vec![("points", pts.join(" "))];
        attrs.extend(style.iter().cloned());
        self.element("polygon", &attrs);
    }

    /// Appends text at a point.
    pub fn text(&mut self, at: (f64, f64), size: f64, content: &str, style: &[(&str, String)]) {
        let _ = write!(
            self.body,
            "<text x=\"{}\" y=\"{}\" font-size=\"{}\" font-family=\"sans-serif\"",
            num(at.0),
            num(at.1),
            num(size)
        );
        for (k, v) in style {
            let _ = write!(self.body, " {k}=\"{}\"", escape(v));
        }
        let _ = writeln!(self.body, ">{}</text>", escape(content));
    }

    /// The finished document.
    pub fn finish(self, title: &str) -> String {
        format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\">\n<title>{}</title>\n{}</svg>\n",
            escape(title),
            self.body,
            w = num(self.width),
            h = num(self.height),
        )
    }
}

/// Style attribute helper: `s("stroke", "#000")`.
pub fn s(key: &'static str, value: impl Into<String>) -> (&'static str, String) {
    (key, value.into())
}
