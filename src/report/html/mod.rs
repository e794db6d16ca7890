//! HTML: the document model drawn as one self-contained page (inline CSS and SVG, a few lines
//! of inline script for sorting and zooming; nothing is fetched from anywhere), and the SVG
//! figures a page can hold (`svg`). Every renderer here is a pure function: data in, text out.

pub mod svg;

use super::table::{Align, Block, Document, Markup, Section, Span, Table, Text};

/// Escapes text for HTML element content and double-quoted attribute values (HTML Living
/// Standard, "Serializing HTML fragments": `&`, `<`, `>`, `"`; `'` too, for single-quoted
/// attributes). Characters a browser would drop or that could end a comment are escaped with
/// them; nothing else needs it in UTF-8.
pub fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            c => s.push(c),
        }
    }
    s
}

/// A fragment id made from a title: lower-case letters and digits, words joined by `-`.
pub fn anchor(title: &str) -> String {
    let mut s = String::new();
    for c in title.chars() {
        if c.is_ascii_alphanumeric() {
            s.push(c.to_ascii_lowercase());
        } else if !s.ends_with('-') && !s.is_empty() {
            s.push('-');
        }
    }
    s.trim_end_matches('-').to_string()
}

/// HTML for a [`Document`]: headings by level, tables with a header row that repeats on every
/// printed page; tables with titled columns are sortable by clicking a header (with scripts on).
pub struct Html;

impl Html {
    fn text(text: &Text) -> String {
        text.0
            .iter()
            .map(|span| match span {
                Span::Plain(s) => escape(s),
                Span::Strong(s) => format!("<strong>{}</strong>", escape(s)),
                Span::Code(s) => format!("<code>{}</code>", escape(s)),
            })
            .collect()
    }

    fn cell(tag: &str, text: &str, align: Align) -> String {
        match align {
            Align::Right => format!("<{tag} class=\"num\">{}</{tag}>", escape(text)),
            Align::Left => format!("<{tag}>{}</{tag}>", escape(text)),
        }
    }

    fn block(&self, block: &Block, level: usize) -> String {
        match block {
            Block::Paragraph(t) => format!("<p>{}</p>\n", Self::text(t)),
            Block::List(items) => {
                let mut s = String::from("<ul>\n");
                for item in items {
                    s.push_str(&format!("<li>{}</li>\n", Self::text(item)));
                }
                s.push_str("</ul>\n");
                s
            }
            Block::Table(t) => self.table(t),
            Block::Section(sub) => self.section(sub, level + 1),
        }
    }
}

impl Markup for Html {
    fn table(&self, table: &Table) -> String {
        let columns = table.columns();
        let mut s = String::new();
        match &table.header {
            Some(h) => {
                s.push_str("<table class=\"data sortable\">\n<thead><tr>");
                for c in 0..columns {
                    let title = h.get(c).map(String::as_str).unwrap_or("");
                    s.push_str(&Self::cell("th", title, table.align_of(c)));
                }
                s.push_str("</tr></thead>\n");
            }
            None => s.push_str("<table class=\"facts\">\n"),
        }
        s.push_str("<tbody>\n");
        for row in &table.rows {
            s.push_str("<tr>");
            for c in 0..columns {
                let text = row.get(c).map(String::as_str).unwrap_or("");
                // A table of facts has its labels in the first column.
                let tag = if table.header.is_none() && c == 0 {
                    "th"
                } else {
                    "td"
                };
                s.push_str(&Self::cell(tag, text, table.align_of(c)));
            }
            s.push_str("</tr>\n");
        }
        s.push_str("</tbody>\n</table>\n");
        s
    }

    fn section(&self, section: &Section, level: usize) -> String {
        let mut s = String::new();
        let heading = (level + 1).min(6);
        match &section.title {
            Some(t) => s.push_str(&format!(
                "<section id=\"{}\" class=\"level{level}\">\n<h{heading}>{}</h{heading}>\n",
                anchor(t),
                escape(t)
            )),
            None => s.push_str(&format!("<section class=\"level{level}\">\n")),
        }
        for b in &section.blocks {
            s.push_str(&self.block(b, level));
        }
        s.push_str("</section>\n");
        s
    }

    fn document(&self, doc: &Document) -> String {
        let mut body = format!("<h1>{}</h1>\n", escape(&doc.title));
        for section in &doc.sections {
            body.push_str(&self.section(section, 1));
        }
        page(&doc.title, &body)
    }
}

/// A whole page around `body`: the style sheet (screen and print) and the script, inline.
pub fn page(title: &str, body: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{}</title>\n<style>\n{STYLE}</style>\n</head>\n<body>\n{body}\
         <script>\n{SCRIPT}</script>\n</body>\n</html>\n",
        escape(title)
    )
}

