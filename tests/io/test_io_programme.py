"""Programme set-up readers: sites GeoJSON, stations, species, panels, season windows, observers.

All data here is invented (reserve, codes, names).
"""

from __future__ import annotations

import datetime as dt
import json

import pytest

from monitor.errors import InputError
from monitor.io.programme import (
    panel_due,
    parse_epsg,
    parse_revisit_rule,
    projected_crs_problem,
    read_observers_csv,
    read_panels_csv,
    read_season_windows_csv,
    read_sites_geojson,
    read_species_csv,
    read_stations_csv,
    station_area,
)

SQUARE = [[[0, 0], [100, 0], [100, 50], [0, 50], [0, 0]]]
BOWTIE = [[[0, 0], [10, 10], [10, 0], [0, 10], [0, 0]]]


def _sites(tmp_path, features, crs="urn:ogc:def:crs:EPSG::27700", name="sites.geojson"):
    doc = {"type": "FeatureCollection", "features": features}
    if crs is not None:
        doc["crs"] = {"type": "name", "properties": {"name": crs}}
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def _feature(code, coords, **props):
    return {"type": "Feature", "properties": {"code": code, **props},
            "geometry": {"type": "Polygon", "coordinates": coords}}


def _problems(exc: pytest.ExceptionInfo) -> list[tuple]:
    return [(p.row, p.field, p.value) for p in exc.value.problems]


