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
from . import design, export_list
from .exports import Exports
from .hub import Client, Hub, ViewChoice, ring_key
from .persistence import AutosaveFailed, DocumentText, ScenarioStore
from .runner import Runner
from .security import Access
from .session import SessionState, request_error_from_scenario
from .comparison import Comparison, off_message as comparison_off_message
from .scenario_delta import DELTA_MIN_BYTES, sketch_delta
from .wave_history import WaveLine


def hello_message(client: Client, runner: Runner, with_scenario: bool = True) -> dict:
    """The hello; with_scenario False leaves the scenario document out (the server adds its text itself)."""
    s = runner.session
    hello = {"type": "hello", "protocol": p.PROTOCOL_VERSION, "client_id": client.id,
            "views": [{"name": n, "label": label, "unit": unit, "map": colourmaps.view_map(n)}
                      for n, (label, unit) in VIEWS.items()],
            "vocabulary": p.vocabulary(), "colour_maps": colourmaps.for_page(),
            "scenario": scn.scenario_to_dict(s.scenario) if with_scenario else None,
            "edited": s.edited, "origin": s.origin_name,
            "state": s.state.value, "revision": s.revision,
            "limits": {"max_message_bytes": p.MAX_MESSAGE_BYTES, "max_messages_per_s": p.MAX_MESSAGES_PER_S,
                       "max_frames_per_s": runner.hub.max_frames_per_s},
            "view": {"view": client.view.view, "width": client.view.width, "height": client.view.height,
                     "range": "auto" if client.view.fixed_range is None else list(client.view.fixed_range)}}
    if not with_scenario:
        del hello["scenario"]
    return hello


def hello_text(hello: dict, document: dict, document_text: DocumentText) -> str:
    """The hello message as JSON text with the scenario document (the session's, read-only), its text from the
    store's DocumentText: each shape's text is kept from the last save, so a joining tab's hello costs joining
    the pieces, not encoding a big sketch again (19 MB of JSON for 30 polygons of 15,000 points took over a
    second, in C calls that hold the GIL for a shape at a time while the other tabs wait for frames). The
    document is validated, so finite: it needs none of p.dumps's NaN handling."""
    return p.dumps(hello)[:-1] + ',"scenario":' + document_text(document) + "}"


#: Wall time of one slice of a `step N` request; between slices the other tabs get frames and requests.
STEP_SLICE_S = 0.05


#: Refusals of a harmless action that changes nothing (undo with nothing to undo, clearing an empty sketch, deleting
#: what is not there (another tab may have deleted it), stepping while running, a station export with no station): still an `error` reply, marked `harmless` so the page shows a calm
#: note rather than a red error. (request type, rule).
HARMLESS = {("undo", "nothing_to_undo"), ("redo", "nothing_to_redo"), ("clear_sketch", "empty"),
            ("remove_probe", "one_of"), ("remove_station", "one_of"), ("remove_shape", "range"), ("step", "state"),
            ("profile", "one_of"), ("export", "needs_station")}


def is_harmless(request: str, err: RequestError) -> bool:
    """Whether a refusal only says that nothing needed doing."""
    if (request, err.rule) in HARMLESS:
        return True
    if request == "delete_scenario":  # a kept scenario that is not there (a built-in's name stays an error)
        return "see list_scenarios" in err.allowed
    return request == "delete_export" and err.field == "name" and err.value is not None


