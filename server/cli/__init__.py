"""The `shockslate` console command: every sub-command is registered here, in one place.

    shockslate serve [--host 127.0.0.1] [--port 8765] [--scenario NAME_OR_PATH] [--open]   (this module)
    shockslate run | scenarios | check                                                    (cli/batch.py)
    shockslate sweep                                                                      (cli/sweep.py)
    shockslate nozzle                                                                     (cli/nozzle.py)
    shockslate gas                                                                        (cli/gas.py)
    shockslate contour                                                                    (cli/contour.py)
    shockslate bench [--serve]              (bench/solver_bench.py; --serve: bench/serve_bench.py)

Sub-commands set `func` (or `handler`) to a function of the parsed arguments returning the exit code.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from shockslate.bench import serve_bench, solver_bench

from ..protocol import MAX_MESSAGE_BYTES
from ..security import DEFAULT_HOST, DEFAULT_PORT, Access
from . import batch, contour, gas, nozzle, sweep

EXIT_OK, EXIT_BAD_INPUT = 0, 2
#: uvicorn closes a connection (code 1009) above this size; below it, oversized messages get an error reply.
WS_MAX_BYTES = 4 * MAX_MESSAGE_BYTES
SWITCH_INTERVAL_S = 0.0005


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="shockslate",
        description="Local browser sandbox for 2D planar and axisymmetric compressible flow.")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    add_serve_command(sub)
    add_warm_command(sub)
    bench = solver_bench.add_bench_command(sub)
    serve_bench.add_serve_bench(bench)
    batch.add_batch_commands(sub)
    sweep.add_sweep_command(sub)
    nozzle.add_nozzle_command(sub)
    gas.add_gas_command(sub)
    contour.add_contour_command(sub)
    return parser


def add_serve_command(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("serve", help="start the live sandbox and print its address",
                       description="Serve the page and the live simulation. Binds 127.0.0.1 unless told otherwise; "
                                   "on any other address a random token is required (it is in the printed URL).")
    p.add_argument("--host", default=DEFAULT_HOST, help=f"address to bind (default {DEFAULT_HOST})")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"TCP port (default {DEFAULT_PORT})")
    p.add_argument("--scenario", metavar="NAME_OR_PATH",
                   help="start on this scenario: a built-in or saved name, or a scenario JSON file "
                        "(default: the scenario of the last session, else the built-in default)")
    p.add_argument("--open", action="store_true", help="open the page in the default browser")
    p.add_argument("--data-dir", type=Path, metavar="DIR",
                   help="user data folder (default $SHOCKSLATE_DATA_DIR or ~/.local/share/shockslate)")
    p.add_argument("--paused", action="store_true", help="start paused instead of running")
    p.add_argument("--threads", type=int, metavar="N",
                   help="solver threads (default: all cores; 1 is kinder to a machine shared with other work)")
    p.add_argument("--without-thermochemistry", action="store_true",
                   help="answer 'gas from propellants' as if Cantera were not installed (what a `make run` install "
                        "without the design extra shows)")
    p.set_defaults(func=serve)
    return p


def add_warm_command(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("warm", help="compile the solver kernels now (set-up does this; later starts are quick)",
                       description="Compile every solver kernel into the per-user cache shared by the server, the "
                                   "batch commands and the tests. `make run` and `make test` call this once after "
                                   "installing, so that the first start of the page does not wait for it.")
    p.set_defaults(func=warm)
    return p


def warm(args: argparse.Namespace) -> int:
    from shockslate.solver import cache_dir

    from shockslate.solver.warm import warm_kernels

    print(f"shockslate: compiling the solver kernels into {cache_dir()} "
          "(the first time takes one to three minutes; later starts load them in about a second)", flush=True)
    seconds = warm_kernels(lambda done, total, _stage, label: print(
        f"shockslate: compiling the solver kernels, stage {done + 1} of {total}: {label}", flush=True))
    from shockslate.server import frame_kernels

    frame_kernels.warm()  # the live frames' kernels (server/frame_kernels.py) into the same cache
    print(f"shockslate: kernels ready in {seconds:.1f} s", flush=True)
    return EXIT_OK


def serve(args: argparse.Namespace) -> int:
    import uvicorn

    from shockslate.solver.scenario import ScenarioError

    from ..app import ServerConfig, create_app
    from ..errors import RequestError
    from ..persistence import ScenarioStore, scenario_from_argument

    if not (0 < args.port < 65536):
        print(f"shockslate serve: --port = {args.port} is not allowed: 1 to 65535", file=sys.stderr)
        return EXIT_BAD_INPUT
    import numba

    if args.threads is not None and not (1 <= args.threads <= numba.config.NUMBA_NUM_THREADS):
        print(f"shockslate serve: --threads = {args.threads} is not allowed: 1 to {numba.config.NUMBA_NUM_THREADS}",
              file=sys.stderr)
        return EXIT_BAD_INPUT
    store = ScenarioStore(args.data_dir)
    scenario = None
    if args.scenario:
        try:
            scenario = scenario_from_argument(args.scenario, store)
        except (ScenarioError, RequestError) as err:
            print(f"shockslate serve: --scenario: {err}", file=sys.stderr)
            return EXIT_BAD_INPUT
    access = Access.for_bind(args.host, args.port)
    config = ServerConfig(access=access, data_dir=store.data_dir, scenario=scenario,
                          start_running=not args.paused, open_browser=args.open, solver_threads=args.threads,
                          thermochemistry=not args.without_thermochemistry)
    app = create_app(config)
    print(f"shockslate: open {access.url()}", flush=True)
    print(f"shockslate: scenarios are kept in {store.data_dir}", flush=True)
    if access.token:
        print("shockslate: bound off loopback; the token in that address is required to connect. "
              "Anyone with it can steer the simulation.", flush=True)
    # The solver thread needs the GIL back between its nogil kernels many times per step; a shorter
    # switch interval than the default 5 ms keeps the event loop's Python work from stalling it.
    sys.setswitchinterval(SWITCH_INTERVAL_S)
    # Frames are sent uncompressed: on loopback deflate only costs CPU that the solver wants.
    uvicorn.Server(uvicorn.Config(app, host=args.host, port=args.port, ws_max_size=WS_MAX_BYTES,
                                  ws_per_message_deflate=False, log_level="warning", lifespan="on")).run()
    return EXIT_OK


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    command = getattr(args, "func", None) or getattr(args, "handler", None)
    return int(command(args) or 0)


if __name__ == "__main__":
    sys.exit(main())
