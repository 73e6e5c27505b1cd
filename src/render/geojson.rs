//! `layout.geojson`: a layout as an RFC 7946 FeatureCollection in WGS84, one Point feature per
//! sensor (coordinates `[longitude, latitude]`, degrees), ranked as in the layout.
//!
//! Local metres become geographic degrees through the local tangent plane at the site's
//! [`GeoOrigin`]: the plane frame is rotated to east/north by the origin's rotation (angle
//! from true north to local +y, clockwise), the point on the east–north tangent plane is
//! placed in Earth-centred coordinates and converted back to geodetic latitude and longitude
//! on the WGS84 ellipsoid (NIMA TR8350.2 constants; the ECEF conversions are textbook
//! geodesy, e.g. Hofmann-Wellenhof et al., *GNSS*, 2008, §10.2). The point lies up to
//! d²/2R above the ellipsoid (8 cm at 1 km); its latitude and longitude are those of the
//! ellipsoid normal through it. Against the exact geodesic at the same distance and azimuth
//! (Karney 2013, via GeographicLib; `tests/fixtures/geojson/`) the horizontal difference is
//! below 1 cm out to 10 km from the origin, far below mounting tolerances.
//! It is not meant for domains beyond a few tens of kilometres.

use serde_json::{json, Value};

use crate::io::{GeoOrigin, PlanePoint, Site};
use crate::select::Layout;

/// WGS84 semi-major axis, m.
const WGS84_A: f64 = 6_378_137.0;
/// WGS84 flattening.
const WGS84_F: f64 = 1.0 / 298.257_223_563;

/// `[longitude, latitude]` in degrees of the plane point `p` (metres in the local frame).
pub fn local_to_lon_lat(origin: &GeoOrigin, p: PlanePoint) -> [f64; 2] {
    let theta = origin.rotation_deg.to_radians();
    let east = p[0] * theta.cos() + p[1] * theta.sin();
    let north = -p[0] * theta.sin() + p[1] * theta.cos();
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (phi, lambda) = (origin.lat_deg.to_radians(), origin.lon_deg.to_radians());
    let n_radius = WGS84_A / (1.0 - e2 * phi.sin().powi(2)).sqrt();
    let origin_ecef = [
        n_radius * phi.cos() * lambda.cos(),
        n_radius * phi.cos() * lambda.sin(),
        n_radius * (1.0 - e2) * phi.sin(),
    ];
    let east_unit = [-lambda.sin(), lambda.cos(), 0.0];
    let north_unit = [
        -phi.sin() * lambda.cos(),
        -phi.sin() * lambda.sin(),
        phi.cos(),
    ];
    let q: Vec<f64> = (0..3)
        .map(|k| origin_ecef[k] + east * east_unit[k] + north * north_unit[k])
        .collect();
    // ECEF to geodetic by fixed-point iteration on latitude (converges to well below a
    // millimetre in a few steps for points near the surface).
    let horizontal = q[0].hypot(q[1]);
    let lon = q[1].atan2(q[0]);
    let mut lat = q[2].atan2(horizontal * (1.0 - e2));
    for _ in 0..8 {
        let n = WGS84_A / (1.0 - e2 * lat.sin().powi(2)).sqrt();
        let h = if lat.cos().abs() > 1e-12 {
            horizontal / lat.cos() - n
        } else {
            q[2].abs() - n * (1.0 - e2)
        };
        lat = q[2].atan2(horizontal * (1.0 - e2 * n / (n + h)));
    }
    [lon.to_degrees(), lat.to_degrees()]
}

/// Rounds degrees to 1e-8 (about 1 mm), the precision written to the file.
fn round_deg(v: f64) -> f64 {
    (v * 1e8).round() / 1e8
}