class Dispatcher:
    def __init__(self, runner: Runner, hub: Hub, store: ScenarioStore, exports: Exports, access: Access,
                 thermochemistry: bool = True, delta_min_bytes: int = DELTA_MIN_BYTES):
        self.runner = runner
        self.hub = hub
        self.store = store
        self.exports = exports
        self.access = access
        self.session = runner.session
        #: False: answer gas-from-propellants as if Cantera were not installed (serve --without-thermochemistry)
        self.thermochemistry = thermochemistry
        self._changes = asyncio.Lock()  # one scenario change at a time, from its start until it is saved
        #: a one-shape change is sent as `sketch_change` when the whole scenario's text is at least this long
        self.delta_min_bytes = delta_min_bytes
        self._handlers: dict[str, Callable[[Client, Any], Awaitable[None]]] = {
            "add_shape": self._add_shape,
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
            "set_resolution": lambda c, m: self._rebuild(c, m, nx=m.nx),
            "set_domain": lambda c, m: self._rebuild(c, m, **_fields(m)),
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
            "build_nozzle": self._build_nozzle,
            "propellant_gas": self._propellant_gas,
            "list_frames": self._list_frames,
            "recall_frame": self._recall_frame,
            "set_wave_line": self._set_wave_line,
            "wave_history": self._wave_history,
            "set_comparison": self._set_comparison,
            "get_scenario": self._get_scenario,
        }
        missing = set(p.MESSAGE_TYPES) - set(self._handlers)
        assert not missing, f"message types without a handler: {missing}"

    async def handle(self, client: Client, message: Any) -> None:
        try:
            await self._handlers[message.type](client, message)
        except RequestError as err:
            if is_harmless(message.type, err):
                err.harmless = True  # error_message marks it; the page shows a calm note
            raise

    # ------------------------------------------------------------ replies
    def _reply(self, client: Client, message: Any, reply: dict) -> None:
        if message.id is not None:
            reply = {**reply, "id": message.id}
        self.hub.send(client, reply)

    def _broadcast_scenario(self, client: Client, message: Any, document: dict | None = None) -> None:
        s = self.session
        if document is None:
            self.hub.broadcast({"type": "scenario", "scenario": scn.scenario_to_dict(s.scenario),
                                "revision": s.revision, "edited": s.edited, "origin": s.origin_name},
                               reply_to=client, request_id=message.id)
            return
        # the document's text as the autosave made it (a big sketch's shapes are not encoded again); the
        # document is finite (validated), so it needs none of p.dumps's NaN handling
        head = '{"type":"scenario","scenario":' + self.store.document_text(document)
        tail = {"revision": s.revision, "edited": s.edited, "origin": s.origin_name}
        text = head + "," + p.dumps(tail)[1:]
        for other in list(self.hub.clients.values()):  # as hub.broadcast: the sender's copy echoes its id
            if other is client and message.id is not None:
                other.queue(head + "," + p.dumps({**tail, "id": message.id})[1:])
            else:
                other.queue(text)

    def _broadcast_change(self, client: Client, message: Any, before: tuple[int, dict], document: dict) -> None:
        """A saved change to every tab: as `sketch_change` (the one shape inserted or removed) when that is all
        that changed, the revision moved by one and the whole scenario is big; else as the whole `scenario`."""
        s = self.session
        revision, old = before
        delta = sketch_delta(old, document) if s.revision == revision + 1 else None
        if delta is not None and self.delta_min_bytes > 0:
            size = sum(len(piece) for piece in self.store.document_text.pieces(document))  # shapes' text is kept
            if size < self.delta_min_bytes:
                delta = None
        if delta is None:
            self._broadcast_scenario(client, message, document)
            return
        self.hub.broadcast({"type": "sketch_change", "base_revision": revision, "revision": s.revision, **delta,
                            "name": document.get("name"), "description": document.get("description"),
                            "edited": s.edited, "origin": s.origin_name}, reply_to=client, request_id=message.id)

    def _change_with_before(self, fn: Callable, *args: Any, **kwargs: Any) -> tuple[tuple[int, dict], Any, dict]:
        """session.unsaved_change, with the revision and document it started from (solver thread, locked)."""
        s = self.session
        before = (s.revision, s.document())
        scenario, document = s.unsaved_change(fn, *args, **kwargs)
        return before, scenario, document

    async def _get_scenario(self, client: Client, message: Any) -> None:
        """The whole scenario to this tab only (a tab that missed a `sketch_change` asks for it). Taken while no
        change is being saved, so the `sketch_change` messages after it start from its revision."""
        async with self._changes:
            document = await self.runner.read(self.session.document)
            s = self.session
            tail = {"revision": s.revision, "edited": s.edited, "origin": s.origin_name,
                    **({"id": message.id} if message.id is not None else {})}
            body = await asyncio.to_thread(self.store.document_text, document)
        client.queue('{"type":"scenario","scenario":' + body + "," + p.dumps(tail)[1:])

    # ------------------------------------------------------------ handlers
    async def _change(self, client: Client, message: Any, fn: Callable, *args: Any, **kwargs: Any) -> None:
        """Apply a change in the solver's thread, then save it in another thread while the flow steps on, and
        acknowledge it (the `scenario` or `sketch_change` broadcast) only once saved. Changes wait for each
        other's save, so files are written in order; a save that fails rolls the change back and AutosaveFailed
        tells every tab."""
        async with self._changes:
            before, scenario, document = await self.runner.call(self._change_with_before, fn, *args, **kwargs)
            await self._save_or_roll_back(scenario, document)
            self._broadcast_change(client, message, before, document)

    async def _save_or_roll_back(self, scenario: scn.Scenario, document: dict) -> None:
        try:
            await asyncio.to_thread(self.store.save_current, scenario, document)
        except AutosaveFailed:
            await self.runner.call(self.session.roll_back)
            raise

    async def _rebuild(self, client: Client, message: Any, **domain_changes: Any) -> None:
        """A new resolution or extent: checked and the flow copied under the lock (quick), the new grid built
        in another thread while the flow steps on and the tabs get frames (unless its steps are too slow to
        give them: it is held then), then swapped in under the lock and saved like any change.

        From the request's arrival to its acknowledgement the tabs get held frames (hub.hold_frames) whenever
        no new one comes: while the copy waits for a big grid's step in progress, while that flow is held, and
        during the swap. The copy is a read (it changes nothing the tabs see), so it publishes no snapshot."""
        self.hub.hold_frames(True)
        try:
            async with self._changes:
                plan = await self.runner.read(self.session.plan_rebuild, **domain_changes)
                try:  # a slow flow is held meanwhile (session.HOLD_STEP_S); it steps again whatever happens here
                    await asyncio.to_thread(self.session.build_rebuild, plan)
                    scenario, document = await self.runner.call(self.session.unsaved_change,
                                                                self.session.finish_rebuild, plan)
                finally:
                    self.session.release_rebuild(plan)
                await self._save_or_roll_back(scenario, document)
                self._broadcast_scenario(client, message, document)
        finally:
            self.hub.hold_frames(False)

    async def _add_shape(self, client: Client, message: Any) -> None:
        # a shape refused for itself is refused at once, without waiting for the solver or another change
        await asyncio.to_thread(self.session.check_shape, message.shape)
        await self._change(client, message, self.session.add_shape, message.shape)

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

    async def _build_nozzle(self, client: Client, message: p.BuildNozzle) -> None:
        """The designed nozzle (server/design.py) becomes the current scenario: one change, undo takes it back."""
        current = self.session.scenario
        doc = await asyncio.to_thread(design.nozzle_document, _fields(message), current)
        try:
            scenario = scn.parse_scenario(doc)
        except scn.ScenarioError as err:  # numbers the designer took but the solver cannot hold (a huge domain)
            refused = request_error_from_scenario(err)
            raise RequestError(refused.field, refused.value, refused.allowed, "The nozzle built from these numbers "
                               f"does not fit the solver: {refused.message}", refused.rule) from None
        await self._change(client, message, self.session.replace, scenario)

    async def _propellant_gas(self, client: Client, message: p.PropellantGas) -> None:
        """Chamber gas by chemical equilibrium; its frozen gamma, molar mass, T0 and p0 applied as one change."""
        result = await asyncio.to_thread(design.chamber_gas, _fields(message), self.thermochemistry)
        async with self._changes:  # as _change: applied, saved off the solver's thread, then acknowledged
            scenario, document = await self.runner.call(
                self.session.unsaved_change,
                lambda: self.session.change_document(design.gas_document(result, self.session.scenario)))
            await self._save_or_roll_back(scenario, document)
            self._reply(client, message, design.chamber_gas_message(result))
            self._broadcast_scenario(client, message, document)

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


    # ------------------------------------------------------------ presenting: frame ring, wave diagram
    async def _list_frames(self, client: Client, message: p.ListFrames) -> None:
        self._reply(client, message, self.hub.ring.listing())

    async def _recall_frame(self, client: Client, message: p.RecallFrame) -> None:
        frame = self.hub.ring.recall(message.steps, ring_key(client.view))
        if frame is None:
            span = self.hub.ring.span()
            allowed = (f"a step from {span[0]} (the oldest kept) upwards" if span is not None
                       else "a step of a kept frame (none is kept yet: the ring fills while tabs watch the flow)")
            raise RequestError("steps", message.steps, allowed,
                               f"No frame at or before step {message.steps} is kept any more.", "kept")
        self.hub.send_frame(client, frame)

    async def _set_wave_line(self, client: Client, message: p.SetWaveLine) -> None:
        line = None
        if message.station is not None:
            found = [st for st in self.session.scenario.stations if st.name == message.station]
            if not found:
                names = [st.name for st in self.session.scenario.stations]
                raise RequestError("station", message.station,
                                   "one of the stations: " + (", ".join(names) or "(there are none)"),
                                   f"There is no station called {message.station}.", "one_of")
            st = found[0]
            line = WaveLine(tuple(st.start_m), tuple(st.end_m), message.field, st.name)
        elif not message.off:
            line = WaveLine(tuple(message.start_m), tuple(message.end_m), message.field)
        waves = self.runner.waves
        await self.runner.read(lambda: (setattr(waves, "every_steps", message.every_steps), waves.set_line(line),
                                        waves.record(self.session.sim)))
        self.hub.broadcast(waves.line_message(), reply_to=client, request_id=message.id)

    async def _wave_history(self, client: Client, message: p.WaveHistoryRequest) -> None:
        self._reply(client, message, self.runner.waves.message(message.after_steps))


    async def _set_comparison(self, client: Client, message: p.SetComparison) -> None:
        runner, s = self.runner, self.session
        if message.off:
            await runner.read(lambda: setattr(runner, "comparison", None))
            self.hub.broadcast(comparison_off_message(), reply_to=client, request_id=message.id)
            return

        def start() -> dict:
            c = Comparison.build(s.scenario, message.setting, message.value, s.revision)
            c.start_from(s.sim)
            runner.comparison = c
            return c.message(s.scenario)

        reply = await runner.call(start)
        self.hub.broadcast(reply, reply_to=client, request_id=message.id)


def _fields(message: Any) -> dict:
    """The message's own fields (not type or id)."""
    return {k: v for k, v in message.model_dump().items() if k not in ("type", "id")}
