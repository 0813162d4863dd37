//! Disc geometry shared by detection and the renderer: the exact area of a pixel covered by a
//! disc, and the mean surface normal of a sphere's image over a pixel.
//!
//! Goes in: pixel and disc coordinates (pixel centres at integer coordinates). Comes out: areas
//! (0..1) and unit normals. Method: closed-form integration of the circle's chord.

/// G(x) = integral from 0 to x of sqrt(r^2 - t^2) dt = (x sqrt(r^2 - x^2) + r^2 asin(x / r)) / 2,
/// the area under a half-disc's chord.
fn half_disc_primitive(x: f64, r: f64) -> f64 {
    0.5 * (x * (r * r - x * x).max(0.0).sqrt() + r * r * (x / r).clamp(-1.0, 1.0).asin())
}

/// Exact area of the unit pixel centred at (px, py) covered by the disc centred at (cx, cy) with
/// radius r. Pixel centres are at integer coordinates, so the pixel spans px - 0.5 .. px + 0.5.
///
/// The area is the integral over the pixel's columns of the disc's chord clipped to the pixel's
/// rows; between the points where the circle crosses a row edge the clipped chord is a row edge
/// or the circle, whose integral is G(x) = (x sqrt(r^2 - x^2) + r^2 asin(x / r)) / 2, so one
/// G per break point (at most six) does it.
pub fn disc_coverage(px: f64, py: f64, cx: f64, cy: f64, r: f64) -> f64 {
    if !(r > 0.0 && r.is_finite() && cx.is_finite() && cy.is_finite()) {
        return 0.0;
    }
    let (x0, x1) = ((px - 0.5 - cx).max(-r), (px + 0.5 - cx).min(r));
    let (y0, y1) = (py - 0.5 - cy, py + 0.5 - cy);
    if x0 >= x1 || y0 >= r || y1 <= -r {
        return 0.0;
    }
    let half_chord = |x: f64| (r * r - x * x).max(0.0).sqrt();
    let g = |x: f64| half_disc_primitive(x, r);
    // Break points: the columns' edges and where the circle crosses a row edge.
    let mut xs = [x0, x1, x1, x1, x1, x1];
    let mut n = 2;
    for y in [y0, y1] {
        if y.abs() < r {
            let w = half_chord(y);
            for x in [-w, w] {
                if x > x0 && x < x1 {
                    xs[n] = x;
                    n += 1;
                }
            }
        }
    }
    let xs = &mut xs[..n];
    xs.sort_by(f64::total_cmp);
    let mut area = 0.0;
    let mut g_prev = g(xs[0]);
    for k in 1..n {
        let (a, b) = (xs[k - 1], xs[k]);
        let g_next = g(b);
        if b > a {
            let s = half_chord(0.5 * (a + b));
            let circle = g_next - g_prev;
            // Upper and lower ends of the clipped chord on this piece.
            let upper = if y1 < s { y1 * (b - a) } else { circle };
            let lower = if y0 > -s { y0 * (b - a) } else { -circle };
            if y1.min(s) > y0.max(-s) {
                area += upper - lower;
            }
        }
        g_prev = g_next;
    }
    area.clamp(0.0, 1.0)
}

/// Mean surface normal of a sphere of radius `r` over the part of a pixel its image covers
/// (`coverage`), the pixel centre at (dx, dy) from the image's centre: the normal at the pixel
/// centre for a pixel wholly inside; for a rim pixel, the mean over the radial strip of the covered
/// width inside the rim, where the normal turns fastest (nz grows as sqrt(2 t / r) at depth t), so
/// a grazing light on a small image is not misjudged by a pixel-centre sample.
pub fn sphere_normal(dx: f64, dy: f64, r: f64, coverage: f64) -> [f64; 3] {
    if coverage >= 1.0 {
        let (nx, ny) = (dx / r, dy / r);
        let n2 = nx * nx + ny * ny;
        if n2 < 1.0 {
            return [nx, ny, (1.0 - n2).sqrt()];
        }
    }
    let d = (dx * dx + dy * dy).sqrt();
    let (ux, uy) = if d > 1e-12 {
        (dx / d, dy / d)
    } else {
        (1.0, 0.0)
    };
    let a = (r - coverage.clamp(1e-9, 1.0)).max(0.0);
    let nz = (half_disc_primitive(r, r) - half_disc_primitive(a, r)) / (r * (r - a));
    let rho = 0.5 * (a + r) / r;
    [ux * rho, uy * rho, nz]
}

#[cfg(test)]
mod tests {
    use super::disc_coverage;

    /// Area of { x <= xq, y <= yq } inside the disc of radius `r` centred at the origin (a
    /// second, independent derivation: primitives of the quadrant, inclusion-exclusion over the
    /// pixel's corners).
    fn quadrant_area(xq: f64, yq: f64, r: f64) -> f64 {
        let x = xq.clamp(-r, r);
        let y = yq.clamp(-r, r);
        let g = |t: f64| {
            let t = t.clamp(-r, r);
            0.5 * (t * (r * r - t * t).max(0.0).sqrt() + r * r * (t / r).clamp(-1.0, 1.0).asin())
        };
        let h = |a: f64, b: f64| if b > a { g(b) - g(a) } else { 0.0 };
        let w = (r * r - y * y).max(0.0).sqrt();
        let (lo, hi) = (-w, x.min(w));
        let inner = (hi - lo).max(0.0);
        if y >= 0.0 {
            let outer = h(-r, x.min(-w)) + if x > w { h(w, x) } else { 0.0 };
            h(-r, x) + y * inner + outer
        } else {
            if inner <= 0.0 {
                return 0.0;
            }
            y * inner + h(lo, hi)
        }
    }

    fn by_corners(px: f64, py: f64, cx: f64, cy: f64, r: f64) -> f64 {
        let (x0, x1, y0, y1) = (px - 0.5 - cx, px + 0.5 - cx, py - 0.5 - cy, py + 0.5 - cy);
        (quadrant_area(x1, y1, r) - quadrant_area(x0, y1, r) - quadrant_area(x1, y0, r)
            + quadrant_area(x0, y0, r))
        .clamp(0.0, 1.0)
    }

    #[test]
    fn coverage_agrees_with_inclusion_exclusion() {
        // Radii from below a pixel to large, centres at many sub-pixel offsets, every pixel
        // near the rim (and a few wholly inside or outside).
        let mut worst: f64 = 0.0;
        for &r in &[0.3f64, 0.5, 0.71, 1.0, 2.5, 7.9, 40.0] {
            for k in 0..37 {
                let cx = 0.37 * k as f64 % 1.0 + 0.013;
                let cy = 0.61 * k as f64 % 1.0 - 0.4;
                let n = (r + 2.0).ceil() as i64;
                for y in -n..=n {
                    for x in -n..=n {
                        let (px, py) = (x as f64, y as f64);
                        let a = disc_coverage(px, py, cx, cy, r);
                        let b = by_corners(px, py, cx, cy, r);
                        worst = worst.max((a - b).abs());
                    }
                }
            }
        }
        assert!(worst < 1e-9, "largest difference {worst}");
    }

    #[test]
    fn coverage_of_degenerate_discs_is_zero() {
        assert_eq!(disc_coverage(0.0, 0.0, 0.0, 0.0, 0.0), 0.0);
        assert_eq!(disc_coverage(0.0, 0.0, 0.0, 0.0, -1.0), 0.0);
        assert_eq!(disc_coverage(0.0, 0.0, f64::NAN, 0.0, 3.0), 0.0);
        assert_eq!(disc_coverage(0.0, 0.0, 0.0, 0.0, f64::NAN), 0.0);
    }
}
