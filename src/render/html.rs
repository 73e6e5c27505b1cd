//! HTML building blocks for the report: escaping, `data:` URIs for embedded downloads, SVG
//! inlining and the report's style sheet (our own typography: a serif-free reading column,
//! figures at full column width, quiet tables with tabular figures, a print layout that keeps
//! figures and tables whole). No scripts, no external fonts, images or styles.

use super::palette::{hex, HIGHLIGHT, INK, INK_SOFT, RULE, SERIES};

/// Escapes text for HTML element content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for ch in text.chars() {
        match ch {
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

/// A `data:` URI carrying `text` percent-encoded (RFC 2397, RFC 3986 unreserved set kept).
pub fn data_uri(mime: &str, text: &str) -> String {
    let mut out = format!("data:{mime};charset=utf-8,");
    for b in text.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b'~') {
            out.push(b as char);
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

/// An SVG document ready to sit inside HTML: any XML declaration dropped and an accessible
/// label added, so the browser scales it with the column (width/height kept as intrinsic
/// size, the style sheet lets it shrink).
pub fn inline_svg(svg: &str, label: &str) -> String {
    let body = match svg.find("<svg") {
        Some(start) => &svg[start..],
        None => svg,
    };
    body.replacen(
        "<svg ",
        &format!("<svg role=\"img\" aria-label=\"{}\" ", escape(label)),
        1,
    )
}

/// The report's style sheet.
pub fn style_sheet() -> String {
    let ink = hex(INK);
    let soft = hex(INK_SOFT);
    let rule = hex(RULE);
    let accent = hex(SERIES[0]);
    let warn = hex(HIGHLIGHT);
    format!(
        r#"
:root {{ --ink: {ink}; --soft: {soft}; --rule: {rule}; --accent: {accent}; --warn: {warn}; }}
* {{ box-sizing: border-box; }}
html {{ background: #f6f7f9; }}
body {{ margin: 0; color: var(--ink); font: 16px/1.55 "DejaVu Sans", "Segoe UI", "Helvetica Neue", Arial, sans-serif; }}
main {{ max-width: 920px; margin: 0 auto; padding: 28px 36px 60px; background: #fff; }}
header {{ border-bottom: 3px solid var(--accent); padding-bottom: 12px; margin-bottom: 22px; }}
header h1 {{ font-size: 28px; margin: 0 0 4px; letter-spacing: -0.01em; }}
header p {{ margin: 0; color: var(--soft); }}
nav {{ font-size: 14px; margin-bottom: 26px; }}
nav ol {{ margin: 0; padding-left: 20px; columns: 2; }}
nav a {{ color: var(--accent); text-decoration: none; }}
h2 {{ font-size: 21px; margin: 34px 0 10px; padding-top: 8px; border-top: 1px solid var(--rule); }}
h3 {{ font-size: 17px; margin: 24px 0 8px; }}
p {{ margin: 0 0 10px; max-width: 46em; }}
a {{ color: var(--accent); }}
figure {{ margin: 16px 0 22px; }}
figure svg {{ display: block; max-width: 100%; height: auto; border: 1px solid var(--rule); }}
figcaption {{ font-size: 14px; color: var(--soft); margin-top: 6px; }}
table {{ border-collapse: collapse; margin: 10px 0 18px; font-size: 14px; font-variant-numeric: tabular-nums; }}
caption {{ text-align: left; font-size: 14px; color: var(--soft); padding-bottom: 6px; }}
th, td {{ padding: 5px 12px 5px 0; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }}
th {{ font-weight: 600; border-bottom: 2px solid var(--ink); }}
td.num, th.num {{ text-align: right; padding-right: 16px; }}
dl.facts {{ display: grid; grid-template-columns: max-content 1fr; gap: 4px 22px; margin: 8px 0 16px; font-size: 15px; }}
dl.facts dt {{ color: var(--soft); }}
dl.facts dd {{ margin: 0; }}
.downloads a {{ display: inline-block; margin: 0 14px 8px 0; padding: 5px 12px; border: 1px solid var(--accent); border-radius: 4px; text-decoration: none; font-size: 14px; }}
details {{ margin: 6px 0 14px; }}
summary {{ cursor: pointer; color: var(--accent); font-size: 14px; }}
pre {{ background: #f3f4f6; padding: 10px 12px; overflow-x: auto; font-size: 12.5px; line-height: 1.45; }}
.cautions {{ border-left: 4px solid var(--warn); background: #fdf3f6; padding: 12px 18px; }}
.cautions li {{ margin-bottom: 6px; }}
footer {{ margin-top: 40px; font-size: 13px; color: var(--soft); }}
@media print {{
  html, main {{ background: #fff; }}
  main {{ max-width: none; padding: 0; }}
  nav, details, .downloads {{ display: none; }}
  h2 {{ break-after: avoid; }}
  figure, table, .cautions {{ break-inside: avoid; }}
  figure svg {{ border: none; }}
  a {{ color: inherit; text-decoration: none; }}
}}
@page {{ margin: 16mm 14mm; }}
"#
    )
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    #[test]
    fn escape_neutralises_markup() {
        assert_eq!(
            escape("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;"
        );
    }

    #[test]
    fn data_uri_round_trips() {
        let text = "id,x\nmast 1,2.5\n\"q\"%";
        let uri = data_uri("text/csv", text);
        assert!(uri.starts_with("data:text/csv;charset=utf-8,"));
        let body = &uri["data:text/csv;charset=utf-8,".len()..];
        assert!(!body.contains([' ', '\n', '"', '#', '<']));
        // Decode by hand and compare.
        let bytes = body.as_bytes();
        let mut out = Vec::new();
        let mut k = 0;
        while k < bytes.len() {
            if bytes[k] == b'%' {
                out.push(
                    u8::from_str_radix(std::str::from_utf8(&bytes[k + 1..k + 3]).unwrap(), 16)
                        .unwrap(),
                );
                k += 3;
            } else {
                out.push(bytes[k]);
                k += 1;
            }
        }
        assert_eq!(String::from_utf8(out).unwrap(), text);
    }

    #[test]
    fn inline_svg_labels_the_root() {
        let s = inline_svg(
            "<?xml version=\"1.0\"?>\n<svg width=\"10\" height=\"10\"></svg>",
            "a \"map\"",
        );
        assert!(s.starts_with("<svg role=\"img\" aria-label=\"a &quot;map&quot;\" width"));
    }
}
