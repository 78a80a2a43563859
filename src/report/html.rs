//! A minimal HTML document builder for reports.

use super::svg::escape;
use crate::io::provenance::RESEARCH_NOTICE;
use std::fmt::Write;

/// An HTML report under construction.
#[derive(Clone, Debug, Default)]
pub struct Report {
    title: String,
    body: String,
}

impl Report {
    /// A report with a title; the research-use notice is always shown first.
    pub fn new(title: &str) -> Self {
        let mut r = Report { title: title.to_string(), body: String::new() };
        let _ = write!(r.body, r#"<p class="notice">{}</p>"#, escape(RESEARCH_NOTICE));
        r
    }

    /// A section heading.
    pub fn heading(&mut self, text: &str) -> &mut Self {
        let _ = write!(self.body, "<h2>{}</h2>", escape(text));
        self
    }

    /// A paragraph of plain text.
    pub fn paragraph(&mut self, text: &str) -> &mut Self {
        let _ = write!(self.body, "<p>{}</p>", escape(text));
        self
    }

    /// An inline SVG figure with a caption (the SVG is trusted, made by [`super::svg`]).
    pub fn figure(&mut self, svg: &str, caption: &str) -> &mut Self {
        let _ = write!(self.body, "<figure>{svg}<figcaption>{}</figcaption></figure>", escape(caption));
        self
    }

    /// A table with a header row.
    pub fn table(&mut self, header: &[&str], rows: &[Vec<String>]) -> &mut Self {
        self.body.push_str("<table><thead><tr>");
        for h in header {
            let _ = write!(self.body, "<th>{}</th>", escape(h));
        }
        self.body.push_str("</tr></thead><tbody>");
        for row in rows {
            self.body.push_str("<tr>");
            for c in row {
                let _ = write!(self.body, "<td>{}</td>", escape(c));
            }
            self.body.push_str("</tr>");
        }
        self.body.push_str("</tbody></table>");
        self
    }

    /// The complete, self-contained HTML page.
    pub fn finish(&self) -> String {
        format!(
            "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>{t}</title><style>{css}</style></head>\
             <body><h1>{t}</h1>{body}<footer>hierax {v}</footer></body></html>\n",
            t = escape(&self.title),
            css = CSS,
            body = self.body,
            v = crate::VERSION
        )
    }
}

const CSS: &str = "body{font-family:sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;color:#1f2933}\
h1{font-size:1.5rem}h2{font-size:1.15rem;margin-top:2rem;border-bottom:1px solid #cbd2d9}\
.notice{background:#fff4e5;border-left:4px solid #c2571a;padding:.5rem .8rem}\
figure{display:inline-block;margin:.5rem 1rem .5rem 0}figcaption{font-size:.85rem;color:#52606d;max-width:420px}\
table{border-collapse:collapse;font-size:.85rem}td,th{border:1px solid #cbd2d9;padding:.2rem .5rem;text-align:right}td:first-child{text-align:left}\
th{background:#f5f7fa}footer{margin-top:3rem;font-size:.8rem;color:#7b8794}";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn report_carries_notice_and_escapes() {
        let mut r = Report::new("Cohort <demo>");
        r.heading("Energy").paragraph("a & b").table(&["x"], &[vec!["<1>".into()]]);
        let html = r.finish();
        assert!(html.contains("not for clinical decisions"));
        assert!(
            html.contains("Cohort &lt;demo&gt;") && html.contains("a &amp; b") && html.contains("&lt;1&gt;")
        );
    }
}
