"""Timing of a stepped sweep: which step plays at a given sample and whether it has settled."""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

from rtanalyzer.generator.errors import GeneratorError


class SweepStep(NamedTuple):
    """One step of a sweep, in output sample indices (``end_sample`` excluded)."""

    start_sample: int
    end_sample: int
    frequency_hz: float
    settle_end_sample: int


@dataclass(frozen=True)
class SweepPlan:
    """Steps of ``dwell_frames`` samples, the first ``settle_frames`` of each unsettled, from ``start_sample``.

    After the last step the sweep starts again from the first; :meth:`schedule` lists one pass.

    Examples
    --------
    >>> plan = SweepPlan((100.0, 200.0), dwell_frames=10, settle_frames=3, start_sample=5)
    >>> plan.schedule()[1]
    SweepStep(start_sample=15, end_sample=25, frequency_hz=200.0, settle_end_sample=18)
    >>> plan.step_at(27)
    (0, 100.0, False)
    """

    frequencies_hz: tuple[float, ...]
    dwell_frames: int
    settle_frames: int
    start_sample: int

    @classmethod
    def for_sweep(cls, sweep, rate_hz: float, start_sample: int) -> SweepPlan:
        """Plan of a :class:`~rtanalyzer.generator.signals.Sweep` at ``rate_hz``, starting at ``start_sample``.

        ``dwell_s`` and ``settle_s`` are rounded to whole samples.
        """
        dwell = max(1, int(round(sweep.dwell_s * rate_hz)))
        settle = min(dwell - 1, int(round(sweep.settle_s * rate_hz)))
        return cls(tuple(sweep.frequencies_hz), dwell, settle, int(start_sample))

    def schedule(self) -> list[SweepStep]:
        """The steps of one pass, in order."""
        steps = []
        for i, f in enumerate(self.frequencies_hz):
            start = self.start_sample + i * self.dwell_frames
            steps.append(SweepStep(start, start + self.dwell_frames, f, start + self.settle_frames))
        return steps

    def step_at(self, sample_index: int) -> tuple[int, float, bool]:
        """(step index, frequency in Hz, settled) of output sample ``sample_index``.

        Raises
        ------
        GeneratorError
            If ``sample_index`` is before the sweep started.
        """
        index = int(sample_index)
        if index < self.start_sample:
            raise GeneratorError(
                f"sample_index = {sample_index!r} is before the sweep started; allowed: >= {self.start_sample}"
            )
        offset = (index - self.start_sample) % (self.dwell_frames * len(self.frequencies_hz))
        step, within = divmod(offset, self.dwell_frames)
        return step, self.frequencies_hz[step], within >= self.settle_frames

    def frames_to_boundary(self, sample_index: int) -> int:
        """Samples from ``sample_index`` (included) to the start of the next step."""
        return self.dwell_frames - (int(sample_index) - self.start_sample) % self.dwell_frames
