//! Polygons of `site.toml`: exclusion `[[zones]]` and solid `[[obstacles]]`, inline as a
//! vertex list or from a GeoJSON file (RFC 7946 geometry objects, but in local metres, not
//! WGS84: a FeatureCollection/Feature of Polygon or MultiPolygon; the outer ring is used).
//! A closing vertex equal to the first is dropped; fewer than three vertices or zero area
//! is refused. Owns no geometry maths (see [`super::geometry`]).

use std::path::Path;

use super::geometry::polygon_area;
use super::keys::Section;
use super::site::{PlanePoint, Polygon};
use super::IoError;

/// A named polygon as read, before it becomes a `Zone` or an `Obstacle`.
pub struct NamedPolygon {
    pub name: String,
    pub polygon: Polygon,
}

/// Reads the `[[zones]]` or `[[obstacles]]` entries (`list` = "zones" or "obstacles").
pub fn read_polygons(
    site_file: &Path,
    root: &Path,
    top: &Section,
    list: &str,
    warnings: &mut Vec<String>,
) -> Result<Vec<NamedPolygon>, IoError> {
    let mut out = Vec::new();
    for (idx, table) in top.table_array(list)?.into_iter().enumerate() {
        let prefix = format!("{list}[{idx}]");
        let s = Section::new(site_file, &prefix, table, &["name", "polygon", "file"])?;
        match (s.has("polygon"), s.has("file")) {
            (true, true) | (false, false) => {
                return Err(s.err(
                    "polygon",
                    "give exactly one of `polygon = [[x, y], ...]` or `file = \"....geojson\"`",
                ))
            }
            (true, false) => {
                let name = s.req_str("name", "a name for the polygon")?.to_string();
                let value = s.req("polygon", "a list of [x, y] vertices in m")?;
                let items = value
                    .as_array()
                    .ok_or_else(|| s.err("polygon", "expected a list of [x, y] vertices in m"))?;
                let vertices = items
                    .iter()
                    .map(|v| s.as_pair("polygon", v, "a vertex [x, y] in m"))
                    .collect::<Result<Vec<_>, _>>()?;
                let polygon = close_ring(vertices).map_err(|message| s.err("polygon", message))?;
                out.push(NamedPolygon { name, polygon });
            }
            (false, true) => {
                let path = s.req_file("file", root, "a GeoJSON file name")?;
                let prefix_name = s.opt_str("name", "a name prefix")?;
                out.extend(read_geojson(&path, prefix_name, warnings)?);
            }
        }
    }
    Ok(out)
}

/// Drops a repeated closing vertex and checks the ring is a usable polygon.
fn close_ring(mut vertices: Vec<PlanePoint>) -> Result<Polygon, String> {
    if vertices.len() >= 2 && vertices.first() == vertices.last() {
        vertices.pop();
    }
    if vertices.len() < 3 {
        return Err(format!(
            "found {} distinct vertices, expected at least 3",
            vertices.len()
        ));
    }
    let area = polygon_area(&vertices);
    if area <= 0.0 {
        return Err("polygon has zero area (all vertices on one line)".to_string());
    }
    Ok(Polygon { vertices })
}

