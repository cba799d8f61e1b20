"""The web application: the page (web/), GET /health, the websocket /ws and GET /exports/<file>.

`create_app(config)` builds everything for one server: the scenario store, the session (restored
from the last run, or the scenario asked for, or the built-in default), the runner and the client
hub. The access rules (security.py) are applied here, before a websocket is accepted.
"""
from __future__ import annotations

import asyncio
import contextlib
import json
import logging
import re
import sys
import time
import webbrowser
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

from fastapi import FastAPI, HTTPException, Request, WebSocket, WebSocketDisconnect
from fastapi.responses import FileResponse, JSONResponse
from starlette.staticfiles import StaticFiles
from starlette.types import ASGIApp, Receive, Scope, Send

from shockslate.solver import scenario as scn
from shockslate.solver.warm import warm_kernels

from . import design
from . import protocol as p
from .dispatch import Dispatcher, hello_message, hello_text
from .errors import RequestError
from .exports import Exports
from .hub import MAX_CLIENTS, Hub
from .persistence import AutosaveFailed, ScenarioStore
from .runner import Runner
from .scenario_delta import DELTA_MIN_BYTES
from .security import Access, RateLimiter
from .session import Session

log = logging.getLogger("shockslate")

#: The page: package data of shockslate.web (web/ in a checkout).
WEB_DIR = Path(str(resources.files("shockslate.web")))
#: Close code for a refused connection (RFC 6455 'policy violation').
POLICY_VIOLATION = 1008
#: Close code for a connection refused because the server is full (RFC 6455 registry 'try again later').
TRY_AGAIN_LATER = 1013


@dataclass
class ServerConfig:
    """How one server starts."""

    access: Access = field(default_factory=Access)
    data_dir: Path | None = None
    #: Start on this scenario; None restores the last one, or falls back to the built-in default.
    scenario: scn.Scenario | None = None
    start_running: bool = True
    warm: bool = True
    open_browser: bool = False
    web_dir: Path = WEB_DIR
    #: numba threads for the solver (None: numba's default, all cores). 1 is kinder to a shared machine.
    solver_threads: int | None = None
    runner_options: dict[str, Any] = field(default_factory=dict)
    #: False: gas from propellants answers as if Cantera were not installed (what a `make run` install shows).
    thermochemistry: bool = True
    #: A one-shape change goes to the tabs as `sketch_change` once the whole scenario's text is this long
    #: (0: always; tests use that on small sketches).
    delta_min_bytes: int = DELTA_MIN_BYTES


@dataclass
class ServerParts:
    """What the lifespan built; kept on app.state.parts for the endpoints (and tests)."""

    config: ServerConfig
    store: ScenarioStore
    session: Session
    hub: Hub
    runner: Runner
    dispatcher: Dispatcher
    exports: Exports
    warnings: list[str]
    #: True while the solver kernels load or compile at start; tabs are told, and told again when it ends.
    warming: bool = False
    #: The stage of the warm-up now running ({stage, done, total, label}), None when none runs.
    warming_stage: dict | None = None


class HostGuard:
    """Refuse HTTP requests whose Host header is not this server's (DNS-rebinding guard on loopback)."""

    def __init__(self, app: ASGIApp, access: Access):
        self.app = app
        self.access = access

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and not self.access.host_ok(_header(scope, b"host")):
            response = JSONResponse({"error": "host not allowed"}, status_code=400)
            await response(scope, receive, send)
            return
        await self.app(scope, receive, send)


def _threading_layer() -> str | None:
    """numba's threading layer once a parallel kernel has run (None before)."""
    import numba

    try:
        return numba.threading_layer()
    except ValueError:
        return None


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", []):
        if key == name:
            return value.decode("latin-1")
    return None


def starting_scenario(config: ServerConfig, store: ScenarioStore) -> tuple[scn.Scenario, list[str]]:
    """The scenario asked for, else the one of the last session, else the built-in default."""
    if config.scenario is not None:
        return config.scenario, []
    restored = store.restore_current()
    warnings = [restored.warning] if restored.warning else []
    for warning in warnings:
        print(f"shockslate: {warning}", file=sys.stderr, flush=True)
    if restored.scenario is not None:
        return restored.scenario, warnings
    return scn.load_builtin(scn.DEFAULT_SCENARIO), warnings


