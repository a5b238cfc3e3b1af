"""``smooth_many``: batches within the limits, concurrent, retried slot by slot, each series answered once.

The bookkeeping (:class:`service.client.fan_out.FanOut`) is driven here by a
scripted service that fails batches and slots in the ways a real fleet does
(deadline, shutdown, overload, lost connections, a batch too large); the
client methods run against the real app in process.
"""

from __future__ import annotations

import asyncio
import random
import threading
from collections import Counter
from collections.abc import AsyncIterator
from typing import Any

import orjson
import pytest

from estimators.demo import cold_store
from service.client import (
    AsyncBandwiseClient,
    BandwiseError,
    BatchLimits,
    BatchResult,
    ConnectionFailed,
    RetryPolicy,
    SlotAnswer,
    SmoothResult,
    ValidationFailed,
    error_from_problem,
)
from service.client.fan_out import FanOut, run_tasks, run_threads
from service.contract.models import ProblemSlot

from .conftest import API_KEY, InProcessApp

DEMO = cold_store()
X, Y = DEMO.x[::25].tolist(), DEMO.y[::25].tolist()
QUICK_RETRY = RetryPolicy(attempts=5, backoff=0.001, max_backoff=0.01, total=10.0)


def problem(slug: str, status: int) -> dict[str, Any]:
    return {"type": f"/problems/{slug}", "title": "t", "status": status, "detail": f"{slug} for this series"}


@pytest.fixture(scope="module")
def one_result(app: InProcessApp) -> SmoothResult:
    with app.client(api_key=API_KEY) as bw:
        return bw.smooth(X, Y, bandwidth=2.0, curve={"points": 5})


class ScriptedService:
    """Answers batch bodies like a fleet under strain: some batches and slots fail, each at most ``failures`` times per series."""

    def __init__(self, result: SmoothResult, count: int, seed: int, max_series: int | None = None) -> None:
        self.result = result
        self.rng = random.Random(seed)
        self.failed: Counter[int] = Counter()
        self.sent: Counter[int] = Counter()
        self.max_series = max_series
        self.batch_sizes: list[int] = []
        self.lock = threading.Lock()
        self.count = count

    def answer(self, body: bytes) -> BatchResult:
        indices = [int(s["i"]) for s in orjson.loads(body)["series"]]
        with self.lock:
            self.batch_sizes.append(len(indices))
            if self.max_series is not None and len(indices) > self.max_series:
                raise error_from_problem({**problem("payload-too-large", 413)}, 413)
            roll = self.rng.random()
            if roll < 0.1 and all(self.failed[i] < 2 for i in indices):
                for i in indices:
                    self.failed[i] += 1
                raise ConnectionFailed("connection reset by a replica that died", title="Connection failed")
            if roll < 0.2 and all(self.failed[i] < 2 for i in indices):
                for i in indices:
                    self.failed[i] += 1
                raise error_from_problem(problem("deadline-exceeded", 503), 503)
            slots: list[SmoothResult | ProblemSlot] = []
            for i in indices:
                self.sent[i] += 1
                if i % 17 == 3:  # a series the service refuses every time
                    slots.append(ProblemSlot.model_validate({"problem": problem("validation-error", 422)}))
                elif self.failed[i] < 2 and self.rng.random() < 0.3:
                    self.failed[i] += 1
                    slug, status = self.rng.choice([("deadline-exceeded", 503), ("shutting-down", 503), ("overloaded", 503)])
                    slots.append(ProblemSlot.model_validate({"problem": problem(slug, status)}))
                else:
                    slots.append(self.result)
            return BatchResult.model_construct(results=slots)

    async def answer_async(self, body: bytes) -> BatchResult:
        await asyncio.sleep(0)
        return self.answer(body)


def plan_for(count: int, limits: BatchLimits, batch_series: int, points: list[int] | None = None) -> FanOut:
    bodies = [f'{{"i":{i}}}'.encode() for i in range(count)]
    return FanOut(bodies, points or [10] * count, limits, batch_series, QUICK_RETRY, random.Random(1))


def check_exactly_once(answers: list[SlotAnswer], count: int) -> dict[int, SlotAnswer]:
    seen = Counter(a.index for a in answers)
    assert set(seen) == set(range(count)), "every series answered"
    assert max(seen.values()) == 1, "no series answered twice"
    return {a.index: a for a in answers}


