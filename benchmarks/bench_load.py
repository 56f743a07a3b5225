"""Concurrent sessions against the real dashboard, over HTTP, on 127.0.0.1.

Each simulated session is a thread with its own keep-alive connection and its
own cookie jar (the server ties uploaded datasets to the browser session cookie). It
loads the page (``/``, ``/_dash-layout``, ``/_dash-dependencies``), uploads its
own invented dataset through the upload callback, asks for the split and the
charts, then changes the degree several times (the slider's callback and the
model callback), exactly as the browser's Dash renderer posts them to
``/_dash-update-component``.

Invented data: session k has 24 rows, x = 0 .. 23 and
y = a_k + b_k x + 0.01 (-1)^i with a_k = 100 + 3k and b_k = 0.5 + 0.01k, so
every session's numbers differ from every other's (a_k by 3, far beyond any tolerance).

Checks: every response is 2xx; no callback reports an error; the fit chart's
data points are the session's own rows; every coefficient table matches
``numpy.polynomial.Polynomial.fit`` on the session's own rows: each term's
size over the data, |c_k| * max|x|^k, agrees to 1e-8 of max|y| (the dashboard
prints 10 significant digits). Anything else counts as cross-talk or an error.

    python benchmarks/bench_load.py [--sessions 200] [--degrees 1 2 3 4 5] [--threads 8] [--timeout 300]

The server binds to 127.0.0.1 on a free port and is stopped at the end.
"""

from __future__ import annotations

import argparse
import base64
import contextlib
import http.client
import json
import math
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

ROWS = 24


def session_data(k: int) -> tuple[np.ndarray, np.ndarray]:
    x = np.arange(ROWS, dtype=float)
    y = (100.0 + 3 * k) + (0.5 + 0.01 * k) * x + 0.01 * (-1.0) ** np.arange(ROWS)
    return x, y


def session_csv(k: int) -> bytes:
    x, y = session_data(k)
    lines = ["# invented load-test data, session %d" % k, "x,y"] + [
        f"{float(a)!r},{float(b)!r}" for a, b in zip(x, y, strict=False)
    ]
    return ("\n".join(lines) + "\n").encode()


# -- the Dash protocol ------------------------------------------------------------


def _outputs(output: str) -> list[dict]:
    """``..a.b...c.d..`` (or ``a.b``) -> [{"id": "a", "property": "b"}, ...]."""
    parts = output[2:-2].split("...") if output.startswith("..") else [output]
    out = []
    for p in parts:
        cid, prop = p.rsplit(".", 1) if "@" not in p else (p.split("@")[0].rsplit(".", 1)[0], p.split(".", 1)[1])
        out.append({"id": cid, "property": prop})
    return out


@dataclass
class Protocol:
    deps: list[dict]

    def find(self, first_output: str, first_input: str) -> dict:
        for d in self.deps:
            outs = _outputs(d["output"])
            o = outs[0]["id"] + "." + outs[0]["property"].split("@")[0]
            i = d["inputs"][0]["id"] + "." + d["inputs"][0]["property"] if d["inputs"] else ""
            if o == first_output and i == first_input:
                return d
        raise LookupError(f"no callback with output {first_output} and input {first_input}")

    @staticmethod
    def body(dep: dict, inputs: dict, state: dict, changed: list[str]) -> bytes:
        def vals(specs, values):
            return [dict(s, value=values.get(s["id"] + "." + s["property"])) for s in specs]

        return json.dumps(
            {
                "output": dep["output"],
                "outputs": _outputs(dep["output"]) if dep["output"].startswith("..") else _outputs(dep["output"])[0],
                "inputs": vals(dep["inputs"], inputs),
                "state": vals(dep["state"], state),
                "changedPropIds": changed,
            }
        ).encode()


def decode_array(v):
    """plotly >= 6 sends numeric arrays as {"dtype", "bdata"} (base64); lists pass through."""
    if isinstance(v, dict) and "bdata" in v:
        arr = np.frombuffer(base64.b64decode(v["bdata"]), dtype=np.dtype(v["dtype"]))
        return arr.reshape(v["shape"]) if "shape" in v and isinstance(v["shape"], list) else arr
    return np.asarray(v, dtype=float) if v is not None else None


def _texts(node) -> list[str]:
    out: list[str] = []
    if isinstance(node, str):
        out.append(node)
    elif isinstance(node, list):
        for v in node:
            out += _texts(v)
    elif isinstance(node, dict):
        props = node.get("props", node)
        out += _texts(props.get("children"))
    return out


