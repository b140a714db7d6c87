"""Run the simulated impedance meter: a coil (or a standard) on a test fixture, served over SCPI.

The simulator stands in for a bench LCR meter. It listens on a TCP socket (127.0.0.1 unless
--host says otherwise) and speaks the SCPI command set in drivers/simulator/COMMANDS.md; any
VISA client reaches it as the resource printed on the first line of output, for example

    acquire sim --profile air-core-coil
    TCPIP0::127.0.0.1::5025::SOCKET

and from another terminal: `acquire identify --resource TCPIP0::127.0.0.1::5025::SOCKET`, or by
hand with `nc 127.0.0.1 5025` and lines such as `*IDN?`, `FREQ 10kHz;READ?`, `SYST:ERR?`.

What it reports is the DUT (device under test) as seen through the fixture: the leads' series
residual (R, L) and stray shunt (C, G) lie between meter and DUT, as on a real bench, plus noise
set by the measurement speed, averaging and test level. Open, short and load are the reference
standards used to remove the fixture later (`SIMulate:DUT OPEN` puts one in). Profiles are TOML
files: a shipped name (air-core-coil, ferrite-choke, rf-coil, demo-coil, powder-choke,
ferrite-power-choke; fixtures bench-leads, long-leads, cable-leads, direct; standards open,
short, load) or a path to your own.

A client changes the DUT or fixture by name only (`SIMulate:DUT "rf-coil"`): a shipped profile,
or a file NAME.toml in the directory given with --profile-dir. It cannot name a path, so it
cannot make the simulator read other files of this machine; a profile that fails to load is
refused with a short reply and the reason is logged here on standard error.

DC bias. The meter applies a DC bias current through the DUT (BIAS:CURR, BIAS:STAT, up to the
meter profile's bias_limit, 8 A as shipped), and --source-port also serves a simulated DC
current source wired to the same DUT (its resource is printed on the second line of output;
SOUR:CURR, OUTP ON|OFF, MEAS:CURR?). The current through the DUT is the sum of the two. The
power-choke profiles (powder-choke, ferrite-power-choke) saturate and warm under it. On a real
bench a biased inductor stores energy (1/2 L I^2): breaking its current arcs and can destroy the
meter's input and hurt you. Bring the bias to zero before touching the part or the leads, and
follow the meter and fixture makers' instructions, local codes and licensed practice.

Serves until Ctrl-C. The simulator has no authentication: binding to an address other than
127.0.0.1 (--host) exposes it to the network, and it warns when you do.
"""

from __future__ import annotations

import argparse

HELP = "run the simulated impedance meter on a TCP socket (SCPI)"

#: The TCP port registered for raw SCPI over sockets.
DEFAULT_PORT = 5025


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--profile",
        default="air-core-coil",
        metavar="NAME_OR_PATH",
        help="what is in the fixture: a shipped DUT or standard profile, or a TOML file "
        "(default: air-core-coil)",
    )
    parser.add_argument(
        "--fixture",
        default="bench-leads",
        metavar="NAME_OR_PATH",
        help="the test fixture profile (default: bench-leads)",
    )
    parser.add_argument(
        "--profile-dir",
        default=None,
        metavar="DIR",
        help="a directory of your own profiles (NAME.toml): clients may name them, as they name "
        "the shipped ones, with SIMulate:DUT and SIMulate:FIXTure (default: shipped only)",
    )
    parser.add_argument(
        "--port",
        type=int,
        default=DEFAULT_PORT,
        help=f"TCP port; 0 picks a free one (default: {DEFAULT_PORT})",
    )
    parser.add_argument(
        "--source-port",
        type=int,
        default=None,
        metavar="PORT",
        help="also serve a simulated DC current source wired to the same DUT on this TCP port "
        "(0 picks a free one); its resource is printed on the second line (default: none)",
    )
    parser.add_argument(
        "--host",
        default="127.0.0.1",
        help="address to listen on (default: 127.0.0.1; any other address exposes the "
        "simulator to the network)",
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of noise, spread and faults")
    parser.add_argument(
        "--measure-time",
        type=float,
        default=None,
        metavar="SECONDS",
        help="seconds per point whatever the speed setting (0: instant); default: as the "
        "speed and averaging settings imply",
    )
    parser.add_argument("--no-noise", action="store_true", help="exact readings, no noise")
    parser.add_argument(
        "--meter",
        default="simulated-meter",
        metavar="NAME_OR_PATH",
        help="meter profile: identity, noise and timing (default: simulated-meter)",
    )
    parser.add_argument(
        "--quiet", action="store_true", help="do not log connections on standard error"
    )


def run(args: argparse.Namespace) -> int:
    import asyncio
    import logging
    import signal
    import sys
    from pathlib import Path

    from acquire.errors import InputError
    from drivers.simulator.instrument import Instrument
    from drivers.simulator.server import LOOPBACK, SimulatorServer

    if not 0 <= args.port <= 65535:
        raise InputError(f"--port {args.port} is not a TCP port (0 to 65535)")
    if args.source_port is not None and not 0 <= args.source_port <= 65535:
        raise InputError(f"--source-port {args.source_port} is not a TCP port (0 to 65535)")
    if args.measure_time is not None and not 0 <= args.measure_time <= 60:
        raise InputError(f"--measure-time {args.measure_time} must be 0 to 60 seconds")
    profile_dir = None if args.profile_dir is None else Path(args.profile_dir)
    if profile_dir is not None and not profile_dir.is_dir():
        raise InputError(f"--profile-dir {args.profile_dir}: no such directory")
    instrument = Instrument(
        args.profile,
        args.fixture,
        args.meter,
        args.seed,
        args.measure_time,
        not args.no_noise,
        profile_dir=profile_dir,
    )
    server = SimulatorServer(instrument, args.host, args.port)
    source = None
    if args.source_port is not None:
        source = SimulatorServer(instrument, args.host, args.source_port, source=True)
    # asyncio.run turns Ctrl-C into a clean cancellation only under Python's own SIGINT handler
    signal.signal(signal.SIGINT, signal.default_int_handler)
    if not args.quiet:
        logging.basicConfig(level=logging.INFO, format="sim: %(message)s", stream=sys.stderr)

    def ready(server: SimulatorServer) -> None:
        if args.host not in LOOPBACK:  # before the resource line, which callers wait for
            print(
                f"warning: listening on {args.host}: anyone who can reach this address can "
                "control the simulator (it has no authentication)",
                file=sys.stderr,
                flush=True,
            )
        print(server.resource, flush=True)
        if source is not None:
            print(source.resource, flush=True)
        print(
            f"simulated meter: {instrument.dut.name} on {instrument.fixture.name}, seed "
            f"{args.seed}; Ctrl-C to stop",
            file=sys.stderr,
            flush=True,
        )

    async def serve() -> None:
        if source is None:
            await server.serve_forever(ready)
            return
        await source.start()
        try:
            await server.serve_forever(ready)
        finally:
            await source.close()

    try:
        asyncio.run(serve())
    except KeyboardInterrupt:
        print("simulated meter stopped", file=sys.stderr)
    except OSError as exc:
        raise InputError(
            f"cannot listen on {args.host} port {args.port}: {exc.strerror or exc}; "
            "is another simulator running? --port 0 picks a free port"
        ) from exc
    return 0
