// The one websocket to the server: JSON intents out, JSON messages and binary frames in.
//
// It reconnects by itself (a server restart resumes where the user was, because the server keeps
// the scenario), tags every request with an id so an error can be laid beside what caused it,
// and carries the access token from the page address when the server was started with one.

export class Connection {
  /**
   * onMessage(msg) gets every JSON message, onFrame(ArrayBuffer) every binary frame,
   * onState("connecting"|"open"|"closed", detail) the link state.
   */
  constructor({ onMessage, onFrame, onState }) {
    this.onMessage = onMessage;
    this.onFrame = onFrame;
    this.onState = onState;
    this.socket = null;
    this.nextId = 1;
    this.sent = new Map(); // id -> {type, at}
    this.retryMs = 500;
    this.queue = []; // messages sent while not yet open
  }

  url() {
    const scheme = location.protocol === "https:" ? "wss:" : "ws:";
    const token = new URLSearchParams(location.search).get("token");
    const query = token ? `?token=${encodeURIComponent(token)}` : "";
    return `${scheme}//${location.host}/ws${query}`;
  }

  open() {
    this.onState("connecting");
    const socket = new WebSocket(this.url());
    socket.binaryType = "arraybuffer";
    this.socket = socket;
    socket.onopen = () => {
      this.retryMs = 500;
      this.onState("open");
      const waiting = this.queue;
      this.queue = [];
      for (const text of waiting) socket.send(text);
    };
    socket.onmessage = (event) => {
      if (typeof event.data === "string") {
        let msg;
        try {
          msg = JSON.parse(event.data);
        } catch (err) {
          console.warn("unreadable message from server", err);
          return;
        }
        if (msg.id !== undefined) msg.request_sent = this.sent.get(msg.id);
        this.onMessage(msg);
      } else {
        this.onFrame(event.data);
      }
    };
    socket.onclose = (event) => {
      this.socket = null;
      this.onState("closed", event.reason || `code ${event.code}`);
      setTimeout(() => this.open(), this.retryMs);
      this.retryMs = Math.min(this.retryMs * 2, 8000);
    };
  }

  /** Send an intent; returns its id. Sent later if the link is not open yet. */
  send(type, fields = {}) {
    const id = this.nextId++;
    const text = JSON.stringify({ type, id, ...fields });
    this.sent.set(id, { type, at: performance.now() });
    if (this.sent.size > 500) this.sent.delete(this.sent.keys().next().value);
    if (this.socket && this.socket.readyState === WebSocket.OPEN) this.socket.send(text);
    else if (this.queue.length < 50) this.queue.push(text);
    return id;
  }
}
