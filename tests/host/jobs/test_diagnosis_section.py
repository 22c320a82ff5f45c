"""The report's diagnosis section: verdict, zones before and after balancing, the spectrum and
the speed plot, from a simulated fan and the resonant fan's coast-down."""

from __future__ import annotations

import json
import math
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from runtrue.device import open_meter
from runtrue.diagnosis.acquire import analyse_speed_run, record_speed_change, take_diagnosis
from runtrue.jobs.diagnosis_section import diagnosis_section_html

ROOT = Path(__file__).resolve().parents[3]


class _Check(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.ids: set[str] = set()

    def handle_starttag(self, tag: str, attrs: list) -> None:
        if tag not in ("line", "rect", "path", "circle", "br"):
            self.stack.append(tag)
        self.ids.update(v for k, v in attrs if k == "id")

    def handle_endtag(self, tag: str) -> None:
        if tag in ("line", "rect", "path", "circle"):
            return
        assert self.stack and self.stack[-1] == tag, (tag, self.stack[-3:])
        self.stack.pop()


@pytest.mark.slow
def test_section_shows_spectrum_zone_before_and_after_and_the_speed_plot() -> None:
    with open_meter("sim:fan", seed=5) as c:
        c.identify()
        before = take_diagnosis(c, revs=20)
        m = c.transport.machine
        u = m.unbalance_gmm()[0]
        r = m.scenario.planes[0].radius_mm
        m.add_weight(0, 0.95 * abs(u) / r, math.degrees(np.angle(-u)), r)
        c.discard_revolutions()
        after = take_diagnosis(c, revs=20)
    with open_meter(f"sim:{ROOT / 'examples' / 'scenarios' / 'resonant_fan.toml'}", seed=5) as c:
        c.identify()
        c.set_channels(1)
        run = record_speed_change(c, from_rpm=1900, to_rpm=1000, rate_rpm_per_s=200)
    speed = analyse_speed_run(run, 1480)
    # stored as JSON with the job and rendered again: the same section
    html_obj = diagnosis_section_html(before, after, speed)
    html_json = diagnosis_section_html(json.loads(json.dumps(before.to_dict(spectrum=True))),
                                       json.loads(json.dumps(after.to_dict(spectrum=True))),
                                       json.loads(json.dumps(speed.to_dict())))
    assert html_obj == html_json
    p = _Check()
    p.feed(html_obj)
    assert p.stack == []
    assert {"diagnosis", "diagnosis-verdict", "severity-table", "spectrum", "speed-plot"} <= p.ids
    zb, za = before.channels[0].severity.zone, after.channels[0].severity.zone
    row = re.search(r'id="severity-table">.*?</table>', html_obj, re.S).group(0)
    assert f"zone {zb}" in row and f"zone {za}" in row and zb != za
    assert "Hann window" in html_obj and ">1x<" in html_obj and ">2x<" in html_obj
    assert html_obj.count("<svg") == 2
    assert "resonance 16" in html_obj and "10 % above the balancing speed" in html_obj


def test_section_without_a_diagnosis_says_so() -> None:
    html = diagnosis_section_html(None)
    assert "No diagnosis was taken" in html and html.startswith('<section id="diagnosis">')


@pytest.mark.slow
def test_a_job_keeps_its_diagnoses_and_its_report_shows_zones_before_and_after_and_the_spectrum() -> None:
    """The diagnoses are kept as job events (JSON with the spectrum); the report takes the first
    as "before" and the last as "after", right after the Machine table."""
    from runtrue.jobs import BalanceJob, JobStore
    from runtrue.jobs.demo_machine import machine_for_scenario
    from runtrue.jobs.report import render_html
    from runtrue.tui.session import Session

    with open_meter("sim:fan", seed=7) as c:
        c.identify()
        before = take_diagnosis(c, revs=20)
        m = c.transport.machine
        u = m.unbalance_gmm()[0]
        r = m.scenario.planes[0].radius_mm
        m.add_weight(0, 0.95 * abs(u) / r, math.degrees(np.angle(-u)), r)
        c.discard_revolutions()
        after = take_diagnosis(c, revs=20)
    store = JobStore(":memory:")
    session = Session()
    session._store = store
    session.diagnoses.append(before)               # taken before the job started
    assert session.record_diagnoses() == 0         # no job open: nothing to keep it with yet
    session.job = BalanceJob.start(store, machine_for_scenario("fan"))
    assert session.record_diagnoses() == 1
    session.diagnoses.append(after)
    assert session.record_diagnoses() == 1         # only the new one
    assert session.record_diagnoses() == 0
    kinds = [e.kind for e in store.events(session.job.job_id)]
    assert kinds.count("diagnosis") == 2
    page = render_html(store, session.job.job_id)
    ids = set(re.findall(r'id="([^"]+)"', page))
    assert {"diagnosis", "severity-table", "spectrum"} <= ids
    assert page.index('id="machine"') < page.index('id="diagnosis"') < page.index('id="before-after"')
    table = re.search(r'<table id="severity-table">.*?</table>', page, re.S).group(0)
    zones = re.findall(r"zone ([ABCD]):", table)
    assert len(zones) == 2                         # one pickup: a zone before and a zone after
    assert f"{before.channels[0].severity.velocity_rms_mm_s:.2f}" in table
    assert f"{after.channels[0].severity.velocity_rms_mm_s:.2f}" in table
    assert before.channels[0].severity.velocity_rms_mm_s > after.channels[0].severity.velocity_rms_mm_s
    assert "<svg" in page.split('id="spectrum"')[1]


def test_a_job_without_a_diagnosis_has_no_diagnosis_section() -> None:
    from runtrue.jobs import BalanceJob, JobStore
    from runtrue.jobs.demo_machine import machine_for_scenario
    from runtrue.jobs.report import render_html

    store = JobStore(":memory:")
    job = BalanceJob.start(store, machine_for_scenario("fan"))
    assert 'id="diagnosis"' not in render_html(store, job.job_id)
