import { Duplex } from 'node:stream';
import type { Socket } from 'node:net';

export interface PacketLimits {
  /** Largest first packet (CONNECT) accepted, whole packet in bytes: nothing is known of the sender yet. */
  maxConnectBytes: number;
  /** Largest packet accepted after it. */
  maxPacketBytes: number;
}

/** A packet header claimed more than the limit: the connection is closed before any of its body is read on. */
export interface OversizedPacket {
  phase: 'before-connect' | 'after-connect';
  claimedBytes: number;
  limitBytes: number;
}

/**
 * Reads MQTT fixed headers (MQTT 3.1.1 §2.2: one type byte, then the remaining length as a variable-length
 * integer of at most four bytes) as bytes pass, without buffering packets. Returns the first violation in
 * the chunk, or null. A malformed length (a fifth continuation byte) counts as oversized.
 */
export function createPacketSizeMeter(limits: PacketLimits) {
  let packets = 0;
  let state: 'type' | 'length' | 'body' = 'type';
  let headerBytes = 0;
  let multiplier = 1;
  let remaining = 0;
  let toSkip = 0;

  return function inspect(chunk: Uint8Array): OversizedPacket | null {
    let i = 0;
    while (i < chunk.length) {
      if (state === 'type') {
        state = 'length';
        headerBytes = 1;
        multiplier = 1;
        remaining = 0;
        i += 1;
      } else if (state === 'length') {
        const byte = chunk[i]!;
        i += 1;
        headerBytes += 1;
        remaining += (byte & 0x7f) * multiplier;
        multiplier *= 128;
        const limit = packets === 0 ? limits.maxConnectBytes : limits.maxPacketBytes;
        const phase = packets === 0 ? 'before-connect' : 'after-connect';
        // Later length bytes only add to it, so a partial length over the limit is already a refusal.
        if (headerBytes + remaining > limit) return { phase, claimedBytes: headerBytes + remaining, limitBytes: limit };
        if ((byte & 0x80) !== 0) {
          if (headerBytes >= 5) return { phase, claimedBytes: Infinity, limitBytes: limit };
          continue;
        }
        packets += 1;
        toSkip = remaining;
        state = toSkip === 0 ? 'type' : 'body';
      } else {
        const n = Math.min(toSkip, chunk.length - i);
        toSkip -= n;
        i += n;
        if (toSkip === 0) state = 'type';
      }
    }
    return null;
  };
}

/**
 * Puts a size check between a client's socket and the broker: every byte is passed on as it arrives, and
 * the connection is destroyed as soon as a packet's header claims more than the limit of its phase, so a
 * CONNECT that claims 200 MB is never streamed into memory. The wrapper is what the broker reads and writes.
 */
export function guardConnection(socket: Socket, limits: PacketLimits, onOversized: (violation: OversizedPacket) => void): Duplex {
  const inspect = createPacketSizeMeter(limits);
  let stopped = false;
  const connection: Duplex = new Duplex({
    read() {
      socket.resume();
    },
    write(chunk: Buffer, _encoding, callback) {
      if (socket.destroyed) return callback();
      socket.write(chunk, callback);
    },
    // Packets queued while the socket was busy go out together (one writev system call), not one write each:
    // the server's own connection receives thousands of packets in a burst when a fleet reports at once.
    writev(chunks: Array<{ chunk: Buffer }>, callback) {
      if (socket.destroyed) return callback();
      socket.cork();
      for (let i = 0; i < chunks.length - 1; i++) socket.write(chunks[i]!.chunk);
      socket.write(chunks[chunks.length - 1]!.chunk, callback);
      socket.uncork();
    },
    final(callback) {
      socket.end(callback);
    },
    destroy(error, callback) {
      socket.destroy();
      callback(error);
    },
  });
  socket.on('data', function checkChunk(chunk: Buffer) {
    if (stopped) return;
    const violation = inspect(chunk);
    if (violation) {
      stopped = true;
      onOversized(violation);
      socket.destroy();
      connection.destroy();
      return;
    }
    if (!connection.push(chunk)) socket.pause();
  });
  socket.on('end', () => connection.push(null));
  socket.on('close', () => connection.destroy());
  socket.on('error', (e) => connection.destroy(e));
  return connection;
}
