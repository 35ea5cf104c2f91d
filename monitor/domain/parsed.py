"""What ingest made of one file: :class:`ParsedFile`."""

from __future__ import annotations

from dataclasses import dataclass, field

from monitor.domain.batch import HistogramBatch
from monitor.domain.records import Histogram, Problem, Reading


class _BatchRecords:
    """``ParsedFile.histograms``: a list given or assigned, else the records of
    ``ParsedFile.batch``, made on first read (ingest stores from the batch and never
    needs them). Assigning a list drops the batch, so the two never disagree."""

    def __set_name__(self, owner: type, name: str) -> None:
        self.slot = "_" + name

    def __get__(self, obj: object, owner: type | None = None) -> list[Histogram] | tuple:
        if obj is None:
            return ()  # the dataclass default: no records given
        value = obj.__dict__.get(self.slot)
        if value is None:
            batch = obj.__dict__.get("batch")
            value = obj.__dict__[self.slot] = [] if batch is None else batch.histograms()
        return value

    def __set__(self, obj: object, value: list[Histogram] | tuple) -> None:
        if value == ():
            obj.__dict__[self.slot] = None  # not given: follow the batch
            return
        obj.__dict__[self.slot] = list(value)
        obj.__dict__["batch"] = None


@dataclass
class ParsedFile:
    """What ingest made of one file: clean records plus every problem found.

    A file with any problem is rejected whole; ``histograms``/``readings`` are then
    informative only. ``content_sha256`` is the hash of the raw bytes (duplicate check).
    ``batch`` holds the histograms as columns (see :class:`HistogramBatch`);
    ``histograms`` lists them as records, made from the batch when first read. Give
    one or the other.
    """

    name: str
    content_sha256: str
    histograms: list[Histogram] = _BatchRecords()  # noqa: RUF009 - a descriptor
    readings: list[Reading] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    batch: HistogramBatch | None = None

    def histogram_batch(self) -> HistogramBatch:
        """The histograms as columns: ``batch``, or one built from ``histograms``."""
        if self.batch is None:
            self.batch = HistogramBatch.from_histograms(self.histograms)
        return self.batch

    @property
    def ok(self) -> bool:
        return not self.problems
