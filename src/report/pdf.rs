//! Vector PDF from a figure's SVG, through usvg (SVG parsing) and svg2pdf (PDF writing): the
//! same drawing as the SVG file, with the bundled DejaVu Sans embedded (subset) for the text.

use std::sync::{Arc, OnceLock};

use svg2pdf::usvg;

use super::ReportError;

fn fonts() -> Arc<usvg::fontdb::Database> {
    static DB: OnceLock<Arc<usvg::fontdb::Database>> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = usvg::fontdb::Database::new();
        for face in [
            dejavu::sans::regular(),
            dejavu::sans::bold(),
            dejavu::sans::oblique(),
        ] {
            db.load_font_data(face.to_vec());
        }
        db.set_sans_serif_family("DejaVu Sans");
        Arc::new(db)
    })
    .clone()
}

/// The PDF of an SVG document whose user unit is one point (1/72 in).
pub(crate) fn svg_to_pdf(svg: &str) -> Result<Vec<u8>, ReportError> {
    let options = usvg::Options {
        fontdb: fonts(),
        font_family: "DejaVu Sans".into(),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(svg, &options)
        .map_err(|e| ReportError::Drawing(format!("SVG for the PDF: {e}")))?;
    let page = svg2pdf::PageOptions { dpi: 72.0 };
    svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page)
        .map_err(|e| ReportError::Drawing(format!("PDF: {e}")))
}
