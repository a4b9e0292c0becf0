"""The process-pool runner (readchan.evaluate.runner): every job's result, in the order of the
jobs, whatever the number of processes; progress reported from 0 to the total."""

from __future__ import annotations

import operator

import pytest

from readchan.errors import ParameterError
from readchan.evaluate.runner import run_jobs


@pytest.mark.parametrize("workers", [1, 2])
def test_results_come_back_in_the_order_of_the_jobs(workers):
    jobs = list(range(37, 0, -1))
    assert run_jobs(operator.mul, jobs, shared=(3,), workers=workers) == [3 * j for j in jobs]


def test_progress_starts_at_zero_and_ends_at_the_number_of_jobs():
    seen = []
    run_jobs(operator.neg, range(20), workers=2, progress=lambda done, total: seen.append((done, total)))
    assert seen[0] == (0, 20)
    assert seen[-1] == (20, 20)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)


def test_no_jobs_give_no_results():
    assert run_jobs(operator.neg, [], workers=2) == []


@pytest.mark.parametrize("workers", [0, -1, 1025, 2.5])
def test_an_absurd_number_of_workers_is_a_parameter_error(workers):
    with pytest.raises(ParameterError, match="workers must be between 1 and 1024"):
        run_jobs(operator.neg, [1], workers=workers)
