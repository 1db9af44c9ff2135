//! The pictures of `--out`: `velocity.png`, `wall_shear.png` and `temperature_h1.png`.
//!
//! Owns: rasterising them. Everything is drawn here on an RGB canvas: the field pixel by pixel,
//! walls and curves as antialiased lines (coverage = distance from the pixel centre to the
//! segment, a box filter one pixel wide), text with the embedded DejaVu Sans font (Bitstream
//! Vera licence with DejaVu changes in the public domain: free to embed and redistribute; the
//! font ships inside the `dejavu` crate), so no system font is needed.
//!
//! The cross-section is drawn at true aspect ratio from the true geometry: a pixel is fluid or
//! solid by the wall nearest to it (the side of the tangent chord of the nearest wall sample;
//! the samples are at most h/2 apart on the exact curve), not by the grid's staircase; the walls
//! are drawn as those chords. The velocity inside is the bilinear interpolant of the node values
//! (0 at solid nodes). Each PNG carries a `canalis:view` text chunk with the map from metres to
//! pixels (`px = left_px + (x − x_min_m)·px_per_m`, `py = top_px + (y_max_m − y)·px_per_m`,
//! pixel (i, j) covering [i, i+1) × [j, j+1)), so a reader can find a point of the shape.
//!
//! Colour map: viridis, the 256-entry table published with matplotlib by Nathaniel J. Smith and
//! Stéfan van der Walt (mpl-colormaps, "_viridis_data", released under CC0), embedded as
//! published. Series colours: the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal
//! Design"), distinguishable with the common colour-vision deficiencies.
//!
//! With several passages the velocity, temperature and wall-shear pictures carry each passage's
//! number (the order of the report's `passages` array) in a white disc at its centroid.
//!
//! Invariant: computes no physics; all numbers come from the outcome through [`Scale`].

use super::{display_unit, fields, Scale};
use crate::error::{Error, Result};
use crate::geometry::{Point, WallSample};
use crate::grid::{Classified, Dir};
use crate::outcome::Outcome;
use ab_glyph::{point, Font, FontRef, PxScale, ScaleFont};

