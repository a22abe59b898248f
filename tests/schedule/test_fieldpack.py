"""Field packs: sheet headers in the agreed wide layout, template context, GPX and iCalendar."""

import dataclasses
import datetime as dt
import re

import icalendar
import jinja2
import pandas as pd
import pytest
from jinja2 import meta, nodes
from lxml import etree

from monitor.errors import DesignError
from monitor.schedule import (
    CrewSettings,
    Team,
    field_sheet_columns,
    field_sheet_context,
    field_sheet_frame,
    plan_season,
    render_field_sheet,
    team_day_calendar,
    team_day_gpx,
)
from monitor.schedule.fieldpack import (
    FieldSheetContext,
    PreviousVisit,
    SheetStation,
    template_environment,
)
from tests.conftest import GPX_SCHEMA

SCHEMA = etree.XMLSchema(etree.parse(str(GPX_SCHEMA)))  # the official GPX 1.1 schema
EPSG = 32633  # UTM 33N; invented reserve near easting 500 km
X0, Y0 = 500000.0, 5000000.0

# the agreed wide field-sheet layout (docs/files.md, "field records"), transcribed
FIXED = ["station", "date", "observers", "status", "repeat", "protocol", "notes"]
VALUE_PATTERNS = [
    r"^[A-Z0-9]+:count$",
    r"^[A-Z0-9]+:cover$",
    r"^[A-Z0-9]+:frequency/[1-9][0-9]*$",
    r"^[A-Z0-9]+:pin_hits/[1-9][0-9]*$",
    r"^[A-Z0-9]+:presence$",
    r"^cov:[a-z_]+\[[^\]]+\]$",
]
TARGETS = [("ANEMNE", "count"), ("CALLUV", "cover"), ("PRIMUL", "frequency", 25), ("SUCCIS", "pin_hits", 10),
           ("GENTIA", "presence")]
COVARIATES = [("soil_moisture", "%")]


def _is_layout_header(h):
    return h in FIXED or any(re.match(p, h) for p in VALUE_PATTERNS)


STATIONS = pd.DataFrame({
    "station": [f"Q{i:03d}" for i in range(1, 7)],
    "site": ["HEATH"] * 6,
    "x": X0 + pd.Series([50.0, 120, 300, 410, 220, 80]),
    "y": Y0 + pd.Series([40.0, 200, 90, 310, 260, 330]),
    "quadrat_width_m": 1.0,
    "quadrat_length_m": 1.0,
    "relocation_notes": ["peg 2 m N of <gate> & stile", "", "", "", "", ""],
})


@pytest.fixture(scope="module")
def plan():
    due = STATIONS.assign(window_start=dt.date(2026, 6, 1), window_end=dt.date(2026, 6, 5), effort_min=30.0,
                          overdue_years=0)
    crews = CrewSettings((Team("T1", ("OBS1", "OBS2")),), {"HEATH": (X0, Y0)})
    return plan_season(due, crews, year=2026, rng=7)


def _history():
    visits = pd.DataFrame({
        "station": ["Q001", "Q001", "Q001", "Q002"],
        "date": [dt.date(2023, 6, 2), dt.date(2024, 6, 3), dt.date(2025, 6, 4), dt.date(2025, 6, 4)],
        "observers": [("OBS1",), ("OBS1", "OBS3"), ("OBS2",), ("OBS2",)],
        "status": ["done", "done", "missed", "done"],
    })
    obs = pd.DataFrame({
        "station": ["Q001", "Q001", "Q001", "Q002"],
        "date": [dt.date(2023, 6, 2), dt.date(2024, 6, 3), dt.date(2024, 6, 3), dt.date(2025, 6, 4)],
        "species": ["ANEMNE", "ANEMNE", "PRIMUL", "ANEMNE"],
        "measure": ["count", "count", "frequency", "count"],
        "value": [11.0, 14.0, 7.0, 0.0],
        "n": [None, None, 25, None],
    })
    return visits, obs


def _context(plan):
    td = plan.team_days[0]
    visits, obs = _history()
    return field_sheet_context(plan, td.team, td.date, STATIONS, crs=EPSG, targets=TARGETS, covariates=COVARIATES,
                               visits=visits, observations=obs, programme="Heath quadrats", protocol="P2",
                               generated=dt.datetime(2026, 5, 1, tzinfo=dt.UTC))


def test_headers_are_the_agreed_wide_layout():
    heads = field_sheet_columns(TARGETS, COVARIATES)
    assert list(heads[:7]) == FIXED
    assert all(_is_layout_header(h) for h in heads)
    assert "PRIMUL:frequency/25" in heads and "SUCCIS:pin_hits/10" in heads and "cov:soil_moisture[%]" in heads
    with pytest.raises(DesignError, match="needs the number"):
        field_sheet_columns([("PRIMUL", "frequency")])


