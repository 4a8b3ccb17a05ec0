"""Check the region layer: attributes, CRS and polygons (invalid ones are repaired)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .findings import Findings
from .schema import TableSchema, check_columns, check_fields

__all__ = ["check_regions", "REGION_COLUMNS"]

REGION_COLUMNS = ["region_id", "name", "geometry"]
_CRS_FIX = ("set the layer's CRS to the one its coordinates are in: in QGIS, Layer Properties > Source > "
            "Assigned CRS and save again; or in Python, gdf.set_crs('EPSG:4326').to_file(...)")


def check_regions(gdf, schema: TableSchema, file: str, findings: Findings):
    """Typed region layer (region_id, name, geometry; CRS kept as given), or ``None``.

    Invalid polygons are repaired with ``shapely.make_valid`` (structure method) and
    listed in a warning. A layer without CRS is a problem.
    """
    import geopandas as gpd
    import shapely

    schema.rule("crs")
    if gdf.crs is None:
        findings.add(file, "a layer without a coordinate reference system (CRS)",
                     "a layer with its CRS declared (for example EPSG:4326, WGS84)", _CRS_FIX)
    elif not gdf.crs.equals("EPSG:4326"):
        # the regions stage transforms occurrence coordinates into the layer's CRS
        findings.warn(f"{file}: region layer CRS kept as given: {gdf.crs.to_string()} (not WGS84 longitude/"
                      f"latitude); occurrence coordinates (WGS84) are transformed into it to assign them to regions")
    attrs = pd.DataFrame(gdf.drop(columns=gdf.geometry.name)).reset_index(drop=True)
    ok = check_columns(list(attrs.columns), schema, file, findings)
    # layers have no header row: row numbers are feature numbers (1 = first feature)
    typed, _ = check_fields(attrs, schema, file, findings, row_offset=1)
    schema.rule("geometry")
    geoms = np.asarray(gdf.geometry.array, dtype=object)
    feature = np.arange(1, len(gdf) + 1)
    ids = typed["region_id"].fillna("?").to_numpy(dtype=object)
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if empty.any():
        findings.rows(file, "geometry", feature[empty],
                      [f"region {i!r} without a geometry" for i in ids[empty][:20]],
                      "a polygon for every region", "draw the region or delete the feature")
    allowed = schema.field("geometry").get("geometryTypes", ["Polygon", "MultiPolygon"])
    types = shapely.get_type_id(geoms)
    polygonal = np.isin(types, [shapely.GeometryType.POLYGON, shapely.GeometryType.MULTIPOLYGON])
    wrong = ~empty & ~polygonal
    if wrong.any():
        names = np.array([str(shapely.GeometryType(t).name).title() for t in types[wrong]])
        findings.rows(file, "geometry", feature[wrong],
                      [f"region {i!r} is a {n}" for i, n in zip(ids[wrong][:20], names[:20])],
                      f"geometry types {allowed}", "keep only polygon features in the region layer")
    check = ~empty & polygonal
    invalid = np.zeros(len(geoms), bool)
    invalid[check] = ~shapely.is_valid(geoms[check])
    if invalid.any():
        fixed = shapely.make_valid(geoms[invalid], method="structure", keep_collapsed=False)
        geoms = geoms.copy()
        geoms[invalid] = [_polygonal(g) for g in fixed]
        reasons = shapely.is_valid_reason(np.asarray(gdf.geometry.array, dtype=object)[invalid])
        named = ", ".join(f"{i} ({r})" for i, r in zip(ids[invalid][:20], reasons[:20]))
        more = f" and {int(invalid.sum()) - 20} more" if invalid.sum() > 20 else ""
        findings.warn(f"{file}: repaired {int(invalid.sum())} invalid polygon(s) with shapely make_valid: "
                      f"region_id {named}{more}; check their outlines in a GIS")
    if not ok:
        return None
    out = gpd.GeoDataFrame({"region_id": typed["region_id"].to_numpy(), "name": typed["name"].to_numpy()},
                           geometry=gpd.GeoSeries(geoms, crs=gdf.crs), crs=gdf.crs)
    out["region_id"] = out["region_id"].astype("str")
    out["name"] = out["name"].astype("str")
    return out


def _polygonal(geom):
    """Keep the polygonal part of a repaired geometry."""
    import shapely
    from shapely.geometry import MultiPolygon, Polygon

    if isinstance(geom, (Polygon, MultiPolygon)):
        return geom
    parts = [p for p in shapely.get_parts(geom) if isinstance(p, (Polygon, MultiPolygon))]
    polys = [q for p in parts for q in (p.geoms if isinstance(p, MultiPolygon) else [p])]
    return MultiPolygon(polys) if polys else geom