/// Polygons of a GeoJSON file in local metres; names from `properties.name`, else
/// `<prefix or file stem>-<n>`.
pub fn read_geojson(
    path: &Path,
    prefix_name: Option<&str>,
    warnings: &mut Vec<String>,
) -> Result<Vec<NamedPolygon>, IoError> {
    let text = std::fs::read_to_string(path).map_err(|e| IoError::file(path, e))?;
    let json: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        IoError::invalid(
            path,
            format!("line {}, column {}", e.line(), e.column()),
            format!("not valid JSON: {e}"),
        )
    })?;
    let base = prefix_name.map(str::to_string).unwrap_or_else(|| {
        path.file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "zone".to_string())
    });
    let features: Vec<(String, &serde_json::Value)> = match json.get("type").and_then(|t| t.as_str()) {
        Some("FeatureCollection") => {
            let list = json
                .get("features")
                .and_then(|f| f.as_array())
                .ok_or_else(|| IoError::invalid(path, "features", "expected an array of features"))?;
            list.iter()
                .enumerate()
                .map(|(idx, f)| (format!("features[{idx}]"), f))
                .collect()
        }
        Some("Feature") => vec![("feature".to_string(), &json)],
        Some("Polygon") | Some("MultiPolygon") => vec![("geometry".to_string(), &json)],
        other => {
            return Err(IoError::invalid(
                path,
                "type",
                format!(
                    "found {}, expected \"FeatureCollection\", \"Feature\", \"Polygon\" or \"MultiPolygon\"",
                    other.map_or("no type".to_string(), |t| format!("\"{t}\""))
                ),
            ))
        }
    };
    let mut out = Vec::new();
    for (place, feature) in features {
        let is_geometry = feature.get("coordinates").is_some();
        let geometry = if is_geometry {
            feature
        } else {
            feature
                .get("geometry")
                .ok_or_else(|| IoError::invalid(path, &place, "feature has no geometry"))?
        };
        let name = feature
            .get("properties")
            .and_then(|p| p.get("name"))
            .and_then(|n| n.as_str())
            .map(str::to_string)
            .unwrap_or_else(|| format!("{base}-{}", out.len() + 1));
        let coords = geometry
            .get("coordinates")
            .ok_or_else(|| IoError::invalid(path, &place, "geometry has no coordinates"))?;
        let polygons: Vec<&serde_json::Value> = match geometry.get("type").and_then(|t| t.as_str())
        {
            Some("Polygon") => vec![coords],
            Some("MultiPolygon") => coords
                .as_array()
                .ok_or_else(|| {
                    IoError::invalid(path, &place, "MultiPolygon coordinates must be an array")
                })?
                .iter()
                .collect(),
            other => {
                return Err(IoError::invalid(
                    path,
                    &place,
                    format!(
                        "geometry type {}, expected Polygon or MultiPolygon",
                        other.unwrap_or("missing")
                    ),
                ))
            }
        };
        let n_parts = polygons.len();
        for (part_idx, rings) in polygons.into_iter().enumerate() {
            let rings = rings.as_array().ok_or_else(|| {
                IoError::invalid(path, &place, "polygon must be an array of rings")
            })?;
            let outer = rings
                .first()
                .ok_or_else(|| IoError::invalid(path, &place, "polygon has no ring"))?;
            if rings.len() > 1 {
                warnings.push(format!(
                    "{}: {place}: holes are ignored; the whole outer ring of `{name}` counts",
                    path.display()
                ));
            }
            let vertices = ring_vertices(path, &place, outer)?;
            let polygon = close_ring(vertices).map_err(|m| IoError::invalid(path, &place, m))?;
            let name = if n_parts > 1 {
                format!("{name}-{}", part_idx + 1)
            } else {
                name.clone()
            };
            out.push(NamedPolygon { name, polygon });
        }
    }
    Ok(out)
}

fn ring_vertices(
    path: &Path,
    place: &str,
    ring: &serde_json::Value,
) -> Result<Vec<PlanePoint>, IoError> {
    let positions = ring.as_array().ok_or_else(|| {
        IoError::invalid(path, place, "a ring must be an array of [x, y] positions")
    })?;
    positions
        .iter()
        .enumerate()
        .map(|(idx, pos)| {
            let xy = pos.as_array().filter(|a| a.len() >= 2);
            let pair = xy.and_then(|a| Some([a[0].as_f64()?, a[1].as_f64()?]));
            pair.ok_or_else(|| {
                IoError::invalid(
                    path,
                    format!("{place}, position {idx}"),
                    format!("found {pos}, expected [x, y] in local metres"),
                )
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn geojson_collection_with_multipolygon() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("z.geojson");
        std::fs::write(
            &p,
            r#"{"type": "FeatureCollection", "features": [
              {"type": "Feature", "properties": {"name": "lane"},
               "geometry": {"type": "Polygon", "coordinates": [[[0,0],[10,0],[10,2],[0,2],[0,0]]]}},
              {"type": "Feature", "properties": {},
               "geometry": {"type": "MultiPolygon", "coordinates": [
                  [[[0,5],[1,5],[1,6]]], [[[3,5],[4,5],[4,6],[3,6]], [[3.2,5.2],[3.4,5.2],[3.4,5.4]]]]}}]}"#,
        )
        .unwrap();
        let mut warnings = Vec::new();
        let zones = read_geojson(&p, None, &mut warnings).unwrap();
        let names: Vec<&str> = zones.iter().map(|z| z.name.as_str()).collect();
        assert_eq!(names, ["lane", "z-2-1", "z-2-2"]);
        assert_eq!(zones[0].polygon.vertices.len(), 4);
        assert!((zones[0].polygon.area() - 20.0).abs() < 1e-12);
        assert_eq!(warnings.len(), 1);

        std::fs::write(&p, r#"{"type": "Point", "coordinates": [0, 0]}"#).unwrap();
        let e = read_geojson(&p, None, &mut warnings)
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("found \"Point\""), "{e}");
        std::fs::write(
            &p,
            r#"{"type": "Polygon", "coordinates": [[[0,0],[1,1],[2,2]]]}"#,
        )
        .unwrap();
        let e = read_geojson(&p, None, &mut warnings)
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("zero area"), "{e}");
    }
}
