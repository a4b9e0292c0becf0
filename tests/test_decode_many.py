"""``readchan.decode_many``: per-capture results in input order, each yielded as soon as it and
those before it are done, the same whatever executor runs them (none, a thread pool, a process
pool, a local Dask cluster when ``distributed`` is installed); a bad capture is a result with
its error, never an exception."""

from __future__ import annotations

from concurrent.futures import Executor, Future, ProcessPoolExecutor, ThreadPoolExecutor
from pathlib import Path

import pytest

import readchan
from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID, ParameterError
from readchan.report.render import read_dict

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
BATCH = [FIXTURES / "track2-scope.csv", FIXTURES / "missing.wav", FIXTURES / "track2-strobe.vcd",
         FIXTURES / "track1-comparator.wav"]


def _summary(results) -> list:
    return [(r.source, r.error, r.exit_code, [read_dict(x, unmask=True) for x in r.reads]) for r in results]


@pytest.fixture(scope="module")
def sequential():
    return _summary(readchan.decode_many(BATCH))


def test_results_come_in_input_order_with_the_bad_capture_as_an_error(sequential):
    assert [s for s, *_ in sequential] == [str(p) for p in BATCH]
    assert [code for _, _, code, _ in sequential] == [EXIT_VALID, EXIT_BAD_INPUT, EXIT_VALID, EXIT_VALID]
    assert "no such file" in sequential[1][1] and sequential[1][3] == []
    assert all(reads and reads[0]["valid"] for _, err, _, reads in sequential if err is None)


def test_a_thread_pool_gives_identical_results(sequential):
    with ThreadPoolExecutor(max_workers=2) as ex:
        assert _summary(readchan.decode_many(BATCH, executor=ex)) == sequential


def test_a_process_pool_gives_identical_results(sequential):
    with ProcessPoolExecutor(max_workers=2) as ex:
        assert _summary(readchan.decode_many(BATCH, executor=ex)) == sequential


def test_a_local_dask_cluster_gives_identical_results(sequential):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            got = _summary(readchan.decode_many(BATCH, executor=client.get_executor()))
    assert got == sequential


class _HeldBack(Executor):
    """Runs the first capture at once and holds every other back until released."""

    def __init__(self) -> None:
        self.held: list = []

    def submit(self, fn, *args, **kwargs):
        f: Future = Future()
        if not self.held and not getattr(self, "ran", False):
            self.ran = True
            f.set_result(fn(*args))
        else:
            self.held.append((f, fn, args))
        return f


def test_a_result_is_yielded_while_later_captures_are_still_running():
    ex = _HeldBack()
    it = readchan.decode_many(BATCH, executor=ex)
    first = next(it)
    assert first.source == str(BATCH[0]) and first.reads
    assert len(ex.held) == len(BATCH) - 1 and not any(f.done() for f, _, _ in ex.held)


def test_a_directory_is_every_capture_below_it(tmp_path):
    import shutil

    shutil.copy(FIXTURES / "track2-scope.csv", tmp_path / "a.csv")
    (tmp_path / "sub").mkdir()
    shutil.copy(FIXTURES / "track2-strobe.vcd", tmp_path / "sub" / "b.vcd")
    got = [(Path(r.source).name, r.exit_code) for r in readchan.decode_many(tmp_path)]
    assert got == [("a.csv", EXIT_VALID), ("b.vcd", EXIT_VALID)]


def test_settings_must_be_decode_settings():
    with pytest.raises(ParameterError, match="settings must be a DecodeSettings"):
        next(readchan.decode_many(BATCH, settings={"format": "auto"}))
