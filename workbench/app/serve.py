"""Serve the dashboard: ``workbench serve`` calls :func:`serve`.

The server binds the loopback address unless told otherwise (with a printed warning, since the page lets a
visitor run computations), accepts websocket connections only from the address it serves, limits the size of
messages (uploads are at most 256 KiB of TOML), and serves every script and style itself: the page makes no
request to any other host.
"""

from __future__ import annotations

import argparse
import socket
import sys

__all__ = ["serve", "main", "LOOPBACK"]

LOOPBACK = ("127.0.0.1", "localhost", "::1")
_MAX_MESSAGE_BYTES = 2 * 1024 * 1024


def _origins(address: str, port: int) -> list[str]:
    """Allowed websocket origins: the host and port served, nothing else.

    On loopback both loopback names are allowed; on a wildcard address (all interfaces) the machine's own
    names; otherwise the address given.

    Examples
    --------
    >>> _origins("127.0.0.1", 5006)
    ['127.0.0.1:5006', 'localhost:5006']
    >>> _origins("10.0.0.7", 8000)
    ['10.0.0.7:8000']
    """
    if address in LOOPBACK:
        return [f"127.0.0.1:{port}", f"localhost:{port}"]
    if address in ("0.0.0.0", "::", ""):
        names = dict.fromkeys([socket.gethostname(), socket.getfqdn(), "127.0.0.1", "localhost"])
        return [f"{name}:{port}" for name in names if name]
    host = f"[{address}]" if ":" in address else address
    return [f"{host}:{port}"]


def serve(preset: str | None = None, port: int = 5006, address: str = "127.0.0.1", show: bool = True):
    """Start the dashboard server and block until it is stopped.

    Parameters
    ----------
    preset : str, optional
        Built-in preset to open (by name; default: the default preset).
    port : int
        Port to listen on.
    address : str
        Address to bind; the loopback address by default. Any other address is served with a warning.
    show : bool
        Open the page in the default web browser.

    Raises
    ------
    ScenarioError
        When ``preset`` names no built-in preset (checked before the server starts).

    Examples
    --------
    >>> serve(preset="common_cause", port=5006, show=False)  # doctest: +SKIP
    workbench dashboard: http://127.0.0.1:5006/  (Ctrl-C to stop)
    """
    import panel as pn

    from workbench.app.app import create_app
    from workbench.scenario.presets import DEFAULT_PRESET, preset_text

    preset = preset or DEFAULT_PRESET
    preset_text(preset)  # fail early, with the list of names, on an unknown preset
    if address not in LOOPBACK:
        print(
            f"warning: serving on {address}: anyone who can reach this address can use the dashboard and run "
            "computations on this machine. Use the default 127.0.0.1 to keep it private.",
            file=sys.stderr,
        )
    host = f"[{address}]" if ":" in address else address
    print(f"workbench dashboard: http://{host}:{port}/  (Ctrl-C to stop)", flush=True)
    pn.serve(
        {"/": lambda: create_app(preset)},
        port=port,
        address=address,
        websocket_origin=_origins(address, port),
        show=show,
        title="workbench",
        websocket_max_message_size=_MAX_MESSAGE_BYTES,
        verbose=False,
    )


def main(argv: list[str] | None = None) -> int:
    """``python -m workbench.app.serve [--preset NAME] [--port 5006] [--address 127.0.0.1] [--no-show]``

    Examples
    --------
    >>> main(["--port", "0"])  # doctest: +SKIP
    """
    from workbench.errors import WorkbenchError

    parser = argparse.ArgumentParser(prog="python -m workbench.app.serve", description=__doc__.split("\n")[0])
    parser.add_argument("--preset", default=None)
    parser.add_argument("--port", type=int, default=5006)
    parser.add_argument("--address", default="127.0.0.1")
    parser.add_argument("--show", action=argparse.BooleanOptionalAction, default=True)
    args = parser.parse_args(argv)
    try:
        serve(preset=args.preset, port=args.port, address=args.address, show=args.show)
    except WorkbenchError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 0
    return 0


if __name__ == "__main__":
    sys.exit(main())
