"""Server-side dataset store: uploaded tables stay here, the browser holds only their ids.

* Ids are ``secrets.token_urlsafe(16)``: unguessable, so one user cannot name another's data.
* The store is bounded by the bytes of the arrays it holds (default 1 GiB). When a new
  dataset does not fit, the least recently used ones are evicted.
* A request for an evicted (or unknown) id raises :class:`DatasetGone`, whose message
  asks the user to upload the file again.
* Each dataset records the browser session that stored it (``app.session.current()``
  at ``put``). While a request of another session is being answered, ``get`` and ``in``
  treat it as unknown: the same :class:`DatasetGone` as an evicted dataset. A dataset
  stored outside a request (the start-up sample) has no owner and is shared; outside a
  request (tests, the command line) no owner check applies.
* All methods take one lock: the WSGI server answers requests from several threads.
"""

from __future__ import annotations

import hmac
import secrets
import threading
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any

from fitting import DegreescopeError

from . import session

__all__ = ["DatasetGone", "DatasetStore", "StoredDataset"]

DEFAULT_CACHE_BYTES = 1024**3
_FROM_REQUEST = object()
GONE_MESSAGE = (
    "This dataset is no longer held on the server (memory was needed for newer data, or the "
    "server restarted); please upload the file again."
)


class DatasetGone(DegreescopeError):
    """The dataset id is not (or no longer) held by the server."""


@dataclass
class StoredDataset:
    """One table as read from a file, plus what the page needs to describe it."""

    name: str
    table: Any  # fitting.Table (or the interim reader's table)
    nbytes: int
    meta: dict = field(default_factory=dict)


class DatasetStore:
    """Thread-safe, memory-bounded, least-recently-used store of datasets."""

    def __init__(self, max_bytes: int = DEFAULT_CACHE_BYTES):
        if int(max_bytes) <= 0:
            raise ValueError("max_bytes must be positive")
        self.max_bytes = int(max_bytes)
        self._items: OrderedDict[str, StoredDataset] = OrderedDict()
        self._owners: dict[str, str | None] = {}
        self._bytes = 0
        self._lock = threading.Lock()
        self.evictions = 0

    def put(self, dataset: StoredDataset, *, owner: str | None | object = _FROM_REQUEST) -> str:
        """Store ``dataset`` and return its new id, evicting the least recently used as needed.

        ``owner`` defaults to the session of the request being answered (None outside one: shared).
        """
        owner = session.current() if owner is _FROM_REQUEST else owner
        size = max(int(dataset.nbytes), 1)
        if size > self.max_bytes:
            raise DegreescopeError(
                f"This table needs {size / 2**20:.0f} MiB in memory, more than the server keeps for all datasets "
                f"({self.max_bytes / 2**20:.0f} MiB); use a smaller file or start the server with a larger cache."
            )
        key = secrets.token_urlsafe(16)
        with self._lock:
            while self._items and self._bytes + size > self.max_bytes:
                old_key, old = self._items.popitem(last=False)
                self._owners.pop(old_key, None)
                self._bytes -= max(int(old.nbytes), 1)
                self.evictions += 1
            self._items[key] = dataset
            self._owners[key] = owner
            self._bytes += size
        return key

    def get(self, key: str | None) -> StoredDataset:
        """The dataset for ``key``, marked as recently used; raise DatasetGone if it is not held."""
        with self._lock:
            if not self._visible(key):
                raise DatasetGone(GONE_MESSAGE)
            self._items.move_to_end(key)
            return self._items[key]

    def __contains__(self, key: object) -> bool:
        """Held, and visible to the session being answered (if any)."""
        with self._lock:
            return self._visible(key)

    def owner(self, key: str) -> str | None:
        """The session that stored ``key`` (None: shared, or not held)."""
        with self._lock:
            return self._owners.get(key)

    def visible_items(self) -> list[tuple[str, StoredDataset]]:
        """(id, dataset) of every dataset the session being answered may see, least recently used first."""
        with self._lock:
            return [(k, d) for k, d in self._items.items() if self._visible(k)]

    def _visible(self, key: object) -> bool:
        if not isinstance(key, str) or key not in self._items:
            return False
        owner, asking = self._owners.get(key), session.current()
        if owner is None or asking is None:
            return True
        return hmac.compare_digest(owner.encode(), asking.encode())

    def __len__(self) -> int:
        with self._lock:
            return len(self._items)

    @property
    def total_bytes(self) -> int:
        with self._lock:
            return self._bytes
