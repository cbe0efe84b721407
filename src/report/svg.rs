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

/// Font size of the cautions footer (px).
const FOOTER_FONT: f64 = 9.0;

/// `doc` (a whole SVG document with numeric `width` and `height` on its
/// root) with the cautions as a small footer below the drawing: the
/// canvas grows by the footer's height, its `viewBox` with it, and the
/// cautions are wrapped to the canvas width (0.6 em per character, a
/// safe width for sans-serif). A standalone picture pasted into a slide
/// keeps them. Returns `doc` unchanged when its root has no such size.
pub fn with_cautions(doc: &str) -> String {
    let Some(start) = doc.find("<svg") else {
        return doc.to_string();
    };
    let Some(end) = doc[start..].find('>').map(|e| start + e) else {
        return doc.to_string();
    };
    let root = &doc[start..end];
    let attr = |name: &str| -> Option<f64> {
        let key = format!(" {name}=\"");
        let i = root.find(&key)? + key.len();
        let j = root[i..].find('"')? + i;
        root[i..j].trim_end_matches("px").parse().ok()
    };
    let (Some(w), Some(h)) = (attr("width"), attr("height")) else {
        return doc.to_string();
    };
    let per_line = ((w - 16.0) / (0.6 * FOOTER_FONT)).floor().max(20.0) as usize;
    let mut lines: Vec<String> = Vec::new();
    for c in super::CAUTIONS {
        lines.extend(wrap(&format!("Caution: {c}"), per_line));
    }
    let line_height = FOOTER_FONT * 1.3;
    let footer = 8.0 + line_height * lines.len() as f64;
    let total = h + footer;
    // The new root: width kept, height and viewBox grown.
    let mut new_root = String::from("<svg");
    let mut rest = &root[4..];
    // Drop the old height and viewBox, keep every other attribute.
    while let Some(i) = rest.find('=') {
        let name_start = rest[..i].rfind(' ').map_or(0, |k| k + 1);
        let name = rest[name_start..i].trim();
        let vstart = i + 2;
        let Some(vlen) = rest[vstart..].find('"') else {
            break;
        };
        let value = &rest[vstart..vstart + vlen];
        if name != "height" && name != "viewBox" {
            new_root.push_str(&format!(" {name}=\"{value}\""));
        }
        rest = &rest[vstart + vlen + 1..];
    }
    new_root.push_str(&format!(
        " height=\"{}\" viewBox=\"0 0 {} {}\"",
        num(total),
        num(w),
        num(total)
    ));
    let mut foot = format!(
        "<g class=\"cautions\"><rect x=\"0\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"#ffffff\"/>\n",
        num(h),
        num(w),
        num(footer)
    );
    for (k, l) in lines.iter().enumerate() {
        foot.push_str(&format!(
            "<text x=\"8.00\" y=\"{}\" font-size=\"{}\" font-family=\"sans-serif\" fill=\"#333333\">{}</text>\n",
            num(h + 4.0 + line_height * (k as f64 + 1.0)),
            num(FOOTER_FONT),
            escape(l)
        ));
    }
    foot.push_str("</g>\n");
    let body_end = doc.rfind("</svg>").unwrap_or(doc.len());
    format!(
        "{}{new_root}{}{foot}{}",
        &doc[..start],
        &doc[end..body_end],
        &doc[body_end..]
    )
}

/// Splits `text` at spaces into lines of at most `width` characters (a
/// longer word stays whole on its own line).
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// Style attribute helper: `s("stroke", "#000")`.
pub fn s(key: &'static str, value: impl Into<String>) -> (&'static str, String) {
    (key, value.into())
}
