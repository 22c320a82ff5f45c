"""The customer report and the exports: every required part is there and the numbers are the job's."""

from __future__ import annotations

import csv
import io
import json
import math
import re
from collections.abc import Iterator
from html.parser import HTMLParser

import pytest
from jobs_fakes import LinearRotor, polar

from runtrue.jobs import BalanceJob, JobStore, Machine, Pickup, PlaneSpec, StockPiece
from runtrue.jobs.export import CSV_COLUMNS, job_json, runs_csv
from runtrue.jobs.report import polar_svg, render_html

VOID = {"meta", "br", "hr", "img", "input", "link", "col", "area", "base", "wbr", "source", "path", "circle", "line"}


class Page(HTMLParser):
    """Collects ids, section texts, svgs and table rows, and checks that tags nest properly."""

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.ids: dict[str, str] = {}
        self.text: list[str] = []
        self.svg_count = 0
        self.errors: list[str] = []
        self.tables: list[list[list[str]]] = []
        self._cell: list[str] | None = None
        self.external: list[str] = []
        self.title = ""
        self._in_title = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if "id" in a and a["id"]:
            self.ids[a["id"]] = tag
        for key in ("src", "href"):
            if a.get(key) and not str(a[key]).startswith("#"):
                self.external.append(str(a[key]))
        if tag == "svg":
            self.svg_count += 1
        if tag == "title" and not self.stack[-1:] == ["svg"]:
            self._in_title = "head" in self.stack
        if tag == "table":
            self.tables.append([])
        if tag == "tr":
            self.tables[-1].append([])
        if tag in ("td", "th"):
            self._cell = []
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes <{self.stack[-1] if self.stack else None}>")
            return
        self.stack.pop()
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][-1].append("".join(self._cell).strip())
            self._cell = None
        if tag == "title":
            self._in_title = False

    def handle_data(self, data: str) -> None:
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)
        if self._in_title:
            self.title += data


@pytest.fixture(scope="module")
def finished_job() -> Iterator[tuple[JobStore, BalanceJob]]:
    store = JobStore(":memory:")
    m = Machine("press roll <3> & co", 38.0, 980.0,
                [PlaneSpec(95.0, count=6, max_pieces_per_position=4),
                 PlaneSpec(95.0, count=6, first_angle_deg=30.0, max_pieces_per_position=4)],
                rotation="ccw", pickups=[Pickup("drive end"), Pickup("far end")],
                stock=[StockPiece(2.0, 12), StockPiece(5.0, 12), StockPiece(10.0, 8)])
    store.save_machine(m)
    rotor = LinearRotor([[polar(1.1e-4, 20.0), polar(3.5e-5, 75.0)], [polar(2.8e-5, 300.0), polar(1.0e-4, 35.0)]],
                        [polar(3600.0, 40.0), polar(2800.0, 250.0)], 980.0, noise_g=0.001)
    job = BalanceJob.start(store, m)
    while job.step != "done":
        job.record_run(rotor.reading(job.planned_weights()))
    yield store, job
    store.close()


def test_report_has_every_part_a_customer_needs(finished_job: tuple[JobStore, BalanceJob]) -> None:
    store, job = finished_job
    page = Page()
    page.feed(render_html(store, job.job_id))
    page.close()
    assert page.errors == [] and page.stack == [], "tags nest and close"
    assert page.external == [], "self-contained: nothing fetched from elsewhere"
    assert "press roll <3> & co" in page.title  # escaped in the source, shown as typed
    for section in ("machine", "conventions", "before-after", "polar", "grade", "weights", "runs", "cautions", "verdict"):
        assert section in page.ids, section
    text = " ".join(page.text)
    assert "ISO 21940-11" in text and "G6.3" in text
    assert "lag in degrees of rotation after the reference mark" in text
    assert "against the direction of rotation" in text and "seen from the drive end" in text
    assert "lock it out" in text and "rated speed" in text
    assert "PASSED" in text
    assert page.svg_count == 2 + len({w.plane for w in job.result().weights_on}), (
        "one polar diagram per pickup and one position sketch per plane with weights")
    import xml.etree.ElementTree as ET

    for svg in re.findall(r"<svg.*?</svg>", render_html(store, job.job_id), re.S):
        root = ET.fromstring(svg)  # well-formed XML, as an SVG must be
        assert root.tag.endswith("svg")
        if "positions of plane" in svg:  # the sketch numbers every position of the plane
            plane = int(re.search(r"positions of plane (\d+)", svg).group(1))  # type: ignore[union-attr]
            n_positions = len(job.machine.planes[plane - 1].position_angles_deg() or [])
            numbers = [t.text for t in root.iter("{http://www.w3.org/2000/svg}text") if t.text and t.text.isdigit()]
            assert numbers == [str(n) for n in range(1, n_positions + 1)]
            continue
        labels = [t.text for t in root.iter("{http://www.w3.org/2000/svg}text")]
        assert [str(r.seq) for r in job.runs] == [x for x in labels if x and x.isdigit()]