def create_app(config: ServerConfig | None = None) -> FastAPI:
    config = config or ServerConfig()
    access = config.access

    @contextlib.asynccontextmanager
    async def lifespan(app: FastAPI):
        store = ScenarioStore(config.data_dir)
        scenario, warnings = await asyncio.to_thread(starting_scenario, config, store)
        session = await asyncio.to_thread(Session, scenario, store.save_current)
        try:
            # with the session's own document: the store keeps each shape's text by that document's shape dicts,
            # so the first change saves only what it adds (a big sketch's 19 MB encoded again took most of a second)
            await asyncio.to_thread(store.save_current, scenario, session.document())
        except AutosaveFailed as err:  # start anyway: the page says why changes are refused
            warnings.append(err.message)
            print(f"shockslate: {err.message}", file=sys.stderr, flush=True)
        hub = Hub()
        runner = Runner(session, hub, **config.runner_options)
        exports = Exports(store.exports_dir)
        parts = ServerParts(config, store, session, hub, runner, Dispatcher(runner, hub, store, exports, access,
                                                                           config.thermochemistry,
                                                                           config.delta_min_bytes),
                            exports, warnings)
        app.state.parts = parts
        runner.start()
        starter = asyncio.create_task(_warm_then_run(parts))
        try:
            yield
        finally:
            starter.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await starter
            await runner.stop()
            for client in list(hub.clients.values()):
                hub.remove(client)

    async def _warm_then_run(parts: ServerParts) -> None:
        if config.solver_threads is not None:
            import numba  # the thread count is per calling thread: set it in the solver's own thread

            await parts.runner.in_worker(numba.set_num_threads, config.solver_threads)
        if config.warm:
            parts.warming = True
            print("shockslate: loading the solver kernels (compiled once per user; a first start compiles them, "
                  "which takes one to three minutes)", flush=True)
            loop = asyncio.get_running_loop()

            def stage(done: int, total: int, name: str, label: str) -> None:  # called in the solver thread
                print(f"shockslate: compiling the solver kernels, stage {done + 1} of {total}: {label}", flush=True)
                loop.call_soon_threadsafe(_tell_stage, parts, {"stage": name, "done": done, "total": total,
                                                                "label": label})

            try:
                seconds = await parts.runner.in_worker(warm_kernels, stage)
            finally:
                parts.warming = False
                parts.warming_stage = None
            print(f"shockslate: solver kernels ready in {seconds:.1f} s", flush=True)
            parts.hub.broadcast({"type": "notice", "kind": "ready",
                                 "message": f"The solver kernels are ready ({seconds:.0f} s)."})
        if config.start_running:
            await parts.runner.call(parts.session.run)
        if config.open_browser:
            await asyncio.to_thread(webbrowser.open, access.url())

    def _tell_stage(parts: ServerParts, stage: dict) -> None:
        """Every tab learns which kernels compile now (a `notice` of kind `warming`), a joining tab from hello."""
        if not parts.warming:
            return
        parts.warming_stage = stage
        parts.hub.broadcast({"type": "notice", "kind": "warming", **stage,
                             "message": f"Compiling the solver kernels: {stage['label']} "
                                        f"(stage {stage['done'] + 1} of {stage['total']})."})

    app = FastAPI(title="shockslate", lifespan=lifespan, docs_url=None, redoc_url=None, openapi_url=None)
    app.add_middleware(HostGuard, access=access)

    @app.get("/health")
    async def health(request: Request) -> dict:
        if not access.token_ok(request.query_params.get("token")):
            raise HTTPException(status_code=403, detail="token required")
        parts: ServerParts = request.app.state.parts
        s, r = parts.session, parts.runner
        return {"status": "ok", "protocol": p.PROTOCOL_VERSION, "state": s.state.value, "time_s": s.sim.time_s,
                "steps": s.sim.steps, "cells": s.sim.cells, "steps_per_s": r.steps_per_s,
                "cell_updates_per_s": r.cell_updates_per_s, "clients": len(parts.hub.clients),
                "revision": s.revision, "warnings": parts.warnings, "threading_layer": _threading_layer()}

    @app.get("/exports/{name}")
    async def download(name: str, request: Request) -> FileResponse:
        parts: ServerParts = request.app.state.parts
        if not access.token_ok(request.query_params.get("token")):
            raise HTTPException(status_code=403, detail="token required")
        path = parts.exports.find(name)
        if path is None:
            raise HTTPException(status_code=404, detail=f"no export named {name!r}")
        return FileResponse(path, filename=name)

    @app.websocket("/ws")
    async def live(websocket: WebSocket) -> None:
        parts: ServerParts = websocket.app.state.parts
        await serve_client(websocket, parts, access)

    app.mount("/", StaticFiles(directory=config.web_dir, html=True, check_dir=False), name="web")
    return app


