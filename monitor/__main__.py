"""Allows `python -m monitor`, the same as the `ejecta` command."""

from monitor.cli import main

raise SystemExit(main())
