//! `floorplan.svg`: the chip drawn for a person to read (the renderer
//! lands in the next commit).

use super::floorplan::Floorplan;

pub fn floorplan_svg(fp: &Floorplan) -> String {
    format!("<svg xmlns=\"http://www.w3.org/2000/svg\"><title>{}</title></svg>\n", fp.chip)
}