/// The layout as a GeoJSON FeatureCollection string.
pub fn layout_geojson(site: &Site, layout: &Layout, origin: &GeoOrigin) -> String {
    let features: Vec<Value> = layout
        .entries
        .iter()
        .map(|e| {
            let c = &site.candidates[e.candidate_idx];
            let kind = &site.kinds[e.kind_idx];
            let [lon, lat] = local_to_lon_lat(origin, c.position);
            json!({
                "type": "Feature",
                "geometry": { "type": "Point", "coordinates": [round_deg(lon), round_deg(lat)] },
                "properties": {
                    "rank": e.rank,
                    "candidate": c.id,
                    "kind": kind.name,
                    "x_m": c.position[0],
                    "y_m": c.position[1],
                    "height_m": c.height,
                    "cost": kind.cost + c.mount_cost,
                    "cumulative_cost": e.cumulative_cost,
                    "kept": e.kept,
                }
            })
        })
        .collect();
    let doc = json!({
        "type": "FeatureCollection",
        "name": format!("{} layout", site.name),
        "features": features,
    });
    // Serialising a json! value cannot fail.
    serde_json::to_string_pretty(&doc).unwrap_or_default()
}

/// Writes [`layout_geojson`] to `path` atomically.
pub fn write_layout_geojson(
    path: &std::path::Path,
    site: &Site,
    layout: &Layout,
    origin: &GeoOrigin,
) -> Result<(), super::RenderError> {
    let text = layout_geojson(site, layout, origin);
    crate::io::atomic::write_bytes_atomic(path, text.as_bytes())?;
    Ok(())
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    fn haversine_m(a: [f64; 2], b: [f64; 2]) -> f64 {
        // Mean Earth radius 6371.0088 km (IUGG, common practice).
        let r = 6_371_008.8;
        let (l1, p1) = (a[0].to_radians(), a[1].to_radians());
        let (l2, p2) = (b[0].to_radians(), b[1].to_radians());
        let h =
            ((p2 - p1) / 2.0).sin().powi(2) + p1.cos() * p2.cos() * ((l2 - l1) / 2.0).sin().powi(2);
        2.0 * r * h.sqrt().asin()
    }

    #[test]
    fn one_kilometre_north_is_about_0_009_degrees() {
        // At 45° one degree of latitude spans about 111.13 km of meridian (common practice),
        // so 1000 m is ≈ 0.008998°; at the equator (110.574 km/°) ≈ 0.009044°.
        let o = GeoOrigin {
            lat_deg: 45.0,
            lon_deg: 10.0,
            rotation_deg: 0.0,
        };
        let [lon, lat] = local_to_lon_lat(&o, [0.0, 1000.0]);
        assert!((lon - 10.0).abs() < 1e-12);
        assert!((lat - 45.0 - 0.008_998).abs() < 2e-6, "{lat}");
        let eq = GeoOrigin {
            lat_deg: 0.0,
            lon_deg: 0.0,
            rotation_deg: 0.0,
        };
        let [_, lat] = local_to_lon_lat(&eq, [0.0, 1000.0]);
        assert!((lat - 0.009_044).abs() < 2e-6, "{lat}");
        // Haversine on the mean sphere agrees to within the ellipsoid's flattening (~0.5 %).
        let d = haversine_m([10.0, 45.0], [lon, 45.0 + 0.008_998]);
        assert!((d - 1000.0).abs() < 5.0, "{d}");
    }

    #[test]
    fn rotation_turns_local_axes() {
        // Local +y pointing east (rotation 90°): 1 km along +y moves east only.
        let o = GeoOrigin {
            lat_deg: 53.54,
            lon_deg: 9.97,
            rotation_deg: 90.0,
        };
        let [lon, lat] = local_to_lon_lat(&o, [0.0, 1000.0]);
        // Only the tangent plane's second-order drop (d² tan φ / 2R ≈ 0.1 m) moves it south.
        assert!((lat - 53.54).abs() < 2e-6, "{lat}");
        assert!(lon > 9.97);
        let d = haversine_m([9.97, 53.54], [lon, lat]);
        assert!((d - 1000.0).abs() < 5.0, "{d}");
        // Local +x is then south.
        let [lon, lat] = local_to_lon_lat(&o, [1000.0, 0.0]);
        assert!((lon - 9.97).abs() < 1e-8 && lat < 53.54);
    }
}
