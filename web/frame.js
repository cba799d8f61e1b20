// Decoding the binary view frames of the live protocol (server/PROTOCOL.md, "Binary frames").

export const FRAME_MAGIC = "SSF1";
export const HEADER_BYTES = 48;

/**
 * Parse one binary frame. Returns {width, height, viewIndex, encoding, channel, min, max, timeS, step,
 * levels: Uint8Array(width * height)} with row 0 the top of the picture, or throws with a reason.
 */
export function decodeFrame(buffer) {
  if (!(buffer instanceof ArrayBuffer) || buffer.byteLength < HEADER_BYTES) {
    throw new Error(`frame of ${buffer && buffer.byteLength} bytes is shorter than its ${HEADER_BYTES}-byte header`);
  }
  const head = new DataView(buffer);
  const magic = String.fromCharCode(head.getUint8(0), head.getUint8(1), head.getUint8(2), head.getUint8(3));
  if (magic !== FRAME_MAGIC) throw new Error(`frame magic ${JSON.stringify(magic)} is not ${FRAME_MAGIC}`);
  const headerBytes = head.getUint32(4, true);
  const width = head.getUint16(8, true);
  const height = head.getUint16(10, true);
  const viewIndex = head.getUint8(12);
  const encoding = head.getUint8(13);
  const channel = head.getUint16(14, true); // 0 live, 1 recalled from the server's frame ring
  const min = head.getFloat64(16, true);
  const max = head.getFloat64(24, true);
  const timeS = head.getFloat64(32, true);
  const step = Number(head.getBigUint64(40, true));
  if (encoding !== 0) throw new Error(`frame encoding ${encoding} is not known (only 0, one byte per pixel)`);
  if (buffer.byteLength < headerBytes + width * height) {
    throw new Error(`frame says ${width}x${height} pixels but carries ${buffer.byteLength - headerBytes} bytes`);
  }
  const levels = new Uint8Array(buffer, headerBytes, width * height);
  return { width, height, viewIndex, encoding, channel, min, max, timeS, step, levels };
}
