//! The `trilane cell --sweep FILE.svg` figure (plotters, SVG backend):
//! three panels side by side: cross power against the gap difference
//! (integrated on the real law, with the exponential rule's sin^2 theta),
//! the auxiliary leakage against the gap difference (log scale), and
//! loss-normalised 1 - F against edge bias for each cell (log scale).

use crate::cell::sweep::Sweep;
use plotters::prelude::*;

// A palette of our own: slate for axes and text, teal for the geometric
// cell, amber for the baseline, rose for the ideal curve and markers.
const SLATE: RGBColor = RGBColor(0x33, 0x41, 0x55);
const TEAL: RGBColor = RGBColor(0x0f, 0x76, 0x6e);
const AMBER: RGBColor = RGBColor(0xb4, 0x53, 0x09);
const ROSE: RGBColor = RGBColor(0xbe, 0x12, 0x3c);
const VIOLET: RGBColor = RGBColor(0x5b, 0x21, 0xb6);

fn colour(kind: &str) -> RGBColor {
    match kind {
        "geometric" => TEAL,
        "coupler" => AMBER,
        _ => VIOLET,
    }
}

pub fn sweep_svg(s: &Sweep, process: &str) -> Result<String, String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (1500, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(|x| x.to_string())?;
        let root = root
            .titled(
                &format!(
                    "geometric cell theta = {:.4} rad on {process}: split, leakage and robustness",
                    s.theta
                ),
                ("sans-serif", 22).into_font().color(&SLATE),
            )
            .map_err(|x| x.to_string())?;
        let panels = root.split_evenly((1, 3));
        let dg_max = s.gaps.last().map_or(1.0, |p| p.gap_difference_nm);

        // 1: cross power
        let mut c = ChartBuilder::on(&panels[0])
            .caption("cross power vs gap difference", ("sans-serif", 17))
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..dg_max, 0.0..1.02)
            .map_err(|x| x.to_string())?;
        c.configure_mesh()
            .x_desc("gap difference g_u - g_l (nm)")
            .y_desc("cross power |R_lu|^2")
            .draw()
            .map_err(|x| x.to_string())?;
        c.draw_series(LineSeries::new(
            s.gaps.iter().map(|p| (p.gap_difference_nm, p.ideal_cross)),
            ROSE.stroke_width(2),
        ))
        .map_err(|x| x.to_string())?
        .label(format!(
            "sin^2 theta, tan(theta/2) = exp(-dg / {:.0} nm)",
            s.g_c_nm
        ))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], ROSE.stroke_width(2)));
        c.draw_series(
            s.gaps
                .iter()
                .map(|p| Circle::new((p.gap_difference_nm, p.cross), 3, TEAL.filled())),
        )
        .map_err(|x| x.to_string())?
        .label("integrated on the process law")
        .legend(|(x, y)| Circle::new((x + 10, y), 3, TEAL.filled()));
        c.draw_series(std::iter::once(Cross::new(
            (s.design_gap_difference_nm, s.design_cross),
            8,
            SLATE.stroke_width(2),
        )))
        .map_err(|x| x.to_string())?
        .label("refined design")
        .legend(|(x, y)| Cross::new((x + 10, y), 6, SLATE.stroke_width(2)));
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(SLATE)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|x| x.to_string())?;

        // 2: leakage
        let floor = 1e-12;
        let lmax = s
            .gaps
            .iter()
            .map(|p| p.leakage)
            .fold(s.design_leakage, f64::max)
            .max(1e-6)
            * 10.0;
        let mut c = ChartBuilder::on(&panels[1])
            .caption("power left in the auxiliary guide", ("sans-serif", 17))
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(64)
            .build_cartesian_2d(0.0..dg_max, (floor..lmax).log_scale())
            .map_err(|x| x.to_string())?;
        c.configure_mesh()
            .x_desc("gap difference g_u - g_l (nm)")
            .y_desc("leakage (fraction of the input)")
            .y_label_formatter(&|v| format!("{v:.0e}"))
            .draw()
            .map_err(|x| x.to_string())?;
        c.draw_series(LineSeries::new(
            s.gaps
                .iter()
                .map(|p| (p.gap_difference_nm, p.leakage.max(floor))),
            TEAL.stroke_width(2),
        ))
        .map_err(|x| x.to_string())?
        .label("same envelope, gaps from the exponential rule")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], TEAL.stroke_width(2)));
        c.draw_series(std::iter::once(Cross::new(
            (s.design_gap_difference_nm, s.design_leakage.max(floor)),
            8,
            SLATE.stroke_width(2),
        )))
        .map_err(|x| x.to_string())?
        .label("refined design")
        .legend(|(x, y)| Cross::new((x + 10, y), 6, SLATE.stroke_width(2)));
        c.draw_series(LineSeries::new(
            [(0.0, 1e-6), (dg_max, 1e-6)],
            ROSE.stroke_width(1),
        ))
        .map_err(|x| x.to_string())?
        .label("1e-6 target")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], ROSE.stroke_width(1)));
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(SLATE)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|x| x.to_string())?;

        // 3: fidelity against edge bias
        let bmax = s
            .bias
            .iter()
            .flat_map(|(_, v)| v.iter().map(|p| p.edge_bias_nm.abs()))
            .fold(1.0, f64::max);
        let ifloor = 1e-9;
        let imax = s
            .bias
            .iter()
            .flat_map(|(_, v)| v.iter().map(|p| p.infidelity))
            .fold(1e-6, f64::max)
            * 10.0;
        let mut c = ChartBuilder::on(&panels[2])
            .caption("1 - F against edge bias", ("sans-serif", 17))
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(64)
            .build_cartesian_2d(-bmax..bmax, (ifloor..imax).log_scale())
            .map_err(|x| x.to_string())?;
        c.configure_mesh()
            .x_desc("edge bias (nm; guides +2x, gaps -2x)")
            .y_desc("loss-normalised 1 - F")
            .y_label_formatter(&|v| format!("{v:.0e}"))
            .draw()
            .map_err(|x| x.to_string())?;
        for (kind, pts) in &s.bias {
            let col = colour(kind);
            c.draw_series(LineSeries::new(
                pts.iter()
                    .map(|p| (p.edge_bias_nm, p.infidelity.max(ifloor))),
                col.stroke_width(2),
            ))
            .map_err(|x| x.to_string())?
            .label(*kind)
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], col.stroke_width(2)));
            c.draw_series(
                pts.iter().map(|p| {
                    Circle::new((p.edge_bias_nm, p.infidelity.max(ifloor)), 3, col.filled())
                }),
            )
            .map_err(|x| x.to_string())?;
        }
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(SLATE)
            .position(SeriesLabelPosition::UpperMiddle)
            .draw()
            .map_err(|x| x.to_string())?;
        root.present().map_err(|x| x.to_string())?;
    }
    Ok(svg)
}
