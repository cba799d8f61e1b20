"""One handler per client message type: call the session through the runner, then reply or broadcast.

Accepted scenario changes are broadcast as a `scenario` message to every tab (the sender's copy
echoes its id); run control answers with a fresh `status`; questions (inspect, profile, lists)
are answered to the asking tab only. A refused request raises RequestError, which the caller turns
into an `error` reply; nothing changes then.
"""
from __future__ import annotations

import asyncio
from typing import Any, Awaitable, Callable

from shockslate.solver import colourmaps
from shockslate.solver import scenario as scn
from shockslate.solver.fields import VIEWS

from . import protocol as p
from .errors import RequestError
from . import export_list
from .exports import Exports
from .hub import Client, Hub, ViewChoice
from .persistence import ScenarioStore
from .runner import Runner
from .security import Access
from .session import SessionState, request_error_from_scenario


def hello_message(client: Client, runner: Runner) -> dict:
    s = runner.session
    return {"type": "hello", "protocol": p.PROTOCOL_VERSION, "client_id": client.id,
            "views": [{"name": n, "label": label, "unit": unit, "map": colourmaps.view_map(n)}
                      for n, (label, unit) in VIEWS.items()],
            "vocabulary": p.vocabulary(), "colour_maps": colourmaps.for_page(),
            "scenario": scn.scenario_to_dict(s.scenario), "edited": s.edited, "origin": s.origin_name,
            "state": s.state.value, "revision": s.revision,
            "limits": {"max_message_bytes": p.MAX_MESSAGE_BYTES, "max_messages_per_s": p.MAX_MESSAGES_PER_S,
                       "max_frames_per_s": runner.hub.max_frames_per_s},
            "view": {"view": client.view.view, "width": client.view.width, "height": client.view.height,
                     "range": "auto" if client.view.fixed_range is None else list(client.view.fixed_range)}}


#: Wall time of one slice of a `step N` request; between slices the other tabs get frames and requests.
STEP_SLICE_S = 0.05


