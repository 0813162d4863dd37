//! Pictures a person checks at a glance: the annotated photo and the SVG plots, and both as the
//! HTML report embeds them ([`pictures`]).

pub mod overlay;
pub mod plot;

/// The pictures of a measurement as the HTML report embeds them: the overlay as PNG bytes (see
/// [`overlay::measure_canvas`]) and the plots' SVG ([`plot::svg`]).
pub fn pictures(
    photo: &std::path::Path,
    m: &crate::pipeline::Measured,
) -> crate::error::Result<crate::report::html::Pictures> {
    Ok(crate::report::html::Pictures {
        overlay_png: Some(overlay::measure_canvas(photo, m)?.png(photo)?),
        plots_svg: Some(plot::svg(&m.doc)),
    })
}
