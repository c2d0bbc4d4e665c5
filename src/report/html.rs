//! The run report: one self-contained HTML file (inline CSS, figures embedded), no scripts.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use serde_json::Value;

use super::data::{self, is_ok, numbers, outlier_summary, status_counts};
use super::{Figure, ReportError};
use crate::catalogue::Table;
use crate::flow::bulk_flow_report::BulkFlowReport;

/// Write the run report for `table` (read from `input`) to `out`, atomically: provenance,
/// settings and conventions, counts per status, outliers per reason, the bulk flow and its ΛCDM
/// comparison (from `bulkflow`, the `OUTPUT.bulkflow.json` file as read by
/// `catalogue::bulk_flow_file::read_bulk_flow`), and every file of
/// `figures` embedded (PNG as base64 data, SVG inline; a figure written in both formats is
/// embedded once, as PNG) and linked.
pub fn write_report(
    table: &Table,
    input: &Path,
    figures: &[PathBuf],
    bulkflow: Option<&BulkFlowReport>,
    out: &Path,
) -> Result<(), ReportError> {
    let html = render(table, input, figures, bulkflow, out)?;
    crate::catalogue::atomic::write_bytes(out, html.as_bytes())
        .map_err(|e| ReportError::output(out, e.into()))
}

fn render(
    table: &Table,
    input: &Path,
    figures: &[PathBuf],
    bulkflow: Option<&BulkFlowReport>,
    out: &Path,
) -> Result<String, ReportError> {
    let mut h = String::with_capacity(1 << 20);
    let name = input
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| input.display().to_string());
    let (provenance, prov_source) = read_provenance(input);
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>flowsift report: {}</title>\n<style>{CSS}</style>\n</head>\n<body>\n",
        esc(&name)
    );
    let _ = write!(
        h,
        "<header><p class=\"kicker\">flowsift run report</p><h1>{}</h1>\
         <p class=\"meta\">Written {} by flowsift {}. Figures and numbers below use the rows \
         whose status is <code>ok</code>.</p></header>\n<main>\n",
        esc(&name),
        esc(&utc_now()),
        env!("CARGO_PKG_VERSION")
    );
    contents(&mut h, bulkflow.is_some(), !figures.is_empty());
    input_section(&mut h, table, input, &provenance, &prov_source);
    settings_section(&mut h, &provenance);
    rows_section(&mut h, table)?;
    outliers_section(&mut h, table)?;
    bulkflow_section(&mut h, bulkflow);
    figures_section(&mut h, figures, out)?;
    h.push_str(
        "</main>\n<footer>Self-contained report: no external files, styles or scripts. \
                Written by flowsift.</footer>\n</body>\n</html>\n",
    );
    Ok(h)
}

const CSS: &str = "\
:root{--ink:#1c2028;--muted:#5a606a;--line:#d9dce1;--soft:#f4f5f7;--accent:#2e5480;--warm:#cc6600;--green:#00964a}\
*{box-sizing:border-box}\
body{margin:0;color:var(--ink);background:#fff;font:16px/1.5 system-ui,-apple-system,'Segoe UI','DejaVu Sans',sans-serif}\
header{padding:28px 40px 20px;border-bottom:4px solid var(--accent);background:var(--soft)}\
header h1{margin:0;font-size:28px;word-break:break-all}\
.kicker{margin:0 0 4px;text-transform:uppercase;letter-spacing:.12em;font-size:13px;color:var(--accent);font-weight:600}\
.meta{margin:6px 0 0;color:var(--muted)}\
main{max-width:1180px;margin:0 auto;padding:10px 40px 40px}\
nav{margin:18px 0;font-size:15px}nav a{margin-right:16px;color:var(--accent)}\
h2{margin:36px 0 10px;font-size:21px;border-bottom:1px solid var(--line);padding-bottom:4px}\
h3{margin:22px 0 8px;font-size:17px}\
table{border-collapse:collapse;margin:8px 0 14px;font-size:15px}\
th,td{border-bottom:1px solid var(--line);padding:5px 14px 5px 0;text-align:left;vertical-align:top}\
th{color:var(--muted);font-weight:600}\
td.n{text-align:right;font-variant-numeric:tabular-nums}\
code,pre{font-family:'DejaVu Sans Mono',Menlo,Consolas,monospace;font-size:13.5px}\
pre{margin:0;white-space:pre-wrap;word-break:break-word;background:var(--soft);padding:6px 8px;border-radius:4px}\
.note{color:var(--muted)}.warn{border-left:4px solid var(--warm);padding:4px 12px;background:#fff7ef}ul.warn{padding-left:32px}\
figure{margin:22px 0 34px}figure img,figure svg{width:100%;height:auto;border:1px solid var(--line)}\
figcaption{margin-top:6px;color:var(--muted)}\
details{margin:8px 0}summary{cursor:pointer;color:var(--accent)}\
footer{max-width:1180px;margin:0 auto;padding:16px 40px 30px;color:var(--muted);font-size:14px;border-top:1px solid var(--line)}";

