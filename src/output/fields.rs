//! Field files of `--out`: `velocity.csv`, `wall_shear.csv` and `velocity.vti`.
//!
//! Owns: their layouts. Numbers are written in Rust's shortest round-trip form, so a reader
//! recovers every f64 exactly. Coordinates are metres in the frame of the shape.
//!
//! * `velocity.csv`: `x_m,y_m,<u>` for every fluid node, `<u>` = `u_m_s` at an operating
//!   point, else `u_over_u_mean`.
//! * `wall_shear.csv`: one row per wall sample (midpoint rule on the exact wall):
//!   `wall_id,wall_name,s_m,ds_m,x_m,y_m,<tau>,tau_over_tau_mean`, `<tau>` = `tau_pa` at an
//!   operating point, else `tau_unit_m` (τ̃ of the unit problem −∇²ũ = 1, in metres; τ = G·τ̃).
//!   `s_m` is the arc length from the start of the wall's primitive, `ds_m` the length the
//!   sample stands for (Σ ds = wetted perimeter). A sample without a fluid node near it has
//!   `NaN` shear.
//! * `velocity.vti`: VTK XML ImageData, ASCII, one point per grid node (the solid ring included),
//!   point arrays `<u>` (0 at solid nodes) and `fluid` (1 fluid, 0 solid).
//!
//! Invariant: computes no physics.

use super::Scale;
use crate::outcome::Outcome;
use std::fmt::Write;

/// Velocity of every grid node in displayed units, 0 at solid nodes.
pub fn node_values(o: &Outcome, scale: &Scale) -> Vec<f64> {
    let mut v = vec![0.0; o.unit.classified.grid.len()];
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        v[k] = scale.u_factor * o.unit.u[q];
    }
    v
}

/// `velocity.csv`.
pub fn velocity_csv(o: &Outcome, scale: &Scale) -> String {
    let g = &o.unit.classified.grid;
    let mut s = String::with_capacity(o.unit.u.len() * 60);
    let _ = writeln!(s, "x_m,y_m,{}", scale.u_name());
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        let (i, j) = g.ij(k);
        let p = g.node(i, j);
        let _ = writeln!(s, "{},{},{}", p[0], p[1], scale.u_factor * o.unit.u[q]);
    }
    s
}

/// A CSV field, quoted when it holds a comma, quote or line break (RFC 4180).
fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// `wall_shear.csv`.
pub fn wall_shear_csv(o: &Outcome, scale: &Scale) -> String {
    let f = &o.unit.figures;
    // In the file: Pa at an operating point, else the unit problem's own τ̃.
    let tau_factor = if scale.physical {
        scale.tau_factor
    } else {
        1.0
    };
    let mut s = String::with_capacity(o.unit.shear.len() * 120);
    let _ = writeln!(
        s,
        "wall_id,wall_name,s_m,ds_m,x_m,y_m,{},tau_over_tau_mean",
        scale.tau_name()
    );
    let names = &o.unit.walls.names;
    for smp in &o.unit.shear {
        let name = names.get(smp.wall).map(String::as_str).unwrap_or("wall");
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{}",
            smp.wall,
            csv_field(name),
            smp.s,
            smp.ds,
            smp.point[0],
            smp.point[1],
            tau_factor * smp.tau,
            smp.tau / f.wall_shear_mean
        );
    }
    s
}

/// `velocity.vti`: VTK XML ImageData (VTK file formats, "XML File Formats", ImageData:
/// WholeExtent in point indices, Origin of point (0, 0, 0), Spacing per axis; point data run
/// with x fastest, then y, the order of the grid's node index j·nx + i).
pub fn velocity_vti(o: &Outcome, scale: &Scale) -> String {
    let c = &o.unit.classified;
    let g = &c.grid;
    let values = node_values(o, scale);
    let mut s = String::with_capacity(g.len() * 26 + 1024);
    let extent = format!("0 {} 0 {} 0 0", g.nx - 1, g.ny - 1);
    let _ = writeln!(s, "<?xml version=\"1.0\"?>");
    let _ = writeln!(
        s,
        "<VTKFile type=\"ImageData\" version=\"1.0\" byte_order=\"LittleEndian\">"
    );
    let _ = writeln!(
        s,
        "  <ImageData WholeExtent=\"{extent}\" Origin=\"{} {} 0\" Spacing=\"{} {} {}\">",
        g.origin[0], g.origin[1], g.h, g.h, g.h
    );
    let _ = writeln!(s, "    <Piece Extent=\"{extent}\">");
    let _ = writeln!(
        s,
        "      <PointData Scalars=\"{name}\">\n        <DataArray type=\"Float64\" \
         Name=\"{name}\" NumberOfComponents=\"1\" format=\"ascii\">",
        name = scale.u_name()
    );
    for row in values.chunks(8) {
        s.push_str("         ");
        for v in row {
            let _ = write!(s, " {v}");
        }
        s.push('\n');
    }
    let _ = writeln!(s, "        </DataArray>");
    let _ = writeln!(
        s,
        "        <DataArray type=\"UInt8\" Name=\"fluid\" NumberOfComponents=\"1\" \
         format=\"ascii\">"
    );
    for row in c.fluid.chunks(32) {
        s.push_str("         ");
        for &f in row {
            s.push_str(if f { " 1" } else { " 0" });
        }
        s.push('\n');
    }
    let _ = writeln!(s, "        </DataArray>");
    // The weights of the cut-cell quadrature (post::quadrature_weights), so that a reader can
    // reproduce the reported flow rate: Q = Σ wᵢ·uᵢ + (G/μ)·h²·A/24 (post::flow_integral).
    let weights = crate::post::quadrature_weights(c, &o.unit.numbering);
    let mut full = vec![0.0; g.len()];
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        full[k] = weights[q];
    }
    let _ = writeln!(
        s,
        "        <DataArray type=\"Float64\" Name=\"quadrature_weight_m2\" \
         NumberOfComponents=\"1\" format=\"ascii\">"
    );
    for row in full.chunks(8) {
        s.push_str("         ");
        for v in row {
            let _ = write!(s, " {v}");
        }
        s.push('\n');
    }
    let _ = writeln!(s, "        </DataArray>");
    let _ = writeln!(s, "      </PointData>");
    let _ = writeln!(s, "      <CellData>\n      </CellData>");
    let _ = writeln!(s, "    </Piece>");
    let _ = writeln!(s, "  </ImageData>");
    let _ = writeln!(s, "</VTKFile>");
    s
}

#[cfg(test)]
mod tests {
    use super::csv_field;

    #[test]
    fn csv_fields_are_quoted_only_when_needed() {
        // RFC 4180, section 2: fields with commas or quotes are enclosed in double quotes,
        // quotes doubled.
        assert_eq!(csv_field("hole 1 (rect)"), "hole 1 (rect)");
        assert_eq!(csv_field("a, b"), "\"a, b\"");
        assert_eq!(csv_field("say \"x\""), "\"say \"\"x\"\"\"");
    }
}