def coefficient_values(table_component) -> list[float]:
    """The coefficient column of the dashboard's coefficient table (2nd cell of each body row)."""
    tbody = table_component["props"]["children"][1]
    values = []
    for tr in tbody["props"]["children"]:
        tds = tr["props"]["children"]
        values.append(float(_texts(tds[1])[0].replace("−", "-")))
    return values


def coefficients_match(got, x, y, d: int) -> bool:
    """``got`` (power basis, constant first) is numpy's fit of degree ``d`` to (x, y).

    Each term's size over the data, |c_k| * max|x|^k, must agree to 1e-8 of max|y|:
    a near-zero top coefficient printed to 10 digits differs between solvers in
    relative terms, while its effect on the curve does not.
    """
    want = np.polynomial.Polynomial.fit(x, y, d).convert().coef
    want = np.pad(want, (0, max(0, d + 1 - want.size)))  # convert() may trim a zero top coefficient
    if len(got) != d + 1:
        return False
    span = np.abs(x).max() ** np.arange(d + 1)
    return bool(np.max(np.abs((np.asarray(got, dtype=float) - want) * span)) <= 1e-8 * np.abs(y).max())


# -- one session ---------------------------------------------------------------------


@dataclass
class Result:
    latencies: list[float] = field(default_factory=list)
    by_kind: dict[str, list[float]] = field(default_factory=dict)
    status: dict[int, int] = field(default_factory=dict)
    errors: list[str] = field(default_factory=list)
    crosstalk: list[str] = field(default_factory=list)
    requests: int = 0
    lock: threading.Lock = field(default_factory=threading.Lock)

    def add(self, kind: str, status: int, seconds: float) -> None:
        with self.lock:
            self.requests += 1
            self.latencies.append(seconds)
            self.by_kind.setdefault(kind, []).append(seconds)
            self.status[status] = self.status.get(status, 0) + 1