fn contents(h: &mut String, bulk: bool, figs: bool) {
    h.push_str(
        "<nav><a href=\"#input\">Input</a><a href=\"#settings\">Settings and conventions</a>\
                <a href=\"#rows\">Rows</a><a href=\"#outliers\">Outliers</a>",
    );
    if bulk {
        h.push_str("<a href=\"#bulkflow\">Bulk flow</a>");
    }
    if figs {
        h.push_str("<a href=\"#figures\">Figures</a>");
    }
    h.push_str("</nav>\n");
}

/// HTML escaping for text and attribute values.
fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            _ => o.push(c),
        }
    }
    o
}

/// Provenance entries of a flowsift output, through the catalogue layer's one reader, and a
/// note saying where they came from (or why there are none).
fn read_provenance(input: &Path) -> (Vec<(String, String)>, String) {
    match crate::catalogue::read_provenance(input, None) {
        Ok(found) => (found.provenance.entries, found.origin),
        Err(e) => (Vec::new(), format!("provenance not readable: {e}")),
    }
}

fn lookup<'a>(p: &'a [(String, String)], key: &str) -> Option<&'a str> {
    p.iter().find(|(k, _)| k == key).map(|(_, v)| v.as_str())
}

fn input_section(
    h: &mut String,
    table: &Table,
    input: &Path,
    provenance: &[(String, String)],
    source: &str,
) {
    let full = std::fs::canonicalize(input).unwrap_or_else(|_| input.to_path_buf());
    let _ = write!(
        h,
        "<h2 id=\"input\">Input</h2>\n<table>\
         <tr><th>file</th><td><code>{}</code></td></tr>\
         <tr><th>rows × columns</th><td>{} × {}</td></tr>\
         <tr><th>provenance</th><td>{} ({} entries)</td></tr>",
        esc(&full.display().to_string()),
        table.frame.height(),
        table.frame.width(),
        esc(source),
        provenance.len()
    );
    let record = crate::catalogue::RunRecord::from_provenance(&crate::catalogue::Provenance {
        entries: provenance.to_vec(),
    });
    match record {
        Ok(Some(r)) => {
            let _ = write!(
                h,
                "<tr><th>steps that made it</th><td><code>{}</code></td></tr>",
                esc(&r.chain().join(" → "))
            );
            if !r.overridden.is_empty() {
                let _ = write!(
                    h,
                    "<tr><th>overridden against its input</th><td>{}</td></tr>",
                    esc(&r.overridden.join("; "))
                );
            }
        }
        Ok(None) => {}
        Err(e) => {
            let _ = write!(
                h,
                "<tr><th>record</th><td class=\"warn\">{}</td></tr>",
                esc(&e)
            );
        }
    }
    for (key, label) in [
        ("input", "catalogue it was made from"),
        ("stage", "stage"),
        ("command", "command"),
        ("software", "software"),
        ("date", "written (UTC)"),
    ] {
        if let Some(v) = lookup(provenance, key) {
            let _ = write!(
                h,
                "<tr><th>{label}</th><td><code>{}</code></td></tr>",
                esc(v)
            );
        }
    }
    h.push_str("</table>\n");
}

/// A provenance value for display: JSON objects pretty-printed.
fn show_value(v: &str) -> String {
    let t = v.trim();
    if t.starts_with('{') || t.starts_with('[') {
        if let Ok(j) = serde_json::from_str::<Value>(t) {
            let pretty = serde_json::to_string_pretty(&j).unwrap_or_else(|_| t.to_string());
            return format!("<pre>{}</pre>", esc(&pretty));
        }
    }
    format!("<code>{}</code>", esc(v))
}