class Dispatcher:
    def __init__(self, runner: Runner, hub: Hub, store: ScenarioStore, exports: Exports, access: Access):
        self.runner = runner
        self.hub = hub
        self.store = store
        self.exports = exports
        self.access = access
        self.session = runner.session
        self._handlers: dict[str, Callable[[Client, Any], Awaitable[None]]] = {
            "add_shape": lambda c, m: self._change(c, m, self.session.add_shape, m.shape),
            "remove_shape": lambda c, m: self._change(c, m, self.session.remove_shape, m.index),
            "undo": lambda c, m: self._change(c, m, self.session.undo),
            "redo": lambda c, m: self._change(c, m, self.session.redo),
            "clear_sketch": lambda c, m: self._change(c, m, self.session.clear_sketch),
            "clear_all": lambda c, m: self._change(c, m, self.session.clear_all),
            "set_initial": lambda c, m: self._change(c, m, self.session.set_initial, m.kind, m.x_m, m.centre_m,
                                                     m.radius_m),
            "set_mirror": lambda c, m: self._change(c, m, self.session.set_mirror, m.mirror),
            "set_gas": lambda c, m: self._change(c, m, self.session.set_gas, m.preset, m.gamma, m.molar_mass_kg_kmol),
            "set_conditions": self._set_conditions,
            "set_numerics": lambda c, m: self._change(c, m, self.session.set_numerics, **_fields(m)),
            "set_resolution": lambda c, m: self._change(c, m, self.session.set_resolution, m.nx),
            "set_domain": lambda c, m: self._change(c, m, self.session.set_domain, **_fields(m)),
            "set_edges": lambda c, m: self._change(c, m, self.session.set_edges, **_fields(m)),
            "set_mode": lambda c, m: self._change(c, m, self.session.set_mode, m.mode),
            "run": lambda c, m: self._control(c, m, self.session.run),
            "pause": lambda c, m: self._control(c, m, self.session.pause),
            "reset_flow": lambda c, m: self._control(c, m, self.session.reset_flow),
            "step": self._step,
            "settle": lambda c, m: self._control(c, m, lambda: self.session.set_settle(m.on)),
            "add_station": lambda c, m: self._change(c, m, self.session.add_station, m.name, m.start_m, m.end_m,
                                                     m.role),
            "remove_station": lambda c, m: self._change(c, m, self.session.remove_station, m.name),
            "add_probe": lambda c, m: self._change(c, m, self.session.add_probe, m.name, m.x_m, m.y_m),
            "remove_probe": lambda c, m: self._change(c, m, self.session.remove_probe, m.name),
            "set_view": self._set_view,
            "inspect": self._inspect,
            "profile": self._profile,
            "save_scenario": self._save,
            "load_scenario": self._load,
            "list_scenarios": self._list,
            "delete_scenario": self._delete_scenario,
            "export": self._export,
            "list_exports": self._list_exports,
            "delete_export": self._delete_export,
        }
        missing = set(p.MESSAGE_TYPES) - set(self._handlers)
        assert not missing, f"message types without a handler: {missing}"

    async def handle(self, client: Client, message: Any) -> None:
        await self._handlers[message.type](client, message)

    # ------------------------------------------------------------ replies
    def _reply(self, client: Client, message: Any, reply: dict) -> None:
        if message.id is not None:
            reply = {**reply, "id": message.id}
        self.hub.send(client, reply)

    def _broadcast_scenario(self, client: Client, message: Any) -> None:
        s = self.session
        self.hub.broadcast({"type": "scenario", "scenario": scn.scenario_to_dict(s.scenario), "revision": s.revision,
                            "edited": s.edited, "origin": s.origin_name},
                           reply_to=client, request_id=message.id)

    # ------------------------------------------------------------ handlers
    async def _change(self, client: Client, message: Any, fn: Callable, *args: Any, **kwargs: Any) -> None:
        await self.runner.call(fn, *args, **kwargs)
        self._broadcast_scenario(client, message)

    async def _set_conditions(self, client: Client, message: p.SetConditions) -> None:
        parts = {name: (getattr(message, name).model_dump() if getattr(message, name) is not None else None)
                 for name in ("reservoir", "stream", "ambient")}
        await self._change(client, message, self.session.set_conditions, **parts)

    async def _control(self, client: Client, message: Any, fn: Callable) -> None:
        await self.runner.call(fn, fresh_status=True)
        if self.runner.last_status is not None:
            self._reply(client, message, self.runner.last_status)

    async def _step(self, client: Client, message: p.Step) -> None:
        """`step N` in slices of about STEP_SLICE_S, each its own locked call that publishes a snapshot: other
        tabs keep getting frames meanwhile, and a run started by another tab ends the stepping."""
        remaining = message.count
        while remaining > 0:
            if remaining < message.count and self.session.state is not SessionState.PAUSED:
                break  # another tab started the run (or reset the flow) between slices
            advanced = await self.runner.call(self.session.step, remaining, max_wall_s=STEP_SLICE_S,
                                              fresh_status=True)
            remaining -= advanced.steps
            if advanced.divergence is not None:
                self.hub.broadcast(advanced.divergence.to_message())
                break
            if advanced.steps == 0:
                break
        if self.runner.last_status is not None:
            self._reply(client, message, self.runner.last_status)

    async def _set_view(self, client: Client, message: p.SetView) -> None:
        client.view = ViewChoice(message.view, message.width, message.height, message.fixed_range,
                                 tuple(dict.fromkeys(message.overlays)))
        client.wake.set()

    async def _inspect(self, client: Client, message: p.Inspect) -> None:
        self._reply(client, message, await self.runner.read(self.session.inspect, message.x_m, message.y_m))

    async def _profile(self, client: Client, message: p.Profile) -> None:
        reply = await self.runner.read(self.session.profile, message.station, bool(message.axis))
        self._reply(client, message, reply)

    async def _save(self, client: Client, message: p.SaveScenario) -> None:
        path = await asyncio.to_thread(self.store.save_named, message.name, self.session.scenario)
        self._reply(client, message, {"type": "saved", "name": message.name, "path": str(path)})
        # the scenario on screen is now the kept one: its name, no longer 'edited'
        await self._change(client, message, self.session.kept_as, message.name)
        await self._broadcast_list()

    async def _load(self, client: Client, message: p.LoadScenario) -> None:
        if message.name is not None:
            try:
                scenario = await asyncio.to_thread(self.store.load_named, message.name)
            except scn.ScenarioError as err:  # a kept file that no longer validates: say why, in its own terms
                refused = request_error_from_scenario(err)
                raise RequestError("name", message.name, refused.allowed,
                                   f"The kept scenario {message.name!r} cannot be opened: {refused.message}",
                                   refused.rule) from None
        else:
            try:
                scenario = scn.parse_scenario(message.scenario)
            except scn.ScenarioError as err:
                raise request_error_from_scenario(err, message.scenario, {"": "scenario."}) from None
        await self._change(client, message, self.session.load, scenario)

    async def _list(self, client: Client, message: p.ListScenarios) -> None:
        listing = await asyncio.to_thread(self.store.listing)
        self._reply(client, message, {"type": "scenario_list", **listing})

    async def _broadcast_list(self) -> None:
        listing = await asyncio.to_thread(self.store.listing)
        self.hub.broadcast({"type": "scenario_list", **listing})

    async def _delete_scenario(self, client: Client, message: p.DeleteScenario) -> None:
        await asyncio.to_thread(self.store.delete_named, message.name)
        listing = await asyncio.to_thread(self.store.listing)
        self.hub.broadcast({"type": "scenario_list", **listing}, reply_to=client, request_id=message.id)

    async def _list_exports(self, client: Client, message: p.ListExports) -> None:
        files = await asyncio.to_thread(export_list.listing, self.exports, self.access.token)
        self._reply(client, message, {"type": "export_list", "files": files, "keep": self.exports.keep})

    async def _delete_export(self, client: Client, message: p.DeleteExport) -> None:
        await asyncio.to_thread(export_list.delete, self.exports, message.name, bool(message.all))
        files = await asyncio.to_thread(export_list.listing, self.exports, self.access.token)
        self.hub.broadcast({"type": "export_list", "files": files, "keep": self.exports.keep},
                           reply_to=client, request_id=message.id)

    async def _export(self, client: Client, message: p.Export) -> None:
        s = self.session
        if message.what == "npz":
            snap, scenario = await self.runner.read(lambda: (s.snapshot(), s.scenario))
            path = await asyncio.to_thread(self.exports.write_npz, snap, scenario)
        elif message.what == "vti":
            snap, scenario = await self.runner.read(lambda: (s.snapshot(), s.scenario))
            path = await asyncio.to_thread(self.exports.write_vti, snap, scenario)
        elif message.what == "csv":
            if not s.scenario.stations:
                raise RequestError("what", "csv", "npz, vti or scenario (csv holds station distributions: add a station "
                                   "first)", "A CSV export holds station distributions; add a station first.",
                                   "needs_station")
            path = await self.runner.read(lambda: self.exports.write_csv(s.sim, s.scenario))
        else:
            path = await asyncio.to_thread(self.exports.write_scenario, s.scenario)
        query = f"?token={self.access.token}" if self.access.token else ""
        self._reply(client, message, {"type": "export_ready", "what": message.what,
                                      "url": f"/exports/{path.name}{query}", "filename": path.name})


def _fields(message: Any) -> dict:
    """The message's own fields (not type or id)."""
    return {k: v for k, v in message.model_dump().items() if k not in ("type", "id")}