def test_rendered_sheet_table_headers_exactly_layout(plan):
    html = render_field_sheet(_context(plan))
    doc = etree.HTML(html)
    # the header as the importer reads it (a line may break after ':'), the common name below it apart
    ths = ["".join(th.itertext()).removesuffix("".join(th.xpath('string(.//span[@class="label"])')))
           for th in doc.iter("th")]
    assert ths == list(field_sheet_columns(TARGETS, COVARIATES))
    today = doc.xpath('//tr[@class="today"]')
    assert [tr[0].text for tr in today] == list(plan.team_days[0].stations)
    assert all(len(tr) == len(ths) for tr in today)


def test_previous_two_visits_shown(plan):
    ctx = _context(plan)
    q1 = [s for s in ctx.stations if s.station == "Q001"][0]
    assert [p.date for p in q1.previous] == ["2025-06-04", "2024-06-03"]  # the last two, newest first
    assert q1.previous[0].status == "missed" and set(q1.previous[0].values) == {""}
    idx = list(ctx.value_headers).index("ANEMNE:count")
    assert q1.previous[1].values[idx] == "14"
    assert q1.previous[1].values[list(ctx.value_headers).index("PRIMUL:frequency/25")] == "7"
    assert q1.previous[1].observers == "OBS1;OBS3"
    q2 = [s for s in ctx.stations if s.station == "Q002"][0]
    assert q2.previous[0].values[idx] == "0"  # a recorded zero stays a zero


def test_safety_caution_and_escaping(plan):
    html = render_field_sheet(_context(plan)).lower()
    for word in ("alone", "lone-working", "water", "ticks", "weather", "fragile habitat", "permission",
                 "local rules", "risk assessment"):
        assert word in html, word
    assert "&lt;gate&gt; &amp; stile" in html  # autoescape on
    assert "<gate>" not in html


def test_template_uses_only_context_fields():
    # style rule: templates are dumb; every field the template reads exists on the context
    env = template_environment()
    source = env.loader.get_source(env, "field_sheet.html")[0]
    ast = env.parse(source)
    assert meta.find_undeclared_variables(ast) == {"sheet"}
    allowed = {
        "sheet": {f for f in FieldSheetContext.__dataclass_fields__},
        "st": {f for f in SheetStation.__dataclass_fields__},
        "prev": {f for f in PreviousVisit.__dataclass_fields__},
    }
    used = {(n.node.name, n.attr) for n in ast.find_all(nodes.Getattr) if isinstance(n.node, nodes.Name)}
    for var, attr in used:
        if var in allowed:
            assert attr in allowed[var], f"{var}.{attr}"
    assert ("sheet", "headers") in used and ("st", "relocation") in used


def test_strict_undefined_catches_missing_fields(plan):
    env = template_environment()
    with pytest.raises(jinja2.UndefinedError):
        env.get_template("field_sheet.html").render(sheet={"title": "x"})


def test_blank_entry_frame_round_trips_through_csv(plan, tmp_path):
    ctx = _context(plan)
    df = field_sheet_frame(ctx)
    path = tmp_path / "sheet.csv"
    df.to_csv(path, index=False)
    back = pd.read_csv(path, dtype=str, keep_default_na=False)
    assert list(back.columns) == list(ctx.headers)
    assert list(back.station) == list(plan.team_days[0].stations)
    assert (back.protocol == "P2").all()


def test_team_day_gpx_valid_with_route(plan):
    td = plan.team_days[0]
    text = team_day_gpx(plan, td.team, td.date, STATIONS, crs=EPSG)
    doc = etree.fromstring(text.encode())
    SCHEMA.assertValid(doc)
    ns = {"g": "http://www.topografix.com/GPX/1/1"}
    names = [e.text for e in doc.findall("g:rte/g:rtept/g:name", ns)]
    assert names == [f"START {td.site}", *td.stations, f"START {td.site}"]
    assert len(doc.findall("g:wpt", ns)) == len(td.stations) + 1


def test_calendar_one_event_per_team_day(plan):
    text = team_day_calendar(plan, crs=EPSG, dtstamp=dt.datetime(2026, 5, 1, 8, tzinfo=dt.UTC),
                             programme="Heath quadrats")
    cal = icalendar.Calendar.from_ical(text)
    events = cal.walk("VEVENT")
    assert len(events) == len(plan.team_days)
    uids = [str(e["UID"]) for e in events]
    assert len(set(uids)) == len(uids)
    td = plan.team_days[0]
    assert events[0].decoded("DTSTART") == dt.datetime.combine(td.date, td.start_time)
    assert events[0].decoded("DTEND") == dt.datetime.combine(td.date, td.end_time)
    for prop in ("UID", "DTSTAMP", "DTSTART"):
        assert all(e.get(prop) is not None for e in events)


