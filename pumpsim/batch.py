"""Batches of independent simulations, each distinct setup run once.

Sizing and route comparison are made of *searches*: generators that yield a
list of setups they want simulated, receive the list of
:class:`~pumpsim.outcome.Outcome` back, and finally return their answer.
:meth:`Batcher.drive` steps several searches in lockstep, so that the
simulations they ask for at the same step run in parallel. What a search asks
next depends only on the outcomes it received, never on the executor, which
keeps every answer identical whichever executor ran it.
"""

from .executors import SerialExecutor, run_ordered
from .outcome import evaluate
from .setup_file import setup_to_toml


class Batcher:
    """Run setups through an executor, remembering every outcome.

    Parameters
    ----------
    executor : Executor, optional
        Serial in this process by default.
    progress : Progress, optional
        Advanced once per simulation; its expected total grows as needed.
    """

    def __init__(self, executor=None, progress=None):
        self.executor = executor or SerialExecutor()
        self.progress = progress
        self.cache = {}
        self.simulations = 0
        self.unconverged = 0  # simulations whose error estimate missed the tolerance

    def run(self, setups) -> list:
        """Outcomes of ``setups`` in order; a setup seen before is not re-run."""
        keys = [setup_to_toml(s) for s in setups]
        todo = {}
        for key, s in zip(keys, setups):
            if key not in self.cache:
                todo.setdefault(key, s)
        if todo and self.progress is not None:
            self.progress.remaining_at_least(len(todo))
        outcomes = run_ordered(self.executor, evaluate, todo.values(), self.progress)
        self.cache.update(zip(todo, outcomes))
        self.simulations += len(todo)
        self.unconverged += sum(not o.converged for o in outcomes)
        return [self.cache[k] for k in keys]

    def drive(self, searches) -> list:
        """Run search generators to completion in lockstep; their return values."""
        gens = list(searches)
        answers = [None] * len(gens)
        asks = {}
        for i, gen in enumerate(gens):
            self._step(i, gen, None, asks, answers)
        while asks:
            order = list(asks)
            outcomes = self.run([s for i in order for s in asks[i]])
            replies, pos = {}, 0
            for i in order:
                replies[i] = outcomes[pos:pos + len(asks[i])]
                pos += len(asks[i])
            asks = {}
            for i in order:
                self._step(i, gens[i], replies[i], asks, answers)
        return answers

    @staticmethod
    def _step(i, gen, reply, asks, answers):
        try:
            asks[i] = gen.send(reply)
        except StopIteration as stop:
            answers[i] = stop.value


def ask(setups):
    """Inside a search: ``outcomes = yield from ask(setups)``."""
    outcomes = yield list(setups)
    return outcomes
