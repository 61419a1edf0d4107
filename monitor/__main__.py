"""Allows `python -m monitor`, the same as the `ejecta` command."""

from monitor.cli import main

if __name__ == "__main__":  # not when a spawned helper process imports this module (monitor.sources.log_stream)
    raise SystemExit(main())