def test_calendar_in_the_programmes_time_zone(plan):
    """RFC 5545 3.6.5: zoned times carry a TZID with a VTIMEZONE; read back with the icalendar library the
    start is the planned local time in Europe/London (BST in June: UTC+1, from the IANA zone database)."""
    import zoneinfo

    text = team_day_calendar(plan, crs=EPSG, dtstamp=dt.datetime(2026, 5, 1, 8, tzinfo=dt.UTC),
                             programme="Heath quadrats", time_zone="Europe/London")
    cal = icalendar.Calendar.from_ical(text)
    zones = cal.walk("VTIMEZONE")
    assert [str(z["TZID"]) for z in zones] == ["Europe/London"]
    event = cal.walk("VEVENT")[0]
    assert event["DTSTART"].params["TZID"] == "Europe/London"
    td = plan.team_days[0]
    start = event.decoded("DTSTART")
    assert start.replace(tzinfo=None) == dt.datetime.combine(td.date, td.start_time)
    assert start.utcoffset() == dt.datetime.combine(td.date, td.start_time,
                                                    zoneinfo.ZoneInfo("Europe/London")).utcoffset()
    assert "TZID=Europe/London" in text and "BEGIN:VTIMEZONE" in text


# --- the printed sheet, for a wet hillside -------------------------------------------------------------------
def _named_context(plan):
    td = plan.team_days[0]
    visits, obs = _history()
    names = {t[0]: f"common name of {t[0].lower()}" for t in TARGETS}
    return field_sheet_context(plan, td.team, td.date, STATIONS, crs=EPSG, targets=TARGETS, covariates=COVARIATES,
                               visits=visits, observations=obs, programme="Heath quadrats", protocol="P2",
                               generated=dt.datetime(2026, 5, 1, tzinfo=dt.UTC), species_names=names,
                               site_name="Long Heath")


def _css_pt(css: str, selector: str) -> float:
    import re

    block = re.search(re.escape(selector) + r"\s*\{([^}]*)\}", css)[1]
    return float(re.search(r"font-size:\s*([\d.]+)pt", block)[1])


def test_sheet_text_is_large_and_the_notes_column_wide(plan):
    import re

    html = render_field_sheet(_named_context(plan))
    css = html[html.index("<style>"):html.index("</style>")]
    # 10-11 pt for everything written or read in the field (common practice for outdoor forms)
    assert _css_pt(css, "body") >= 11 and _css_pt(css, "tr.today td") >= 11
    assert _css_pt(css, "tr.previous td") >= 10 and _css_pt(css, "tr.info td") >= 10
    assert all(float(v) >= 8.5 for v in re.findall(r"font-size:\s*([\d.]+)pt", css))
    assert float(re.search(r"\.c-notes \{ width: ([\d.]+)mm", css)[1]) >= 30
    assert re.search(r"td\.date, th\.date \{ white-space: nowrap; \}", css)


def test_sheet_names_common_names_planned_date_protocol_and_crs(plan):
    ctx = _named_context(plan)
    html = render_field_sheet(ctx)
    doc = etree.HTML(html)
    labels = [th.xpath("string(.//span[@class='label'])") for th in doc.iter("th")]
    assert "common name of anemne" in labels
    today = doc.xpath('//tr[@class="today"]')
    assert all(tr[1].text == ctx.date and tr[5].text == "P2" for tr in today)   # planned date, protocol
    assert f"EPSG:{EPSG}" in html and "UTM zone" in html                        # the coordinate system
    assert "Long Heath" in html


def test_printed_sheet_every_page_placed_and_page_one_holds_stations(plan, tmp_path):
    """WeasyPrint lays the sheet out on A4; pypdf reads it back: every page carries site, team, date and
    "page n of m"; dates are not broken across lines; page 1 holds entry rows, not only notes."""
    from pypdf import PdfReader

    from monitor.schedule.fieldpack import write_sheet_pdf

    ctx = _named_context(plan)
    many = dataclasses.replace(ctx, stations=ctx.stations * 4)   # enough rows for several pages
    path = write_sheet_pdf(render_field_sheet(many), tmp_path / "sheet.pdf")
    reader = PdfReader(str(path))
    pages = len(reader.pages)
    assert pages >= 2
    for number, page in enumerate(reader.pages, start=1):
        text = page.extract_text()
        flat = " ".join(text.split())
        assert f"page {number} of {pages}" in flat
        assert f"Site {ctx.site} Long Heath" in flat and f"team {ctx.team}" in flat and ctx.date in flat
    first = reader.pages[0].extract_text()
    assert sum(first.count(s.station) > 0 for s in ctx.stations) >= 3
    assert first.count(ctx.date) >= 4                                  # the date whole on its lines
    assert "Safety first" in first                                     # the full notes at the end