fn settings_section(h: &mut String, p: &[(String, String)]) {
    h.push_str("<h2 id=\"settings\">Settings and conventions</h2>\n");
    if p.is_empty() {
        h.push_str(
            "<p class=\"note\">No provenance was found with this table, so the settings \
                    it was made with are unknown.</p>\n",
        );
        return;
    }
    h.push_str("<table>");
    let json = |key: &str| lookup(p, key).and_then(|v| serde_json::from_str::<Value>(v).ok());
    if let Some(c) = json("cosmology") {
        let par = c.get("params").cloned().unwrap_or(Value::Null);
        let num = |k: &str| par.get(k).and_then(Value::as_f64).map(number);
        let mut s = format!(
            "H0 = {} km/s/Mpc, Ω_m = {}, Ω_de = {}",
            num("h0").unwrap_or_else(|| "?".into()),
            num("omega_m").unwrap_or_else(|| "?".into()),
            num("omega_de").unwrap_or_else(|| "?".into())
        );
        if let Some(k) = c.get("omega_k").and_then(Value::as_f64) {
            let _ = write!(s, ", Ω_k = {}", number(k));
        }
        if let (Some(w0), Some(wa)) = (num("w0"), num("wa")) {
            let _ = write!(s, ", w0 = {w0}, wa = {wa}");
        }
        let _ = write!(h, "<tr><th>cosmology</th><td>{}", esc(&s));
        if let Some(src) = c.get("source").and_then(Value::as_str) {
            let _ = write!(h, "<br><span class=\"note\">{}</span>", esc(src));
        }
        h.push_str("</td></tr>");
    }
    if let Some(a) = json("cmb_apex") {
        let f = |k: &str| {
            a.get(k)
                .and_then(Value::as_f64)
                .map(number)
                .unwrap_or_default()
        };
        let _ = write!(
            h,
            "<tr><th>CMB frame</th><td>apex {}: {} km/s towards l = {}°, b = {}°",
            esc(a.get("name").and_then(Value::as_str).unwrap_or("?")),
            f("speed_km_s"),
            f("glon_deg"),
            f("glat_deg")
        );
        if let Some(src) = a.get("source").and_then(Value::as_str) {
            let _ = write!(h, "<br><span class=\"note\">{}</span>", esc(src));
        }
        h.push_str("</td></tr>");
    }
    for (key, label) in [
        ("dl_convention", "luminosity-distance convention"),
        ("boost", "rest-frame boost"),
        ("sigma_star_km_s", "σ_* added to velocity errors (km/s)"),
        ("length_unit", "length unit"),
        ("monte_carlo_draws", "Monte Carlo draws per object"),
        ("monte_carlo_seed", "Monte Carlo seed"),
        ("local_group_apex", "Local Group apex"),
        ("galactic_rest_apex", "Galactic rest-frame apex"),
        ("input_rows", "input rows"),
        ("rows_ok", "rows ok"),
    ] {
        if let Some(v) = lookup(p, key) {
            let _ = write!(
                h,
                "<tr><th>{}</th><td><code>{}</code></td></tr>",
                esc(label),
                esc(v)
            );
        }
    }
    h.push_str("</table>\n");
    if let Some(c) = lookup(p, "cautions") {
        let items: Vec<&str> = c.split(" | ").filter(|s| !s.trim().is_empty()).collect();
        if !items.is_empty() {
            h.push_str("<h3>Cautions recorded with the run</h3><ul class=\"warn\">");
            for i in items {
                let _ = write!(h, "<li>{}</li>", esc(i));
            }
            h.push_str("</ul>\n");
        }
    }
    h.push_str("<details><summary>All provenance entries</summary><table>");
    for (k, v) in p {
        let _ = write!(
            h,
            "<tr><th><code>{}</code></th><td>{}</td></tr>",
            esc(k),
            show_value(v)
        );
    }
    h.push_str("</table></details>\n");
}

