"""The dask engine of the streaming sweep: one task per Parquet row group or CSV byte range.

Each task reduces its piece of the source to per-label factors (``_stream._reduce_chunk``) on a
``dask.distributed`` worker; the client merges them as they complete (``Block.merge``, TSQR) and
``_stream._run_passes`` drives the scan and reduce passes exactly as for the numpy engine, so the
result equals the numpy engine's to rounding. Imported by ``sweep_source(engine="dask")`` only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import DegreescopeError, FitError
from ._stream import Progress, _merge_blocks, _Plan, _reduce_chunk, _run_passes, _scan_chunk, _Stats
from .intake import FileSource, NeedsText, csv_ranges, first_line, read_piece

#: bytes per CSV block handed to the dask workers
_DASK_CSV_BLOCK = 32 << 20
#: how long to wait for a remote dask scheduler
_CONNECT_TIMEOUT = "20s"


def _dask_client(scheduler):
    try:
        import distributed
    except ImportError:
        raise FitError('The dask engine needs dask and distributed; install them with pip install ".[dask]".') from None
    if scheduler is None:
        # Workers are threads of this process and talk to the scheduler in memory
        # (inproc://); the only sockets are the small HTTP status servers, which
        # distributed always starts: bind them to loopback on free ports, or they
        # would take 0.0.0.0 and port 8787.
        cluster = distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=False,
            dashboard_address="127.0.0.1:0",
            worker_dashboard_address="127.0.0.1:0",
        )
        client = distributed.Client(cluster, set_as_default=False)
        return client, [client, cluster]
    if isinstance(scheduler, distributed.Client):
        return scheduler, []
    if isinstance(scheduler, str):
        try:
            client = distributed.Client(scheduler, set_as_default=False, timeout=_CONNECT_TIMEOUT)
        except (OSError, TimeoutError) as exc:
            raise FitError(
                f"Cannot reach the dask scheduler at {scheduler} ({first_line(exc)}); check the address."
            ) from None
        return client, [client]
    raise FitError(
        f"The scheduler must be an address such as tcp://host:8786 or a distributed.Client, not {scheduler!r}."
    )


def _dask_scan_task(kind, path, part, x, y, names, as_text):
    try:
        xa, ya, invalid = read_piece(kind, path, part, x, y, names, as_text)
    except NeedsText:
        return "text"
    s = _Stats()
    _scan_chunk(xa, ya, invalid, s)
    return s


def _dask_reduce_task(kind, path, part, start, x, y, names, as_text, plan):
    xa, ya, invalid = read_piece(kind, path, part, x, y, names, as_text)
    blocks: dict = {}
    stats = _Stats()
    _reduce_chunk(xa, ya, int(start), invalid, plan, blocks, stats)
    return blocks, stats


def _dask_pieces(src: FileSource) -> list[tuple]:
    """(path, part, rows or None) per task: Parquet row groups, or CSV byte ranges."""
    if src.kind != "parquet":
        return [(src.paths[0], r, None) for r in csv_ranges(src, _DASK_CSV_BLOCK)]
    import pyarrow.parquet as pq

    pieces = []
    for p in src.paths:
        md = pq.ParquetFile(p).metadata
        pieces += [(p, g, md.row_group(g).num_rows) for g in range(md.num_row_groups)]
    return pieces


@dataclass
class _DaskPasses:
    client: object
    src: FileSource
    x: str
    y: str
    pieces: list
    progress: Progress | None

    def __post_init__(self):
        self.counts = [n for _, _, n in self.pieces]  # rows per piece, known after a scan

    def _submit(self, fn, *args):
        return self.client.submit(fn, *args, pure=False)

    def scan(self, as_text: bool) -> _Stats | None:
        args = (self.x, self.y, self.src.names, as_text)
        futs = [self._submit(_dask_scan_task, self.src.kind, p, part, *args) for p, part, _ in self.pieces]
        scans = self.client.gather(futs)
        if any(isinstance(s, str) for s in scans):
            return None
        scan = _Stats()
        for s in scans:
            scan.merge(s)
        self.counts = [s.rows_read for s in scans]
        return scan

    def reduce(self, plan: _Plan, as_text: bool, total):
        import distributed

        starts = np.concatenate([[0], np.cumsum(self.counts)[:-1]]).astype(np.int64)
        kind, x, y, names = self.src.kind, self.x, self.y, self.src.names
        futs = [
            self._submit(_dask_reduce_task, kind, p, part, int(s0), x, y, names, as_text, plan)
            for (p, part, _), s0 in zip(self.pieces, starts, strict=False)
        ]
        blocks: dict = {}
        stats = _Stats()
        for fut in distributed.as_completed(futs, loop=self.client.loop):
            b, s = fut.result()
            _merge_blocks(blocks, b)
            stats.merge(s)
            if self.progress is not None:
                self.progress(stats.rows_read, total)
        return blocks, stats, len(self.pieces)


def run_dask(src, x, y, ncols, labeller, scheduler, progress):
    client, to_close = _dask_client(scheduler)
    try:
        engine = _DaskPasses(client, src, x, y, _dask_pieces(src), progress)
        return _run_passes(engine, src, x, y, ncols, labeller)
    except DegreescopeError:
        raise
    except Exception as exc:  # a worker or scheduler failure: one sentence, with its first line
        raise FitError(
            f"The dask computation failed ({first_line(exc)}); check the cluster and the source path."
        ) from None
    finally:
        for obj in to_close:
            obj.close()
