"""shockslate live server: one simulation, many tabs.

app (routes, access checks) -> dispatch (one handler per message) -> runner (lock, solver thread,
publishing) -> session (scenario, flow, run-state machine); hub (per-tab senders, newest frame only),
frames (binary frames, overlay), readings (status figures, ideal 1D nozzle values), protocol (message
models, errors), security, persistence, exports, cli (every sub-command). The wire format is in PROTOCOL.md. The wire format is in PROTOCOL.md.
"""