fn rows_section(h: &mut String, table: &Table) -> Result<(), ReportError> {
    h.push_str("<h2 id=\"rows\">Rows</h2>\n");
    let counts = status_counts(table)?;
    let total = table.frame.height();
    if counts.is_empty() {
        h.push_str("<p class=\"warn\">The table has no <code>status</code> column.</p>\n");
    } else {
        h.push_str("<table><tr><th>status</th><th>rows</th><th>share</th></tr>");
        for (s, n) in &counts {
            let _ = write!(
                h,
                "<tr><td><code>{}</code></td><td class=\"n\">{n}</td><td class=\"n\">{:.1}%</td></tr>",
                esc(s),
                100.0 * *n as f64 / total.max(1) as f64
            );
        }
        let _ = writeln!(
            h,
            "<tr><th>all</th><th class=\"n\">{total}</th><th></th></tr></table>"
        );
    }
    // A few numbers of the usable rows.
    let ok: Vec<bool> = match data::texts(table, "status")? {
        Some(s) => s.iter().map(|v| is_ok(v.as_deref())).collect(),
        None => vec![false; total],
    };
    let summary = |name: &str, unit: &str| -> Result<Option<String>, ReportError> {
        let Some(v) = numbers(table, name)? else {
            return Ok(None);
        };
        let mut x: Vec<f64> = v
            .iter()
            .zip(&ok)
            .filter(|(v, o)| **o && v.is_finite())
            .map(|(v, _)| *v)
            .collect();
        if x.is_empty() {
            return Ok(None);
        }
        x.sort_by(f64::total_cmp);
        let med = x[x.len() / 2];
        Ok(Some(format!(
            "<tr><td><code>{name}</code></td><td>{unit}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            sig(x[0], 4),
            sig(med, 4),
            sig(x[x.len() - 1], 4)
        )))
    };
    let mut lines = String::new();
    for (name, unit) in [
        ("z_cmb", ""),
        ("d_c", "Mpc"),
        ("v_pec", "km/s"),
        ("v_pec_err", "km/s"),
        ("eta_err", ""),
    ] {
        if let Some(l) = summary(name, unit)? {
            lines.push_str(&l);
        }
    }
    if !lines.is_empty() {
        let _ = writeln!(
            h,
            "<h3>Rows with status ok</h3><table><tr><th>column</th><th>unit</th><th>min</th><th>median</th><th>max</th></tr>{lines}</table>"
        );
    }
    Ok(())
}

fn outliers_section(h: &mut String, table: &Table) -> Result<(), ReportError> {
    h.push_str("<h2 id=\"outliers\">Outliers</h2>\n");
    let s = outlier_summary(table)?;
    if !s.has_column {
        h.push_str(
            "<p class=\"note\">The table has no <code>outlier</code> column: no outlier \
                    flagging was run on it (<code>flowsift outliers</code>).</p>\n",
        );
        return Ok(());
    }
    let _ = writeln!(
        h,
        "<p>{} of {} rows are flagged as outliers (they stay in the table; the figures show them \
         as open green markers).</p>",
        s.flagged,
        table.frame.height()
    );
    if s.flagged == 0 {
        return Ok(());
    }
    h.push_str("<table><tr><th>reason</th><th>rows</th></tr>");
    for (r, n) in &s.per_reason {
        let _ = write!(
            h,
            "<tr><td><code>{}</code></td><td class=\"n\">{n}</td></tr>",
            esc(r)
        );
    }
    h.push_str(
        "</table>\n<p class=\"note\">A row can be flagged for several reasons; by \
                combination:</p><table><tr><th>reasons</th><th>rows</th></tr>",
    );
    for (r, n) in &s.per_combination {
        let _ = write!(
            h,
            "<tr><td><code>{}</code></td><td class=\"n\">{n}</td></tr>",
            esc(r)
        );
    }
    h.push_str("</table>\n");
    Ok(())
}

fn diagonal(m: &[[f64; 3]; 3]) -> [f64; 3] {
    [m[0][0], m[1][1], m[2][2]]
}

/// The fitted quantity in words.
fn quantity_words(q: crate::settings::FitSpace) -> &'static str {
    match q {
        crate::settings::FitSpace::Eta => "η",
        crate::settings::FitSpace::Velocity => "radial velocities",
    }
}

