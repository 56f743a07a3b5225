"""The server-side dataset store: ids, memory bound, LRU eviction, thread safety."""

from __future__ import annotations

import contextlib
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
            with contextlib.suppress(DatasetGone):
                store.get(k)

    threads = [threading.Thread(target=work) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert store.total_bytes == 7 * len(store)
    assert store.total_bytes <= 10_000


# -- owners (app.session) ---------------------------------------------------------------------

A_SESSION = "a" * 43
B_SESSION = "b" * 43


def test_a_dataset_is_hidden_from_other_sessions_as_if_evicted():
    from app import session

    store = DatasetStore(1000)
    with session.bound(A_SESSION):
        mine = store.put(ds(10))
        assert store.get(mine).name == "d10" and mine in store
    assert store.owner(mine) == A_SESSION
    with session.bound(B_SESSION):
        assert mine not in store
        with pytest.raises(DatasetGone) as refused:
            store.get(mine)
    with pytest.raises(DatasetGone) as evicted:
        store.get("never-stored")
    assert str(refused.value) == str(evicted.value)  # the same "upload again" message
    assert store.get(mine).name == "d10"  # outside a request (tests, command line): no owner check


def test_datasets_stored_outside_a_request_are_shared():
    from app import session

    store = DatasetStore(1000)
    sample = store.put(ds(5))
    assert store.owner(sample) is None
    for sid in (A_SESSION, B_SESSION):
        with session.bound(sid):
            assert store.get(sample).name == "d5"
    explicit = store.put(ds(6), owner=B_SESSION)
    with session.bound(A_SESSION):
        assert explicit not in store


def test_eviction_forgets_the_owner():
    from app import session

    store = DatasetStore(100)
    with session.bound(A_SESSION):
        old = store.put(ds(60))
        store.put(ds(60))
    assert old not in store and store.owner(old) is None
    assert len(store._owners) == len(store) == 1


def test_session_ids_are_checked():
    from app import session

    assert session.current() is None
    assert session.is_session_id(session.new_session_id())
    assert session.new_session_id() != session.new_session_id()
    for bad in ("", "short", "a" * 31, "a" * 40 + ";x=1", None, 42, "a" * 129):
        assert not session.is_session_id(bad)
        with pytest.raises(ValueError), session.bound(bad):
            pass
    with session.bound(A_SESSION):
        assert session.current() == A_SESSION
    assert session.current() is None