def test_batches_stay_within_every_limit() -> None:
    rng = random.Random(5)
    points = [rng.randint(1, 400) for _ in range(300)]
    limits = BatchLimits(max_series=40, max_points=2_000, max_body_bytes=300)
    plan = plan_for(300, limits, 1_000, points)
    handed: list[int] = []
    while not plan.done:
        batch = plan.next_batch(0.0)
        assert batch
        assert len(batch) <= limits.max_series
        assert len(batch) == 1 or sum(s.points for s in batch) <= limits.max_points
        assert len(batch) == 1 or len(FanOut.body(batch)) <= limits.max_body_bytes
        handed += [s.index for s in batch]
        plan.settle(batch, BatchResult.model_construct(results=[ProblemSlot.model_validate({"problem": problem("validation-error", 422)})] * len(batch)), 0.0)
    assert sorted(handed) == list(range(300))


def test_a_batch_refused_as_too_large_is_halved_without_losing_series(one_result: SmoothResult) -> None:
    service = ScriptedService(one_result, 50, seed=2, max_series=7)
    plan = plan_for(50, BatchLimits(), 50)
    answers = check_exactly_once(list(run_threads(plan, lambda body: _no_failures(service, body), 3)), 50)
    assert all(a.ok for a in answers.values())
    assert max(service.batch_sizes[-3:]) <= 7


def _no_failures(service: ScriptedService, body: bytes) -> BatchResult:
    count = len(orjson.loads(body)["series"])
    with service.lock:
        service.batch_sizes.append(count)
    if count > (service.max_series or count):
        raise error_from_problem(problem("payload-too-large", 413), 413)
    return BatchResult.model_construct(results=[service.result] * count)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_threads_answer_every_series_once_through_failures(one_result: SmoothResult, seed: int) -> None:
    count = 120
    service = ScriptedService(one_result, count, seed)
    answers = check_exactly_once(list(run_threads(plan_for(count, BatchLimits(), 9), service.answer, 4)), count)
    for i, answer in answers.items():
        if i % 17 == 3:
            assert answer.error is not None and answer.error.slug == "validation-error"
            assert answer.error.instance is not None and answer.error.instance.endswith(f"#series[{i}]")
        else:
            assert answer.ok, (i, answer.error)
    assert sum(service.failed.values()) > 0, "the script did fail some batches or slots"


def test_tasks_answer_every_series_once_through_failures(one_result: SmoothResult) -> None:
    count = 90
    service = ScriptedService(one_result, count, 4)

    async def main() -> list[SlotAnswer]:
        stream: AsyncIterator[SlotAnswer] = run_tasks(plan_for(count, BatchLimits(), 7), service.answer_async, 3)
        return [a async for a in stream]

    answers = check_exactly_once(asyncio.run(main()), count)
    assert all(a.ok for i, a in answers.items() if i % 17 != 3)


def test_series_that_keep_failing_are_given_back_with_their_last_error(one_result: SmoothResult) -> None:
    def always_shutting_down(body: bytes) -> BatchResult:
        raise error_from_problem(problem("shutting-down", 503), 503)

    answers = check_exactly_once(list(run_threads(plan_for(10, BatchLimits(), 4), always_shutting_down, 2)), 10)
    for answer in answers.values():
        assert isinstance(answer.error, BandwiseError) and answer.error.slug == "shutting-down"


# ---------------------------------------------------------------- the client methods, in process


def fleet(count: int) -> list[dict[str, Any]]:
    return [{"x": X, "y": [v + 0.1 * i for v in Y], "bandwidth": 2.0, "curve": {"points": 8}} for i in range(count)]


def test_smooth_many_gives_each_series_its_own_fit(app: InProcessApp) -> None:
    series = fleet(23)
    with app.client(api_key=API_KEY) as bw:
        answers = check_exactly_once(list(bw.smooth_many(series, connections=3, batch_series=4)), len(series))
        for i in (0, 11, 22):  # reference: the same series sent alone
            assert answers[i].result == bw.smooth(series[i]["x"], series[i]["y"], bandwidth=2.0, curve={"points": 8})


def test_async_smooth_many_gives_each_series_once(app: InProcessApp) -> None:
    series = fleet(17)

    async def work(bw: AsyncBandwiseClient) -> list[SlotAnswer]:
        return [a async for a in bw.smooth_many(series, connections=2, batch_series=5)]

    answers = check_exactly_once(app.run_async(work, api_key=API_KEY), len(series))
    assert all(a.ok for a in answers.values())


def test_smooth_many_checks_every_series_before_sending(app: InProcessApp) -> None:
    series = fleet(4)
    series[2] = {"x": X, "y": Y[:-1]}
    with app.client(api_key=API_KEY) as bw, pytest.raises(ValidationFailed) as info:
        bw.smooth_many(series)
    assert any(e.field.startswith("series[2]") for e in info.value.errors)