/// The style sheet: system fonts only; on paper each major part starts a page, the title block
/// stays on the first, table headers repeat and rows are not split.
const STYLE: &str = r#"body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;margin:1.5em auto;max-width:80em;padding:0 1em;color:#111;line-height:1.35}
h1{font-size:1.6em;margin:.2em 0}h2{font-size:1.3em;border-bottom:2px solid #333;padding-bottom:.15em;margin-top:1.6em}h3{font-size:1.1em;margin-top:1.2em}
table{border-collapse:collapse;margin:.5em 0;font-size:.9em}
th,td{border:1px solid #999;padding:.2em .45em;vertical-align:top;text-align:left}
thead th{background:#e8e8e8}table.sortable thead th{cursor:pointer}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
table.facts th{background:#f2f2f2;font-weight:600;white-space:nowrap}
tbody tr:nth-child(even){background:#f7f7f7}
code{font-size:.95em}
.title-block{border:2px solid #111;padding:.6em .9em;margin:.6em 0 1em}
.title-block table{width:100%;margin:0}.title-block th{width:13em}
.cautions{border-left:6px solid #b35c00;background:#fff6ec;padding:.4em .9em;margin:.8em 0}
figure{margin:1em 0}figcaption{font-size:.9em;color:#333;margin-top:.3em}
svg text{font-family:system-ui,Arial,sans-serif}
.map>svg{width:100%;height:auto;max-height:80vh;border:1px solid #999;background:#fff;touch-action:none}
.map .layer{display:none}.legend{display:none;font-size:.9em;margin:.3em 0}.hydrant-legend{display:block}
#col-0:checked~svg .layer-0,#col-1:checked~svg .layer-1,#col-2:checked~svg .layer-2,#col-3:checked~svg .layer-3{display:inline}
#col-0:checked~.legends .legend-0,#col-1:checked~.legends .legend-1,#col-2:checked~.legends .legend-2,#col-3:checked~.legends .legend-3{display:block}
.legend span.key{display:inline-block;margin-right:1.1em;white-space:nowrap}
.legend svg{vertical-align:middle;margin-right:.3em}
.colouring label{margin-right:1em;white-space:nowrap}
.sheet{break-inside:avoid}.fail-text{font-weight:700}
.footer{margin-top:2em;font-size:.85em;color:#444}
@media print{body{max-width:none;margin:0;font-size:10pt}
section.level1.major{break-before:page}.sheet{break-before:page}
thead{display:table-header-group}tr{break-inside:avoid}
.colouring,.no-print{display:none}.map>svg{max-height:none;border:none}
a{color:inherit;text-decoration:none}}
@page{margin:14mm}
"#;

/// The script: sortable tables, the map's zoom and pan. The page reads the same without it; at
/// its end it marks the page, so a test can tell that it ran to completion.
const SCRIPT: &str = r#"(function(){
function key(td){var t=(td&&td.textContent||'').trim(),n=parseFloat(t.replace(/,/g,''));return isNaN(n)||!/^[-+]?[0-9.,]+$/.test(t)?{n:null,t:t}:{n:n,t:t};}
document.querySelectorAll('table.sortable').forEach(function(table){
  table.querySelectorAll('thead th').forEach(function(th,i){
    th.title='sort by this column';
    th.addEventListener('click',function(){
      var body=table.tBodies[0],rows=Array.prototype.slice.call(body.rows),up=th.dataset.dir!=='up';
      table.querySelectorAll('thead th').forEach(function(o){delete o.dataset.dir;});th.dataset.dir=up?'up':'down';
      rows.sort(function(a,b){var x=key(a.cells[i]),y=key(b.cells[i]),c;
        if(x.n!==null&&y.n!==null)c=x.n-y.n;else if(x.n!==null)c=-1;else if(y.n!==null)c=1;else c=x.t.localeCompare(y.t);
        return up?c:-c;});
      rows.forEach(function(r){body.appendChild(r);});
    });
  });
});
document.querySelectorAll('.map>svg').forEach(function(svg){
  var v=svg.getAttribute('viewBox').split(' ').map(Number),home=v.slice(),drag=null;
  function set(){svg.setAttribute('viewBox',v.join(' '));}
  function at(e){var r=svg.getBoundingClientRect();return[v[0]+(e.clientX-r.left)/r.width*v[2],v[1]+(e.clientY-r.top)/r.height*v[3]];}
  svg.addEventListener('wheel',function(e){e.preventDefault();var p=at(e),k=e.deltaY<0?0.8:1.25;
    v=[p[0]-(p[0]-v[0])*k,p[1]-(p[1]-v[1])*k,v[2]*k,v[3]*k];set();},{passive:false});
  svg.addEventListener('pointerdown',function(e){drag=at(e);svg.setPointerCapture(e.pointerId);});
  svg.addEventListener('pointermove',function(e){if(!drag)return;var p=at(e);v[0]-=p[0]-drag[0];v[1]-=p[1]-drag[1];set();});
  svg.addEventListener('pointerup',function(){drag=null;});
  svg.addEventListener('dblclick',function(){v=home.slice();set();});
});
document.documentElement.setAttribute('data-script','ran');
})();
"#;

#[cfg(test)]
mod tests {
    use super::*;

    // HTML escaping per the HTML Living Standard's serialization rules: common practice.
    #[test]
    fn escaping_covers_markup_and_attribute_quotes() {
        assert_eq!(
            escape("H<1> & \"x\" 'y' *z*"),
            "H&lt;1&gt; &amp; &quot;x&quot; &#39;y&#39; *z*"
        );
    }

    #[test]
    fn anchors_are_lower_case_words_joined_by_dashes() {
        assert_eq!(anchor("Weak mains (top 10)"), "weak-mains-top-10");
    }

    #[test]
    fn a_titled_table_is_sortable_with_a_repeating_header() {
        let mut t = Table::new(vec!["id".into(), "flow".into()])
            .with_rows([vec!["<H&1>".into(), "1,200".into()]]);
        t.align = vec![Align::Left, Align::Right];
        let s = Html.table(&t);
        assert!(s.starts_with("<table class=\"data sortable\">\n<thead><tr><th>id</th>"));
        assert!(s.contains("<td>&lt;H&amp;1&gt;</td><td class=\"num\">1,200</td>"));
    }

    #[test]
    fn the_page_fetches_nothing() {
        let p = Html.document(&Document {
            title: "T".into(),
            sections: vec![Section::titled("S").paragraph("p")],
        });
        for needle in ["src=", "href=\"http", "url(", "@import"] {
            assert!(!p.contains(needle), "{needle}");
        }
    }
}