/// The viridis colour map, 256 entries of sRGB in 0..1 (mpl-colormaps, CC0; see the module doc).
pub const VIRIDIS: [[f32; 3]; 256] = [
    [0.267004, 0.004874, 0.329415],
    [0.268510, 0.009605, 0.335427],
    [0.269944, 0.014625, 0.341379],
    [0.271305, 0.019942, 0.347269],
    [0.272594, 0.025563, 0.353093],
    [0.273809, 0.031497, 0.358853],
    [0.274952, 0.037752, 0.364543],
    [0.276022, 0.044167, 0.370164],
    [0.277018, 0.050344, 0.375715],
    [0.277941, 0.056324, 0.381191],
    [0.278791, 0.062145, 0.386592],
    [0.279566, 0.067836, 0.391917],
    [0.280267, 0.073417, 0.397163],
    [0.280894, 0.078907, 0.402329],
    [0.281446, 0.084320, 0.407414],
    [0.281924, 0.089666, 0.412415],
    [0.282327, 0.094955, 0.417331],
    [0.282656, 0.100196, 0.422160],
    [0.282910, 0.105393, 0.426902],
    [0.283091, 0.110553, 0.431554],
    [0.283197, 0.115680, 0.436115],
    [0.283229, 0.120777, 0.440584],
    [0.283187, 0.125848, 0.444960],
    [0.283072, 0.130895, 0.449241],
    [0.282884, 0.135920, 0.453427],
    [0.282623, 0.140926, 0.457517],
    [0.282290, 0.145912, 0.461510],
    [0.281887, 0.150881, 0.465405],
    [0.281412, 0.155834, 0.469201],
    [0.280868, 0.160771, 0.472899],
    [0.280255, 0.165693, 0.476498],
    [0.279574, 0.170599, 0.479997],
    [0.278826, 0.175490, 0.483397],
    [0.278012, 0.180367, 0.486697],
    [0.277134, 0.185228, 0.489898],
    [0.276194, 0.190074, 0.493001],
    [0.275191, 0.194905, 0.496005],
    [0.274128, 0.199721, 0.498911],
    [0.273006, 0.204520, 0.501721],
    [0.271828, 0.209303, 0.504434],
    [0.270595, 0.214069, 0.507052],
    [0.269308, 0.218818, 0.509577],
    [0.267968, 0.223549, 0.512008],
    [0.266580, 0.228262, 0.514349],
    [0.265145, 0.232956, 0.516599],
    [0.263663, 0.237631, 0.518762],
    [0.262138, 0.242286, 0.520837],
    [0.260571, 0.246922, 0.522828],
    [0.258965, 0.251537, 0.524736],
    [0.257322, 0.256130, 0.526563],
    [0.255645, 0.260703, 0.528312],
    [0.253935, 0.265254, 0.529983],
    [0.252194, 0.269783, 0.531579],
    [0.250425, 0.274290, 0.533103],
    [0.248629, 0.278775, 0.534556],
    [0.246811, 0.283237, 0.535941],
    [0.244972, 0.287675, 0.537260],
    [0.243113, 0.292092, 0.538516],
    [0.241237, 0.296485, 0.539709],
    [0.239346, 0.300855, 0.540844],
    [0.237441, 0.305202, 0.541921],
    [0.235526, 0.309527, 0.542944],
    [0.233603, 0.313828, 0.543914],
    [0.231674, 0.318106, 0.544834],
    [0.229739, 0.322361, 0.545706],
    [0.227802, 0.326594, 0.546532],
    [0.225863, 0.330805, 0.547314],
    [0.223925, 0.334994, 0.548053],
    [0.221989, 0.339161, 0.548752],
    [0.220057, 0.343307, 0.549413],
    [0.218130, 0.347432, 0.550038],
    [0.216210, 0.351535, 0.550627],
    [0.214298, 0.355619, 0.551184],
    [0.212395, 0.359683, 0.551710],
    [0.210503, 0.363727, 0.552206],
    [0.208623, 0.367752, 0.552675],
    [0.206756, 0.371758, 0.553117],
    [0.204903, 0.375746, 0.553533],
    [0.203063, 0.379716, 0.553925],
    [0.201239, 0.383670, 0.554294],
    [0.199430, 0.387607, 0.554642],
    [0.197636, 0.391528, 0.554969],
    [0.195860, 0.395433, 0.555276],
    [0.194100, 0.399323, 0.555565],
    [0.192357, 0.403199, 0.555836],
    [0.190631, 0.407061, 0.556089],
    [0.188923, 0.410910, 0.556326],
    [0.187231, 0.414746, 0.556547],
    [0.185556, 0.418570, 0.556753],
    [0.183898, 0.422383, 0.556944],
    [0.182256, 0.426184, 0.557120],
    [0.180629, 0.429975, 0.557282],
    [0.179019, 0.433756, 0.557430],
    [0.177423, 0.437527, 0.557565],
    [0.175841, 0.441290, 0.557685],
    [0.174274, 0.445044, 0.557792],
    [0.172719, 0.448791, 0.557885],
    [0.171176, 0.452530, 0.557965],
    [0.169646, 0.456262, 0.558030],
    [0.168126, 0.459988, 0.558082],
    [0.166617, 0.463708, 0.558119],
    [0.165117, 0.467423, 0.558141],
    [0.163625, 0.471133, 0.558148],
    [0.162142, 0.474838, 0.558140],
    [0.160665, 0.478540, 0.558115],
    [0.159194, 0.482237, 0.558073],
    [0.157729, 0.485932, 0.558013],
    [0.156270, 0.489624, 0.557936],
    [0.154815, 0.493313, 0.557840],
    [0.153364, 0.497000, 0.557724],
    [0.151918, 0.500685, 0.557587],
    [0.150476, 0.504369, 0.557430],
    [0.149039, 0.508051, 0.557250],
    [0.147607, 0.511733, 0.557049],
    [0.146180, 0.515413, 0.556823],
    [0.144759, 0.519093, 0.556572],
    [0.143343, 0.522773, 0.556295],
    [0.141935, 0.526453, 0.555991],
    [0.140536, 0.530132, 0.555659],
    [0.139147, 0.533812, 0.555298],
    [0.137770, 0.537492, 0.554906],
    [0.136408, 0.541173, 0.554483],
    [0.135066, 0.544853, 0.554029],
    [0.133743, 0.548535, 0.553541],
    [0.132444, 0.552216, 0.553018],
    [0.131172, 0.555899, 0.552459],
    [0.129933, 0.559582, 0.551864],
    [0.128729, 0.563265, 0.551229],
    [0.127568, 0.566949, 0.550556],
    [0.126453, 0.570633, 0.549841],
    [0.125394, 0.574318, 0.549086],
    [0.124395, 0.578002, 0.548287],
    [0.123463, 0.581687, 0.547445],
    [0.122606, 0.585371, 0.546557],
    [0.121831, 0.589055, 0.545623],
    [0.121148, 0.592739, 0.544641],
    [0.120565, 0.596422, 0.543611],
    [0.120092, 0.600104, 0.542530],
    [0.119738, 0.603785, 0.541400],
    [0.119512, 0.607464, 0.540218],
    [0.119423, 0.611141, 0.538982],
    [0.119483, 0.614817, 0.537692],
    [0.119699, 0.618490, 0.536347],
    [0.120081, 0.622161, 0.534946],
    [0.120638, 0.625828, 0.533488],
    [0.121380, 0.629492, 0.531973],
    [0.122312, 0.633153, 0.530398],
    [0.123444, 0.636809, 0.528763],
    [0.124780, 0.640461, 0.527068],
    [0.126326, 0.644107, 0.525311],
    [0.128087, 0.647749, 0.523491],
    [0.130067, 0.651384, 0.521608],
    [0.132268, 0.655014, 0.519661],
    [0.134692, 0.658636, 0.517649],
    [0.137339, 0.662252, 0.515571],
    [0.140210, 0.665859, 0.513427],
    [0.143303, 0.669459, 0.511215],
    [0.146616, 0.673050, 0.508936],
    [0.150148, 0.676631, 0.506589],
    [0.153894, 0.680203, 0.504172],
    [0.157851, 0.683765, 0.501686],
    [0.162016, 0.687316, 0.499129],
    [0.166383, 0.690856, 0.496502],
    [0.170948, 0.694384, 0.493803],
    [0.175707, 0.697900, 0.491033],
    [0.180653, 0.701402, 0.488189],
    [0.185783, 0.704891, 0.485273],
    [0.191090, 0.708366, 0.482284],
    [0.196571, 0.711827, 0.479221],
    [0.202219, 0.715272, 0.476084],
    [0.208030, 0.718701, 0.472873],
    [0.214000, 0.722114, 0.469588],
    [0.220124, 0.725509, 0.466226],
    [0.226397, 0.728888, 0.462789],
    [0.232815, 0.732247, 0.459277],
    [0.239374, 0.735588, 0.455688],
    [0.246070, 0.738910, 0.452024],
    [0.252899, 0.742211, 0.448284],
    [0.259857, 0.745492, 0.444467],
    [0.266941, 0.748751, 0.440573],
    [0.274149, 0.751988, 0.436601],
    [0.281477, 0.755203, 0.432552],
    [0.288921, 0.758394, 0.428426],
    [0.296479, 0.761561, 0.424223],
    [0.304148, 0.764704, 0.419943],
    [0.311925, 0.767822, 0.415586],
    [0.319809, 0.770914, 0.411152],
    [0.327796, 0.773980, 0.406640],
    [0.335885, 0.777018, 0.402049],
    [0.344074, 0.780029, 0.397381],
    [0.352360, 0.783011, 0.392636],
    [0.360741, 0.785964, 0.387814],
    [0.369214, 0.788888, 0.382914],
    [0.377779, 0.791781, 0.377939],
    [0.386433, 0.794644, 0.372886],
    [0.395174, 0.797475, 0.367757],
    [0.404001, 0.800275, 0.362552],
    [0.412913, 0.803041, 0.357269],
    [0.421908, 0.805774, 0.351910],
    [0.430983, 0.808473, 0.346476],
    [0.440137, 0.811138, 0.340967],
    [0.449368, 0.813768, 0.335384],
    [0.458674, 0.816363, 0.329727],
    [0.468053, 0.818921, 0.323998],
    [0.477504, 0.821444, 0.318195],
    [0.487026, 0.823929, 0.312321],
    [0.496615, 0.826376, 0.306377],
    [0.506271, 0.828786, 0.300362],
    [0.515992, 0.831158, 0.294279],
    [0.525776, 0.833491, 0.288127],
    [0.535621, 0.835785, 0.281908],
    [0.545524, 0.838039, 0.275626],
    [0.555484, 0.840254, 0.269281],
    [0.565498, 0.842430, 0.262877],
    [0.575563, 0.844566, 0.256415],
    [0.585678, 0.846661, 0.249897],
    [0.595839, 0.848717, 0.243329],
    [0.606045, 0.850733, 0.236712],
    [0.616293, 0.852709, 0.230052],
    [0.626579, 0.854645, 0.223353],
    [0.636902, 0.856542, 0.216620],
    [0.647257, 0.858400, 0.209861],
    [0.657642, 0.860219, 0.203082],
    [0.668054, 0.861999, 0.196293],
    [0.678489, 0.863742, 0.189503],
    [0.688944, 0.865448, 0.182725],
    [0.699415, 0.867117, 0.175971],
    [0.709898, 0.868751, 0.169257],
    [0.720391, 0.870350, 0.162603],
    [0.730889, 0.871916, 0.156029],
    [0.741388, 0.873449, 0.149561],
    [0.751884, 0.874951, 0.143228],
    [0.762373, 0.876424, 0.137064],
    [0.772852, 0.877868, 0.131109],
    [0.783315, 0.879285, 0.125405],
    [0.793760, 0.880678, 0.120005],
    [0.804182, 0.882046, 0.114965],
    [0.814576, 0.883393, 0.110347],
    [0.824940, 0.884720, 0.106217],
    [0.835270, 0.886029, 0.102646],
    [0.845561, 0.887322, 0.099702],
    [0.855810, 0.888601, 0.097452],
    [0.866013, 0.889868, 0.095953],
    [0.876168, 0.891125, 0.095250],
    [0.886271, 0.892374, 0.095374],
    [0.896320, 0.893616, 0.096335],
    [0.906311, 0.894855, 0.098125],
    [0.916242, 0.896091, 0.100717],
    [0.926106, 0.897330, 0.104071],
    [0.935904, 0.898570, 0.108131],
    [0.945636, 0.899815, 0.112838],
    [0.955300, 0.901065, 0.118128],
    [0.964894, 0.902323, 0.123941],
    [0.974417, 0.903590, 0.130215],
    [0.983868, 0.904867, 0.136897],
    [0.993248, 0.906157, 0.143936],
];

