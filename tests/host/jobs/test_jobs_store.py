"""The job store: what is written comes back exactly, names stay unique, jobs list and trend."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from runtrue.jobs import (
    JobStore,
    Machine,
    Pickup,
    PlaneSpec,
    RunReading,
    StockPiece,
    StoredInfluence,
    StripSpec,
    Weight,
    default_db_path,
)
from runtrue.jobs.model import ChannelValue


def roll_machine() -> Machine:
    return Machine(
        name="press roll 3",
        rotor_mass_kg=38.0,
        speed_rpm=980.0,
        rotation="ccw",
        grade="G6.3",
        planes=[
            PlaneSpec(95.0, name="drive end", count=6, first_angle_deg=0.0, excluded=[3], max_pieces_per_position=4),
            PlaneSpec(95.0, name="far end", angles_deg=[30.0, 90.0, 150.0, 210.0]),
        ],
        pickups=[Pickup("DE horizontal", 0.0), Pickup("NDE horizontal", 0.0)],
        stock=[StockPiece(5.0, 12), StockPiece(10.0, 8)],
        influence=StoredInfluence([[1e-4 + 2e-5j, 3e-5j], [-2e-5 + 0j, 9e-5 - 1e-5j]], 980.0, "2026-11-30T10:00:00Z", 7),
        notes="bolts M10",
    )


def test_machine_round_trip_keeps_every_field(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = roll_machine()
        mid = store.save_machine(m)
        back = store.get_machine(mid)
        assert back == m  # same id assigned to m by save_machine
        assert store.get_machine("press roll 3") == m
        assert back is not None and back.influence is not None
        assert back.influence.coefficients[0][0] == 1e-4 + 2e-5j


def test_strip_machine_round_trip(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = Machine("drum", 2.2, 3450, [PlaneSpec(48.0, continuous=True)], strip=StripSpec(0.12, 5, 1))
        store.save_machine(m)
        assert store.get_machine("drum") == m


def test_second_machine_with_the_same_name_is_refused_clearly(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        store.save_machine(roll_machine())
        with pytest.raises(ValueError, match="already saved"):
            store.save_machine(roll_machine())
        assert len(store.list_machines()) == 1


def test_run_round_trip_keeps_reading_weights_and_order(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = roll_machine()
        store.save_machine(m)
        job = store.new_job(m, {"trial_removed": True})
        r0 = RunReading(980.2, (ChannelValue(0.1 + 0.2j, 0.003, 0.007, 0.01j, 0.4), ChannelValue(-0.05 + 0j, 0.002, 0.005)),
                        speed_sd_rpm=1.5, n_revs=40)
        w = (Weight(1, 12.5, 60.0, 95.0, "trial weight, plane 1"),)
        a = store.add_run(job, "reference", r0, ())
        b = store.add_run(job, "trial", r0, w, note="first trial")
        runs = store.runs(job)
        assert [r.seq for r in runs] == [1, 2]
        assert runs[0] == a and runs[1] == b
        assert runs[1].reading == r0 and runs[1].weights == w
        with pytest.raises(ValueError, match="run kind"):
            store.add_run(job, "balancing", r0, ())
        assert len(store.runs(job)) == 2


def test_every_write_is_visible_to_another_connection_at_once(tmp_path: Path) -> None:
    path = tmp_path / "j.sqlite"
    with JobStore(path) as store:
        m = roll_machine()
        store.save_machine(m)
        job = store.new_job(m)
        store.add_run(job, "reference", RunReading.manual([0.3, 0.2], [40, 100], 980), ())
        other = sqlite3.connect(path)
        assert other.execute("SELECT COUNT(*) FROM runs").fetchone()[0] == 1
        assert other.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        other.close()


def test_unfinished_jobs_are_offered_until_finished(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = roll_machine()
        store.save_machine(m)
        j1 = store.new_job(m)
        j2 = store.new_job(m)
        assert [j.id for j in store.unfinished_jobs()] == [j2, j1]
        store.finish_job(j1, "passed", {"passed": True, "initial": [0.3], "final": [0.02]})
        assert [j.id for j in store.unfinished_jobs()] == [j2]
        with pytest.raises(ValueError):
            store.finish_job(j2, "won", None)


def test_machine_history_and_trend_oldest_first(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = roll_machine()
        mid = store.save_machine(m)
        other = Machine("other", 1, 1000, [PlaneSpec(50)])
        store.save_machine(other)
        j1 = store.new_job(m)
        store.finish_job(j1, "passed", {"passed": True, "initial": [0.5, 0.4], "final": [0.05, 0.03],
                                        "residual_unbalance_gmm": [400, 300], "permissible_unbalance_gmm": [1100, 1100]})
        store.new_job(other)
        j3 = store.new_job(m)
        store.finish_job(j3, "stopped", {"passed": False, "initial": [0.2, 0.1], "final": [0.15, 0.1]})
        assert [j.id for j in store.machine_history(mid)] == [j3, j1]
        trend = store.trend(mid)
        assert [t.job_id for t in trend] == [j1, j3]
        assert trend[0].final_amp_g == [0.05, 0.03] and trend[1].passed is False


def test_stored_influence_is_kept_with_the_machine(tmp_path: Path) -> None:
    with JobStore(tmp_path / "j.sqlite") as store:
        m = Machine("fan 2", 14, 1470, [PlaneSpec(160, count=8)])
        mid = store.save_machine(m)
        store.store_influence(mid, StoredInfluence([[2e-4j]], 1470.0, "t", 1))
        back = store.get_machine(mid)
        assert back is not None and back.influence is not None and back.influence.coefficients == [[2e-4j]]


def test_default_database_follows_runtrue_data_dir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("RUNTRUE_DATA_DIR", str(tmp_path / "data"))
    assert default_db_path() == tmp_path / "data" / "runtrue.sqlite"
    with JobStore() as store:
        assert store.path == tmp_path / "data" / "runtrue.sqlite"
    assert (tmp_path / "data" / "runtrue.sqlite").exists()


def test_bad_machine_descriptions_say_what_is_wrong() -> None:
    with pytest.raises(ValueError, match="rotor mass"):
        Machine("x", 0, 1000, [PlaneSpec(50)])
    with pytest.raises(ValueError, match="drive end"):
        Machine("x", 1, 1000, [PlaneSpec(50)], rotation="left")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="only one"):
        PlaneSpec(50, count=6, continuous=True)
    with pytest.raises(ValueError, match="one or two"):
        Machine("x", 1, 1000, [PlaneSpec(50)] * 3)


@pytest.mark.slow
def test_one_store_can_be_written_from_several_threads(tmp_path: Path) -> None:
    import threading

    with JobStore(tmp_path / "j.sqlite") as store:
        m = roll_machine()
        store.save_machine(m)
        job = store.new_job(m)
        reading = RunReading.manual([0.3, 0.2], [40, 100], 980)

        def worker() -> None:
            for _ in range(20):
                store.add_run(job, "trim", reading, ())

        threads = [threading.Thread(target=worker) for _ in range(4)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        assert [r.seq for r in store.runs(job)] == list(range(1, 81))