fn bulkflow_section(h: &mut String, bulk: Option<&BulkFlowReport>) {
    let Some(b) = bulk else {
        return;
    };
    h.push_str("<h2 id=\"bulkflow\">Bulk flow</h2>\n");
    // serde_json writes a number that is not finite as null: such a number is left out.
    let finite = |v: f64| v.is_finite().then_some(v);
    let mut intro = format!(
        "Maximum-likelihood fit of {} objects' {}",
        b.fit.n_used,
        esc(quantity_words(b.fit.quantity))
    );
    if let Some(s) = finite(b.fit.sigma_star) {
        let _ = write!(
            intro,
            ", σ_* = {} km/s ({})",
            fixed(s, 0),
            if b.fit.sigma_star_fitted {
                "fitted"
            } else {
                "fixed"
            }
        );
    }
    let _ = writeln!(h, "<p>{intro}.</p>");
    if let (Some(a), Some(l), Some(bb)) = (finite(b.amplitude), finite(b.l), finite(b.b)) {
        let err = finite(b.amplitude_err)
            .map(|e| format!(" ± {}", fixed(e, 0)))
            .unwrap_or_default();
        let _ = writeln!(
            h,
            "<p><strong>{}{err} km/s towards l = {}°, b = {}°</strong> (Galactic).</p>",
            fixed(a, 0),
            fixed(l, 1),
            fixed(bb, 1)
        );
    }
    let lcdm = b.lcdm.as_ref();
    let rms = lcdm.map(|l| l.lcdm_rms);
    let table =
        |h: &mut String,
         title: &str,
         v: [f64; 3],
         variances: [f64; 3],
         axes: [&str; 3],
         rms: Option<[f64; 3]>| {
            let _ =
                write!(
            h,
            "<h3>{}</h3><table><tr><th>component</th><th>v (km/s)</th><th>σ (km/s)</th>{}</tr>",
            esc(title),
            if rms.is_some() { "<th>ΛCDM rms (km/s)</th><th>v / rms</th>" } else { "" }
        );
            for i in 0..3 {
                let sig = finite(variances[i]).map(|c| c.max(0.0).sqrt());
                let _ = write!(
                    h,
                    "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>",
                    axes[i],
                    fixed(v[i], 0),
                    sig.map(|s| fixed(s, 0)).unwrap_or_else(|| "—".into())
                );
                if let Some(r) = rms {
                    let _ = write!(
                        h,
                        "<td class=\"n\">{}</td><td class=\"n\">{}</td>",
                        fixed(r[i], 0),
                        fixed(v[i] / r[i], 2)
                    );
                }
                h.push_str("</tr>");
            }
            h.push_str("</table>\n");
        };
    table(
        h,
        "Galactic Cartesian components",
        b.galactic.v,
        diagonal(&b.galactic.cov),
        ["x (l = 0°, b = 0°)", "y (l = 90°, b = 0°)", "z (b = 90°)"],
        rms,
    );
    table(
        h,
        "Supergalactic Cartesian components",
        b.supergalactic.v,
        diagonal(&b.supergalactic.cov),
        ["SGX", "SGY", "SGZ"],
        None,
    );
    if let Some(l) = lcdm {
        h.push_str("<h3>Comparison with ΛCDM</h3><table>");
        if let Some(c) = finite(l.chi2) {
            let _ = write!(
                h,
                "<tr><th>χ² of the flow against measurement + ΛCDM covariance</th><td>{} for {} degrees of freedom</td></tr>",
                fixed(c, 2),
                l.dof
            );
        }
        if let Some(p) = finite(l.probability) {
            let _ = write!(
                h,
                "<tr><th>probability of a χ² at least this large</th><td>{}</td></tr>",
                sig(p, 3)
            );
        }
        for (s, label) in [(&l.power_spectrum, "power spectrum"), (&l.window, "window")] {
            let _ = write!(h, "<tr><th>{label}</th><td>{}</td></tr>", esc(s));
        }
        if let Some(s8) = finite(l.sigma8) {
            let _ = write!(h, "<tr><th>σ8</th><td>{}</td></tr>", number(s8));
        }
        if let Some(fg) = finite(l.growth_rate) {
            let _ = write!(
                h,
                "<tr><th>growth rate f</th><td>{}</td></tr>",
                fixed(fg, 4)
            );
        }
        h.push_str("</table>\n");
    }
    if !b.cautions.is_empty() {
        h.push_str("<ul class=\"warn\">");
        for item in &b.cautions {
            let _ = write!(h, "<li>{}</li>", esc(item));
        }
        h.push_str("</ul>\n");
    }
}

/// A link target for `file` as seen from the report at `out`: relative when the file is in the
/// report's folder or below it, else the absolute path.
fn href(file: &Path, out: &Path) -> String {
    let base = crate::catalogue::atomic::folder_of(out);
    let abs = |p: &Path| std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    let (f, b) = (abs(file), abs(base));
    let target = match f.strip_prefix(&b) {
        Ok(rel) => rel.to_path_buf(),
        Err(_) => f,
    };
    let s = target.to_string_lossy().replace('\\', "/");
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            ' ' => o.push_str("%20"),
            '#' => o.push_str("%23"),
            '?' => o.push_str("%3F"),
            '%' => o.push_str("%25"),
            '"' => o.push_str("%22"),
            _ => o.push(c),
        }
    }
    o
}

