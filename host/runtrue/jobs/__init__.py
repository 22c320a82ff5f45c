"""Jobs: machines, the balancing workflow, the SQLite job store, reports and exports.

Conventions (every screen and report states them): phase is a lag in degrees after the
reference mark (0-360); weight angles are measured from the reference mark **against** the
direction of rotation (a weight is ``mass_g·radius_mm·e^{+jθ}`` g·mm); ``Machine.rotation``
(``"cw"``/``"ccw"``) is the direction of rotation **seen from the drive end**; correction planes
and pickups are numbered from 1 wherever a user sees them and in :class:`Weight`.

Public API (``from runtrue.jobs import ...``), exact signatures:

Data (``model``; cheap to import, no numpy)
    Machine(name, rotor_mass_kg, speed_rpm, planes: list[PlaneSpec], rotation="cw", grade="G6.3",
            pickups=[Pickup("1")], stock: list[StockPiece]=[], strip: StripSpec | None=None,
            influence: StoredInfluence | None=None, notes="", id=None)
        .n_planes, .n_pickups, .angle_direction_words() -> str, .to_dict(), Machine.from_dict(d, id=None)
    PlaneSpec(radius_mm, name="", count=None, first_angle_deg=0.0, angles_deg=None, continuous=False,
              excluded: list[int]=[] (1-based position numbers), max_pieces_per_position=None,
              max_mass_per_position_g=None)       # no count/angles given -> continuous
        .position_angles_deg() -> list[float] | None, .describe() -> str
    StockPiece(mass_g, count);  StripSpec(grams_per_mm, min_mm=5.0, step_mm=1.0)
    Pickup(label, angle_deg=0.0)
    StoredInfluence(coefficients: list[list[complex]] ([pickup][plane], g per g·mm), speed_rpm,
                    measured_at="", job_id=None)
    Weight(plane, mass_g, angle_deg, radius_mm, label="", pieces: tuple[float, ...]=())   .unbalance_gmm -> complex
        (labels starting "trial" mark trial weights; ``pieces`` are the stock pieces it is made of,
        which are then not available for later steps)
    RunReading(speed_rpm, channels: tuple[ChannelValue, ...], speed_sd_rpm=0.0, n_revs=0, source="meter")
        RunReading.from_reading(runtrue.readings.Reading) ; RunReading.manual(amps, phases_deg, speed_rpm, spreads=None)
            (phases_deg=None: amplitudes only, source AMPLITUDE_ONLY_SOURCE) ; .has_phase ; .amplitudes_only()
    ChannelValue(mean: complex, spread_g=0.0, confidence_g=0.0, h2=None, rms_g=None)  .amp_g, .phase_deg
    RunRecord(job_id, seq, kind, taken_at, reading: RunReading, weights: tuple[Weight, ...], note="", id=None)
    ANGLE_CONVENTION: str (the sentence to show)

Store (``store``)
    JobStore(path=None)   # default $RUNTRUE_DATA_DIR/runtrue.sqlite or platformdirs user data dir; WAL;
                          # every write committed before the call returns; context manager; .close()
        save_machine(machine) -> int;  get_machine(id | name) -> Machine | None;  list_machines() -> list[Machine]
        store_influence(machine_id, StoredInfluence)
        new_job(machine, options=None) -> int;  get_job(job_id) -> JobRecord | None
        add_run(job_id, kind, reading: RunReading, weights, note="", taken_at=None) -> RunRecord
        runs(job_id) -> list[RunRecord];  add_event(job_id, kind, data) ; events(job_id) -> list[Event]
        finish_job(job_id, status, result);  save_result(job_id, result)
        list_jobs(machine_id=None, status=None) -> list[JobSummary];  unfinished_jobs() -> list[JobSummary]
        machine_history(machine_id) -> list[JobSummary];  trend(machine_id) -> list[TrendPoint]
    JobSummary(id, machine_id, machine_name, status, started_at, finished_at, n_runs, passed)
    TrendPoint(job_id, date, initial_amp_g, final_amp_g, residual_unbalance_gmm, permissible_unbalance_gmm,
               passed, speed_rpm)
    default_db_path() -> Path

The job (``job``: the state machine; ``method``, ``method_influence``, ``method_four_run``: its
balancing methods; ``results``: the records it fills; ``wording``: what it says; ``limits``: the
force and speed rules; ``weights``: weights on the rotor; ``engine``: the converters to the
balancing engine's types; ``fitting``: computed weights to placements)
    A job is one small state machine (steps reference -> trial -> correction -> trim -> done; every
    run and decision recorded, replayed by ``resume``) that calls its balancing METHOD for all that
    is method-specific: ``InfluenceMethod`` (reference mark, influence coefficients, one or more
    planes) or ``FourRunMethod`` (amplitudes only, the four-run method, one plane).
    BalanceJob.start(store, machine, *, trial_removed=True, use_stored_influence=None, max_trim_runs=5,
                     amplitude_only=False)
        amplitude_only=True: the four-run method without phase (an ``AmplitudeOnlyJob``: a BalanceJob
        whose method is ``FourRunMethod``); one plane only (ValueError otherwise); readings' phase
        ignored; max_trim_runs limits the extra four-run cycles; BalanceJob.resume returns one for such a job.
    BalanceJob.resume(store, job_id)
        .job_id, .machine, .runs: list[RunRecord], .state: JobState, .step -> str, .influence, .method
        .instructions() -> list[str]   (what to do now; convention and cautions included)
        .cautions() -> list[str]
        .planned_weights() -> list[Weight]   (all weights that should be on for the next run)
        .suggested_trial() -> Weight | None
        .set_trial(mass_g, angle_deg, radius_mm=None) -> Weight
        .record_run(reading, weights_present=None, note="") -> RunRecord   (stored first, then advances)
        .accept_trial_anyway();  .stop(reason="stopped by the user")
        .result() -> JobResult
    JobState: step ("reference"|"trial"|"correction"|"trim"|"done"), plane, trial: Weight | None,
        last_trial_check: TrialCheck | None, plan: CorrectionPlan | None, trims_done, status
        ("open"|"passed"|"stopped"), message, warnings, method ("influence-coefficient"|"four-run");
        four-run only: cycle (from 1), trial_number (1-3 at a trial step), trial_angles_deg
    TrialCheck(plane, ok, ratio, message, suggested_scale, accepted_anyway)
    CorrectionPlan(kind, remove: list[Weight], planes: list[PlaneCorrection], predicted, method,
                   condition_number, warnings)   .weights_to_fit() -> list[Weight]
    PlaneCorrection(plane, correction: Weight, fit: list[Weight], sheet: list[SheetRow], residual_gmm,
                    residual_fraction, warnings)
    JobResult: job_id, machine_name, grade, standard ("ISO 21940-11"), speed_rpm,
        channels: list[ChannelResult(label, before, after)], residual_unbalance_gmm, permissible_unbalance_gmm,
        permissible_total_gmm, passed, runs, status, weights_on, influence, warnings, tolerance_rule,
        residual_uncertainty_gmm (95 %), method, influence_magnitude (four-run: |H|, g per g·mm; its
        influence is None); .to_dict() (adds "method")
        four-run: residual ≈ amplitude / |H| of the last check run, an estimate without phase.
        passed: every plane's residual PLUS its 95 % uncertainty within the permissible value.
    A refusal by the maths (BalancingError) never loses a run: the run stays recorded, the step stays,
    and ``state.message`` says why.
    CAUTIONS: tuple[str, ...];  STANDARD = "ISO 21940-11"   (grades: ``runtrue.balancing.grades.parse_grade``)

Reports and exports (``report``, ``export``)
    render_html(store, job_id) -> str        (self-contained, printable; inline SVG polar diagram)
    runs_csv(store, job_id) -> str;  job_json(store, job_id) -> dict

Simulator helpers (``demo_machine``, ``headless``; import the simulator lazily)
    machine_for_scenario(scenario_or_name, *, stock=True) -> Machine   (with an invented demo stock)
    VirtualRotorFitter(virtual_machine).fit(weights)   keeps the virtual rotor's weights equal to a list
    run_demo(scenario, seed=None, *, store=None, resume_job_id=None, revs=40, max_runs=12, on_run=None,
             machine=None, trial_removed=True, amplitude_only=False) -> DemoOutcome
        (.job, .to_json(): the demo's JSON, with "method"); amplitude_only feeds the job amplitudes only

Amplitude-only (``method_four_run``, ``wording``)
    three_trial_angles_deg(machine, plane, first_deg) -> list[float]
    AMPLITUDE_ONLY_CONVENTION: str (the sentence shown instead of ANGLE_CONVENTION)

Safety (``limits``)
    force_limit_n(machine), force_limit_basis(machine) -> str; ForceLimitExceeded, OverSpeed (ValueError)
"""

