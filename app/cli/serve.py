"""``degreescope serve [FILE]``: the dashboard in a local browser tab. The only command that imports dash."""

from __future__ import annotations

from pathlib import Path

from . import _args

HELP = "Run the dashboard in a local browser tab."
SAMPLE = Path(__file__).resolve().parents[2] / "sample_data" / "sensor_calibration.csv"


def add_parser(sub) -> None:
    p = _args.add_command(sub, "serve", HELP)
    p.add_argument(
        "file", nargs="?", metavar="FILE", help="data to open first (default: the invented sensor calibration sample)"
    )
    p.add_argument("--host", default="127.0.0.1", help="address to bind (default: 127.0.0.1, this machine only)")
    p.add_argument("--port", type=_args.port, default=8050, help="port (default: 8050; 0 picks a free one)")
    p.add_argument("--threads", type=_args.positive_int, default=8, help="worker threads (default: 8)")
    p.add_argument(
        "--no-token",
        action="store_true",
        help="do not require the access token on a non-loopback address (anyone who can reach the port can use it)",
    )
    p.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="also accept requests addressed to this host name (repeatable); others are refused",
    )
    p.add_argument(
        "--upload-limit-mb",
        type=_args.positive_int,
        default=128,
        metavar="MB",
        help="largest upload in MiB (default: 128)",
    )
    p.set_defaults(func=run)


def run(args) -> int:
    data_path = None
    if args.file is not None:
        data_path = str(_args.existing_file(args.file))
    elif SAMPLE.is_file():
        data_path = str(SAMPLE)
    from ..server import serve  # imports dash and plotly (only this command does)

    try:
        serve(
            data_path,
            host=args.host,
            port=args.port,
            threads=args.threads,
            debug=bool(getattr(args, "debug", False)),
            token=None if args.no_token else "auto",
            upload_limit_bytes=int(args.upload_limit_mb) * _args.MIB,
            allowed_hosts=args.allow_host,
        )
    except OSError as exc:
        raise _args.UsageError(f"cannot listen on {args.host}:{args.port}: {exc.strerror or exc}") from None
    return 0
