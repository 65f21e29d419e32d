"""Command line: ``lagwise serve | demo | openapi``."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[2]
GUNICORN_CONFIG = REPO_ROOT / "deploy" / "gunicorn.conf.py"
DEFAULT_BIND = "127.0.0.1:8750"


def serve(args: argparse.Namespace) -> int:
    """Replace this process with gunicorn running the app factory."""
    config = Path(args.config)
    if not config.exists():
        print(f"gunicorn configuration not found: {config}", file=sys.stderr)
        return 2
    os.environ.setdefault("LAGWISE_BIND", args.bind)
    command = [sys.executable, "-m", "gunicorn", "--config", str(config), "lagwise.api:create_app()"]
    os.execv(sys.executable, command)
    return 0  # pragma: no cover - execv does not return


def demo(args: argparse.Namespace) -> int:
    """Run the invented demo scenario through the SDK against a running service."""
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


def parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="lagwise", description="Lagwise spatial continuity service")
    commands = p.add_subparsers(dest="command", required=True)
    s = commands.add_parser("serve", help="run the service under gunicorn")
    s.add_argument(
        "--bind", default=os.environ.get("LAGWISE_BIND", DEFAULT_BIND), help=f"address:port (default {DEFAULT_BIND})"
    )
    s.add_argument("--config", default=str(GUNICORN_CONFIG), help="gunicorn configuration file")
    s.set_defaults(run=serve)
    d = commands.add_parser("demo", help="run the invented Elmsworth demo against a running service")
    d.add_argument("--url", default=f"http://{DEFAULT_BIND}", help="service base URL")
    d.add_argument("--out", default="reports/elmsworth", help="report folder")
    d.set_defaults(run=demo)
    o = commands.add_parser("openapi", help="write the OpenAPI document")
    o.add_argument("--out", default=str(REPO_ROOT / "openapi" / "openapi.yaml"))
    o.set_defaults(run=openapi)
    return p


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    return args.run(args)


if __name__ == "__main__":
    sys.exit(main())
