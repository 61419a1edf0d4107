"""Measure what one screen refresh costs: `python tests/ui/measure_frame_cost.py [FRAMES]` (run from the repo root).

For each terminal size, a demo session on a FakeClock moves on by 0.1 s of run time (the simulated rig at
1 kHz, so every number, bar and alert time changes), then the app builds the view and textual draws the
changed blocks. Reported per frame: the view model and layout (ms), the whole refresh as textual does it
headless (ms, wall and process CPU), and the blocks that were redrawn. The session's own work (reading,
estimating, alerts) runs before the clock is started and is not counted. Headless textual composes every
frame as a real terminal would but writes nothing, so a real terminal adds its own output cost: the second
part starts `ejecta demo` in a pseudo-terminal and reads the process's CPU use from /proc for 20 s.
"""

from __future__ import annotations

import asyncio
import os
import select
import struct
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path[:0] = [str(ROOT), str(HERE)]

from ui_helpers import advance, bench_text, sim_session  # noqa: E402

from monitor.ui import MonitorApp  # noqa: E402
from monitor.ui.view import build_view  # noqa: E402
from monitor.ui.widgets import TextBlock  # noqa: E402


async def headless(size: tuple[int, int], frames: int) -> dict[str, float]:
    session, clock = sim_session(bench_text("1 kHz"))
    advance(session, clock, 21.0)
    app = MonitorApp(session, refresh_hz=1.0)  # the timer stays out of the way: each frame is driven below
    view_ms, wall_ms, cpu_ms, redrawn = [], [], [], []
    async with app.run_test(size=size) as pilot:
        app.refresh_view()
        await pilot.pause()
        idle_cpu = []
        for _ in range(frames):  # the same loop with nothing to draw: what the test harness itself costs
            c0 = time.process_time()
            app.refresh_view()
            await pilot.pause()
            idle_cpu.append((time.process_time() - c0) * 1e3)
        for _ in range(frames):
            advance(session, clock, 0.1)
            before = {b.id: b.renders for b in app.monitor.query(TextBlock)}
            t0, c0 = time.perf_counter(), time.process_time()
            build_view(session.snapshot(), app.units, app.settings)
            t1 = time.perf_counter()
            app.refresh_view()
            await pilot.pause()
            t2, c2 = time.perf_counter(), time.process_time()
            view_ms.append((t1 - t0) * 1e3)
            wall_ms.append((t2 - t1) * 1e3)
            cpu_ms.append((c2 - c0) * 1e3 - (t1 - t0) * 1e3)
            redrawn.append(sum(b.renders - before[b.id] for b in app.monitor.query(TextBlock)))
    med = sorted(wall_ms)[len(wall_ms) // 2]
    return {"view_ms": sorted(view_ms)[len(view_ms) // 2], "refresh_ms": med,
            "refresh_p90_ms": sorted(wall_ms)[int(0.9 * len(wall_ms))], "cpu_ms": sorted(cpu_ms)[len(cpu_ms) // 2],
            "idle_cpu_ms": sorted(idle_cpu)[len(idle_cpu) // 2],
            "blocks_redrawn": sum(redrawn) / len(redrawn)}


def in_terminal(columns: int, rows: int, seconds: float = 20.0) -> float:
    """CPU use of `ejecta demo` (screen + simulated rig + engine) in a pseudo-terminal, percent of one core."""
    import fcntl
    import termios

    master, slave = os.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", rows, columns, 0, 0))
    env = dict(os.environ, TERM="xterm-256color", PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "demo"], stdin=slave, stdout=slave, stderr=slave,
                            env=env, cwd=ROOT, start_new_session=True)
    os.close(slave)

    def drain(until: float) -> None:
        while time.monotonic() < until:
            if select.select([master], [], [], 0.1)[0]:
                os.read(master, 1 << 16)

    def cpu_s() -> float:
        fields = Path(f"/proc/{proc.pid}/stat").read_text().rsplit(")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")

    drain(time.monotonic() + 8.0)  # start-up
    c0, t0 = cpu_s(), time.monotonic()
    drain(t0 + seconds)
    used = (cpu_s() - c0) / (time.monotonic() - t0)
    os.write(master, b"q")
    end = time.monotonic() + 20.0
    while proc.poll() is None and time.monotonic() < end:
        try:
            drain(time.monotonic() + 0.2)  # keep reading, or the child blocks writing its last frame
        except OSError:
            break
    proc.wait(5)
    os.close(master)
    return 100.0 * used


def main() -> None:
    frames = int(sys.argv[1]) if len(sys.argv) > 1 else 100
    for size in ((80, 24), (200, 50)):
        r = asyncio.run(headless(size, frames))
        print(f"{size[0]}x{size[1]} headless: view model {r['view_ms']:.2f} ms; a refresh costs {r['cpu_ms']:.2f} ms of "
              f"CPU ({r['cpu_ms'] - r['idle_cpu_ms']:.2f} ms above an idle frame's {r['idle_cpu_ms']:.2f} ms), "
              f"{r['refresh_ms']:.1f} ms wall median, {r['refresh_p90_ms']:.1f} ms p90 (the wall time includes the "
              f"harness's waits); {r['blocks_redrawn']:.1f} blocks redrawn per frame")
    if sys.platform.startswith("linux"):
        for columns, rows in ((80, 24), (200, 50)):
            print(f"{columns}x{rows} ejecta demo in a pseudo-terminal at 10 Hz: {in_terminal(columns, rows):.0f} % of "
                  "one core (screen, simulated 1 kHz rig, estimators, alerts)")


if __name__ == "__main__":
    main()
