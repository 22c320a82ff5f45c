"""The report comes from a template and says exactly what it said before: the reports of the
fixture jobs (written before the template existed) come out again tag for tag and word for
word; every value is escaped; the template ships with the package."""

from __future__ import annotations

import importlib.resources
import sqlite3
import time
from collections.abc import Iterator
from html.parser import HTMLParser
from pathlib import Path

import pytest

import runtrue.jobs.report as report
from runtrue.jobs import BalanceJob, JobStore, Machine, PlaneSpec
from runtrue.jobs.model import RunReading

try:
    import tomllib
except ImportError:  # Python 3.10: pytest brings tomli there
    import tomli as tomllib  # type: ignore[no-redef]

ROOT = Path(__file__).resolve().parents[3]
FIXTURES = ROOT / "tests" / "fixtures"
REPORTS = sorted((FIXTURES / "reports").glob("job_*.html"))
WRITTEN_AT = "2026-12-02T12:00:00Z"  # when the fixture reports were written (UTC)


class Tokens(HTMLParser):
    """The page as the browser reads it: tags with their attributes and text, entities decoded."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tokens: list[tuple[str, ...]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tokens.append(("start", tag, repr(attrs)))

    def handle_endtag(self, tag: str) -> None:
        self.tokens.append(("end", tag))

    def handle_data(self, data: str) -> None:
        self.tokens.append(("text", data))

    def handle_decl(self, decl: str) -> None:
        self.tokens.append(("decl", decl))


def tokens(page: str) -> list[tuple[str, ...]]:
    parser = Tokens()
    parser.feed(page)
    parser.close()
    return parser.tokens


@pytest.fixture(scope="module")
def fixture_store(tmp_path_factory: pytest.TempPathFactory) -> Iterator[JobStore]:
    path = tmp_path_factory.mktemp("reports") / "runtrue.sqlite"
    with sqlite3.connect(path) as db:
        db.executescript((FIXTURES / "store_v1.sql").read_text(encoding="utf-8"))
        db.execute("PRAGMA user_version=1")
    with JobStore(path) as store:
        yield store


@pytest.fixture
def utc(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Local time is UTC and the report is written when the fixtures were."""
    monkeypatch.setenv("TZ", "UTC")
    time.tzset()
    monkeypatch.setattr(report, "now_iso", lambda: WRITTEN_AT)
    yield
    monkeypatch.undo()
    time.tzset()


def test_there_are_reports_of_every_kind_of_job_to_compare() -> None:
    pages = [p.read_text(encoding="utf-8") for p in REPORTS]
    assert len(pages) >= 8
    assert any('id="diagnosis"' in p for p in pages) and any("four-run" in p for p in pages)
    assert any('id="details"' in p for p in pages) and any("NOT CHECKED" in p for p in pages)
    assert any('id="frontend"' in p for p in pages) and any("Press roll" in p for p in pages)


@pytest.mark.parametrize("saved", REPORTS, ids=lambda p: p.stem)
def test_the_report_says_what_it_said_before_the_template(saved: Path, fixture_store: JobStore, utc: None) -> None:
    before = saved.read_text(encoding="utf-8")
    job_id = int(saved.stem.removeprefix("job_"))
    now = report.render_html(fixture_store, job_id)
    assert tokens(now) == tokens(before)
    # byte for byte but for how an apostrophe or a quote is spelt (&#39; for &#x27;: the same character)
    assert now.replace("&#39;", "&#x27;").replace("&#34;", "&quot;") == before


def test_every_value_in_the_report_is_escaped(tmp_path: Path) -> None:
    with JobStore(tmp_path / "runtrue.sqlite") as store:
        m = Machine("<script>alert('x')</script> & fan", 20.0, 1470.0, [PlaneSpec(160.0, count=8)],
                    notes='guard "B" <removed>')
        store.save_machine(m)
        job = BalanceJob.start(store, m)
        job.record_run(RunReading.manual([0.41], [207.0], 1470.0))
        report.save_report_details(store, job.job_id, {"technician": "<b>Ann</b>"})
        page = report.render_html(store, job.job_id)
    assert "<script>" not in page and "<b>Ann" not in page
    assert "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; fan" in page
    assert "guard &#34;B&#34; &lt;removed&gt;" in page and "&lt;b&gt;Ann&lt;/b&gt;" in page
    assert "<svg" in page  # the drawings made in Python arrive as markup


def test_the_template_is_packaged_with_runtrue() -> None:
    template = importlib.resources.files("runtrue.jobs").joinpath("templates", "report.html.j2")
    assert template.is_file() and "autoescape" in template.read_text(encoding="utf-8")
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert "templates/*.j2" in project["tool"]["setuptools"]["package-data"]["runtrue.jobs"]
    assert any(d.startswith("jinja2") for d in project["project"]["dependencies"])
