"""The `ejecta` command: parses arguments, runs one subcommand, turns ejecta's errors into messages and exit codes."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence

from monitor import __version__
from monitor.errors import MonitorError

# Subcommand name -> (module under monitor.commands, one-line help). Modules are imported only when used,
# so `ejecta --help` stays fast and a subcommand's heavy imports cost nothing to the others.
COMMANDS: dict[str, tuple[str, str]] = {
    "predict": ("monitor.commands.predict", "predict what a rig will do: thrust, Isp, blowdown, delta-v, stored energy"),
    "simulate": ("monitor.commands.simulate", "play a simulated rig's sensor lines on a pseudo-terminal, in real time"),
    "record": ("monitor.commands.record", "acquire from the rig's sensors without a screen and record a run log"),
    "import": ("monitor.commands.import_csv", "turn another system's CSV export into a run log"),
    "demo": ("monitor.commands.demo", "the monitor on the simulated rig: pulses, a slow leak and a sensor dropout"),
    "live": ("monitor.commands.live", "the monitor on the rig's sensors, recording the run from the start"),
    "replay": ("monitor.commands.replay", "the monitor on a recorded run, with pause, step, speed and seek"),
    "bench": ("monitor.commands.bench", "measure throughput, alert latency and memory of the whole chain"),
    "review": ("monitor.commands.review", "summarise a recorded run: impulse, Isp, propellant, alerts; JSON or HTML report"),
    "compare": ("monitor.commands.compare", "compare recorded runs side by side, with their plots overlaid"),
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="ejecta",
        description="Monitor for cold-gas thruster test stands and gas-jet hovering platforms. "
        "A monitor, not a safety interlock.",
    )
    parser.add_argument("--version", action="version", version=f"ejecta {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    import importlib

    for name, (module_name, help_text) in COMMANDS.items():
        module = importlib.import_module(module_name)
        command_parser = sub.add_parser(name, help=help_text, description=module.__doc__)
        module.add_arguments(command_parser)
        command_parser.set_defaults(run=module.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run ejecta; returns the process exit code (0 ok, 2 bad input, 3 source failure, 4 bad log)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    run: Callable[[argparse.Namespace], int] | None = getattr(args, "run", None)
    if run is None:
        parser.print_help()
        return 2
    from monitor.gas_memo import install_from_environment

    install_from_environment()  # a rig's gas states kept between runs: a command run again starts without CoolProp
    try:
        return run(args)
    except MonitorError as exc:
        print(f"ejecta {args.command}: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print(f"ejecta {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
