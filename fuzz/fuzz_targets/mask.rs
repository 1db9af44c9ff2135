//! Mask images: decoding (within a small memory limit, as `Mask::load` does), the mask, its
//! specks and both domains.
#![no_main]
use canalis::geometry::mask::{Mask, MaskMode, MaskOptions};
use canalis::input::mask_domain;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(reader) = image::ImageReader::new(std::io::Cursor::new(data)).with_guessed_format()
    else {
        return;
    };
    let mut reader = reader;
    let mut limits = image::Limits::default();
    limits.max_alloc = Some(16 << 20);
    limits.max_image_width = Some(512);
    limits.max_image_height = Some(512);
    reader.limits(limits);
    let Ok(img) = reader.decode() else {
        return;
    };
    let opts = MaskOptions {
        pixel: 1e-4,
        threshold: data.first().copied().unwrap_or(128),
        ..MaskOptions::default()
    };
    let Ok((mut mask, _)) = Mask::from_image(&img, &opts, "fuzz.png") else {
        return;
    };
    let _ = mask.drop_specks(opts.min_feature.pixels(mask.pixel()), "fuzz.png");
    for mode in [MaskMode::Pixels, MaskMode::Traced] {
        let (domain, _, _) = mask_domain(mask.clone(), mode);
        let (lo, hi) = domain.bbox();
        let _ = domain.walls(((hi[0] - lo[0]).max(hi[1] - lo[1]) / 64.0).max(1e-9));
    }
});
