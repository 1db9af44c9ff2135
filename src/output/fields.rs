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
//! * `velocity.vti`: VTK XML ImageData, binary (appended raw data, zlib-compressed, UInt64
//!   headers: [`velocity_vti`]), one point per grid node (the solid ring included), point
//!   arrays `<u>` (0 at solid nodes), `fluid` (1 fluid, 0 solid) and `quadrature_weight_m2`.
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
    let tau_factor = if scale.tau_physical {
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

/// Uncompressed bytes per zlib block of `velocity.vti` (VTK's own default block size).
pub const VTI_BLOCK_SIZE: usize = 1 << 15;

/// `velocity.vti`: VTK XML ImageData (VTK file formats, "XML File Formats", ImageData:
/// WholeExtent in point indices, Origin of point (0, 0, 0), Spacing per axis; point data run
/// with x fastest, then y, the order of the grid's node index j·nx + i), in the binary form
/// ParaView reads: every DataArray `format="appended"` with its `offset` into one
/// `<AppendedData encoding="raw">` block that follows the XML after a `_`, little-endian,
/// `header_type="UInt64"`, `compressor="vtkZLibDataCompressor"`. Each array there is a header
/// of UInt64 [number of blocks, bytes per block, bytes of the last block (0: a full block),
/// compressed size of each block] followed by the zlib streams of its blocks of
/// [`VTI_BLOCK_SIZE`] bytes (VTK's layout of compressed appended data). The ASCII form this
/// replaces was 26 bytes per node and value (9 MB for a 600 × 373 field); the sizes of both
/// are in DEVELOPERS.md.
pub fn velocity_vti(o: &Outcome, scale: &Scale) -> Vec<u8> {
    let c = &o.unit.classified;
    let g = &c.grid;
    let values = node_values(o, scale);
    // The weights of the cut-cell quadrature (post::quadrature_weights), so that a reader can
    // reproduce the reported flow rate: Q = Σ wᵢ·uᵢ + (G/μ)·h²·A/24 (post::flow_integral).
    let weights = crate::post::quadrature_weights(c, &o.unit.numbering);
    let mut full = vec![0.0; g.len()];
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        full[k] = weights[q];
    }
    let f64_bytes = |v: &[f64]| v.iter().flat_map(|x| x.to_le_bytes()).collect::<Vec<u8>>();
    let arrays: [(&str, &str, Vec<u8>); 3] = [
        ("Float64", scale.u_name(), f64_bytes(&values)),
        (
            "UInt8",
            "fluid",
            c.fluid.iter().map(|&f| u8::from(f)).collect(),
        ),
        ("Float64", "quadrature_weight_m2", f64_bytes(&full)),
    ];
    let mut appended = Vec::new();
    let mut xml = String::with_capacity(2048);
    let extent = format!("0 {} 0 {} 0 0", g.nx - 1, g.ny - 1);
    let _ = writeln!(xml, "<?xml version=\"1.0\"?>");
    let _ = writeln!(
        xml,
        "<VTKFile type=\"ImageData\" version=\"1.0\" byte_order=\"LittleEndian\" \
         header_type=\"UInt64\" compressor=\"vtkZLibDataCompressor\">"
    );
    let _ = writeln!(
        xml,
        "  <ImageData WholeExtent=\"{extent}\" Origin=\"{} {} 0\" Spacing=\"{} {} {}\">",
        g.origin[0], g.origin[1], g.h, g.h, g.h
    );
    let _ = writeln!(xml, "    <Piece Extent=\"{extent}\">");
    let _ = writeln!(xml, "      <PointData Scalars=\"{}\">", scale.u_name());
    for (kind, name, bytes) in &arrays {
        let _ = writeln!(
            xml,
            "        <DataArray type=\"{kind}\" Name=\"{name}\" NumberOfComponents=\"1\" \
             format=\"appended\" offset=\"{}\"/>",
            appended.len()
        );
        appended.extend(zlib_blocks(bytes));
    }
    let _ = writeln!(xml, "      </PointData>");
    let _ = writeln!(xml, "      <CellData>\n      </CellData>");
    let _ = writeln!(xml, "    </Piece>");
    let _ = writeln!(xml, "  </ImageData>");
    let _ = write!(xml, "  <AppendedData encoding=\"raw\">\n   _");
    let mut file = xml.into_bytes();
    file.extend_from_slice(&appended);
    file.extend_from_slice(b"\n  </AppendedData>\n</VTKFile>\n");
    file
}

/// `bytes` as VTK's compressed appended data: the UInt64 header [blocks, block size, last
/// block size (0 when full), compressed sizes…] and the zlib stream of each block.
fn zlib_blocks(bytes: &[u8]) -> Vec<u8> {
    use flate2::write::ZlibEncoder;
    use flate2::Compression;
    use std::io::Write as _;
    let blocks: Vec<Vec<u8>> = bytes
        .chunks(VTI_BLOCK_SIZE)
        .map(|chunk| {
            let mut e = ZlibEncoder::new(Vec::new(), Compression::default());
            // Writing into a Vec cannot fail.
            let _ = e.write_all(chunk);
            e.finish().unwrap_or_default()
        })
        .collect();
    let mut out = Vec::with_capacity(8 * (3 + blocks.len()) + bytes.len() / 2);
    let last = (bytes.len() % VTI_BLOCK_SIZE) as u64;
    for v in [blocks.len() as u64, VTI_BLOCK_SIZE as u64, last]
        .into_iter()
        .chain(blocks.iter().map(|b| b.len() as u64))
    {
        out.extend_from_slice(&v.to_le_bytes());
    }
    for b in &blocks {
        out.extend_from_slice(b);
    }
    out
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
