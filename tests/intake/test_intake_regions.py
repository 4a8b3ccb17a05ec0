"""Region layers: formats, CRS, attribute checks and polygon repair."""
from __future__ import annotations

import geopandas as gpd
import pyogrio
import pytest
import shapely
from shapely.geometry import LineString, Point, Polygon

from analog.errors import AnalogWarning, InputError
from analog.intake import inventory, load_study

BOWTIE = Polygon([(10, 10), (20, 20), (20, 10), (10, 20)])  # self-intersecting ring


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_region_layer_without_crs(study):
    study.regions = study.regions.set_crs(None, allow_override=True)
    folder = study.write()
    assert pyogrio.read_info(folder / "regions.gpkg")["crs"] is None
    with pytest.raises(InputError, match=r"regions\.gpkg:-:-: found a layer without a coordinate reference system "
                                         r"\(CRS\);.*fix: set the layer's CRS .*QGIS.*set_crs"):
        load_study(folder)


def test_invalid_polygon_repaired_with_warning_naming_it(study):
    study.regions.loc[1, "geometry"] = BOWTIE
    with pytest.warns(AnalogWarning, match=r"regions\.gpkg: repaired 1 invalid polygon\(s\) with shapely make_valid: "
                                           r"region_id r2 \(Self-intersection"):
        s = load_study(study.write())
    geom = s.regions.geometry.iloc[1]
    assert geom.is_valid and geom.geom_type in ("Polygon", "MultiPolygon")
    # reference: shapely.make_valid keeps both lobes of the bow-tie, area 2 x 25
    assert geom.area == pytest.approx(shapely.make_valid(BOWTIE).area) == pytest.approx(50.0)
    assert any("r2" in w for w in s.warnings)


def test_non_polygon_features(study):
    study.regions = gpd.GeoDataFrame({"region_id": ["r1", "r2"], "name": ["A", "B"]},
                                     geometry=[study.regions.geometry.iloc[0], LineString([(0, 0), (1, 1)])],
                                     crs="EPSG:4326")
    study.config["inputs"]["regions"] = "regions.geojson"
    with pytest.raises(InputError, match=r"regions\.geojson:2:geometry: found region 'r2' is a Linestring; "
                                         r"expected geometry types \['Polygon', 'MultiPolygon'\]"):
        load_study(study.write())


def test_duplicate_region_id_and_missing_name(study):
    study.regions["region_id"] = ["r1", "r1"]
    study.regions = study.regions.drop(columns="name")
    with pytest.raises(InputError) as info:
        load_study(study.write())
    text = str(info.value)
    assert "regions.gpkg:2:region_id: found 'r1' again (first in row 1)" in text
    assert "regions.gpkg:1:name: found no column 'name'" in text


def test_other_crs_is_kept_and_shown(study):
    study.regions = study.regions.to_crs("EPSG:3857")
    s = load_study(study.write())
    assert s.regions.crs.to_epsg() == 3857
    assert "region layer CRS kept as given: EPSG:3857" in inventory(s)


def test_numeric_region_ids_become_text(study):
    study.regions["region_id"] = [101, 102]
    s = load_study(study.write())
    assert s.regions["region_id"].tolist() == ["101", "102"]


@pytest.mark.parametrize("name", ["regions.geojson", "regions.parquet", "regions.shp"])
def test_other_layer_formats(study, name):
    study.config["inputs"]["regions"] = name
    s = load_study(study.write())
    assert s.regions["region_id"].tolist() == ["r1", "r2"] and s.regions.crs.to_epsg() == 4326


def test_several_layers_reads_the_one_named_regions(study):
    folder = study.write()
    (folder / "regions.gpkg").unlink()
    extra = gpd.GeoDataFrame({"kind": ["port"]}, geometry=[Point(1, 1)], crs="EPSG:4326")
    extra.to_file(folder / "regions.gpkg", layer="aaa_ports", engine="pyogrio")
    study.regions.to_file(folder / "regions.gpkg", layer="regions", engine="pyogrio")
    with pytest.warns(AnalogWarning, match=r"regions\.gpkg holds 2 layers \(aaa_ports, regions\); read 'regions'"):
        s = load_study(folder)
    assert len(s.regions) == 2


def test_chosen_layer_must_exist(study):
    study.config["inputs"]["regions_layer"] = "zones"
    with pytest.raises(InputError, match=r"regions\.gpkg:-:-: found no layer named 'zones'"):
        load_study(study.write())


def test_empty_region_layer(study):
    study.regions = study.regions.iloc[:0]
    with pytest.raises(InputError, match=r"regions\.gpkg:-:-: found a layer without features"):
        load_study(study.write())


def test_unsupported_region_format(study):
    study.config["inputs"]["regions"] = "regions.kml"
    study.regions = None
    folder = study.write()
    (folder / "regions.kml").write_text("<kml/>")
    with pytest.raises(InputError, match=r"regions\.kml:-:-: found a file ending in '\.kml'; expected a GeoPackage"):
        load_study(folder)