/// Colour of solid material (and of everything outside the fluid) in the pictures: a flat
/// light grey, far from every colour of the map.
pub const SOLID: [u8; 3] = [204, 204, 204];
/// Page background.
pub const PAPER: [u8; 3] = [255, 255, 255];
/// Walls and text.
pub(super) const INK: [u8; 3] = [25, 25, 25];
/// The fluid of the wall-shear sheet's cross-section (the walls carry the colour there).
const PALE_FLUID: [u8; 3] = [246, 246, 246];
/// Okabe–Ito: blue, vermillion, bluish green, reddish purple, orange, sky blue, black, yellow.
pub(super) const SERIES: [[u8; 3]; 8] = [
    [0, 114, 178],
    [213, 94, 0],
    [0, 158, 115],
    [204, 121, 167],
    [230, 159, 0],
    [86, 180, 233],
    [0, 0, 0],
    [240, 228, 66],
];

/// Entry `i` of [`VIRIDIS`] as 8-bit sRGB.
pub fn viridis_u8(i: usize) -> [u8; 3] {
    let c = VIRIDIS[i.min(255)];
    [
        (c[0] * 255.0).round() as u8,
        (c[1] * 255.0).round() as u8,
        (c[2] * 255.0).round() as u8,
    ]
}

/// The map at t ∈ [0, 1] (nearest entry; t outside is clamped).
pub fn viridis(t: f64) -> [u8; 3] {
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    viridis_u8((t * 255.0).round() as usize)
}

// ---------------------------------------------------------------------------------------------
// Canvas, lines and text.

#[derive(Clone, Copy, PartialEq, Eq)]
enum Align {
    Left,
    Center,
    Right,
}

struct Canvas {
    w: usize,
    h: usize,
    px: Vec<[u8; 3]>,
    font: FontRef<'static>,
}

impl Canvas {
    fn new(w: usize, h: usize) -> Result<Canvas> {
        let font = FontRef::try_from_slice(dejavu::sans::regular())
            .map_err(|e| Error::param("--out", format!("the embedded font is unusable: {e}")))?;
        Ok(Canvas {
            w,
            h,
            px: vec![PAPER; w * h],
            font,
        })
    }

    fn set(&mut self, x: i64, y: i64, c: [u8; 3]) {
        if x >= 0 && y >= 0 && (x as usize) < self.w && (y as usize) < self.h {
            self.px[y as usize * self.w + x as usize] = c;
        }
    }

    fn blend(&mut self, x: i64, y: i64, c: [u8; 3], a: f64) {
        if a <= 0.0 || x < 0 || y < 0 || x as usize >= self.w || y as usize >= self.h {
            return;
        }
        let a = a.min(1.0);
        let p = &mut self.px[y as usize * self.w + x as usize];
        for (o, n) in p.iter_mut().zip(c) {
            *o = (*o as f64 * (1.0 - a) + n as f64 * a).round() as u8;
        }
    }

    /// Fills [x0, x1) × [y0, y1) (pixel edges, rounded).
    fn fill(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, c: [u8; 3]) {
        for y in y0.round() as i64..y1.round() as i64 {
            for x in x0.round() as i64..x1.round() as i64 {
                self.set(x, y, c);
            }
        }
    }