from __future__ import annotations

from runtrue.jobs.job import AmplitudeOnlyJob, BalanceJob
from runtrue.jobs.model import (
    ANGLE_CONVENTION,
    ChannelValue,
    Machine,
    Pickup,
    PlaneSpec,
    RunReading,
    RunRecord,
    StockPiece,
    StoredInfluence,
    StripSpec,
    Weight,
)
from runtrue.jobs.results import (
    STANDARD,
    ChannelResult,
    CorrectionPlan,
    JobResult,
    JobState,
    PlaneCorrection,
    TrialCheck,
)
from runtrue.jobs.store import JobRecord, JobStore, JobSummary, TrendPoint, default_db_path
from runtrue.jobs.wording import AMPLITUDE_ONLY_CONVENTION, CAUTIONS

__all__ = [
    "ANGLE_CONVENTION", "ChannelValue", "Machine", "Pickup", "PlaneSpec", "RunReading", "RunRecord",
    "StockPiece", "StoredInfluence", "StripSpec", "Weight",
    "JobRecord", "JobStore", "JobSummary", "TrendPoint", "default_db_path",
    "CAUTIONS", "STANDARD", "BalanceJob", "ChannelResult", "CorrectionPlan", "JobResult", "JobState",
    "PlaneCorrection", "TrialCheck", "AMPLITUDE_ONLY_CONVENTION", "AmplitudeOnlyJob",
]
