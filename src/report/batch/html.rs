//! The self-contained HTML page: our own Markdown bodies turned into HTML,
//! pictures embedded as base64 `data:` URIs.

use std::fmt::Write as _;

use super::pictures::Pictures;
use super::sections::sections;
use super::summary::BatchSummary;

/// Base64 (RFC 4648 §4, standard alphabet, with padding).
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        let sextet = |shift: u32| char::from(ALPHABET[((n >> shift) & 63) as usize]);
        out.push(sextet(18));
        out.push(sextet(12));
        out.push(if chunk.len() > 1 { sextet(6) } else { '=' });
        out.push(if chunk.len() > 2 { sextet(0) } else { '=' });
    }
    out
}

pub(super) fn html_escape(s: &str) -> String {
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

/// Inline Markdown of our own bodies: `code`, **bold**.
pub(super) fn html_inline(s: &str) -> String {
    let e = html_escape(s).replace("\\|", "|");
    let mut o = String::new();
    let mut code = false;
    let mut bold = false;
    let mut rest = e.as_str();
    while let Some(c) = rest.chars().next() {
        if rest.starts_with("**") && !code {
            o.push_str(if bold { "</strong>" } else { "<strong>" });
            bold = !bold;
            rest = &rest[2..];
        } else if c == '`' {
            o.push_str(if code { "</code>" } else { "<code>" });
            code = !code;
            rest = &rest[1..];
        } else {
            o.push(c);
            rest = &rest[c.len_utf8()..];
        }
    }
    o
}

/// Splits a table line into cells, honouring `\|`.
pub(super) fn table_cells(line: &str) -> Vec<String> {
    let inner = line.trim().trim_start_matches('|').trim_end_matches('|');
    let mut cells = Vec::new();
    let mut cur = String::new();
    let mut chars = inner.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\\' && chars.peek() == Some(&'|') {
            cur.push_str("\\|");
            chars.next();
        } else if c == '|' {
            cells.push(cur.trim().to_string());
            cur.clear();
        } else {
            cur.push(c);
        }
    }
    cells.push(cur.trim().to_string());
    cells
}

/// Turns one of our Markdown bodies (paragraphs, lists, pipe tables,
/// images) into HTML; images become `data:` URIs.
pub(super) fn body_html(body: &str, pics: &Pictures) -> String {
    let mut o = String::new();
    let lines: Vec<&str> = body.lines().collect();
    let mut i = 0;
    while i < lines.len() {
        let l = lines[i];
        if l.trim().is_empty() {
            i += 1;
        } else if let Some(rest) = l.strip_prefix("![") {
            let (alt, src) = rest.split_once("](").unwrap_or((rest, ""));
            let src = src.trim_end_matches(')');
            if let Some((_, png, _)) = pics.items.iter().find(|p| p.0 == src) {
                let _ = writeln!(
                    o,
                    "<figure><img alt=\"{}\" src=\"data:image/png;base64,{}\"></figure>",
                    html_escape(alt),
                    base64(png)
                );
            }
            i += 1;
        } else if l.starts_with('|') {
            o.push_str("<table>\n");
            let header = table_cells(l);
            let aligns: Vec<bool> = lines
                .get(i + 1)
                .map(|s| table_cells(s).iter().map(|c| c.ends_with(':')).collect())
                .unwrap_or_default();
            o.push_str("<thead><tr>");
            for (k, c) in header.iter().enumerate() {
                let cls = if aligns.get(k).copied().unwrap_or(false) {
                    " class=\"n\""
                } else {
                    ""
                };
                let _ = write!(o, "<th{cls}>{}</th>", html_inline(c));
            }
            o.push_str("</tr></thead>\n<tbody>\n");
            i += 2;
            while i < lines.len() && lines[i].starts_with('|') {
                o.push_str("<tr>");
                for (k, c) in table_cells(lines[i]).iter().enumerate() {
                    let cls = if aligns.get(k).copied().unwrap_or(false) {
                        " class=\"n\""
                    } else {
                        ""
                    };
                    let decision_cls = match c.as_str() {
                        "pass" | "fail" | "indeterminate" => format!(" data-d=\"{c}\""),
                        _ => String::new(),
                    };
                    let _ = write!(o, "<td{cls}{decision_cls}>{}</td>", html_inline(c));
                }
                o.push_str("</tr>\n");
                i += 1;
            }
            o.push_str("</tbody></table>\n");
        } else if l.starts_with("- ") {
            o.push_str("<ul>\n");
            while i < lines.len() && lines[i].starts_with("- ") {
                let _ = writeln!(o, "<li>{}</li>", html_inline(&lines[i][2..]));
                i += 1;
            }
            o.push_str("</ul>\n");
        } else {
            let mut para = Vec::new();
            while i < lines.len()
                && !lines[i].trim().is_empty()
                && !lines[i].starts_with('|')
                && !lines[i].starts_with("- ")
                && !lines[i].starts_with("![")
            {
                para.push(lines[i]);
                i += 1;
            }
            let _ = writeln!(o, "<p>{}</p>", html_inline(&para.join(" ")));
        }
    }
    o
}

pub(super) const CSS: &str = "body{font-family:'DejaVu Sans',Verdana,sans-serif;color:#262a30;max-width:1240px;margin:2em auto;padding:0 1em;line-height:1.45}\
h1{font-size:1.6em;border-bottom:3px solid #5c80aa;padding-bottom:.3em}\
h2{font-size:1.2em;margin-top:2em;color:#34506f}\
table{border-collapse:collapse;margin:.8em 0;font-size:.92em}\
th,td{border:1px solid #d5d9df;padding:.25em .6em;text-align:left}\
th{background:#eef1f5}td.n,th.n{text-align:right;font-variant-numeric:tabular-nums}\
td[data-d=pass]{color:#28788f}td[data-d=fail]{color:#b03028;font-weight:bold}td[data-d=indeterminate]{color:#a06a00}\
code{font-size:.9em;background:#f3f4f6;padding:0 .2em}\
figure{margin:1em 0}img{max-width:100%;border:1px solid #e2e5ea}";

pub(super) fn html_with(s: &BatchSummary, pics: &Pictures) -> String {
    let title = format!(
        "Batch report: {} v{}, {} recordings",
        s.spec_name,
        s.spec_version,
        s.entries.len()
    );
    let mut o = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{t}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<h1>{t}</h1>\n",
        t = html_escape(&title)
    );
    for (h, body) in sections(s, pics) {
        let _ = write!(
            o,
            "<section>\n<h2>{}</h2>\n{}</section>\n",
            html_escape(&h),
            body_html(&body, pics)
        );
    }
    o.push_str("</body>\n</html>\n");
    o
}