    /// An antialiased line of `width` pixels from a to b (continuous pixel coordinates).
    fn line(&mut self, a: (f64, f64), b: (f64, f64), width: f64, c: [u8; 3], alpha: f64) {
        let r = 0.5 * width;
        let (x0, x1) = (a.0.min(b.0) - r - 1.0, a.0.max(b.0) + r + 1.0);
        let (y0, y1) = (a.1.min(b.1) - r - 1.0, a.1.max(b.1) + r + 1.0);
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len2 = dx * dx + dy * dy;
        for y in y0.floor() as i64..=y1.ceil() as i64 {
            for x in x0.floor() as i64..=x1.ceil() as i64 {
                let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
                let t = if len2 > 0.0 {
                    (((px - a.0) * dx + (py - a.1) * dy) / len2).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let (qx, qy) = (a.0 + t * dx - px, a.1 + t * dy - py);
                let d = (qx * qx + qy * qy).sqrt();
                let cover = (r + 0.5 - d).clamp(0.0, 1.0);
                if cover > 0.0 {
                    self.blend(x, y, c, cover * alpha);
                }
            }
        }
    }

    /// A dashed line: dashes of `dash` pixels with gaps of the same length.
    fn dashed(&mut self, a: (f64, f64), b: (f64, f64), width: f64, c: [u8; 3], dash: f64) {
        let len = ((b.0 - a.0).powi(2) + (b.1 - a.1).powi(2)).sqrt();
        let n = (len / dash).ceil().max(1.0) as usize;
        for k in (0..n).step_by(2) {
            let t0 = k as f64 * dash / len;
            let t1 = ((k + 1) as f64 * dash / len).min(1.0);
            let p = |t: f64| (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
            self.line(p(t0), p(t1), width, c, 1.0);
        }
    }

    /// Width of `s` at `size` pixels.
    fn text_width(&self, s: &str, size: f64) -> f64 {
        let sf = self.font.as_scaled(PxScale::from(size as f32));
        let mut w = 0.0;
        let mut prev = None;
        for ch in s.chars() {
            let id = sf.glyph_id(ch);
            if let Some(p) = prev {
                w += sf.kern(p, id);
            }
            w += sf.h_advance(id);
            prev = Some(id);
        }
        w as f64
    }

    /// Rasterises `s` with its left end at x = 0 and its visual middle (half the x-height
    /// above the baseline) at y = 0, handing each covered pixel to `put`.
    fn raster(&self, s: &str, size: f64, mut put: impl FnMut(f64, f64, f32)) {
        let scale = PxScale::from(size as f32);
        let sf = self.font.as_scaled(scale);
        let baseline = 0.36 * size as f32;
        let mut x = 0.0f32;
        let mut prev = None;
        for ch in s.chars() {
            let id = sf.glyph_id(ch);
            if let Some(p) = prev {
                x += sf.kern(p, id);
            }
            let glyph = id.with_scale_and_position(scale, point(x, baseline));
            x += sf.h_advance(id);
            prev = Some(id);
            if let Some(o) = self.font.outline_glyph(glyph) {
                let bb = o.px_bounds();
                o.draw(|gx, gy, c| {
                    put(bb.min.x as f64 + gx as f64, bb.min.y as f64 + gy as f64, c)
                });
            }
        }
    }

    /// Horizontal text whose vertical middle is at y; `align` says where x is.
    fn text(&mut self, x: f64, y: f64, size: f64, s: &str, c: [u8; 3], align: Align) {
        let w = self.text_width(s, size);
        let x0 = match align {
            Align::Left => x,
            Align::Center => x - 0.5 * w,
            Align::Right => x - w,
        }
        .round();
        let y0 = y.round();
        let mut hits = Vec::new();
        self.raster(s, size, |gx, gy, cov| hits.push((gx, gy, cov)));
        for (gx, gy, cov) in hits {
            self.blend((x0 + gx) as i64, (y0 + gy) as i64, c, cov as f64);
        }
    }

    /// Text reading upwards (turned 90° anticlockwise), centred on (x, y).
    fn text_up(&mut self, x: f64, y: f64, size: f64, s: &str, c: [u8; 3]) {
        let w = self.text_width(s, size);
        let (x0, y0) = (x.round(), (y + 0.5 * w).round());
        let mut hits = Vec::new();
        self.raster(s, size, |gx, gy, cov| hits.push((gx, gy, cov)));
        for (gx, gy, cov) in hits {
            self.blend((x0 + gy) as i64, (y0 - gx) as i64, c, cov as f64);
        }
    }

    /// PNG bytes, with `view` as a `canalis:view` text chunk.
    fn png(&self, view: &View) -> Result<Vec<u8>> {
        let data: Vec<u8> = self.px.iter().flatten().copied().collect();
        encode_rgb(
            self.w as u32,
            self.h as u32,
            &data,
            &[("canalis:view", view.describe())],
        )
    }
}

/// Encodes 8-bit RGB pixels (row by row, `3·width·height` bytes) as PNG with the given text
/// chunks (keyword, text) followed by `Software: canalis`: the one encoder of every picture of
/// `--out`.
pub(super) fn encode_rgb(
    width: u32,
    height: u32,
    rgb: &[u8],
    text: &[(&str, String)],
) -> Result<Vec<u8>> {
    let fail = |e: &dyn std::fmt::Display| {
        Error::param("--out", format!("a picture could not be encoded: {e}"))
    };
    let mut bytes = Vec::new();
    {
        let mut enc = ::png::Encoder::new(&mut bytes, width, height);
        enc.set_color(::png::ColorType::Rgb);
        enc.set_depth(::png::BitDepth::Eight);
        for (key, value) in text {
            enc.add_text_chunk((*key).into(), value.clone())
                .map_err(|e| fail(&e))?;
        }
        enc.add_text_chunk("Software".into(), "canalis".into())
            .map_err(|e| fail(&e))?;
        let mut wr = enc.write_header().map_err(|e| fail(&e))?;
        wr.write_image_data(rgb).map_err(|e| fail(&e))?;
        wr.finish().map_err(|e| fail(&e))?;
    }
    Ok(bytes)
}

// ---------------------------------------------------------------------------------------------
// From metres to pixels, and the field at a point.

/// The map from the shape's plane (metres, y up) to pixels (y down).
#[derive(Debug, Clone, Copy)]
struct View {
    left: f64,
    top: f64,
    /// Pixels per metre.
    k: f64,
    x_min: f64,
    y_max: f64,
    /// Size of the drawn box, pixels.
    w: f64,
    h: f64,
}

impl View {
    fn px(&self, p: Point) -> (f64, f64) {
        (
            self.left + (p[0] - self.x_min) * self.k,
            self.top + (self.y_max - p[1]) * self.k,
        )
    }

    fn metres(&self, x: f64, y: f64) -> Point {
        [
            self.x_min + (x - self.left) / self.k,
            self.y_max - (y - self.top) / self.k,
        ]
    }

    fn describe(&self) -> String {
        format!(
            "px_per_m={} left_px={} top_px={} x_min_m={} y_max_m={}",
            self.k, self.left, self.top, self.x_min, self.y_max
        )
    }
}

/// The box of the walls, padded by 4 % of its larger side: (x_min, y_min, x_max, y_max).
fn wall_box(samples: &[WallSample]) -> [f64; 4] {
    let mut b = [
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    ];
    for s in samples {
        b[0] = b[0].min(s.point[0]);
        b[1] = b[1].min(s.point[1]);
        b[2] = b[2].max(s.point[0]);
        b[3] = b[3].max(s.point[1]);
    }
    if !b.iter().all(|v| v.is_finite()) {
        b = [0.0, 0.0, 1e-3, 1e-3];
    }
    let pad = 0.04 * (b[2] - b[0]).max(b[3] - b[1]).max(1e-12);
    [b[0] - pad, b[1] - pad, b[2] + pad, b[3] + pad]
}

/// Fits `bx` into `avail_w` × `max_h` pixels at true aspect ratio.
fn fit(bx: [f64; 4], left: f64, top: f64, avail_w: f64, max_h: f64) -> View {
    let (bw, bh) = (bx[2] - bx[0], bx[3] - bx[1]);
    let k = (avail_w / bw).min(max_h / bh);
    View {
        left: left + 0.5 * (avail_w - bw * k),
        top,
        k,
        x_min: bx[0],
        y_max: bx[3],
        w: bw * k,
        h: bh * k,
    }
}

/// The tangent chord a wall sample stands for: its point ± (ds/2)·tangent.
fn chord(s: &WallSample) -> (Point, Point) {
    let t = [-s.normal[1], s.normal[0]];
    let r = 0.5 * s.ds;
    (
        [s.point[0] - r * t[0], s.point[1] - r * t[1]],
        [s.point[0] + r * t[0], s.point[1] + r * t[1]],
    )
}

/// Fluid/solid and velocity at any point of the plane.
struct Field<'a> {
    c: &'a Classified,
    values: Vec<f64>,
    samples: &'a [WallSample],
    chords: Vec<(Point, Point)>,
    /// Wall samples by square bucket of side `cell`.
    buckets: Vec<Vec<u32>>,
    cell: f64,
    bnx: usize,
    bny: usize,
}

impl<'a> Field<'a> {
    fn new(o: &'a Outcome, values: Vec<f64>) -> Field<'a> {
        let c = &o.unit.classified;
        let g = &c.grid;
        let samples = &o.unit.walls.samples[..];
        let cell = 2.0 * g.h;
        let bnx = ((g.nx as f64 * g.h) / cell).ceil() as usize + 1;
        let bny = ((g.ny as f64 * g.h) / cell).ceil() as usize + 1;
        let mut buckets = vec![Vec::new(); bnx * bny];
        let mut f = Field {
            c,
            values,
            samples,
            chords: samples.iter().map(chord).collect(),
            buckets: Vec::new(),
            cell,
            bnx,
            bny,
        };
        for (i, s) in samples.iter().enumerate() {
            if let Some(b) = f.bucket(s.point) {
                buckets[b.1 * bnx + b.0].push(i as u32);
            }
        }
        f.buckets = buckets;
        f
    }

    fn bucket(&self, p: Point) -> Option<(usize, usize)> {
        let o = self.c.grid.origin;
        let bx = ((p[0] - o[0]) / self.cell).floor();
        let by = ((p[1] - o[1]) / self.cell).floor();
        (bx >= 0.0 && by >= 0.0 && (bx as usize) < self.bnx && (by as usize) < self.bny)
            .then_some((bx as usize, by as usize))
    }

    /// Is p in the fluid? By the side of the nearest wall chord within 2h (its normal points
    /// into the solid); farther from every wall, by the nearest grid node.
    fn fluid_at(&self, p: Point) -> bool {
        let g = &self.c.grid;
        let fi = (p[0] - g.origin[0]) / g.h;
        let fj = (p[1] - g.origin[1]) / g.h;
        if fi < 0.0 || fj < 0.0 || fi > (g.nx - 1) as f64 || fj > (g.ny - 1) as f64 {
            return false;
        }
        let mut best: Option<(f64, usize)> = None;
        if let Some((bx, by)) = self.bucket(p) {
            for j in by.saturating_sub(1)..(by + 2).min(self.bny) {
                for i in bx.saturating_sub(1)..(bx + 2).min(self.bnx) {
                    for &q in &self.buckets[j * self.bnx + i] {
                        let (a, b) = self.chords[q as usize];
                        let d = segment_distance2(p, a, b);
                        if best.is_none_or(|(bd, _)| d < bd) {
                            best = Some((d, q as usize));
                        }
                    }
                }
            }
        }
        match best {
            Some((d, q)) if d <= self.cell * self.cell => {
                let s = &self.samples[q];
                (p[0] - s.point[0]) * s.normal[0] + (p[1] - s.point[1]) * s.normal[1] < 0.0
            }
            _ => self.c.fluid[g.index(fi.round() as usize, fj.round() as usize)],
        }
    }

    /// Bilinear interpolant of the node values (0 at solid nodes).
    fn value_at(&self, p: Point) -> f64 {
        let g = &self.c.grid;
        let fi = ((p[0] - g.origin[0]) / g.h).clamp(0.0, (g.nx - 1) as f64);
        let fj = ((p[1] - g.origin[1]) / g.h).clamp(0.0, (g.ny - 1) as f64);
        let (i, j) = ((fi as usize).min(g.nx - 2), (fj as usize).min(g.ny - 2));
        let (tx, ty) = (fi - i as f64, fj - j as f64);
        let v = |a: usize, b: usize| self.values[g.index(a, b)];
        (1.0 - ty) * ((1.0 - tx) * v(i, j) + tx * v(i + 1, j))
            + ty * ((1.0 - tx) * v(i, j + 1) + tx * v(i + 1, j + 1))
    }

    /// Isolines of the node values at `level` by marching squares. Along a link cut by a wall
    /// the value falls linearly to 0 at the wall point (θ·h from the fluid node), so no isoline
    /// strays into the solid.
    fn isolines(&self, level: f64) -> Vec<(Point, Point)> {
        let g = &self.c.grid;
        let mut out = Vec::new();
        // Crossing on the link from node a to its neighbour b in direction d.
        let cross = |a: usize, b: usize, d: Dir, back: Dir| -> Point {
            let (va, vb) = (self.values[a], self.values[b]);
            let t = match (self.c.fluid[a], self.c.fluid[b]) {
                (true, false) => self.c.theta(a, d).unwrap_or(1.0) * (va - level) / va,
                (false, true) => 1.0 - self.c.theta(b, back).unwrap_or(1.0) * (vb - level) / vb,
                _ => (level - va) / (vb - va),
            };
            let (ia, ja) = g.ij(a);
            let pa = g.node(ia, ja);
            let v = d.vector();
            [pa[0] + t * g.h * v[0], pa[1] + t * g.h * v[1]]
        };
        for j in 0..g.ny - 1 {
            for i in 0..g.nx - 1 {
                let k = [
                    g.index(i, j),
                    g.index(i + 1, j),
                    g.index(i + 1, j + 1),
                    g.index(i, j + 1),
                ];
                let high = k.map(|n| self.values[n] >= level);
                if high.iter().all(|&x| x) || high.iter().all(|&x| !x) {
                    continue;
                }
                // Edges: bottom (0→1), right (1→2), top (3→2), left (0→3).
                let edges = [
                    (k[0], k[1], Dir::East, Dir::West, high[0] != high[1]),
                    (k[1], k[2], Dir::North, Dir::South, high[1] != high[2]),
                    (k[3], k[2], Dir::East, Dir::West, high[3] != high[2]),
                    (k[0], k[3], Dir::North, Dir::South, high[0] != high[3]),
                ];
                let pts: Vec<(usize, Point)> = edges
                    .iter()
                    .enumerate()
                    .filter(|e| e.1 .4)
                    .map(|(n, &(a, b, d, back, _))| (n, cross(a, b, d, back)))
                    .collect();
                if pts.len() == 2 {
                    out.push((pts[0].1, pts[1].1));
                } else if pts.len() == 4 {
                    // Saddle: the cell's mean decides which corners connect.
                    let mean = k.iter().map(|&n| self.values[n]).sum::<f64>() / 4.0;
                    if high[0] == (mean >= level) {
                        out.push((pts[0].1, pts[1].1));
                        out.push((pts[2].1, pts[3].1));
                    } else {
                        out.push((pts[0].1, pts[3].1));
                        out.push((pts[1].1, pts[2].1));
                    }
                }
            }
        }
        out
    }
}

/// Squared distance from p to the segment ab.
fn segment_distance2(p: Point, a: Point, b: Point) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let (qx, qy) = (a[0] + t * dx - p[0], a[1] + t * dy - p[1]);
    qx * qx + qy * qy
}

// ---------------------------------------------------------------------------------------------
// Axes and labels.

/// A step of 1, 2 or 5 × 10^k giving about `n` intervals over `range`.
fn nice_step(range: f64, n: f64) -> f64 {
    let raw = (range / n).max(f64::MIN_POSITIVE);
    let mag = 10f64.powf(raw.log10().floor());
    let r = raw / mag;
    mag * if r < 1.5 {
        1.0
    } else if r < 3.5 {
        2.0
    } else if r < 7.5 {
        5.0
    } else {
        10.0
    }
}

/// Multiples of `step` in [lo, hi].
fn ticks(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A tick label with as many decimals as the step needs.
fn tick_label(v: f64, step: f64) -> String {
    if !(1e-4..1e5).contains(&step) {
        return format!("{v:.1e}");
    }
    let decimals = (-step.log10() - 1e-9).ceil().max(0.0) as usize;
    let v = if v.abs() < 0.5 * step { 0.0 } else { v };
    format!("{v:.decimals$}")
}

/// A number with four significant digits.
pub(super) fn sig4(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let mag = v.abs().log10().floor() as i32;
    if (-3..5).contains(&mag) {
        let d = (3 - mag).max(0) as usize;
        format!("{v:.d$}")
    } else {
        format!("{v:.3e}")
    }
}

/// A vertical colour bar of `rect` = (x, y_top, width, height) from 0 to `vmax`, with ticks,
/// labels and a label reading upwards; returns the tick values.
fn colour_bar(cv: &mut Canvas, rect: (f64, f64, f64, f64), vmax: f64, label: &str, fs: f64) {
    let (x, y, w, h) = rect;
    let n = h.round().max(1.0) as i64;
    for r in 0..n {
        let t = 1.0 - (r as f64 + 0.5) / n as f64;
        cv.fill(x, y + r as f64, x + w, y + r as f64 + 1.0, viridis(t));
    }
    let frame = [(x, y), (x + w, y), (x + w, y + h), (x, y + h), (x, y)];
    for p in frame.windows(2) {
        cv.line(p[0], p[1], 1.0, INK, 1.0);
    }
    let step = nice_step(vmax, 5.0);
    let mut widest: f64 = 0.0;
    for v in ticks(0.0, vmax, step) {
        let ty = y + h * (1.0 - v / vmax);
        cv.line((x + w, ty), (x + w + 0.35 * fs, ty), 1.2, INK, 1.0);
        let s = tick_label(v, step);
        widest = widest.max(cv.text_width(&s, fs));
        cv.text(x + w + 0.55 * fs, ty, fs, &s, INK, Align::Left);
    }
    cv.text_up(
        x + w + 0.9 * fs + widest + 0.6 * fs,
        y + 0.5 * h,
        fs,
        label,
        INK,
    );
}

/// A scale bar of a round length below the cross-section, left end at (x, y).
fn scale_bar(cv: &mut Canvas, view: &View, x: f64, y: f64, fs: f64) {
    let extent_m = view.w.max(view.h) / view.k;
    let (unit, per) = display_unit(extent_m);
    let target = 0.25 * view.w / view.k / per;
    let len = nice_step(target, 1.0).min(target.max(f64::MIN_POSITIVE) * 2.0);
    let len = if len > target * 1.5 {
        nice_step(target * 0.6, 1.0)
    } else {
        len
    };
    let px = len * per * view.k;
    let t = (0.18 * fs).max(2.0);
    cv.fill(x, y - 0.5 * t, x + px, y + 0.5 * t, INK);
    cv.line((x, y - 0.45 * fs), (x, y + 0.45 * fs), 1.5, INK, 1.0);
    cv.line(
        (x + px, y - 0.45 * fs),
        (x + px, y + 0.45 * fs),
        1.5,
        INK,
        1.0,
    );
    let s = format!("{} {unit}", tick_label(len, len));
    cv.text(x + px + 0.6 * fs, y, fs, &s, INK, Align::Left);
}

/// Fills the cross-section of `view`: `colour(p)` for fluid pixels, [`SOLID`] elsewhere.
fn paint_section(cv: &mut Canvas, view: &View, field: &Field, colour: impl Fn(Point) -> [u8; 3]) {
    let (x0, y0) = (view.left.floor() as i64, view.top.floor() as i64);
    let (x1, y1) = (
        (view.left + view.w).ceil() as i64,
        (view.top + view.h).ceil() as i64,
    );
    for y in y0..y1 {
        for x in x0..x1 {
            let p = view.metres(x as f64 + 0.5, y as f64 + 0.5);
            let c = if field.fluid_at(p) { colour(p) } else { SOLID };
            cv.set(x, y, c);
        }
    }
    let (l, t, r, b) = (view.left, view.top, view.left + view.w, view.top + view.h);
    for p in [(l, t), (r, t), (r, b), (l, b), (l, t)].windows(2) {
        cv.line(p[0], p[1], 1.0, [150, 150, 150], 1.0);
    }
}

/// Where to write each passage's number (in the order of `passages`): its centroid when that
/// lies in the passage, else (a ring round a core, a bent channel) the passage's fastest node,
/// which is well inside it.
fn passage_anchors(o: &Outcome) -> Vec<Point> {
    let c = &o.unit.classified;
    let g = &c.grid;
    let (label, count) = crate::post::passage_labels(c);
    let mut sum = vec![[0.0f64; 2]; count];
    let mut nodes = vec![0usize; count];
    let mut fastest = vec![(f64::NEG_INFINITY, [0.0f64; 2]); count];
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        let l = label[k];
        if l == u32::MAX {
            continue;
        }
        let (i, j) = g.ij(k);
        let x = g.node(i, j);
        let l = l as usize;
        sum[l] = [sum[l][0] + x[0], sum[l][1] + x[1]];
        nodes[l] += 1;
        if o.unit.u[q] > fastest[l].0 {
            fastest[l] = (o.unit.u[q], x);
        }
    }
    let mean: Vec<Point> = (0..count)
        .map(|l| {
            let n = nodes[l].max(1) as f64;
            [sum[l][0] / n, sum[l][1] / n]
        })
        .collect();
    o.unit
        .passages
        .iter()
        .map(|p| {
            let d2 = |a: Point| (a[0] - p.centroid[0]).powi(2) + (a[1] - p.centroid[1]).powi(2);
            let Some(l) = (0..count).min_by(|&a, &b| d2(mean[a]).total_cmp(&d2(mean[b]))) else {
                return p.centroid;
            };
            let i = ((p.centroid[0] - g.origin[0]) / g.h).round();
            let j = ((p.centroid[1] - g.origin[1]) / g.h).round();
            let inside = i >= 0.0
                && j >= 0.0
                && (i as usize) < g.nx
                && (j as usize) < g.ny
                && label[g.index(i as usize, j as usize)] == l as u32;
            if inside {
                p.centroid
            } else {
                fastest[l].1
            }
        })
        .collect()
}

/// The passage numbers (1-based, the order of the report's `passages`) in white discs with a
/// dark ring, legible on any colour of the map; only when there is more than one passage.
fn passage_numbers(cv: &mut Canvas, view: &View, o: &Outcome, fs: f64) {
    if o.unit.passages.len() < 2 {
        return;
    }
    for (k, at) in passage_anchors(o).into_iter().enumerate() {
        let (x, y) = view.px(at);
        let text = format!("{}", k + 1);
        let r = (0.5 * cv.text_width(&text, fs) + 0.35 * fs).max(0.75 * fs);
        for py in (y - r - 1.0).floor() as i64..=(y + r + 1.0).ceil() as i64 {
            for px in (x - r - 1.0).floor() as i64..=(x + r + 1.0).ceil() as i64 {
                let d = ((px as f64 + 0.5 - x).powi(2) + (py as f64 + 0.5 - y).powi(2)).sqrt();
                cv.blend(px, py, PAPER, (r + 0.5 - d).clamp(0.0, 1.0) * 0.92);
            }
        }
        let ring = 48;
        for q in 0..ring {
            let (a0, a1) = (
                q as f64 / ring as f64 * std::f64::consts::TAU,
                (q + 1) as f64 / ring as f64 * std::f64::consts::TAU,
            );
            cv.line(
                (x + r * a0.cos(), y + r * a0.sin()),
                (x + r * a1.cos(), y + r * a1.sin()),
                (fs / 12.0).max(1.2),
                INK,
                1.0,
            );
        }
        cv.text(x, y, fs, &text, INK, Align::Center);
    }
}

/// The picture's title (the cross-section's name) and the line under it, at the top left.
fn title(cv: &mut Canvas, margin: f64, fs: f64, name: &str, sub: &str) {
    cv.text(margin, margin + 0.6 * fs, 1.3 * fs, name, INK, Align::Left);
    cv.text(margin, margin + 2.1 * fs, fs, sub, INK, Align::Left);
}

/// Sizes derived from the picture width: (font size, margin).
pub(super) fn metrics(width: u32) -> (f64, f64) {
    let w = width as f64;
    ((w / 64.0).clamp(10.0, 40.0), 0.03 * w)
}

pub(super) fn length_text(v: f64) -> String {
    let (unit, per) = display_unit(v);
    format!("{} {unit}", sig4(v / per))
}

// ---------------------------------------------------------------------------------------------
// The two sheets.

/// `velocity.png`: the axial velocity over the cross-section.
pub fn velocity_png(o: &Outcome, scale: &Scale, width: u32) -> Result<Vec<u8>> {
    let sub = match &o.operating {
        Some(op) if !scale.laminar => format!(
            "Axial velocity of the LAMINAR solution at Q = {} L/min, mean {} m/s; the flow \
             (Re {:.0}) is {}",
            sig4(op.flow_rate_m3_s * 6e4),
            sig4(op.mean_velocity_m_s),
            op.reynolds,
            op.regime
        ),
        Some(op) => format!(
            "Axial velocity, fully developed laminar flow: Q = {} L/min, mean {} m/s, Re = {:.0}",
            sig4(op.flow_rate_m3_s * 6e4),
            sig4(op.mean_velocity_m_s),
            op.reynolds
        ),
        None => "Axial velocity over its mean, fully developed laminar flow".to_string(),
    };
    let f = &o.unit.figures;
    let caption = format!(
        "u_max / u_mean = {}    f·Re = {} (Fanning)    D_h = {}",
        sig4(f.max_to_mean_velocity),
        sig4(f.fanning_f_re),
        length_text(f.hydraulic_diameter)
    );
    map_png(
        o,
        fields::node_values(o, scale),
        &sub,
        scale.u_label(),
        &caption,
        width,
    )
}

/// `temperature_h1.png`: the fully developed temperature field of the H1 boundary condition,
/// θ = (T − T_w)/(T_b − T_w) = φ/φ_b, same look as the velocity map. None without heat transfer.
pub fn temperature_h1_png(o: &Outcome, width: u32) -> Result<Option<Vec<u8>>> {
    let Some(heat) = &o.unit.heat else {
        return Ok(None);
    };
    let mut values = vec![0.0; o.unit.classified.grid.len()];
    for (q, k) in o.unit.numbering.nodes().enumerate() {
        values[k] = heat.psi[q] / heat.psi_bulk;
    }
    let caption = format!(
        "Nu_H1 = {}    Nu_T = {}    D_h = {}",
        sig4(heat.nusselt_h1),
        sig4(heat.nusselt_t),
        length_text(o.unit.figures.hydraulic_diameter)
    );
    let sub = match &o.operating {
        Some(op) if op.regime != crate::correlations::Regime::Laminar => format!(
            "Temperature H1 of the LAMINAR solution; the flow (Re {:.0}) is {}, h from \
             correlations",
            op.reynolds, op.regime
        ),
        _ => "Temperature, H1 (axially uniform heat flux, uniform wall temperature around the \
              wall), fully developed laminar flow"
            .to_string(),
    };
    map_png(o, values, &sub, "(T − T_w) / (T_b − T_w)", &caption, width).map(Some)
}

/// A field on the cross-section in the colour map, with colour bar, isolines, walls, scale bar
/// and a caption: the common sheet of the velocity and temperature maps.
fn map_png(
    o: &Outcome,
    values: Vec<f64>,
    sub: &str,
    bar_label: &str,
    caption: &str,
    width: u32,
) -> Result<Vec<u8>> {
    let (fs, margin) = metrics(width);
    let w = width as f64;
    let samples = &o.unit.walls.samples;
    let vmax = values
        .iter()
        .copied()
        .fold(0.0, f64::max)
        .max(f64::MIN_POSITIVE);
    let field = Field::new(o, values);
    let top = margin + 3.2 * fs;
    let bar_region = 0.17 * w;
    let avail = w - 2.0 * margin - bar_region;
    let mut view = fit(wall_box(samples), margin, top, avail, 1.2 * w);
    let band = view.h.max(0.3 * w);
    view.top = top + 0.5 * (band - view.h);
    let bottom = 5.0 * fs;
    let height = (top + band + bottom).ceil() as usize;
    let mut cv = Canvas::new(width as usize, height)?;

    title(&mut cv, margin, fs, &o.name, sub);

    // Field, isolines, walls.
    paint_section(&mut cv, &view, &field, |p| {
        viridis(field.value_at(p) / vmax)
    });
    let step = nice_step(vmax, 5.0);
    for level in ticks(step, vmax * 0.9, step) {
        for (a, b) in field.isolines(level) {
            cv.line(view.px(a), view.px(b), (fs / 14.0).max(1.0), PAPER, 0.75);
        }
    }
    let wall_w = (w / 480.0).max(1.6);
    for s in samples {
        let (a, b) = chord(s);
        cv.line(view.px(a), view.px(b), wall_w, INK, 1.0);
    }
    passage_numbers(&mut cv, &view, o, fs);

    // Colour bar.
    let bx = w - margin - bar_region + 0.04 * w;
    let bar_h = band * 0.9;
    colour_bar(
        &mut cv,
        (bx, top + 0.05 * band, 0.025 * w, bar_h),
        vmax,
        bar_label,
        fs,
    );

    // Scale bar and caption.
    let y = top + band + 1.3 * fs;
    scale_bar(&mut cv, &view, view.left.max(margin), y, fs);
    let g = &o.unit.classified.grid;
    let (cx, cy) = g.cells();
    cv.text(w - margin, y, fs, caption, INK, Align::Right);
    cv.text(
        margin,
        y + 2.0 * fs,
        0.85 * fs,
        &format!(
            "grey: solid.  White lines: isolines at the colour-bar ticks below 90 % of the maximum.  Grid {cx} × {cy} \
             cells, h = {}.",
            length_text(g.h)
        ),
        [90, 90, 90],
        Align::Left,
    );
    cv.png(&view)
}

/// `wall_shear.png`: the local wall shear on the cross-section and along each wall.
pub fn wall_shear_png(o: &Outcome, scale: &Scale, width: u32) -> Result<Vec<u8>> {
    let (fs, margin) = metrics(width);
    let w = width as f64;
    let samples = &o.unit.walls.samples;
    let shear = &o.unit.shear;
    // τ in displayed units per sample (the shear samples follow the wall samples one to one).
    let tau: Vec<f64> = shear.iter().map(|s| scale.tau_factor * s.tau).collect();
    // The colour scale and the chart stop at the largest wall shear away from the singular
    // corners (issue 20): their peaks, unbounded in truth and grid-dependent in the samples,
    // would push every other wall into the lowest colours. Values above it show at its colour.
    let figures = &o.unit.figures;
    let away = |p: [f64; 2]| {
        figures
            .singular_corners
            .iter()
            .all(|k| (p[0] - k.position[0]).hypot(p[1] - k.position[1]) >= figures.corner_radius)
    };
    let tmax = tau
        .iter()
        .zip(shear)
        .filter(|(t, s)| t.is_finite() && away(s.point))
        .map(|(t, _)| *t)
        .fold(0.0, f64::max)
        .max(f64::MIN_POSITIVE);
    let field = Field::new(o, vec![0.0; o.unit.classified.grid.len()]);
    let nwalls = o.unit.walls.names.len();

    let top = margin + 3.2 * fs;
    let bar_region = 0.17 * w;
    let avail = w - 2.0 * margin - bar_region;
    let mut view = fit(wall_box(samples), margin, top, avail, 0.45 * w);
    let band = view.h.max(0.25 * w);
    view.top = top + 0.5 * (band - view.h);
    let chart_top = top + band + 2.5 * fs;
    let chart_h = 0.36 * w;
    let height = (chart_top + chart_h + 4.5 * fs + margin).ceil() as usize;
    let mut cv = Canvas::new(width as usize, height)?;

    let sub = if scale.tau_physical {
        format!(
            "Local wall shear stress τ: mean {} Pa (= G·A/P), fully developed laminar flow",
            sig4(scale.tau_mean)
        )
    } else if let Some(op) = o.operating.as_ref().filter(|_| !scale.laminar) {
        format!(
            "Wall shear / mean, LAMINAR solution; the flow (Re {:.0}) is {}, mean {} Pa \
             (correlations)",
            op.reynolds,
            op.regime,
            sig4(op.wall_shear_mean_pa)
        )
    } else {
        "Local wall shear stress over its perimeter mean, fully developed laminar flow".into()
    };
    title(&mut cv, margin, fs, &o.name, &sub);

    // Cross-section with the walls coloured by τ (and the passage numbers, in their discs, so
    // they are not mistaken for the wall numbers beside the walls).
    paint_section(&mut cv, &view, &field, |_| PALE_FLUID);
    passage_numbers(&mut cv, &view, o, fs);
    let wall_w = (w / 200.0).max(3.0);
    for (s, t) in samples.iter().zip(&tau) {
        let (a, b) = chord(s);
        let c = if t.is_finite() {
            viridis(t / tmax)
        } else {
            [120, 120, 120]
        };
        cv.line(view.px(a), view.px(b), wall_w, c, 1.0);
    }
    // Wall numbers in the solid beside the middle sample of each wall, in the series colour.
    for wall in 0..nwalls {
        let idx: Vec<usize> = (0..samples.len())
            .filter(|&i| samples[i].wall == wall)
            .collect();
        if let Some(&i) = idx.get(idx.len() / 2) {
            let s = &samples[i];
            let (x, y) = view.px(s.point);
            let off = 1.1 * fs;
            let (tx, ty) = (x + off * s.normal[0], y - off * s.normal[1]);
            cv.text(
                tx,
                ty,
                fs,
                &format!("{}", wall + 1),
                SERIES[wall % SERIES.len()],
                Align::Center,
            );
        }
    }
    colour_bar(
        &mut cv,
        (
            w - margin - bar_region + 0.04 * w,
            top + 0.05 * band,
            0.025 * w,
            band * 0.9,
        ),
        tmax,
        scale.tau_label(),
        fs,
    );
    scale_bar(
        &mut cv,
        &view,
        view.left.max(margin),
        top + band + 0.9 * fs,
        fs,
    );

    // τ against arc length, one curve per wall.
    let extent_m = view.w.max(view.h) / view.k;
    let (unit, per) = display_unit(extent_m);
    // The walls laid end to end, each over its own stretch of the axis (a gap of 2 % of the
    // total between them), so that walls with the same shear (symmetric fins) do not hide
    // each other.
    let mut spans = vec![(f64::INFINITY, f64::NEG_INFINITY); nwalls];
    for smp in samples {
        if let Some(sp) = spans.get_mut(smp.wall) {
            sp.0 = sp.0.min((smp.s - 0.5 * smp.ds) / per);
            sp.1 = sp.1.max((smp.s + 0.5 * smp.ds) / per);
        }
    }
    let total: f64 = spans
        .iter()
        .filter(|sp| sp.1 > sp.0)
        .map(|sp| sp.1 - sp.0)
        .sum();
    let gap = if nwalls > 1 { 0.02 * total } else { 0.0 };
    let mut offsets = Vec::with_capacity(nwalls);
    let mut at = 0.0;
    for sp in &spans {
        offsets.push(at - sp.0);
        if sp.1 > sp.0 {
            at += sp.1 - sp.0 + gap;
        }
    }
    let smax = (at - gap).max(f64::MIN_POSITIVE);
    let tmin = tau
        .iter()
        .copied()
        .filter(|t| t.is_finite())
        .fold(0.0, f64::min);
    let (ylo, yhi) = (tmin, 1.08 * tmax);
    let legend_w = 0.26 * w;
    let (cl, cr) = (margin + 5.0 * fs, w - margin - legend_w);
    let (ct, cb) = (chart_top, chart_top + chart_h);
    let to = |s: f64, t: f64| {
        (
            cl + (cr - cl) * s / smax,
            cb - (cb - ct) * (t.min(yhi) - ylo) / (yhi - ylo),
        )
    };
    // Each wall's stretch: a light band (every other wall) and its number at the top.
    for (k, sp) in spans.iter().enumerate() {
        if sp.1 <= sp.0 {
            continue;
        }
        let (x0, _) = to(offsets[k] + sp.0, ylo);
        let (x1, _) = to(offsets[k] + sp.1, ylo);
        if k % 2 == 1 {
            cv.fill(x0, ct, x1, cb, [243, 243, 243]);
        }
        cv.text(
            0.5 * (x0 + x1),
            ct + 0.9 * fs,
            fs,
            &format!("{}", k + 1),
            SERIES[k % SERIES.len()],
            Align::Center,
        );
    }
    let xstep = nice_step(smax, 8.0);
    let ystep = nice_step(yhi - ylo, 5.0);
    for v in ticks(0.0, smax, xstep) {
        let (x, _) = to(v, ylo);
        cv.line((x, ct), (x, cb), 1.0, [225, 225, 225], 1.0);
        cv.line((x, cb), (x, cb + 0.35 * fs), 1.2, INK, 1.0);
        cv.text(
            x,
            cb + 1.0 * fs,
            fs,
            &tick_label(v, xstep),
            INK,
            Align::Center,
        );
    }
    for v in ticks(ylo, yhi, ystep) {
        let (_, y) = to(0.0, v);
        cv.line((cl, y), (cr, y), 1.0, [225, 225, 225], 1.0);
        cv.line((cl - 0.35 * fs, y), (cl, y), 1.2, INK, 1.0);
        cv.text(
            cl - 0.55 * fs,
            y,
            fs,
            &tick_label(v, ystep),
            INK,
            Align::Right,
        );
    }
    for p in [(cl, ct), (cr, ct), (cr, cb), (cl, cb), (cl, ct)].windows(2) {
        cv.line(p[0], p[1], 1.2, INK, 1.0);
    }
    cv.text(
        0.5 * (cl + cr),
        cb + 2.5 * fs,
        fs,
        &format!("arc length s, the walls end to end in the order of the legend [{unit}]"),
        INK,
        Align::Center,
    );
    cv.text_up(
        margin + 0.6 * fs,
        0.5 * (ct + cb),
        fs,
        scale.tau_label(),
        INK,
    );
    // Mean.
    let (_, ym) = to(0.0, scale.tau_mean);
    cv.dashed((cl, ym), (cr, ym), 1.6, INK, 0.6 * fs);
    // Curves, broken where a wall's samples are not contiguous (a wall interrupted by another).
    let line_w = (w / 600.0).max(1.5);
    for i in 1..samples.len() {
        let (a, b) = (&samples[i - 1], &samples[i]);
        if a.wall != b.wall || !(tau[i - 1].is_finite() && tau[i].is_finite()) {
            continue;
        }
        if b.s - a.s > 0.75 * (a.ds + b.ds) {
            continue;
        }
        let c = SERIES[a.wall % SERIES.len()];
        let off = offsets[a.wall];
        cv.line(
            to(off + a.s / per, tau[i - 1]),
            to(off + b.s / per, tau[i]),
            line_w,
            c,
            1.0,
        );
    }
    // Legend.
    let lx = cr + 1.2 * fs;
    let mut ly = ct + 0.6 * fs;
    for (k, name) in o.unit.walls.names.iter().enumerate() {
        let c = SERIES[k % SERIES.len()];
        cv.line((lx, ly), (lx + 1.8 * fs, ly), 2.0 * line_w, c, 1.0);
        cv.text(
            lx + 2.3 * fs,
            ly,
            fs,
            &format!("{}  {name}", k + 1),
            INK,
            Align::Left,
        );
        ly += 1.5 * fs;
    }
    cv.dashed((lx, ly), (lx + 1.8 * fs, ly), 1.6, INK, 0.6 * fs);
    let mean_text = if scale.tau_physical {
        format!("mean {} Pa", sig4(scale.tau_mean))
    } else {
        "mean (= 1)".to_string()
    };
    cv.text(lx + 2.3 * fs, ly, fs, &mean_text, INK, Align::Left);
    ly += 1.5 * fs;
    let f = &o.unit.figures;
    cv.text(
        lx,
        ly,
        0.85 * fs,
        &if f.singular_corners.is_empty() {
            format!(
                "max/mean {}, min/mean {}",
                sig4(f.wall_shear_max_to_mean),
                sig4(f.wall_shear_min_to_mean)
            )
        } else {
            format!(
                "max/mean unbounded ({} re-entrant corners; {} away), min/mean {}",
                f.singular_corners.len(),
                sig4(f.wall_shear_max_away_to_mean),
                sig4(f.wall_shear_min_to_mean)
            )
        },
        [90, 90, 90],
        Align::Left,
    );
    cv.text(
        lx,
        ly + 1.3 * fs,
        0.85 * fs,
        &format!("perimeter {}", length_text(f.perimeter)),
        [90, 90, 90],
        Align::Left,
    );
    cv.png(&view)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn viridis_ends_are_the_published_ones() {
        // mpl-colormaps _viridis_data, first and last entries (CC0 table).
        assert_eq!(viridis(0.0), [68, 1, 84]);
        assert_eq!(viridis(1.0), [253, 231, 37]);
        assert_eq!(viridis(f64::NAN), [68, 1, 84]);
    }

    #[test]
    fn nice_steps_are_one_two_five() {
        // Common practice, no source: axis steps of 1, 2, 5 × 10^k.
        assert_eq!(nice_step(10.0, 5.0), 2.0);
        assert_eq!(nice_step(1.0, 5.0), 0.2);
        assert!((nice_step(0.03, 5.0) - 0.005).abs() < 1e-15);
        assert_eq!(ticks(0.0, 1.0, 0.25), vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        assert_eq!(tick_label(0.30000000000000004, 0.1), "0.3");
    }

    #[test]
    fn segment_distance_is_euclidean() {
        assert_eq!(segment_distance2([0.0, 1.0], [-1.0, 0.0], [1.0, 0.0]), 1.0);
        assert_eq!(segment_distance2([3.0, 0.0], [-1.0, 0.0], [1.0, 0.0]), 4.0);
    }
}