class Session:
    def __init__(self, k: int, port: int, proto: Protocol, result: Result, deadline: float):
        self.k, self.port, self.proto, self.result, self.deadline = k, port, proto, result, deadline
        self.conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        self.cookies: dict[str, str] = {}

    def request(self, kind: str, method: str, path: str, body: bytes | None = None):
        if time.monotonic() > self.deadline:
            raise TimeoutError("the load run passed its time limit")
        headers = {"Host": f"127.0.0.1:{self.port}"}
        if body is not None:
            headers["Content-Type"] = "application/json"
        if self.cookies:
            headers["Cookie"] = "; ".join(f"{k}={v}" for k, v in self.cookies.items())
        t0 = time.perf_counter()
        try:
            self.conn.request(method, path, body=body, headers=headers)
            resp = self.conn.getresponse()
            data = resp.read()
            self._keep_cookies(resp)
        except (http.client.HTTPException, OSError):
            self.conn.close()
            self.conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=60)
            raise
        self.result.add(kind, resp.status, time.perf_counter() - t0)
        if resp.status >= 400:
            raise RuntimeError(f"{kind}: HTTP {resp.status}: {data[:200]!r}")
        return json.loads(data) if data and resp.getheader("Content-Type", "").startswith("application/json") else data

    def _keep_cookies(self, resp) -> None:
        from http.cookies import SimpleCookie

        for raw in resp.headers.get_all("Set-Cookie") or []:
            jar = SimpleCookie()
            jar.load(raw)
            self.cookies.update({k: m.value for k, m in jar.items()})

    def callback(self, kind, dep, inputs, state, changed):
        return self.request(kind, "POST", "/_dash-update-component", Protocol.body(dep, inputs, state, changed))

    def run(self, degrees: list[int]) -> None:
        k, p, res = self.k, self.proto, self.result
        x, y = session_data(k)
        try:
            self.request("page", "GET", "/")
            self.request("layout", "GET", "/_dash-layout")
            self.request("dependencies", "GET", "/_dash-dependencies")

            contents = "data:text/csv;base64," + base64.b64encode(session_csv(k)).decode()
            up = self.callback(
                "upload",
                p.find("dataset.data", "upload.contents"),
                {"upload.contents": contents},
                {"upload.filename": f"session-{k}.csv"},
                ["upload.contents"],
            )
            notice = " ".join(_texts(up["response"]["upload-notice"]["children"]))
            if not notice.startswith("Loaded"):
                raise RuntimeError(f"upload refused: {notice}")
            dataset = up["response"]["dataset"]["data"]
            if dataset.get("name") != f"session-{k}.csv":
                res.crosstalk.append(f"session {k}: upload answered with dataset {dataset.get('name')!r}")

            split_dep = p.find("fit-points.figure", "dataset.data")
            inputs = {
                "dataset.data": dataset,
                "x-column.value": "x",
                "y-column.value": "y",
                "weights-column.value": None,
                "group-column.value": None,
                "split-mode.value": "kfold",
                "holdout.value": 25,
                "folds.value": 5,
                "seed.value": 0,
            }
            sp = self.callback(
                "split", split_dep, inputs, {"degree.value": 1, "bands.value": ["confidence"]}, ["x-column.value"]
            )
            r = sp["response"]
            fit_notice = " ".join(_texts(r["fit-notice"]["children"])) if "fit-notice" in r else ""
            if fit_notice:
                raise RuntimeError(f"split failed: {fit_notice}")
            key = r["split-key"]["data"]
            self._check_points(r["fit-points"]["figure"], y)

            deg_dep = p.find("overfit-alert.children", "degree-settled.data")
            model_dep = p.find("stats.children", "split-key.data")
            for d in degrees:
                dg = self.callback(
                    "degree",
                    deg_dep,
                    {"degree-settled.data": d},
                    {"split-key.data": key},
                    ["degree-settled.data"],
                )
                notice = " ".join(_texts(dg["response"].get("fit-notice", {}).get("children")))
                if notice:
                    raise RuntimeError(f"degree {d}: {notice}")
                # the browser copies the slider's resting value into the model callback's degree input
                # (a clientside debounce store, or the slider itself): give every degree input the value
                deg_inputs = [i["id"] + "." + i["property"] for i in model_dep["inputs"][1:]]
                md = self.callback(
                    "model", model_dep, {"split-key.data": key, **{n: d for n in deg_inputs}}, {}, deg_inputs[:1]
                )
                if "coefficients" not in md["response"]:
                    note = " ".join(_texts(md["response"].get("model-note", {}).get("children")))
                    raise RuntimeError(f"degree {d}: no coefficient table; the dashboard said: {note[:200]}")
                got = coefficient_values(md["response"]["coefficients"]["children"])
                if not coefficients_match(got, x, y, d):
                    res.crosstalk.append(f"session {k} degree {d}: coefficients {got[:2]} are not the session's own")
        except Exception as exc:  # noqa: BLE001 - every failure is counted and reported
            with res.lock:
                res.errors.append(f"session {k}: {type(exc).__name__}: {exc}")
        finally:
            self.conn.close()

    def _check_points(self, fig, y_own):
        want = np.sort(y_own)
        for tr in fig.get("data", []):
            ys = decode_array(tr.get("y"))
            if ys is not None and ys.size == want.size and np.allclose(np.sort(ys.astype(float)), want, rtol=1e-12):
                return
        self.result.crosstalk.append(f"session {self.k}: the fit chart does not show the session's own points")


# -- the run ---------------------------------------------------------------------------


def percentile(values: list[float], q: float) -> float:
    if not values:
        return float("nan")
    s = sorted(values)
    idx = min(len(s) - 1, max(0, math.ceil(q / 100 * len(s)) - 1))
    return s[idx]