# a realistic team-day: eight species (each measure kind) with common names, two earlier visits a station
EIGHT = [("ANEMNE", "count"), ("CALLUV", "cover"), ("PRIMUL", "frequency", 25), ("SUCCIS", "pin_hits", 10),
         ("GENTIA", "presence"), ("ORCHMA", "count"), ("THYMPO", "cover"), ("POLYVU", "frequency", 25)]
EIGHT_NAMES = {"ANEMNE": "wood windflower", "CALLUV": "moor heather", "PRIMUL": "pale cowslip",
               "SUCCIS": "devil's-bit scabious", "GENTIA": "field gentian", "ORCHMA": "early purple orchid",
               "THYMPO": "wild thyme", "POLYVU": "common milkwort"}


def _eight_species_sheet(plan, tmp_path):
    from monitor.schedule.fieldpack import write_sheet_pdf

    td = plan.team_days[0]
    visits, obs = [], []
    for station in td.stations:
        for year in (2024, 2025):
            day = dt.date(year, 6, 3)
            visits.append({"station": station, "date": day, "observers": ("OBS01", "OBS02"), "status": "done"})
            for species, measure, *n in EIGHT:
                obs.append({"station": station, "date": day, "species": species, "measure": measure,
                            "value": 7.0 if measure != "presence" else 1.0, "n": n[0] if n else None})
    ctx = field_sheet_context(plan, td.team, td.date, STATIONS, crs=EPSG, targets=EIGHT, covariates=COVARIATES,
                              visits=pd.DataFrame(visits), observations=pd.DataFrame(obs),
                              programme="Heath quadrats", protocol="P2", species_names=EIGHT_NAMES,
                              generated=dt.datetime(2026, 5, 1, tzinfo=dt.UTC), site_name="Long Heath")
    ctx = dataclasses.replace(ctx, stations=ctx.stations * 2)   # a day of 12 stations
    # rendered and printed as the field pack does (services.schedule: render_field_sheet, write_sheet_pdf)
    return ctx, write_sheet_pdf(render_field_sheet(ctx), tmp_path / "field_sheet.pdf")


def test_printed_sheet_page_one_gives_its_room_to_stations(plan, tmp_path):
    """With eight species, page 1 holds five stations' blocks (three before the header was made compact);
    the full safety notes stay on the sheet, after the stations, and page 1 points to them."""
    from pypdf import PdfReader

    ctx, path = _eight_species_sheet(plan, tmp_path)
    pages = [" ".join(page.extract_text().split()) for page in PdfReader(str(path)).pages]
    per_page = [len(re.findall(r"\b\d+\. Q\d{3} · arrive", text)) for text in pages]
    assert sum(per_page) == len(ctx.stations)
    assert per_page[0] >= 5, per_page
    assert "Safety first" in pages[0] and "Safety in the field" in pages[-1]
    assert all(caution.split(":")[0][:30] in " ".join(pages) for caution in ctx.cautions)


def test_printed_sheet_species_codes_never_break(plan, tmp_path):
    """Every species code is read back whole from the header of every page (no line break inside a code),
    and the common name is there too; in the HTML the code is its own unbreakable element. Observer codes
    of earlier visits break, if at all, only after their ';'."""
    from pypdf import PdfReader

    ctx, path = _eight_species_sheet(plan, tmp_path)
    for page in PdfReader(str(path)).pages:
        words = page.extract_text().split()
        for species, *_ in EIGHT:
            assert species in words, (species, words[:80])
        observers = [word for word in words if "OBS0" in word]   # earlier visits (the team is OBS1, OBS2)
        assert observers and all(re.fullmatch(r"(OBS0[12];?)+", word) for word in observers), observers
    flat = " ".join(PdfReader(str(path)).pages[0].extract_text().split())
    assert "wild thyme" in flat and "moor heather" in flat
    doc = etree.HTML(render_field_sheet(ctx))
    codes = [span.text for span in doc.xpath('//th/span[@class="code"]')]
    assert codes == [species for species, *_ in EIGHT] + ["cov"]
    html = render_field_sheet(ctx)
    css = html[html.index("<style>"):html.index("</style>")]
    assert re.search(r"th\.c-value \.code \{[^}]*white-space: nowrap", css)
