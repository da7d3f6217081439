"""Stored counts in scheduled jobs (issue 19): a job file's [counts] section run by
``bitsift run``, its statements written by ``bitsift models``, ``drift --from-counts`` between
two windows and ``report --from-counts``.

The data are invented for these checks (tests/helpers.random_dataset plus a day column, and a
small greenhouse table of trays).
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from pathlib import Path
from typing import Any

import pytest

from bitsift.analysis.counts_report import report_counts
from bitsift.analysis.profile import rank_and_profile
from bitsift.jobs.counts_build import build_counts
from bitsift.jobs.counts_drift import drift_counts
from bitsift.jobs.job_run import run_job
from bitsift.jobs.jobfile import JobError, load_job
from bitsift.jobs.models import write_models
from bitsift.run.counts_rank import rank_counts
from bitsift.run.cuts import fetch_cuts
from bitsift.run.readout import read_ranking
from bitsift.run.result import Ranking
from bitsift.run.session import Session
from bitsift.spec.rankspec import RankOptions
from tests.helpers import ENGINES, assert_same_ranking, loaded, run_main
from tests.test_stored_counts import (
    DAYS,
    _day,
    _destination,
    _execute,
    _total,
    _tray_rows,
    _trays,
    dated_dataset,
    direct,
)

#: Every test here opens DuckDB files or servers several times: seconds each on this machine.
pytestmark = pytest.mark.slow


def _source_table(engine: str, where: Any) -> str:
    """The table as a job file names it (schema-qualified on the servers)."""
    return f"{where.schema}.t" if where.schema else "t"


def _counts_job(folder: Path, source: str, table: str, into: str, counts_table: str, *,
                extra: str = "", ranking: bool = True) -> Path:
    """A job with one ranking (history in a DuckDB file) and a [counts] section."""
    rankings = f'''
[results]
destination = "{folder / 'history.duckdb'}"

[[ranking]]
name = "all"
exclude = ["sown"]
''' if ranking else ""
    path = folder / "job.toml"
    path.write_text(f'''job = "greenhouse"
source = "{source}"

[defaults]
table = "{table}"
target = "y"
{rankings}
[counts]
partition = "sown"
into = "{into}"
counts_table = "{counts_table}"
{extra}''', encoding="utf-8")
    return path


@pytest.mark.parametrize("engine", ENGINES)
def test_a_job_keeps_counts_on_every_engine(engine: str, request: pytest.FixtureRequest,
                                            tmp_path: Path) -> None:
    data = dated_dataset()
    with loaded(engine, data, request, duckdb_file=True) as where:
        dest, table = _destination(engine, where, tmp_path)
        job = load_job(_counts_job(tmp_path, str(where.source), _source_table(engine, where),
                                   dest, table))
        first = run_job(job)
        assert first.counts is not None and first.rows_written > 0
        assert first.counts.partitions == [_day(i) for i in range(DAYS)]
        again = run_job(job)
        assert again.counts is not None
        assert (again.counts.partitions, again.counts.rows) == ([], 0)  # twice adds nothing
        window = rank_counts(dest, counts_table=table, since=_day(2), until=_day(6))
        assert isinstance(window, Ranking)
        cuts = {a.attribute: list(a.cuts or []) for a in window.attributes
                if a.kind == "numeric"}
        want = direct(where.source, where.table, cuts,
                      f"sown >= DATE '{_day(2)}' AND sown < DATE '{_day(6)}'")
        assert isinstance(want, Ranking)
        assert_same_ranking(window, want, f"{engine} job window")


def test_a_late_partition_is_recounted_by_the_job(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "counts.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40) + _tray_rows("2026-03-02", 30))
    path = tmp_path / "job.toml"
    text = f'''job = "trays"
source = "{source}"

[counts]
table = "trays"
target = "outcome"
partition = "day"
into = "{dest}"
'''
    path.write_text(text, encoding="utf-8")
    dry = run_main(capsys, "run", str(path), "--dry-run")
    assert dry.code == 0, dry.err
    assert "every partition of day (day) would be counted" in dry.out
    assert "nothing was counted or written" in dry.out and not dest.exists()
    ran = run_main(capsys, "run", str(path))
    assert ran.code == 0, ran.err
    assert "counts: counted 2 partition(s), 2026-03-01 to 2026-03-02" in ran.out
    assert "wrote" not in ran.out.replace("rows written", "")  # no history without rankings
    _trays(source, [("2026-03-02", "b", "Z1", 3.0, "thrived")] * 20)
    stale = run_main(capsys, "run", str(path), "--dry-run")
    assert "after 2026-03-02 would be added" in stale.out
    assert run_main(capsys, "run", str(path)).code == 0
    assert _total(dest) == [("2026-03-01", 40), ("2026-03-02", 30)]
    path.write_text(text + "recount_from = 2026-03-02\n", encoding="utf-8")
    late = run_main(capsys, "run", str(path))
    assert late.code == 0, late.err
    assert _total(dest) == [("2026-03-01", 40), ("2026-03-02", 50)]


def _job_problem(tmp_path: Path, capsys: pytest.CaptureFixture[str], body: str) -> str:
    source = tmp_path / "src.duckdb"
    if not source.exists():
        _trays(source, _tray_rows("2026-03-01", 10))
    path = tmp_path / "bad.toml"
    path.write_text(f'job = "bad"\nsource = "{source}"\n\n[counts]\ntable = "trays"\n'
                    f'target = "outcome"\n{body}', encoding="utf-8")
    outcome = run_main(capsys, "run", str(path))
    assert outcome.code == 1
    return outcome.err


def test_bad_counts_sections_are_reported_at_their_line(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    into = tmp_path / "c.duckdb"
    unknown = _job_problem(tmp_path, capsys, f'partition = "day"\ninto = "{into}"\n'
                           'partiton_grain = "day"\n')
    assert "bad.toml:9: unknown key 'partiton_grain' in [counts]" in unknown
    assert unknown.count("\n") == 2  # the summary, then one line: the key and its line
    grain = _job_problem(tmp_path, capsys, f'partition = "day"\ninto = "{into}"\n'
                         'grain = "year"\n')
    assert "bad.toml:9: counts: grain must be one of day, week, month, value" in grain
    nowhere = _job_problem(tmp_path, capsys, 'partition = "day"\n')
    assert "into is required" in nowhere
    no_column = _job_problem(tmp_path, capsys, f'partition = "sown"\ninto = "{into}"\n')
    assert "bad.toml:7: counts: " in no_column and "no column 'sown'" in no_column
    bins = _job_problem(tmp_path, capsys, f'partition = "day"\ninto = "{into}"\nbins = 1\n')
    assert "bad.toml:9: counts: bins" in bins
    recount = _job_problem(tmp_path, capsys, f'partition = "day"\ninto = "{into}"\n'
                           'recount_from = "March"\n')
    assert "bad.toml:9: counts: recount_from 'March'" in recount
    assert not into.exists()  # nothing written half-way


def _trays_job(folder: Path, source: Path, into: Path, *, ranking: bool) -> Path:
    path = folder / "trays.toml"
    rankings = f'''
[results]
destination = "{folder / 'history.duckdb'}"

[[ranking]]
name = "trays"
exclude = ["day"]
''' if ranking else ""
    path.write_text(f'''job = "trays nightly"
source = "{source}"

[defaults]
table = "trays"
target = "outcome"
{rankings}
[counts]
partition = "day"
into = "{into}"
''', encoding="utf-8")
    return path


def test_models_of_a_counts_job(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    source = tmp_path / "src.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40) + _tray_rows("2026-03-02", 30, shift=1))
    path = _trays_job(tmp_path, source, tmp_path / "c.duckdb", ranking=True)
    shown = run_main(capsys, "models", str(path), "--out", str(tmp_path / "m"), "-d", "postgres")
    assert shown.code == 0, shown.err
    assert "trays_nightly.counts.sql  (stored counts" in shown.out
    assert "trays_nightly__trays.sql  (ranking trays)" in shown.out
    first = (tmp_path / "m" / "trays_nightly.counts.sql").read_bytes()
    assert run_main(capsys, "models", str(path), "--out", str(tmp_path / "m"), "-d",
                    "postgres").code == 0
    assert (tmp_path / "m" / "trays_nightly.counts.sql").read_bytes() == first
    text = first.decode()
    assert text.startswith("-- bitsift") and "counts model: job trays nightly" in text
    assert text.count("CREATE TABLE IF NOT EXISTS") == 1 and text.count("INSERT INTO") == 1
    insert = run_main(capsys, "models", str(_trays_job(tmp_path, source, tmp_path / "c.duckdb",
                                                       ranking=False)),
                      "--out", str(tmp_path / "m2"), "--insert")
    assert insert.code == 1 and "no rankings" in insert.err


@pytest.mark.parametrize("engine", ENGINES)
def test_models_run_in_the_warehouse_like_the_client_path(
        engine: str, request: pytest.FixtureRequest, tmp_path: Path) -> None:
    with loaded(engine, dated_dataset(), request, duckdb_file=True) as where:
        table = f"{where.schema}.bitsift_counts" if where.schema else "bitsift_counts"
        client = str(tmp_path / "client.duckdb")
        job = load_job(_counts_job(tmp_path, str(where.source), _source_table(engine, where),
                                   client, table, ranking=False))
        # The client path keeps its counts in a DuckDB file (no schema there).
        client_job = load_job(_counts_job(tmp_path, str(where.source),
                                          _source_table(engine, where), client,
                                          "bitsift_counts", ranking=False))
        (model,) = write_models(job, tmp_path / "models")
        assert model.kind == "counts"
        text = model.path.read_text(encoding="utf-8")
        create, insert, ranking = [s for s in text.split(";\n\n") if s.strip()]
        body = [line for line in create.splitlines() if not line.startswith("--")]
        create = "\n".join(body)
        _execute(where, [create, insert, "SELECT 1 AS done"])
        _execute(where, [create, insert, "SELECT 1 AS done"])  # twice adds nothing
        records = _execute(where, [ranking.rstrip(";\n")])
        with Session.open(where.source, where.table) as session:
            spec = session.resolve(RankOptions(target="y", exclude=("sown",),
                                               where="sown IS NOT NULL"))
            cuts = fetch_cuts(session.engine, dataclasses.replace(spec, where=None))
            pasted = read_ranking(records, spec, cuts, dialect=engine)
        run_job(client_job)
        stored = rank_counts(client)
        assert isinstance(stored, Ranking)
        assert_same_ranking(pasted, stored, f"{engine} models")


# --- drift and report from counts ------------------------------------------------------------

def _planted(path: Path, changed: bool) -> None:
    """Four days of trays; with ``changed``, the zone decides the outcome on days 3 and 4."""
    rows = [row for day in ("2026-03-01", "2026-03-02") for row in _tray_rows(day, 60)]
    for day in ("2026-03-03", "2026-03-04"):
        later = _tray_rows(day, 60)
        if changed:
            later = [(d, zone, other, moisture, "failed" if zone == "a" else "thrived")
                     for d, zone, other, moisture, _ in later]
        rows += later
    _trays(path, rows)


@pytest.mark.parametrize("changed", [False, True])
def test_drift_between_windows_of_counts(changed: bool, tmp_path: Path,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "counts.duckdb"
    _planted(source, changed)
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest))
    shown = run_main(capsys, "drift", str(dest), "--from-counts", "--since", "2026-03-03",
                     "--until", "2026-03-05")
    assert shown.code == (3 if changed else 0), shown.err
    assert "day in [2026-03-03, 2026-03-05)" in shown.out
    assert "day in [2026-03-01, 2026-03-03)" in shown.out  # the window before, by default
    if changed:
        assert "zone" in shown.out and "information gain" in shown.out
        assert "DRIFT" in shown.out
    else:
        assert "no drift beyond the thresholds" in shown.out
    explicit = drift_counts(str(dest), since="2026-03-03", until="2026-03-05",
                            against_since="2026-03-01", against_until="2026-03-03")
    assert explicit.drifted is changed
    assert explicit.to_dict()["windows"]["new"]["rows"] > 0


def test_drift_from_counts_refuses_bad_windows(tmp_path: Path,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "counts.duckdb"
    _planted(source, False)
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest))
    base = ["drift", str(dest), "--from-counts"]
    backwards = run_main(capsys, *base, "--since", "2026-03-04", "--until", "2026-03-02")
    assert backwards.code == 1 and backwards.err.count("\n") == 1
    assert "--since 2026-03-04 is not before --until 2026-03-02" in backwards.err
    empty = run_main(capsys, *base, "--since", "2027-01-01", "--until", "2027-01-03")
    assert empty.code == 1 and empty.err.count("\n") == 1
    assert "no stored partitions" in empty.err and "2026-03-01 to 2026-03-04" in empty.err
    against = run_main(capsys, *base, "--since", "2026-03-03", "--until", "2026-03-05",
                       "--against-since", "2026-03-02", "--against-until", "2026-03-01")
    assert against.code == 1 and "--against-since 2026-03-02 is not before" in against.err
    open_ended = run_main(capsys, *base, "--since", "2026-03-03")
    assert open_ended.code == 1 and "--against-since" in open_ended.err
    stray = run_main(capsys, "drift", str(dest), "--since", "2026-03-03")
    assert stray.code == 2 and "--since needs --from-counts" in stray.err
    mixed = run_main(capsys, *base, "--old", "x")
    assert mixed.code == 2 and "--old chooses runs in the history" in mixed.err


def test_report_from_counts(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "counts.duckdb"
    _planted(source, True)
    _trays(source, [(None, "a", "Z0", 1.0, "thrived")] * 3)
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest))
    out = tmp_path / "report.html"
    shown = run_main(capsys, "report", str(dest), "--from-counts", "--since", "2026-03-02",
                     "--until", "2026-03-04", "-o", str(out), "-q")
    assert shown.code == 0, shown.err
    html = out.read_text(encoding="utf-8")
    assert "<html" in html and "zoné" in html and "2026-03-02" in html
    runs = report_counts(str(dest), since="2026-03-02", until="2026-03-04", max_values=2)
    stored = runs[0].profiles.attributes["zone"]
    direct_run = rank_and_profile(str(source), "outcome", "trays", exclude="day", max_values=2,
                                  where="day >= DATE '2026-03-02' AND day < DATE '2026-03-04'")
    want = direct_run.profiles.attributes["zone"]
    assert [(v.label, v.rows, v.counts, v.merged_values) for v in stored.values] == [
        (v.label, v.rows, v.counts, v.merged_values) for v in want.values]
    assert abs(stored.information_gain - want.information_gain) <= 1e-9
    assert runs[0].profiles.classes == direct_run.profiles.classes
    trend = report_counts(str(dest), by_partition=True, top=1)
    assert [r.segment for r in trend] == [f"day = '{d}'" for d in
                                          ("2026-03-01", "2026-03-02", "2026-03-03",
                                           "2026-03-04")]
    assert all(len(r.profiles.attributes) == 1 for r in trend)
    selected = run_main(capsys, "report", str(dest), "--from-counts", "-o", str(out),
                        "--select", "2")
    assert selected.code == 2 and "--select" in selected.err


def test_job_file_without_results_or_rankings(tmp_path: Path) -> None:
    source = tmp_path / "src.duckdb"
    _trays(source, _tray_rows("2026-03-01", 10))
    path = tmp_path / "nothing.toml"
    path.write_text(f'job = "x"\nsource = "{source}"\n', encoding="utf-8")
    with pytest.raises(JobError, match="or a \\[counts\\] section"):
        load_job(path)
    today = _dt.date(2026, 3, 1)
    path.write_text(f'job = "x"\nsource = "{source}"\n[counts]\ntable = "trays"\n'
                    f'target = "outcome"\npartition = "day"\ninto = "{tmp_path / "c.duckdb"}"\n'
                    f"recount_from = {today.isoformat()}\n", encoding="utf-8")
    job = load_job(path)
    assert job.destination is None and job.rankings == ()
    assert job.counts is not None and job.counts.recount_from == "2026-03-01"
