"""The ``evolution`` strategy: a genetic algorithm over whole placements.

Its crossover keeps the segments both parents agree on (D. Sholomon, O.
David, N. Netanyahu, *A genetic algorithm-based solver for very large jigsaw
puzzles*, CVPR 2013); the first population is grown greedily from different
seed tiles; the best children are polished by local search, and each new best
placement gets segment regrowth and window permutations.
"""

from __future__ import annotations

import logging
import math
import os
import time
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from .greedy import greedy_result
from .problem import Problem
from .regrowth import regrow
from .shapes import choose_shape
from .types import Pins, SearchResult, SearchSettings, past

__all__ = ["Evolution", "default_sizes", "evolution_search"]

log = logging.getLogger(__name__)

#: Most rounds of window permutations for the first best placement, and for
#: each new best placement during the generations.
WINDOW_ROUNDS = 50
NEW_BEST_WINDOW_ROUNDS = 1


#: Placements made between two checks for Ctrl-C and the time limit (a huge
#: --population must not make the search deaf to either).
CHUNK = 512


def default_sizes(n):
    """Population size and most generations for ``n`` tiles."""
    population = int(min(200, max(30, 8 * math.sqrt(n))))
    generations = int(min(300, 40 + n // 4))
    return population, generations


class Evolution:
    """One run of the evolutionary search on one grid shape.

    :meth:`run` makes the first population (:meth:`first_population`), then
    breeds generations (:meth:`next_generation`) until the best placement has
    not improved for ``settings.patience`` generations, the generation cap or
    the deadline is reached. Under a time limit a converged population is
    refreshed with new greedy placements (:meth:`refresh`) instead of
    stopping; without one, patience ends the search, so results do not
    depend on the machine.

    Every random choice is drawn from ``rng``; numba's generator is seeded
    per child from it, so children bred side by side on a thread pool (the
    kernels release the GIL) change no result.
    """

    def __init__(self, problem, choice, ranking, settings, rng, *, progress=None, deadline=None):
        self.problem = problem
        self.shape = choice.shape
        self.first = choice.grid
        self.shape_scores = choice.scores
        self.shape_evidence = choice.evidence()
        self.settings = settings
        self.rng = rng
        self.progress = progress
        self.deadline = deadline
        pop_default, gen_default = default_sizes(problem.n)
        self.size = settings.population or pop_default
        self.max_generations = settings.generations or gen_default
        self.elite = max(1, min(settings.elite, self.size - 1))
        # With pins every greedy run starts alike, so there are no other seeds.
        self.seeds = [int(t) for t in ranking[1:]] if not problem.pins else []
        self.generation = 0
        self.stale = 0
        self.best_history, self.mean_history = [], []
        self.population, self.parts = [], []
        self.costs = self.raws = None  # search objective; plain total seam cost (for the history)
        self.best_cost = np.inf
        self.start = None
        self.pool = None

    def _report(self, detail):
        if self.progress is not None:
            self.progress("search", self.generation, self.max_generations, detail)

    def _tick(self):
        self._report("regrowing segments")

    def run(self):
        """Search, and return the :class:`SearchResult`."""
        self.start = time.perf_counter()
        with ThreadPoolExecutor(max_workers=os.cpu_count() or 1) as self.pool:
            self.first_population()
            while self.generation < self.max_generations:
                if past(self.deadline):
                    log.info("time limit reached after %d generations", self.generation)
                    break
                if self.stale >= self.settings.patience and not self.refresh():
                    break
                self.next_generation()
        return self.result()

    def greedy_runs(self, count, share):
        """Up to ``count`` polished greedy placements from the next seeds, while
        less than ``share`` of the time limit has gone by."""
        out = []
        while self.seeds and len(out) < count and not past(self.deadline, share, self.start):
            self._report("growing placements")
            g = self.problem.greedy(self.seeds.pop(), self.shape, self.settings.candidates_free)
            self.problem.polish(g, self.settings.polish_passes)
            out.append(g)
        return out

    def first_population(self):
        """The best greedy placement, more greedy runs from other seeds, then
        random placements; the first gets segment regrowth and window
        permutations. Under a time limit the extra greedy runs stop at a
        quarter of it, so large tile sets still get generations."""
        problem, settings = self.problem, self.settings
        problem.polish(self.first, settings.polish_passes)
        population = [self.first]
        n_greedy = max(1, int(round(self.size * settings.greedy_share)))
        self.rng.shuffle(self.seeds)
        population += self.greedy_runs(n_greedy - 1, 0.25)
        if settings.regrow:
            population[0], _ = regrow(problem, self.first, settings, self.deadline, tick=self._tick, pool=self.pool)
        if not past(self.deadline, 0.5, self.start):
            problem.polish(population[0], settings.polish_passes, windows=WINDOW_ROUNDS)
        while len(population) < self.size:
            if len(population) % CHUNK == 0:
                self._report("filling the population")  # Ctrl-C takes effect here
                if past(self.deadline, 0.5, self.start):
                    log.info("time limit: population of %d instead of %d", len(population), self.size)
                    self.size = len(population)
                    self.elite = max(1, min(self.settings.elite, self.size - 1))
                    break
            population.append(problem.random(self.shape, self.rng))
        self.population = population
        self.costs, self.raws = problem.costs_of(population)
        self.parts = [problem.partners(g) for g in population]
        self.best_cost = self.costs.min()

    def refresh(self):
        """Replace all but the best placements with fresh greedy ones (only
        under a time limit). Returns False when there is nothing to add: the
        search then ends."""
        fresh = self.greedy_runs(max(1, self.size // 4), 1.0) if self.deadline is not None else []
        if not fresh:
            return False
        log.info("generation %d: population refreshed with %d greedy placements", self.generation, len(fresh))
        keep = np.argsort(self.costs, kind="stable")[: self.size - len(fresh)]
        self.population = [self.population[i] for i in keep] + fresh
        self.parts = [self.parts[i] for i in keep] + [self.problem.partners(g) for g in fresh]
        fresh_costs, fresh_raws = self.problem.costs_of(fresh)
        self.costs = np.concatenate([self.costs[keep], fresh_costs])
        self.raws = np.concatenate([self.raws[keep], fresh_raws])
        self.stale = 0
        return True

    def _breed(self, job):
        """One child from two tournament winners, grown from a seed tile."""
        (ia, ib), seed, rseed = job
        pa_t, pa_o = self.population[ia]
        at = np.flatnonzero(pa_t == seed)
        seed_o = int(pa_o.flat[at[0]]) if at.size else self.problem.orientations[0]
        child = self.problem.crossover(self.parts[ia], self.parts[ib], int(seed), seed_o, self.shape,
                                       self.settings.mutation, int(rseed))
        return child, self.problem.costs(child)

    def _polish_child(self, pop, c):
        self.problem.polish(pop[c], self.settings.polish_passes)
        return c, self.problem.costs(pop[c])

    def _improve_new_best(self, pop, costs, raws):
        """A new best placement gets segment regrowth and window permutations
        (dearer than swaps, so kept for it); the result takes the place of the
        worst child when it is cheaper still."""
        problem, settings, elite = self.problem, self.settings, self.elite
        top = int(np.argmin(costs))
        if not (costs[top] < self.best_cost and not past(self.deadline)):
            return
        g = pop[top].copy()
        if settings.regrow:
            g, _ = regrow(problem, g, settings, self.deadline, rounds=3, tick=self._tick, pool=self.pool)
        problem.polish(g, settings.polish_passes, windows=0 if past(self.deadline) else NEW_BEST_WINDOW_ROUNDS)
        c, r = problem.costs(g)
        if c < costs[top]:
            worst = elite + int(np.argmax(costs[elite:]))
            pop[worst], costs[worst], raws[worst] = g, c, r

    def next_generation(self):
        """Keep the elite, breed the rest by tournament selection (size 3),
        polish the most promising children (polishing all costs more than it
        gains) and improve a new best placement."""
        elite, size, rng = self.elite, self.size, self.rng
        order = np.argsort(self.costs, kind="stable")
        pop = [self.population[i] for i in order[:elite]]
        costs = [self.costs[i] for i in order[:elite]]
        raws = [self.raws[i] for i in order[:elite]]
        picks = rng.integers(0, size, size=(size - elite, 2, 3))
        winners = np.take_along_axis(picks, np.argmin(self.costs[picks], axis=2)[..., None], axis=2)[..., 0]
        starts = rng.integers(0, self.problem.n, size=size - elite)
        rseeds = rng.integers(0, 2**31 - 1, size=size - elite)
        # Children depend only on their parents and their own seed, so running
        # them on both cores changes no result.
        jobs = list(zip(winners, starts, rseeds))
        for k in range(0, len(jobs), CHUNK):
            if k:
                self._report("breeding")  # Ctrl-C takes effect between chunks
                if past(self.deadline):
                    return  # out of time: the generation is dropped, the population kept
            for child, (cost, raw) in self.pool.map(self._breed, jobs[k:k + CHUNK]):
                pop.append(child)
                costs.append(cost)
                raws.append(raw)
        children = np.argsort(costs[elite:], kind="stable")[: self.settings.polish] + elite
        for c, (cost, raw) in self.pool.map(lambda c: self._polish_child(pop, c), children):
            costs[c], raws[c] = cost, raw
        self._improve_new_best(pop, costs, raws)
        parts = [self.parts[i] for i in order[:elite]] + list(self.pool.map(self.problem.partners, pop[elite:]))
        self.population, self.parts, self.costs, self.raws = pop, parts, np.array(costs), np.array(raws)
        self.generation += 1
        gen_best = float(self.costs.min())
        self.best_history.append(float(self.raws[int(np.argmin(self.costs))]))
        self.mean_history.append(float(np.mean(self.raws)))
        if gen_best < self.best_cost - 1e-9 * max(1.0, abs(self.best_cost)):
            self.best_cost = gen_best
            self.stale = 0
        else:
            self.stale += 1
        self._report(f"best seam cost {self.best_history[-1]:,.0f}")

    def result(self):
        """The best placement and how much of the final elite agrees with each of its seams."""
        if self.progress is not None:  # stopped early: show the stage as done
            detail = f"best seam cost {self.best_history[-1]:,.0f}" if self.best_history else ""
            self.progress("search", self.generation, self.generation, detail)
        order = np.argsort(self.costs, kind="stable")
        best = self.population[order[0]]
        best_parts = self.parts[order[0]]
        top = [self.parts[i] for i in order[: max(self.elite, self.size // 10)]]
        agreement = np.mean([p == best_parts for p in top], axis=0)
        cost = float(self.raws[order[0]])
        log.info("evolution: %d generations, total seam cost %.2f", self.generation, cost)
        return SearchResult(
            tiles=best[0], orientations=best[1], cost=cost, best_history=tuple(self.best_history),
            mean_history=tuple(self.mean_history), generations=self.generation, strategy="evolution",
            shape_scores=self.shape_scores, agreement=agreement, shape_evidence=self.shape_evidence,
        )


def evolution_search(table, *, shape=None, orientations=None, settings=None, rng=None, progress=None, pins=None,
                     holes=False):
    """Greedy placements refined by evolution; see :func:`stitch.search.search_placement`."""
    settings = settings or SearchSettings()
    rng = np.random.default_rng(rng)
    deadline = settings.deadline()
    problem = Problem(table, table.orientations if orientations is None else orientations, pins or Pins())
    ranking = problem.seed_ranking()
    choice = choose_shape(problem, int(ranking[0]), settings=settings, shape=shape, holes=holes,
                          regrow_contenders=settings.regrow, deadline=deadline, progress=progress)
    if problem.n < 3:
        return greedy_result(problem, choice)
    return Evolution(problem, choice, ranking, settings, rng, progress=progress, deadline=deadline).run()