class _ServerProcess:
    """`degreescope serve` in its own process on a free loopback port, so the load's client
    threads do not share the server's interpreter (and its GIL)."""

    def __init__(self, threads: int):
        import socket
        import subprocess

        with socket.socket() as sock:
            sock.bind(("127.0.0.1", 0))
            self.port = sock.getsockname()[1]
        root = Path(__file__).resolve().parent.parent
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "app.cli", "serve", "--port", str(self.port), "--threads", str(threads)],
            cwd=root,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        self.guard = None
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            try:
                conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=2)
                conn.request("GET", "/_dash-dependencies", headers={"Host": f"127.0.0.1:{self.port}"})
                if conn.getresponse().status == 200:
                    return
            except OSError:
                time.sleep(0.2)
        self.stop()
        raise RuntimeError("the dashboard server did not start within 60 s")

    def stop(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(timeout=10)
        except Exception:  # noqa: BLE001 - make sure it is gone
            self.proc.kill()


def run_load(
    sessions: int = 50, degrees=(1, 2, 3), threads: int = 8, timeout: float = 120.0, *, separate_process: bool = False
) -> dict:
    """Start the dashboard on a free loopback port, run the sessions, stop it, return the figures.

    ``separate_process`` runs the server as `degreescope serve` in a child process (what a
    user runs); otherwise it runs in this process, sharing the interpreter with the clients.
    """
    import logging

    logging.getLogger("waitress.queue").setLevel(logging.ERROR)  # "Task queue depth" notes are expected here
    if separate_process:
        server = _ServerProcess(threads)
    else:
        from app import create_app
        from app.server import make_server

        server = make_server(create_app(None), host="127.0.0.1", port=0, threads=threads).start()
    result = Result()
    t_start = time.perf_counter()
    deadline = time.monotonic() + timeout
    try:
        conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=30)
        conn.request("GET", "/_dash-dependencies", headers={"Host": f"127.0.0.1:{server.port}"})
        proto = Protocol(json.loads(conn.getresponse().read()))
        conn.close()
        barrier = threading.Barrier(sessions)

        def one(k):
            s = Session(k, server.port, proto, result, deadline)
            with contextlib.suppress(threading.BrokenBarrierError):
                barrier.wait(timeout=30)
            s.run(list(degrees))

        workers = [threading.Thread(target=one, args=(k,), daemon=True) for k in range(sessions)]
        for w in workers:
            w.start()
        for w in workers:
            w.join(max(0.0, deadline - time.monotonic()) + 5)
        alive = sum(w.is_alive() for w in workers)
    finally:
        server.stop()
    wall = time.perf_counter() - t_start
    return {
        "sessions": sessions,
        "server_threads": threads,
        "requests": result.requests,
        "status": dict(sorted(result.status.items())),
        "server_errors_5xx": sum(n for s, n in result.status.items() if s >= 500),
        "errors": result.errors,
        "crosstalk": result.crosstalk,
        "unfinished_sessions": alive,
        "wall_seconds": wall,
        "requests_per_second": result.requests / wall if wall > 0 else float("nan"),
        "p50_ms": 1000 * percentile(result.latencies, 50),
        "p95_ms": 1000 * percentile(result.latencies, 95),
        "max_ms": 1000 * max(result.latencies, default=float("nan")),
        "by_kind": {
            k: {"n": len(v), "p50_ms": 1000 * percentile(v, 50), "p95_ms": 1000 * percentile(v, 95)}
            for k, v in sorted(result.by_kind.items())
        },
        "refused_by_guard": dict(server.guard.refused) if server.guard is not None else None,
        "server": "separate process" if separate_process else "in this process",
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sessions", type=int, default=200)
    ap.add_argument("--degrees", type=int, nargs="+", default=[1, 2, 3, 4, 5])
    ap.add_argument("--threads", type=int, default=8, help="server worker threads (default: 8, as `serve`)")
    ap.add_argument("--timeout", type=float, default=300.0, help="stop after this many seconds (default: 300)")
    ap.add_argument("--json", action="store_true")
    ap.add_argument("--in-process", action="store_true", help="run the server in this process, beside the clients")
    a = ap.parse_args(argv)
    out = run_load(a.sessions, a.degrees, a.threads, a.timeout, separate_process=not a.in_process)
    if a.json:
        print(json.dumps(out, indent=2))
    else:
        print(
            f"server: {out['server']}; sessions {out['sessions']}, server threads {out['server_threads']}, "
            f"requests {out['requests']} in {out['wall_seconds']:.1f} s ({out['requests_per_second']:.0f} per second)"
        )
        print(f"HTTP status counts: {out['status']}; 5xx: {out['server_errors_5xx']}")
        print(
            f"errors: {len(out['errors'])}; cross-talk: {len(out['crosstalk'])}; "
            f"unfinished: {out['unfinished_sessions']}"
        )
        print(
            f"latency all requests: p50 {out['p50_ms']:.1f} ms, p95 {out['p95_ms']:.1f} ms, max {out['max_ms']:.1f} ms"
        )
        for k, v in out["by_kind"].items():
            print(f"  {k:<13} n={v['n']:<5} p50 {v['p50_ms']:8.1f} ms   p95 {v['p95_ms']:8.1f} ms")
        for line in (out["errors"] + out["crosstalk"])[:10]:
            print("  " + line)
    ok = not (out["server_errors_5xx"] or out["errors"] or out["crosstalk"] or out["unfinished_sessions"])
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