async def serve_client(websocket: WebSocket, parts: ServerParts, access: Access) -> None:
    """Check the handshake, then read this tab's messages until it leaves (its sender runs beside)."""
    headers = websocket.headers
    if not access.host_ok(headers.get("host")):
        await websocket.close(code=POLICY_VIOLATION, reason="host not allowed")
        return
    if not access.origin_ok(headers.get("origin"), headers.get("host")):
        log.warning("refused a websocket from origin %r", headers.get("origin"))
        await websocket.close(code=POLICY_VIOLATION, reason="origin not allowed")
        return
    if not access.token_ok(websocket.query_params.get("token")):
        await websocket.close(code=POLICY_VIOLATION, reason="token required")
        return
    await websocket.accept()
    hub, runner = parts.hub, parts.runner
    if len(hub.clients) >= MAX_CLIENTS:
        err = RequestError("connection", len(hub.clients) + 1, f"at most {MAX_CLIENTS} tabs at once",
                           f"This server already has {MAX_CLIENTS} tabs connected, the most it serves at once; "
                           "close another tab and reload this one.")
        await websocket.send_text(json.dumps(p.error_message("hello", err)))
        await websocket.close(code=TRY_AGAIN_LATER, reason="too many tabs")
        return
    client = hub.new_client(websocket)
    extra = {"notices": list(parts.warnings),  # e.g. a damaged autosave set aside at start, naming the kept file
             "warming": parts.warming,
             "warming_stage": parts.warming_stage,  # what compiles now: {stage, done, total, label} or None
             "thermochemistry": design.thermochemistry(parts.config.thermochemistry).as_dict()}
    # made in another thread: a big sketch's hello (19 MB of JSON for 30 polygons of 15,000 points) took seconds
    # to convert and encode, and on the event loop every other tab's frames stopped meanwhile
    # the scenario and its revision read together under the solver's lock (a `sketch_change` applies to exactly it)
    try:
        hello, document = await runner.read(lambda: (hello_message(client, runner, with_scenario=False),
                                                     runner.session.document()))
        # first in the queue, before any change broadcast while it was made (the page skips those it already
        # holds); the sender starts only then
        client.queue_first(await asyncio.to_thread(hello_text, {**hello, **extra}, document, parts.store.document_text))
    except BaseException:
        hub.remove(client)
        raise
    sender = asyncio.create_task(_run_sender(hub, client), name=f"sender-{client.id}")
    hub.send(client, runner.history.message())  # what the probes and stations saw before this tab came
    if runner.session.divergence is not None:  # a tab opened after a divergence learns why the run stopped
        hub.send(client, runner.session.divergence.to_message())
    if runner.waves.line is not None:  # the wave diagram's line, when one is set
        hub.send(client, runner.waves.line_message())
    if runner.comparison is not None:  # the comparison run, when there is one
        hub.send(client, runner.comparison.message(runner.session.scenario))
    limiter = RateLimiter(access.max_messages_per_s)
    last_rate_error = 0.0
    try:
        await runner.call(lambda: None, fresh_status=True)  # a fresh snapshot and status for the newcomer
        while not client.closed:
            message = await websocket.receive()
            if message["type"] == "websocket.disconnect":
                break
            text = message.get("text")
            if not limiter.allow():
                now = time.monotonic()
                if now - last_rate_error >= 1.0:
                    last_rate_error = now
                    err = RequestError("message", None, f"at most {access.max_messages_per_s:g} messages per second",
                                       "Too many messages: this one and others are dropped until the rate falls.",
                                       "rate")
                    hub.send(client, p.error_message(_peek_type(text), err))
                continue
            if text is None:
                err = RequestError("message", "binary", "text messages holding JSON objects",
                                   "Binary messages are not accepted.", "text_only")
                hub.send(client, p.error_message("unknown", err))
                continue
            if len(text) > access.max_message_bytes or len(text.encode("utf-8")) > access.max_message_bytes:
                err = RequestError("message", f"{len(text.encode('utf-8'))} bytes",
                                   f"at most {access.max_message_bytes} bytes",
                                   f"The message of {len(text.encode('utf-8'))} bytes is larger than the "
                                   f"{access.max_message_bytes}-byte limit.", "size")
                hub.send(client, p.error_message(_peek_type(text), err))
                continue
            await _handle_text(parts, client, text)
    except Exception:
        if not client.closed:
            log.exception("client %s dropped after an error", client.id)
    finally:
        hub.remove(client)
        sender.cancel()
        with contextlib.suppress(asyncio.CancelledError, Exception):
            await sender


async def _handle_text(parts: ServerParts, client, text: str) -> None:
    raw: Any = None
    try:
        raw = p.parse_json(text)
        message = p.parse_message(raw)
        await parts.dispatcher.handle(client, message)
    except AutosaveFailed as err:  # nothing changed, but the folder is every tab's: all of them are told
        parts.hub.broadcast(p.error_message(p.request_type(raw), err), reply_to=client, request_id=p.request_id(raw))
    except RequestError as err:
        parts.hub.send(client, p.error_message(p.request_type(raw), err, p.request_id(raw)))
    except Exception as err:  # a bug: keep the connection, log it, and say so
        log.exception("request failed: %.200s", text)
        bug = RequestError("server", None, "a request the server can carry out",
                           f"Internal error while handling {p.request_type(raw)}: {type(err).__name__}: {err}",
                           "internal")
        parts.hub.send(client, p.error_message(p.request_type(raw), bug, p.request_id(raw)))


_TYPE_FIELD = re.compile(r'"type"\s*:\s*"(\w+)"')


def _peek_type(text: str | None) -> str:
    """The request type of an oversized or dropped message, without parsing all of it."""
    if not text:
        return "unknown"
    match = _TYPE_FIELD.search(text[:400])
    if match and match.group(1) in p.MESSAGE_TYPES:
        return match.group(1)
    return "unknown"


async def _run_sender(hub: Hub, client) -> None:
    try:
        await hub.sender(client)
    except asyncio.CancelledError:
        raise
    except WebSocketDisconnect:
        client.closed = True  # the tab went away mid-send: the reader sees the disconnect too
    except Exception:
        if not client.closed:
            log.warning("sender of %s stopped", client.id, exc_info=True)
        client.closed = True
