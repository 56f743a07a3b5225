"""The server-side dataset store: ids, memory bound, LRU eviction, thread safety."""

from __future__ import annotations

import threading

import pytest

from app.store import DatasetGone, DatasetStore, StoredDataset
from fitting import DegreescopeError


def ds(n):
    return StoredDataset(name=f"d{n}", table=None, nbytes=n)


def test_ids_are_unguessable_tokens():
    store = DatasetStore(1000)
    keys = {store.put(ds(1)) for _ in range(50)}
    assert len(keys) == 50
    assert all(len(k) >= 21 for k in keys)  # token_urlsafe(16) gives 22 characters


def test_least_recently_used_is_evicted_first_and_says_upload_again():
    store = DatasetStore(300)
    a, b = store.put(ds(100)), store.put(ds(100))
    store.get(a)  # a is now the most recently used
    c = store.put(ds(150))  # needs room: b goes
    assert a in store and c in store and b not in store
    assert store.total_bytes == 250
    with pytest.raises(DatasetGone, match="upload the file again"):
        store.get(b)
    assert store.evictions == 1


def test_a_dataset_larger_than_the_whole_store_is_refused():
    store = DatasetStore(100)
    with pytest.raises(DegreescopeError, match="more than the server keeps"):
        store.put(ds(101))


def test_unknown_and_missing_ids_raise_dataset_gone():
    store = DatasetStore(100)
    for key in (None, "", "nope", 12):
        with pytest.raises(DatasetGone):
            store.get(key)


def test_concurrent_puts_keep_the_byte_total_right():
    store = DatasetStore(10_000)

    def work():
        for _ in range(200):
            k = store.put(ds(7))
            try:
                store.get(k)
            except DatasetGone:
                pass

    threads = [threading.Thread(target=work) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert store.total_bytes == 7 * len(store)
    assert store.total_bytes <= 10_000
