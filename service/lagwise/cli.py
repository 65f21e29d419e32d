"""Command line: ``lagwise serve | demo | openapi | settings``."""

from __future__ import annotations

import argparse
import importlib.util
import sys
from pathlib import Path

from .configuration import markdown_table, value


def serve(args: argparse.Namespace) -> int:
    """Run the front and gunicorn until stopped (see :mod:`lagwise.serving.launcher`)."""
    from .serving.launcher import serve as run_instance
    from .serving.launcher import split_bind

    bind = args.bind or value("LAGWISE_BIND")
    try:
        split_bind(bind)
        return run_instance(bind, args.config)
    except ValueError as exc:
        print(f"lagwise serve: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"lagwise serve: cannot listen on {bind}: {exc.strerror or exc}", file=sys.stderr)
        return 2


def demo(args: argparse.Namespace) -> int:
    """Run the invented demo scenario through the SDK against a running service."""
    if importlib.util.find_spec("lagwise_client") is None:
        print("lagwise demo needs the Python client (the 'demo' extra: lagwise-client)", file=sys.stderr)
        return 2
    from .demo import run_demo

    summary = run_demo(args.url, Path(args.out))
    print(summary.read_text())
    print(f"Report written to {Path(args.out).resolve()} (index.html, summary.txt, report.json, figures/)")
    return 0


def openapi(args: argparse.Namespace) -> int:
    """Write the OpenAPI document generated from the schemas."""
    from .api.openapi import as_yaml

    Path(args.out).parent.mkdir(parents=True, exist_ok=True)
    Path(args.out).write_text(as_yaml())
    print(f"wrote {args.out}")
    return 0


def settings(args: argparse.Namespace) -> int:
    """Print every LAGWISE_* variable with its default and meaning (the README's table)."""
    print(markdown_table(), end="")
    return 0


def parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="lagwise", description="Lagwise spatial continuity service")
    commands = p.add_subparsers(dest="command", required=True)
    s = commands.add_parser("serve", help="run the service (front and gunicorn workers)")
    s.add_argument(
        "--bind",
        default=None,
        help=f"host:port to listen on (wins over LAGWISE_BIND; default {value('LAGWISE_BIND', {})})",
    )
    s.add_argument(
        "--config",
        default="python:lagwise.serving.gunicorn_conf",
        help="gunicorn configuration (a file, or python:MODULE; default the one shipped in the package)",
    )
    s.set_defaults(run=serve)
    d = commands.add_parser("demo", help="run the invented Elmsworth demo against a running service")
    d.add_argument("--url", default=f"http://{value('LAGWISE_BIND', {})}", help="service base URL")
    d.add_argument("--out", default="reports/elmsworth", help="report folder")
    d.set_defaults(run=demo)
    o = commands.add_parser("openapi", help="write the OpenAPI document")
    o.add_argument("--out", default="openapi/openapi.yaml", help="file to write (default openapi/openapi.yaml)")
    o.set_defaults(run=openapi)
    t = commands.add_parser("settings", help="list the LAGWISE_* environment variables")
    t.set_defaults(run=settings)
    return p


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    return args.run(args)


if __name__ == "__main__":
    sys.exit(main())