def _write(tmp_path, name, text, encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


# --- CRS -------------------------------------------------------------------------------------
def test_epsg_forms():
    # OGC URN form urn:ogc:def:crs:EPSG::code (OGC 07-092r1, from memory) and the short EPSG:code
    assert parse_epsg("urn:ogc:def:crs:EPSG::27700") == 27700
    assert parse_epsg("EPSG:32633") == 32633
    assert parse_epsg(3035) == 3035
    assert parse_epsg("WGS84") is None


def test_projected_crs_checks_against_epsg_registry():
    # EPSG registry (via pyproj/PROJ database): 27700 British National Grid, projected, metres
    assert projected_crs_problem(27700) is None
    # 4326 is geographic (degrees), not projected
    assert "not projected" in projected_crs_problem(4326)
    # 2263 NAD83 / New York Long Island is projected in US survey feet
    assert "foot" in projected_crs_problem(2263).lower()
    assert projected_crs_problem(999999) == "a known EPSG code"


# --- sites -------------------------------------------------------------------------------------
def test_sites_read_and_area_from_geometry(tmp_path):
    path = _sites(tmp_path, [_feature("S1", SQUARE, name="North fen", habitat="fen"),
                             _feature("S2", SQUARE, area_m2=4800.5, access_until="2031-12-31")])
    sites = read_sites_geojson(path)
    # closed form: rectangle 100 m x 50 m = 5000 m^2
    assert sites.loc[0, "area_m2"] == pytest.approx(5000.0)
    assert sites.loc[1, "area_m2"] == 4800.5
    assert sites.loc[1, "access_until"] == dt.date(2031, 12, 31)
    assert list(sites["site"]) == ["S1", "S2"]
    assert sites.attrs["epsg"] == 27700


def test_sites_all_problems_reported(tmp_path):
    path = _sites(tmp_path, [_feature("S1", SQUARE), _feature("S1", BOWTIE),
                             {"type": "Feature", "properties": {"code": "S3"},
                              "geometry": {"type": "Point", "coordinates": [1, 2]}}])
    with pytest.raises(InputError) as exc:
        read_sites_geojson(path)
    got = _problems(exc)
    assert (2, "code", "S1") in got                     # duplicate code
    # a bow-tie ring self-intersects: invalid under OGC Simple Features (ISO 19125-1, 6.1.11.1)
    assert any(r == 2 and f == "geometry" and "Self-intersection" in str(v) for r, f, v in got)
    assert (3, "geometry", "Point") in got              # RFC 7946 3.1: not a polygon
    assert "sites.geojson" in str(exc.value)


def test_sites_geographic_crs_refused(tmp_path):
    path = _sites(tmp_path, [_feature("S1", SQUARE)], crs="EPSG:4326")
    with pytest.raises(InputError, match="not projected"):
        read_sites_geojson(path)


def test_sites_crs_argument_and_conflict(tmp_path):
    path = _sites(tmp_path, [_feature("S1", SQUARE)], crs=None)
    with pytest.raises(InputError, match="projected CRS"):
        read_sites_geojson(path)
    assert read_sites_geojson(path, epsg=25832).attrs["epsg"] == 25832
    path2 = _sites(tmp_path, [_feature("S1", SQUARE)], name="b.geojson")
    with pytest.raises(InputError, match="same CRS"):
        read_sites_geojson(path2, epsg=25832)


@pytest.mark.parametrize("content", [b"", b"{not json", b'{"type": "Feature"}', b"\xff\xfe\x00garbage"])
def test_sites_bad_files_give_input_error(tmp_path, content):
    path = tmp_path / "bad.geojson"
    path.write_bytes(content)
    with pytest.raises(InputError) as exc:
        read_sites_geojson(path)
    assert exc.value.problems[0].file == "bad.geojson"


# --- stations -------------------------------------------------------------------------------------
STATIONS_OK = """Code,Site,Easting,Northing,Width_m,Length_m,Placement,Transect,Distance_m,Panel,Established,Retired
Q01,S1,10,10,0.5,0.5,random,,,A,2012-05-01,
Q02,S1,"20",40,1,1,transect,T1,12.5,B,2012-05-01,2019-06-01
"""


def test_stations_read_with_header_variants(tmp_path):
    sites = read_sites_geojson(_sites(tmp_path, [_feature("S1", SQUARE)]))
    stations = read_stations_csv(_write(tmp_path, "stations.csv", STATIONS_OK), sites=sites)
    assert list(stations["station"]) == ["Q01", "Q02"]
    assert stations.loc[1, "distance_m"] == 12.5
    assert stations.loc[1, "retired"] == dt.date(2019, 6, 1)
    assert stations.loc[0, "epsg"] == 27700
    assert stations.loc[0, "quadrat_area_m2"] == pytest.approx(0.25)


def test_stations_every_problem(tmp_path):
    sites = read_sites_geojson(_sites(tmp_path, [_feature("S1", SQUARE)]))
    text = ("station,site,x,y,quadrat_width_m,quadrat_length_m,placement,colour\n"
            "Q1,S1,10,10,1,1,random,red\n"
            "Q1,S1,200,10,0,1,randm,\n"
            "Q3,S9,abc,,1,1,random,\n")
    with pytest.raises(InputError) as exc:
        read_stations_csv(_write(tmp_path, "st.csv", text), sites=sites)
    got = _problems(exc)
    assert (1, "colour", "colour") in got
    assert (3, "station", "Q1") in got
    assert (3, "quadrat_width_m", "0") in got
    assert (3, "placement", "randm") in got
    assert (3, "x/y", "(200, 10)") in got
    assert (4, "site", "S9") in got
    assert (4, "x", "abc") in got
    assert (4, "y", None) in got
    lines = [p.line() for p in exc.value.problems]
    assert any("closest: random" in line for line in lines)
    assert any("100.0 m outside" in line for line in lines)


def test_unknown_column_suggestion(tmp_path):
    text = "station,site,x,y,quadrat_width_m,quadrat_lenght_m,placement\nQ1,S1,1,1,1,1,random\n"
    with pytest.raises(InputError) as exc:
        read_stations_csv(_write(tmp_path, "st.csv", text), epsg=27700)
    lines = [p.line() for p in exc.value.problems]
    assert any("did you mean 'quadrat_length_m'" in line for line in lines)
    assert any("'quadrat_length_m' (required)" in line for line in lines)


def test_station_in_other_crs_is_transformed_for_the_boundary_check(tmp_path):
    # A site around ETRS89 / UTM 32N (EPSG:25832) easting 500000, northing 5500000; the station is given
    # in WGS 84 / UTM 32N (EPSG:32632); the two differ by well under a metre (EPSG registry), so it is inside.
    ring = [[[499000, 5499000], [501000, 5499000], [501000, 5501000], [499000, 5501000], [499000, 5499000]]]
    sites = read_sites_geojson(_sites(tmp_path, [_feature("S1", ring)], crs="EPSG:25832"))
    text = ("station,site,x,y,epsg,quadrat_width_m,quadrat_length_m,placement\n"
            "Q1,S1,500000,5500000,32632,1,1,random\n"
            "Q2,S1,503000,5500000,32632,1,1,random\n")
    with pytest.raises(InputError) as exc:
        read_stations_csv(_write(tmp_path, "st.csv", text), sites=sites)
    assert [p.row for p in exc.value.problems] == [3]


def test_quadrat_area_trade_value():
    # common practice: a 0.33 m x 0.33 m quadrat has an area of about 0.1 m^2
    assert station_area(0.33, 0.33) == pytest.approx(0.1, abs=0.01)
    with pytest.raises(InputError):
        station_area(0, 1)


def test_rfc4180_quoting_and_crlf(tmp_path):
    # RFC 4180 sect. 2 rules 6-7: quoted fields may hold commas, line breaks and doubled quotes
    text = ('station,site,x,y,quadrat_width_m,quadrat_length_m,placement,relocation_notes\r\n'
            'Q1,S1,1,1,1,1,random,"3 m N of post, ""red"" cap\r\nthen 2 m E"\r\n'
            'Q2,S1,1,1,1,1,random,\r\n')
    stations = read_stations_csv(_write(tmp_path, "st.csv", text), epsg=27700)
    assert stations.loc[0, "relocation_notes"] == '3 m N of post, "red" cap\nthen 2 m E'
    # rows are numbered by the physical line where the record starts: Q2 starts on line 4
    assert list(stations["source_row"]) == [2, 4]


# --- species -------------------------------------------------------------------------------------
def test_species_read_and_problems(tmp_path):
    text = ("code,scientific_name,common_name,measure,n,sensitive,window_start,window_end\n"
            "ANEMNE,Anemona nemorosa inventa,wood flower,count,,no,04-01,05-31\n"
            "PRIMUL,Primula fictiva,,frequency,25,yes,,\n"
            "SUCCIS,Succisa imaginaria,,pin hits,10,,,\n")
    species = read_species_csv(_write(tmp_path, "sp.csv", text))
    assert list(species["measure"]) == ["count", "frequency", "pin_hits"]
    assert species.loc[1, "n"] == 25 and bool(species.loc[1, "sensitive"]) is True
    bad = ("code,scientific_name,measure,n,sensitive,window_start,window_end\n"
           "A,Aa,frequency,,maybe,13-01,\n"
           "B,Bb,count,5,no,02-30,03-01\n"
           "C,Cc,covr,,no,,\n")
    with pytest.raises(InputError) as exc:
        read_species_csv(_write(tmp_path, "bad.csv", bad))
    got = _problems(exc)
    assert (2, "n", None) in got
    assert (2, "sensitive", "maybe") in got
    assert (2, "window_start", "13-01") in got
    assert (3, "n", "5") in got
    assert (3, "window_start", "02-30") in got  # no 30 February in any year
    assert (4, "measure", "covr") in got


# --- panels and windows ---------------------------------------------------------------------
def test_revisit_rules_mcdonald_2003():
    # McDonald (2003) notation: [1-0] visited every year; [1-3] visited one year then rested three
    assert parse_revisit_rule("[1-0]") == (1, 0)
    assert parse_revisit_rule("[1-3]") == (1, 3)
    assert parse_revisit_rule("[0-3]") is None
    assert parse_revisit_rule("every year") is None
    assert [y for y in range(2010, 2022) if panel_due(1, 3, 2011, y)] == [2011, 2015, 2019]
    assert [y for y in range(2010, 2016) if panel_due(2, 2, 2010, y)] == [2010, 2011, 2014, 2015]


def test_panels_csv(tmp_path):
    text = "code,rule,start_year\nA,[1-0],\nB,[1-3],2013\nC,[1-3],\nD,sometimes,2012\n"
    with pytest.raises(InputError) as exc:
        read_panels_csv(_write(tmp_path, "panels.csv", text))
    got = _problems(exc)
    assert (4, "start_year", None) in got and (5, "rule", "sometimes") in got and len(got) == 2
    panels = read_panels_csv(_write(tmp_path, "p2.csv", "code,rule,start_year\nA,[1-0],\nB,[1-3],2013\n"))
    assert list(panels["rest_years"]) == [0, 3]


def test_season_windows_csv(tmp_path):
    species = read_species_csv(_write(tmp_path, "sp.csv", "code,scientific_name,measure\nANEMNE,Aa,count\n"))
    text = "scope,start,end,year\nprogramme,05-01,08-31,\nANEMNE,04-01,05-31,\nANEMNX,04-01,05-31,\nprogramme,05-01,8/31,\n"
    with pytest.raises(InputError) as exc:
        read_season_windows_csv(_write(tmp_path, "w.csv", text), species=species)
    got = _problems(exc)
    assert (4, "scope", "ANEMNX") in got
    assert (5, "scope", "programme") in got      # second programme window for every year
    assert (5, "end", "8/31") in got
    assert "closest: ANEMNE" in " ".join(p.line() for p in exc.value.problems)


def test_observers_csv(tmp_path):
    obs = read_observers_csv(_write(tmp_path, "o.csv", "Observer,Name,Trained\nOB1,Ada Invented,2015-04-02\nOB2,Bo Madeup,\n"))
    assert obs.loc[0, "trained"] == dt.date(2015, 4, 2)
    with pytest.raises(InputError) as exc:
        read_observers_csv(_write(tmp_path, "o2.csv", "code,name,trained\nOB1,,01/02/2015\nOB1;OB2,X,\n"))
    got = _problems(exc)
    assert (2, "name", None) in got
    assert (2, "trained", "01/02/2015") in got   # D/M and M/D both fit: refused, never guessed
    assert (3, "code", "OB1;OB2") in got


@pytest.mark.parametrize("code", ["MAR VIO", "MAR:VIO", "A/B", "cov", "'X", "=SUM", "a,b"])
def test_species_codes_the_sheets_cannot_carry_are_refused_at_setup(tmp_path, code):
    """A code with a space (or ':', '/', ...) cannot be a 'CODE:count' header of the field pack's entry
    sheet, so that sheet could never be imported: refused when the species list is read."""
    from monitor.errors import InputError
    from monitor.io.programme import read_species_csv

    path = tmp_path / "species.csv"
    quoted = '"' + code.replace('"', '""') + '"'
    path.write_text(f"code,scientific_name,measure\n{quoted},Viola invented,count\nOK-1,Carex invented,count\n")
    with pytest.raises(InputError) as caught:
        read_species_csv(path)
    assert len(caught.value.problems) == 1
    problem = caught.value.problems[0]
    assert (problem.file, problem.row, problem.field, problem.value) == ("species.csv", 2, "code", code)


def test_a_species_code_with_accents_digits_dots_and_dashes_is_fine(tmp_path):
    from monitor.io.programme import read_species_csv

    path = tmp_path / "species.csv"
    path.write_text("code,scientific_name,measure\nÄSTER-2.b,Aster invented,count\n", encoding="utf-8")
    assert list(read_species_csv(path)["species"]) == ["ÄSTER-2.b"]