fn figures_section(h: &mut String, figures: &[PathBuf], out: &Path) -> Result<(), ReportError> {
    if figures.is_empty() {
        return Ok(());
    }
    h.push_str("<h2 id=\"figures\">Figures</h2>\n");
    // Group the files by stem, keeping the order in which stems first appear.
    let mut groups: Vec<(String, Vec<&PathBuf>)> = Vec::new();
    for f in figures {
        // The figure's name: the file name up to its first dot (NAME.png, NAME.data.csv,
        // NAME.caption.txt).
        let stem = f
            .file_name()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_default();
        let stem = stem.split('.').next().unwrap_or_default().to_string();
        match groups.iter_mut().find(|g| g.0 == stem) {
            Some(g) => g.1.push(f),
            None => groups.push((stem, vec![f])),
        }
    }
    for (stem, files) in groups {
        let ext = |p: &PathBuf| {
            p.extension()
                .map(|e| e.to_string_lossy().to_ascii_lowercase())
                .unwrap_or_default()
        };
        let png = files.iter().find(|p| ext(p) == "png");
        let svg = files.iter().find(|p| ext(p) == "svg");
        let description = Figure::from_stem(&stem)
            .map(Figure::describe)
            .unwrap_or("Figure.");
        let _ = write!(h, "<figure id=\"fig-{}\">", esc(&stem));
        if let Some(p) = png {
            let bytes = std::fs::read(p).map_err(|e| ReportError::file(p, e.to_string()))?;
            let _ = write!(
                h,
                "<img alt=\"{}\" src=\"data:image/png;base64,{}\">",
                esc(description),
                base64(&bytes)
            );
        } else if let Some(p) = svg {
            let text =
                std::fs::read_to_string(p).map_err(|e| ReportError::file(p, e.to_string()))?;
            let start = text
                .find("<svg")
                .ok_or_else(|| ReportError::file(p, "not an SVG file"))?;
            h.push_str(&text[start..]);
        } else {
            h.push_str("<p class=\"note\">(not an image that can be embedded)</p>");
        }
        let caption = files
            .iter()
            .find(|p| p.to_string_lossy().ends_with(".caption.txt"))
            .and_then(|p| std::fs::read_to_string(p).ok());
        match caption {
            Some(c) => {
                let _ = write!(
                    h,
                    "<figcaption>{} {} Files:",
                    esc(description),
                    esc(c.trim())
                );
            }
            None => {
                let _ = write!(h, "<figcaption>{} Files:", esc(description));
            }
        }
        for f in &files {
            let name = f
                .file_name()
                .map(|n| n.to_string_lossy().to_string())
                .unwrap_or_default();
            let _ = write!(h, " <a href=\"{}\">{}</a>", esc(&href(f, out)), esc(&name));
        }
        h.push_str("</figcaption></figure>\n");
    }
    Ok(())
}

fn number(v: f64) -> String {
    super::figures::number(v)
}

/// `v` to `digits` significant digits (for summaries, where full precision is noise).
fn sig(v: f64, digits: i32) -> String {
    if !v.is_finite() || v == 0.0 {
        return number(v);
    }
    let p = 10f64.powi(digits - 1 - v.abs().log10().floor() as i32);
    number((v * p).round() / p)
}

fn fixed(v: f64, decimals: usize) -> String {
    let t = format!("{:.*}", decimals, v.abs());
    if v < 0.0 && t.chars().any(|c| c.is_ascii_digit() && c != '0') {
        format!("−{t}")
    } else {
        t
    }
}

/// Standard base64 (RFC 4648 §4) with padding.
fn base64(bytes: &[u8]) -> String {
    const A: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut o = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (b[0] as u32) << 16 | (b[1] as u32) << 8 | b[2] as u32;
        o.push(A[(n >> 18) as usize & 63] as char);
        o.push(A[(n >> 12) as usize & 63] as char);
        o.push(if chunk.len() > 1 {
            A[(n >> 6) as usize & 63] as char
        } else {
            '='
        });
        o.push(if chunk.len() > 2 {
            A[n as usize & 63] as char
        } else {
            '='
        });
    }
    o
}

/// Now as an ISO 8601 UTC timestamp.
/// The report's date: the catalogue clock's UTC timestamp, spelled for people.
fn utc_now() -> String {
    crate::catalogue::clock::now_utc()
        .replace('T', " ")
        .replace('Z', " UTC")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc4648_examples() {
        // RFC 4648 §10 test vectors.
        for (i, o) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(i.as_bytes()), o);
        }
    }

    #[test]
    fn escaping() {
        assert_eq!(esc("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }

    #[test]
    fn date_is_well_formed() {
        let d = utc_now();
        assert_eq!(d.len(), 23, "{d}");
        assert!(d.starts_with("20"));
    }
}