def test_report_numbers_are_the_jobs(finished_job: tuple[JobStore, BalanceJob]) -> None:
    store, job = finished_job
    page = Page()
    page.feed(render_html(store, job.job_id))
    res = job.result()
    before_after = next(t for t in page.tables if t[0][:2] == ["Pickup", "Before (mm/s rms)"])
    for row, ch in zip(before_after[1:], res.channels):
        # velocity 1x rms at each run's measured speed: v = a / w / sqrt 2, a in m/s^2 (1 g = 9.80665 m/s^2)
        w_before = 2 * math.pi * job.runs[0].reading.speed_rpm / 60
        w_after = 2 * math.pi * job.runs[-1].reading.speed_rpm / 60
        assert float(row[1]) == pytest.approx(ch.before_amp_g * 9.80665 / w_before * 1000 / math.sqrt(2), rel=5e-3)
        assert float(row[3]) == pytest.approx(ch.after_amp_g * 9.80665 / w_after * 1000 / math.sqrt(2), rel=5e-3)
    grade = next(t for t in page.tables if t[0][0] == "Plane" and "Permissible" in t[0])

    def gmm(cell: str) -> float:
        value, unit = cell.split()
        return float(value) * (1000.0 if unit.startswith("kg") else 1.0)

    assert [gmm(r[3]) for r in grade[1:]] == pytest.approx(res.permissible_unbalance_gmm, rel=5e-3)
    assert [gmm(r[1]) for r in grade[1:]] == pytest.approx(res.residual_unbalance_gmm, rel=5e-3)
    assert all(r[5] == "pass" for r in grade[1:])
    weights = next(t for t in page.tables if t[0][:2] == ["Plane", "Position"])
    assert len(weights) - 1 == len(res.weights_on)
    for row, w in zip(weights[1:], res.weights_on):
        force = w.mass_g / 1000 * w.radius_mm / 1000 * (2 * math.pi * 980.0 / 60) ** 2  # F = m r w^2
        assert float(row[3].removesuffix(" g")) == pytest.approx(w.mass_g, rel=5e-3)
        assert float(row[6].removesuffix(" N")) == pytest.approx(force, abs=0.5)
    runs = next(t for t in page.tables if t[0][:2] == ["Run", "Kind"])
    assert [r[1] for r in runs[1:]] == [r.kind for r in job.runs]


def test_polar_diagram_puts_the_mark_at_the_top_and_lag_clockwise(finished_job: tuple[JobStore, BalanceJob]) -> None:
    store, job = finished_job
    from dataclasses import replace

    from runtrue.jobs.model import ChannelValue, RunReading

    at_90 = replace(job.runs[0], reading=RunReading(980.0, (ChannelValue(polar(1.0, 90.0)), ChannelValue(0.5 + 0j))))
    svg = polar_svg([at_90], 0, "test", size_px=300)
    m = re.search(r'<line x1="150.0" y1="150.0" x2="([\d.]+)" y2="([\d.]+)" stroke="#b23a3a"', svg)
    assert m is not None
    x2, y2 = float(m.group(1)), float(m.group(2))
    assert x2 > 200 and y2 == pytest.approx(150.0, abs=0.5), "90° lag is a quarter turn clockwise from the top"


def test_unfinished_job_report_says_not_checked() -> None:
    with JobStore(":memory:") as store:
        job = BalanceJob.start(store, Machine("fan", 14, 1470, [PlaneSpec(160, count=8)]))
        job.record_run(LinearRotor([[polar(2e-4, 63)]], [polar(2400, 117)], 1470).reading([]))
        page = Page()
        page.feed(render_html(store, job.job_id))
        assert "NOT CHECKED" in " ".join(page.text) and page.errors == []


def test_csv_has_one_row_per_run_and_pickup(finished_job: tuple[JobStore, BalanceJob]) -> None:
    store, job = finished_job
    rows = list(csv.DictReader(io.StringIO(runs_csv(store, job.job_id))))
    assert tuple(rows[0].keys()) == CSV_COLUMNS
    assert len(rows) == len(job.runs) * 2
    for run in job.runs:
        for i, ch in enumerate(run.reading.channels):
            row = next(r for r in rows if int(r["run"]) == run.seq and int(r["pickup"]) == i + 1)
            assert row["kind"] == run.kind
            assert float(row["amp_g"]) == pytest.approx(ch.amp_g, rel=1e-5)
            assert float(row["phase_deg"]) == pytest.approx(ch.phase_deg, abs=0.01)


def test_json_export_round_trips_and_states_conventions(finished_job: tuple[JobStore, BalanceJob]) -> None:
    store, job = finished_job
    d = json.loads(json.dumps(job_json(store, job.job_id)))
    assert "against the direction of rotation" in d["conventions"]["weight_angle"]
    assert [r["kind"] for r in d["runs"]] == [r.kind for r in job.runs]
    assert d["result"]["passed"] is True
    assert Machine.from_dict(d["machine"]).name == job.machine.name
    last = d["runs"][-1]
    assert [w["mass_g"] for w in last["weights"]] == [w.mass_g for w in job.runs[-1].weights]


@pytest.mark.slow
def test_report_states_the_front_end_correction_and_line_hum_of_simulated_readings(tmp_path) -> None:
    """A job on the simulated fan: the meter gives its front end, the host takes its lag out, and
    the report says so once under the run log (every run at the same speed)."""
    from runtrue.jobs.headless import run_demo

    store = JobStore(str(tmp_path / "jobs.sqlite"))
    outcome = run_demo("fan", 3, store=store, revs=20)
    html = render_html(store, outcome.job.job_id)
    page = Page()
    page.feed(html)
    assert "frontend" in page.ids
    assert re.search(r"front end corrected: lag 1\.\d\d \+-0\.\d\d deg, gain 1\.000", html)
    runs = store.runs(outcome.job.job_id)
    assert all(r.reading.frontend_note.startswith("front end corrected") for r in runs)
    store.close()
