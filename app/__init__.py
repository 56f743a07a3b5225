"""degreescope's dashboard (Dash). ``create_app`` builds one app; importing this package does nothing else.

    create_app(data_path=None, *, upload_limit_bytes=128 MiB, cache_bytes=1 GiB) -> dash.Dash

``dash_app.server`` is the Flask WSGI app that ``degreescope serve`` runs.

Data flow: ``dcc.Upload`` -> ``service.FitService.load_upload`` -> ``store.DatasetStore``
(server memory, keyed by an unguessable id) -> the page's ``dcc.Store`` holds only that
id and the settings -> each panel's callbacks (``panels/``) ask the service for cached
views -> ``figures`` builds the charts, ``components`` the tables, ``text`` the words,
``exports`` the downloads.
"""

from __future__ import annotations

__all__ = ["create_app"]


def upload_max_size(upload_limit_bytes: int) -> int:
    """``dcc.Upload.max_size``: a bit above the server's limit, so the server's own message is what users see.

    The component drops larger files silently; ``assets/degreescope.js`` warns about those in the browser.
    """
    return int(upload_limit_bytes) + max(int(upload_limit_bytes) // 8, 256 * 1024)


def create_app(
    data_path: str | None = None,
    *,
    upload_limit_bytes: int | None = None,
    cache_bytes: int | None = None,
):
    """Build the dashboard; ``data_path`` (default: the invented sensor sample) is shown at start.

    ``upload_limit_bytes`` defaults to ``server.DEFAULT_UPLOAD_LIMIT_BYTES`` and ``cache_bytes``
    to ``store.DEFAULT_CACHE_BYTES`` (imported here, not at package import, so that the command
    line's ``--help`` loads neither the engine nor dash). Raises ``fitting.DegreescopeError``
    when ``data_path`` cannot be read.
    """
    from pathlib import Path

    import dash

    from . import callbacks, layout
    from .server import DEFAULT_UPLOAD_LIMIT_BYTES
    from .service import SAMPLE_PATH, FitService
    from .store import DEFAULT_CACHE_BYTES, DatasetStore

    upload_limit_bytes = DEFAULT_UPLOAD_LIMIT_BYTES if upload_limit_bytes is None else upload_limit_bytes
    cache_bytes = DEFAULT_CACHE_BYTES if cache_bytes is None else cache_bytes
    if int(upload_limit_bytes) <= 0:
        raise ValueError("upload_limit_bytes must be positive")
    store = DatasetStore(max_bytes=cache_bytes)
    service = FitService(store, upload_limit_bytes=upload_limit_bytes, sample_path=data_path or SAMPLE_PATH)
    service.sample_id()  # read the start-up data now, so a bad path fails at start

    app = dash.Dash(
        __name__,
        title="degreescope",
        assets_folder=str(Path(__file__).resolve().parent / "assets"),
        suppress_callback_exceptions=False,
        update_title=None,
        serve_locally=True,
    )
    max_size = upload_max_size(upload_limit_bytes)

    def serve_layout():
        info = service.info(service.sample_id())
        return layout.build_layout(info.to_store(), upload_limit_bytes=upload_limit_bytes, upload_max_size=max_size)

    app.layout = serve_layout
    callbacks.register(app, service)
    app.degreescope_service = service  # the server's edge screen reaches the dataset store through it
    return app
