/**
 * Bounds-checked reading of flatbuffers tables over the `flatbuffers` runtime's ByteBuffer. The runtime
 * itself trusts every offset (a truncated file reads as zeros); here each offset is checked against the
 * file's length first, so a damaged file is an error naming the table field, never silent garbage.
 * Layout per the FlatBuffers binary format (flatbuffers.dev, "FlatBuffers internals"): a table starts with
 * an int32 back-offset to its vtable; the vtable holds uint16 field offsets; field id n sits at vtable
 * slot 4 + 2n; vectors and strings are uint32-length-prefixed and reached through a uint32 offset.
 */
import { ByteBuffer } from 'flatbuffers';

/** A file that ends before a table, vector or string it points at, or points outside itself. */
export class FlatbufferDamage extends Error {}

export class FbFile {
  readonly bb: ByteBuffer;
  readonly length: number;
  constructor(bytes: Uint8Array) {
    this.bb = new ByteBuffer(bytes);
    this.length = bytes.length;
  }

  check(pos: number, size: number, what: string): void {
    if (!Number.isInteger(pos) || pos < 0 || pos + size > this.length) {
      throw new FlatbufferDamage(`${what} lies at bytes ${pos}–${pos + size} of a ${this.length}-byte file (truncated or damaged)`);
    }
  }

  /** The root table (uint32 offset at byte 0). */
  root(): FbTable {
    this.check(0, 8, 'the root offset and file identifier');
    return this.table(this.bb.readUint32(0), 'the root table');
  }

  identifier(): string {
    this.check(0, 8, 'the file identifier');
    return this.bb.getBufferIdentifier();
  }

  table(pos: number, what: string): FbTable {
    this.check(pos, 4, what);
    const vtable = pos - this.bb.readInt32(pos);
    this.check(vtable, 4, `the field table of ${what}`);
    const vtableSize = this.bb.readUint16(vtable);
    this.check(vtable, vtableSize, `the field table of ${what}`);
    return new FbTable(this, pos, vtable, vtableSize, what);
  }
}

export class FbTable {
  constructor(
    private readonly file: FbFile,
    readonly pos: number,
    private readonly vtable: number,
    private readonly vtableSize: number,
    readonly what: string,
  ) {}

  /** Offset of field `id` from the table start, or 0 when absent. */
  private field(id: number): number {
    const slot = 4 + 2 * id;
    return slot < this.vtableSize ? this.file.bb.readUint16(this.vtable + slot) : 0;
  }

  has(id: number): boolean {
    return this.field(id) !== 0;
  }

  private at(id: number, size: number, name: string): number | undefined {
    const o = this.field(id);
    if (o === 0) return undefined;
    this.file.check(this.pos + o, size, `${this.what}.${name}`);
    return this.pos + o;
  }

  int8(id: number, name: string, fallback = 0): number {
    const p = this.at(id, 1, name);
    return p === undefined ? fallback : this.file.bb.readInt8(p);
  }
  uint8(id: number, name: string, fallback = 0): number {
    const p = this.at(id, 1, name);
    return p === undefined ? fallback : this.file.bb.readUint8(p);
  }
  int32(id: number, name: string, fallback = 0): number {
    const p = this.at(id, 4, name);
    return p === undefined ? fallback : this.file.bb.readInt32(p);
  }
  uint32(id: number, name: string, fallback = 0): number {
    const p = this.at(id, 4, name);
    return p === undefined ? fallback : this.file.bb.readUint32(p);
  }
  float32(id: number, name: string, fallback = 0): number {
    const p = this.at(id, 4, name);
    return p === undefined ? fallback : this.file.bb.readFloat32(p);
  }
  uint64(id: number, name: string): bigint {
    const p = this.at(id, 8, name);
    return p === undefined ? 0n : this.file.bb.readUint64(p);
  }
  bool(id: number, name: string, fallback = false): boolean {
    const p = this.at(id, 1, name);
    return p === undefined ? fallback : this.file.bb.readUint8(p) !== 0;
  }

  /** Start and element count of a vector field, checked to lie inside the file. */
  private vector(id: number, elementSize: number, name: string): { start: number; count: number } | undefined {
    const p = this.at(id, 4, name);
    if (p === undefined) return undefined;
    const lengthAt = p + this.file.bb.readUint32(p);
    this.file.check(lengthAt, 4, `the length of ${this.what}.${name}`);
    const count = this.file.bb.readUint32(lengthAt);
    this.file.check(lengthAt + 4, count * elementSize, `${this.what}.${name} (${count} elements)`);
    return { start: lengthAt + 4, count };
  }

  int32s(id: number, name: string): number[] | undefined {
    const v = this.vector(id, 4, name);
    if (!v) return undefined;
    return Array.from({ length: v.count }, (_, i) => this.file.bb.readInt32(v.start + 4 * i));
  }

  /** The bytes of a [ubyte] vector, as a view into the file. */
  bytes(id: number, name: string): Uint8Array | undefined {
    const v = this.vector(id, 1, name);
    if (!v) return undefined;
    return this.file.bb.bytes().subarray(v.start, v.start + v.count);
  }

  string(id: number, name: string): string | undefined {
    const v = this.vector(id, 1, name);
    if (!v) return undefined;
    return new TextDecoder().decode(this.file.bb.bytes().subarray(v.start, v.start + v.count));
  }

  /** A sub-table reached through field `id`. */
  table(id: number, name: string): FbTable | undefined {
    const p = this.at(id, 4, name);
    if (p === undefined) return undefined;
    return this.file.table(p + this.file.bb.readUint32(p), `${this.what}.${name}`);
  }

  /** A vector of tables. */
  tables(id: number, name: string): FbTable[] {
    const v = this.vector(id, 4, name);
    if (!v) return [];
    return Array.from({ length: v.count }, (_, i) => {
      const at = v.start + 4 * i;
      return this.file.table(at + this.file.bb.readUint32(at), `${this.what}.${name}[${i}]`);
    });
  }
}
